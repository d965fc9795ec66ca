"""Will a salt form? The ΔpKa rule, proton-transfer probability and stoichiometries.

For every salt-forming site of the API and every counterion of the opposite role this
module computes the aqueous ΔpKa = pKa(BH⁺) − pKa(HA), places it on the rule-of-thumb
scale, gives the proton-transfer probability from crystal-structure statistics, and spells
out the stoichiometries worth making, each with its formula, salt molecular weight and
drug content.

References
----------
1. P. H. Stahl, C. G. Wermuth (eds.), *Handbook of Pharmaceutical Salts: Properties,
   Selection, and Use*, 2nd ed., Wiley-VCH, 2011 (ΔpKa ≥ 2–3 rule of thumb; common practice).
2. A. J. Cruz-Cabeza, *CrystEngComm* 2012, 14, 6362–6365 (ΔpKa < −1: co-crystals;
   ΔpKa > 4: salts; P ≈ 0.17·ΔpKa + 0.28 in between; relation from memory).
"""
from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field
from typing import Any

from ..errors import ParameterError
from .stoichiometry import (  # noqa: F401 - re-exported: part of this module's public API
    MASS_SOURCE,
    Composition,
    Option,
    compose,
    counterion_pkas,
    hill_formula,
    is_cation_base,
    option_clears,
    parse_stoichiometry,
    pka_source,
    required_delta_pka,
    salt_pka,
    salt_pka_index,
    stoichiometry_options,
)

CATEGORIES = ("salt_expected", "likely", "uncertain", "unlikely")
THRESHOLD_SOURCE = ("rule of thumb ΔpKa ≥ 2–3 (common practice; Stahl & Wermuth 2011); "
                    "ΔpKa < −1 almost only co-crystals (Cruz-Cabeza 2012)")
PROBABILITY_SOURCE = ("P = clip(0.17·ΔpKa + 0.28, 0, 1), crystal-structure statistics "
                      "(Cruz-Cabeza, CrystEngComm 2012, 14, 6362; relation from memory)")


def _r(value: float, digits: int) -> float:
    """round() without "-0.0" (stable JSON bytes)."""
    out = round(value, digits)
    return 0.0 if out == 0 else out


# --------------------------------------------------------------------------- the rule
@dataclass(frozen=True)
class Thresholds:
    """ΔpKa limits of the categories [pKa units].

    ``ΔpKa ≥ salt_expected`` → "salt_expected"; ``≥ likely`` → "likely";
    ``≥ uncertain`` → "uncertain" (mixed salt/co-crystal zone); below → "unlikely".
    Defaults 3 / 2 / −1: common practice (Stahl & Wermuth 2011) and Cruz-Cabeza 2012.
    """

    salt_expected: float = 3.0
    likely: float = 2.0
    uncertain: float = -1.0

    def __post_init__(self):
        values = (self.salt_expected, self.likely, self.uncertain)
        if not all(isinstance(v, (int, float)) and math.isfinite(v) for v in values):
            raise ParameterError("ΔpKa thresholds must be finite numbers", field="thresholds")
        if not self.salt_expected >= self.likely >= self.uncertain:
            raise ParameterError(
                f"ΔpKa thresholds must satisfy salt_expected ≥ likely ≥ uncertain, got "
                f"{self.salt_expected}, {self.likely}, {self.uncertain}", field="thresholds")

    def to_dict(self) -> dict[str, Any]:
        return {"salt_expected": self.salt_expected, "likely": self.likely,
                "uncertain": self.uncertain, "source": THRESHOLD_SOURCE}


DEFAULT_THRESHOLDS = Thresholds()


def delta_pka(base_pka: float, acid_pka: float) -> float:
    """ΔpKa = pKa(BH⁺) − pKa(HA) [pKa units], both aqueous.

    >>> round(delta_pka(10.64, -6.0), 2)   # a trialkylammonium with HCl (pKa about −6)
    16.64
    """
    return float(base_pka) - float(acid_pka)


def categorize(dpka: float, thresholds: Thresholds = DEFAULT_THRESHOLDS) -> str:
    """Category of a ΔpKa on the rule-of-thumb scale (see :class:`Thresholds`).

    >>> categorize(3.0), categorize(2.5), categorize(0.0), categorize(-1.5)
    ('salt_expected', 'likely', 'uncertain', 'unlikely')
    """
    if dpka >= thresholds.salt_expected:
        return "salt_expected"
    if dpka >= thresholds.likely:
        return "likely"
    if dpka >= thresholds.uncertain:
        return "uncertain"
    return "unlikely"


