"""The in-house prior: Beta-binomial shrinkage of the precedence term toward the ledger's
screens on similar sites; with no ledger, or learning switched off, plans byte-identical."""
from __future__ import annotations

import math

import pytest

from saltplan.ledger.store import InhouseEvidence
from saltplan.plan.inhouse import PKA_WINDOW, PRIOR_STRENGTH, blend, describe
from saltplan.plan.planner import plan_salts

SMILES = "CN(C)CCc1ccc(Cl)cc1"      # one tertiary amine (estimated pKa about 9.2)


def _beta_posterior_mean(a: float, b: float, n: int = 20000) -> float:
    """E[θ] of Beta(a, b) by the midpoint rule on the density (independent of the closed
    form (κ·p0 + k) / (κ + n): Gelman et al., Bayesian Data Analysis, 3rd ed., ch. 2)."""
    log_norm = math.lgamma(a + b) - math.lgamma(a) - math.lgamma(b)
    total = 0.0
    for i in range(n):
        t = (i + 0.5) / n
        total += t * math.exp(log_norm + (a - 1) * math.log(t) + (b - 1) * math.log1p(-t))
    return total / n


@pytest.mark.parametrize("prior, screens, ok", [(0.5, 3, 3), (0.2, 12, 7), (0.7, 50, 10)])
def test_blend_is_the_beta_binomial_posterior_mean(prior, screens, ok):
    a = PRIOR_STRENGTH * prior + ok
    b = PRIOR_STRENGTH * (1 - prior) + screens - ok
    assert blend(prior, screens, ok) == pytest.approx(_beta_posterior_mean(a, b), abs=1e-4)


def test_three_screens_move_it_a_little_fifty_a_lot():
    prior = 0.3
    few = blend(prior, 3, 3) - prior
    many = blend(prior, 50, 50) - prior
    assert 0 < few < 0.2 * (1 - prior) + 1e-9       # three successes: a fifth of the way
    assert many > 0.8 * (1 - prior)                 # fifty: four fifths of the way
    assert blend(prior, 0, 0) == prior
    with pytest.raises(ValueError):
        blend(prior, 3, 4)


def test_the_words_of_the_breakdown():
    assert describe(12, 7, ("HRN", "KIT", "OWL")) == \
        "in-house: 7 of 12 screens crystalline, programme HRN and 2 others"
    assert describe(1, 0, ("HRN",)) == "in-house: 0 of 1 screen crystalline, programme HRN"


def _evidence(counterion, n, ok, pka, site_class="amine_tertiary", programmes=("HRN",)):
    facts = tuple((counterion, site_class, pka, i < ok, programmes[i % len(programmes)],
                   f"res-{counterion}-{i}") for i in range(n))
    return InhouseEvidence(facts, source="test ledger")


def _cand(plan, counterion, stoich="1:1"):
    return next(c for c in plan["candidates"]
                if c["counterion"] == counterion and c["stoichiometry"] == stoich)


@pytest.fixture(scope="module")
def base():
    return plan_salts(SMILES, name="HRN-190").to_dict()


def test_failures_in_house_move_hydrochloride_down(base):
    pka = base["sites"][0]["pka"]
    assert _cand(base, "hydrochloride")["rank"] == 1
    few = plan_salts(SMILES, name="HRN-190",
                     inhouse=_evidence("hydrochloride", 3, 0, pka + 1.0)).to_dict()
    many = plan_salts(SMILES, name="HRN-190",
                      inhouse=_evidence("hydrochloride", 50, 0, pka - 1.0,
                                        programmes=("HRN", "KIT", "OWL"))).to_dict()
    p0 = _cand(base, "hydrochloride")["breakdown"]["precedence"]
    assert p0 == 1.0              # weight 1 × published term 1 (the most frequent anion)
    w = p0
    f = _cand(few, "hydrochloride")
    m = _cand(many, "hydrochloride")
    assert f["breakdown"]["precedence"] == pytest.approx(w * blend(1.0, 3, 0), abs=5e-4)
    assert m["breakdown"]["precedence"] == pytest.approx(w * blend(1.0, 50, 0), abs=5e-4)
    assert f["precedence_basis"] == "in-house: 0 of 3 screens crystalline, programme HRN"
    assert m["precedence_basis"] == \
        "in-house: 0 of 50 screens crystalline, programme HRN and 2 others"
    assert f["rank"] <= 2 < m["rank"]               # three failures: barely; fifty: a lot
    assert many["settings"]["inhouse_prior"]["ledger"] == "test ledger"
    # other counterions keep their published term and carry no in-house words
    assert _cand(many, "sulfate")["breakdown"]["precedence"] == \
        _cand(base, "sulfate")["breakdown"]["precedence"]
    assert "precedence_basis" not in _cand(many, "sulfate")


def test_successes_in_house_move_a_rare_counterion_up(base):
    pka = base["sites"][0]["pka"]
    rare = max(base["candidates"][:12], key=lambda c: c["rank"])
    ci = rare["counterion"]
    up = plan_salts(SMILES, name="HRN-190",
                    inhouse=_evidence(ci, 50, 50, pka)).to_dict()
    assert _cand(up, ci, rare["stoichiometry"])["rank"] < rare["rank"]


@pytest.mark.parametrize("shift, site_class", [(PKA_WINDOW + 0.3, "amine_tertiary"),
                                                (0.0, "amine_secondary")])
def test_evidence_on_dissimilar_sites_changes_no_ranking(base, shift, site_class):
    pka = base["sites"][0]["pka"]
    other = plan_salts(SMILES, name="HRN-190",
                       inhouse=_evidence("hydrochloride", 50, 0, pka + shift,
                                         site_class=site_class)).to_dict()
    assert other["candidates"] == base["candidates"]
    assert other["excluded"] == base["excluded"]


def test_no_ledger_and_switched_off_give_the_same_bytes(cli, tmp_path, monkeypatch):
    """`saltplan plan --out` without a ledger, and with a ledger full of relevant screens
    but --no-learn, write byte-identical files (same SOURCE_DATE_EPOCH)."""
    from saltplan.ledger import ENV_VAR

    monkeypatch.delenv(ENV_VAR, raising=False)
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1796204284")
    from ledger_support import demo_design, demo_results

    from saltplan.ledger import open_ledger

    led_path = tmp_path / "l.sqlite"
    design = demo_design()
    with open_ledger(led_path) as led:
        led.record_results(demo_results(design), design=design)
    smiles = design["plan"]["parent"]["smiles"]
    outs = {}
    for label, extra in (("none", ()), ("off", ("--ledger", led_path, "--no-learn")),
                         ("on", ("--ledger", led_path))):
        out = tmp_path / label
        res = cli("plan", smiles, "--name", "HRN-101", "--out", out, *extra)
        assert res.exit_code == 0, res.output
        outs[label] = {p.name: p.read_bytes() for p in sorted(out.iterdir())}
    assert outs["none"] == outs["off"]
    assert outs["none"].keys() == outs["on"].keys()
    assert outs["none"]["plan.json"] != outs["on"]["plan.json"]    # learning does change it
    assert b"in-house: 1 of 1 screen crystalline, programme HRN" in outs["on"]["report.md"]
