"""In-house precedence: the published marketed-salt prior, updated by the ledger's screens.

The ranking's ``precedence`` term (0..1, :func:`saltplan.plan.ranking.precedence_score`,
from the counterion's share among marketed salts, Berge, Bighley & Monkhouse 1977,
Table I) is read as the prior mean ``p0`` of the chance that the counterion gives a
crystalline salt. With a ledger, the screens that tried the counterion on a similar API
site (same catalogue class, pKa within ±``PKA_WINDOW``; see
:meth:`saltplan.ledger.InhouseEvidence.lookup`) update it by Beta-binomial shrinkage:

    prior      θ ~ Beta(κ·p0, κ·(1 − p0))          (κ·p0 and κ·(1 − p0) pseudo-screens)
    data       crystalline ~ Binomial(screens, θ)
    posterior  θ | data ~ Beta(κ·p0 + crystalline, κ·(1 − p0) + screens − crystalline)
    term       E[θ | data] = (κ·p0 + crystalline) / (κ + screens)
             = w · p0 + (1 − w) · crystalline / screens,   w = κ / (κ + screens)

The conjugate Beta-binomial update and the posterior mean as a weighted average of the
prior mean and the observed rate, the weight of the prior being its "prior sample size"
κ: A. Gelman, J. B. Carlin, H. S. Stern, D. B. Dunson, A. Vehtari, D. B. Rubin, *Bayesian
Data Analysis*, 3rd ed., CRC Press 2013, chapter 2 (§2.4, informative prior for the
binomial model) and §5.3 (shrinkage of group rates toward the common prior) — from memory.

``κ`` (``PRIOR_STRENGTH``) is the prior's weight in screens: 12, so three in-house screens
carry 3/15 = 20 % of the weight (a small move) and fifty carry 50/62 = 81 % (a large
one). Why 12: the published table counts marketed products, not crystallisation
attempts, and knows nothing of a group's own solvents, equipment and chemistry; we value
it like about one year of a preformulation group's screens with one counterion on one
kind of site (a judgement; common practice in shrinkage estimates is a prior worth a
modest, stated number of observations). The ±1.5 pKa window is the definition of a
similar site (a bit more than twice the typical estimate uncertainty of 0.5–0.7 pKa
units).

Nothing here is used without a ledger: :func:`saltplan.plan.plan_salts` with
``inhouse=None`` ranks exactly as before.
"""
from __future__ import annotations

#: weight of the published prior, in screens (κ)
PRIOR_STRENGTH = 12.0
#: a similar site: same class, pKa within this many units
PKA_WINDOW = 1.5
SOURCE = ("in-house precedence: Beta-binomial shrinkage of the published share term "
          f"toward the ledger's screens (prior worth {PRIOR_STRENGTH:g} screens; sites of "
          f"the same class within ±{PKA_WINDOW:g} pKa; posterior mean as in Gelman et al., "
          "Bayesian Data Analysis, 3rd ed. 2013, ch. 2; saltplan.plan.inhouse)")


def blend(prior: float, screens: int, crystalline: int,
          strength: float = PRIOR_STRENGTH) -> float:
    """Posterior mean success term (0..1) after ``crystalline`` of ``screens``.

    >>> blend(0.5, 0, 0), round(blend(0.2, 3, 3), 3), round(blend(0.2, 50, 50), 3)
    (0.5, 0.36, 0.845)
    """
    if screens < 0 or crystalline < 0 or crystalline > screens:
        raise ValueError("need 0 <= crystalline <= screens")
    if not 0.0 <= prior <= 1.0 or strength <= 0:
        raise ValueError("need 0 <= prior <= 1 and strength > 0")
    return (strength * prior + crystalline) / (strength + screens)


def describe(screens: int, crystalline: int, programmes: tuple[str, ...]) -> str:
    """"in-house: 7 of 12 screens crystalline, programme HRN and 2 others"."""
    if not programmes:
        where = "no programme"
    else:
        where = f"programme {programmes[0]}"
        if len(programmes) > 1:
            rest = len(programmes) - 1
            where += f" and {rest} other" + ("s" if rest > 1 else "")
    noun = "screen" if screens == 1 else "screens"
    return f"in-house: {crystalline} of {screens} {noun} crystalline, {where}"