def transfer_probability(dpka: float, slope: float = 0.17, intercept: float = 0.28) -> float:
    """Probability that the proton is transferred (a salt rather than a co-crystal).

    .. math:: P = \\min(1, \\max(0, 0.17\\,\\Delta pK_a + 0.28))

    Parameters
    ----------
    dpka : float
        Aqueous ΔpKa [pKa units].
    slope, intercept : float
        The linear relation of Cruz-Cabeza 2012 (from memory): 17 % per unit, 28 % at 0.

    Returns
    -------
    float
        0 … 1. The 50 % point lies at ΔpKa ≈ 1.3.

    >>> round(transfer_probability(1.3), 3), transfer_probability(5.0)
    (0.501, 1.0)
    """
    return min(1.0, max(0.0, slope * float(dpka) + intercept))


# --------------------------------------------------------------------------- result types
@dataclass(frozen=True)
class Caveat:
    """A liability or warning attached to a candidate or to the API.

    ``severity`` is "info", "warning" or "serious"; ``source`` names the rule or reference.
    """

    code: str
    severity: str
    text: str
    source: str

    def to_dict(self) -> dict[str, Any]:
        return {"code": self.code, "severity": self.severity, "text": self.text,
                "source": self.source}


@dataclass(frozen=True)
class Transfer:
    """One proton transfer of a salt: an API site and a counterion pKa."""

    api_atom: int
    api_kind: str                 # "acid" | "base" (the API site)
    api_pka: float
    api_pka_provenance: str       # "measured" | "estimated"
    api_pka_source: str
    api_pka_uncertainty: float    # pKa units (0 when unknown)
    counterion_pka: float
    counterion_pka_index: int     # index in the counterion's ascending pKa tuple
    counterion_pka_source: str
    delta_pka: float
    note: str | None = None       # e.g. how a zwitterion takes part

    def to_dict(self) -> dict[str, Any]:
        return {
            "api_atom": self.api_atom,
            "api_kind": self.api_kind,
            "api_pka": _r(self.api_pka, 2),
            "api_pka_provenance": self.api_pka_provenance,
            "api_pka_source": self.api_pka_source,
            "api_pka_uncertainty": _r(self.api_pka_uncertainty, 2),
            "counterion_pka": _r(self.counterion_pka, 2),
            "counterion_pka_index": self.counterion_pka_index,
            "counterion_pka_source": self.counterion_pka_source,
            "delta_pka": _r(self.delta_pka, 2),
            "note": self.note,
        }


@dataclass(frozen=True)
class Candidate:
    """A counterion × stoichiometry option for the API (see DEVELOPERS.md contract)."""

    counterion: str
    counterion_name: str
    stoichiometry: str            # "API:counterion"
    api_sites: tuple[int, ...]
    delta_pka: float              # limiting (smallest) ΔpKa
    delta_pkas: tuple[float, ...]
    category: str
    feasible: bool
    probability: float
    formula: str
    salt_mw: float
    drug_content: float
    transfers: tuple[Transfer, ...] = ()
    formula_display: str = ""
    salt_smiles: str = ""
    counterion_mass_per_api: float = 0.0
    tier: int | None = None
    score: float = 0.0
    breakdown: dict = field(default_factory=dict, compare=False, hash=False)
    rank: int = 0
    counterion_rank: int = 0      # rank of the counterion, each counted once by its best entry
    caveats: tuple[Caveat, ...] = ()
    ph_max: float | None = None
    ph_max_basis: str | None = None
    slurry_ph: float | None = None   # pH of the salt's own saturated solution (estimate)
    reason: str | None = None     # why excluded (infeasible), None when feasible
    #: in-house precedence evidence (ledger), None without a ledger
    precedence_basis: str | None = field(default=None, compare=False, hash=False)

    @property
    def limiting_transfer(self) -> Transfer | None:
        """The proton transfer with the smallest ΔpKa (ties: lowest atom index)."""
        if not self.transfers:
            return None
        return min(self.transfers, key=lambda t: (t.delta_pka, t.api_atom))

    @property
    def sort_key(self):
        """Deterministic order: score desc, ΔpKa desc, counterion id, stoichiometry."""
        return ranking_key(self.score, self.delta_pka, self.counterion, self.stoichiometry)

    def to_dict(self) -> dict[str, Any]:
        out = {
            "rank": self.rank,
            "counterion_rank": self.counterion_rank,
            "counterion": self.counterion,
            "counterion_name": self.counterion_name,
            "stoichiometry": self.stoichiometry,
            "api_sites": list(self.api_sites),
            "delta_pka": _r(self.delta_pka, 2),
            "delta_pkas": [_r(d, 2) for d in self.delta_pkas],
            "category": self.category,
            "feasible": self.feasible,
            "probability": _r(self.probability, 3),
            "transfers": [t.to_dict() for t in self.transfers],
            "tier": self.tier,
            "formula": self.formula,
            "formula_display": self.formula_display,
            "salt_smiles": self.salt_smiles,
            "salt_mw": _r(self.salt_mw, 2),
            "drug_content": _r(self.drug_content, 2),
            "mass_source": MASS_SOURCE,
            "score": _r(self.score, 3),
            "breakdown": {k: _r(v, 3) for k, v in self.breakdown.items()},
            "ph_max": None if self.ph_max is None else _r(self.ph_max, 2),
            "ph_max_basis": self.ph_max_basis,
            "slurry_ph": None if self.slurry_ph is None else _r(self.slurry_ph, 2),
            "caveats": [c.to_dict() for c in self.caveats],
            "reason": self.reason,
        }
        if self.precedence_basis is not None:   # only with a ledger: plans stay as before
            out["precedence_basis"] = self.precedence_basis
        return out


def ranking_key(score: float, dpka: float, counterion: str, stoichiometry: str) -> tuple:
    """Sort key of the ranking: score desc, ΔpKa desc, counterion id, stoichiometry.

    Rounded to 9 decimals so that float noise never decides a tie.
    """
    return (-round(score, 9), -round(dpka, 9), counterion, stoichiometry)


# --------------------------------------------------------------------------- assessment
def assess(parent, sites: Sequence, library: Iterable, *, min_delta_pka: float = 2.0,
           thresholds: Thresholds = DEFAULT_THRESHOLDS, slope: float = 0.17,
           intercept: float = 0.28, zwitterion_allowance: float = 0.0) -> list[Candidate]:
    """All counterion × stoichiometry candidates for an API (unranked, no caveats yet).

    Parameters
    ----------
    parent : Parent
        The standardized API (its ``smiles`` and atom order).
    sites : sequence of Site
        Ionizable sites of ``parent`` (estimated or measured).
    library : iterable of Counterion
    min_delta_pka : float
        ``feasible`` = limiting ΔpKa ≥ this [pKa units] (default 2, common practice).
    thresholds : Thresholds
        Category limits.
    zwitterion_allowance : float
        A transfer onto a zwitterion's carboxylate-type site (or from its ammonium-type site)
        is feasible from ``min_delta_pka − zwitterion_allowance`` (see
        :func:`saltplan.stoichiometry.required_delta_pka`); category and probability still
        follow its ΔpKa.

    Returns
    -------
    list of Candidate
        In library order, stoichiometries in the order of :func:`stoichiometry_options`.
    """
    out: list[Candidate] = []
    for ion in library:
        for opt in stoichiometry_options(sites, ion, min_delta_pka, zwitterion_allowance):
            comp = compose(parent.smiles, ion, opt)
            limiting = opt.limiting
            transfers = tuple(
                Transfer(api_atom=site.atom, api_kind=site.kind, api_pka=float(site.pka),
                         api_pka_provenance=str(getattr(site, "provenance", "estimated")),
                         api_pka_source=str(getattr(site, "source", "")),
                         api_pka_uncertainty=float(getattr(site, "uncertainty", 0.0) or 0.0),
                         counterion_pka=(salt_pka(ion) if i == salt_pka_index(ion)
                                         else counterion_pkas(ion)[i]),
                         counterion_pka_index=i, counterion_pka_source=pka_source(ion, i),
                         delta_pka=d, note=opt.notes[k] if opt.notes else None)
                for k, ((site, i), d) in enumerate(zip(opt.pairs, opt.delta_pkas, strict=True)))
            feasible = option_clears(opt, min_delta_pka, zwitterion_allowance)
            need = min(required_delta_pka(n, min_delta_pka, zwitterion_allowance)
                       for n in (opt.notes or (None,)))
            sites_used = tuple(dict.fromkeys(site.atom for site, _ in opt.pairs))
            out.append(Candidate(
                counterion=ion.id, counterion_name=str(getattr(ion, "name", ion.id)),
                stoichiometry=opt.stoichiometry, api_sites=sites_used,
                delta_pka=limiting, delta_pkas=opt.delta_pkas,
                category=categorize(limiting, thresholds), feasible=feasible,
                probability=transfer_probability(limiting, slope, intercept),
                formula=comp.formula, salt_mw=comp.salt_mw, drug_content=comp.drug_content,
                transfers=transfers, formula_display=comp.formula_display,
                salt_smiles=comp.salt_smiles, counterion_mass_per_api=comp.counterion_mass_per_api,
                tier=getattr(ion, "tier", None),
                reason=None if feasible else
                f"ΔpKa {limiting:.2f} below the minimum {need:g}"
                + (" (zwitterion allowance applied)" if need != min_delta_pka else "")))
    return out
