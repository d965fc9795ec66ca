"""Ranking of counterion candidates (saltplan.plan.ranking, data/ranking_weights.yaml).

Sources are named beside each check; measured pKa values are given so that these tests
exercise the ranking, not the estimator.
"""
from __future__ import annotations

import math

import pytest

from saltplan.errors import ParameterError
from saltplan.plan.planner import plan_salts
from saltplan.plan.ranking import load_ranking_config, precedence_score

# N,N-dimethylbenzylamine, pKa(BH+) 8.93 (CRC Handbook, from memory)
BASE = ("CN(C)Cc1ccccc1", {"base": 8.93})
# benzoic acid, pKa 4.20 (CRC Handbook; Serjeant & Dempsey 1979)
ACID = ("OC(=O)c1ccccc1", {"acid": 4.20})


def _best(plan, counterion):
    rows = [c for c in plan["candidates"] if c["counterion"] == counterion and c["feasible"]]
    return min(rows, key=lambda c: c["rank"]) if rows else None


def test_precedence_follows_the_published_share_table():
    # Berge, Bighley, Monkhouse, J. Pharm. Sci. 1977, 66, 1, Table I (from memory):
    # hydrochloride is the most frequent anion, sodium the most frequent cation;
    # sulfate (7.5 %) above mesylate (2.0 %) above a counterion absent from the table.
    cfg = load_ranking_config()
    assert precedence_score("hydrochloride", cfg, role="acid") == pytest.approx(1.0)
    assert precedence_score("sodium", cfg, role="base") == pytest.approx(1.0)
    assert precedence_score("sulfate", cfg, "acid") > precedence_score("mesylate", cfg, "acid") > 0
    assert precedence_score("saccharinate", cfg, "acid") < precedence_score("mesylate", cfg, "acid")


def test_strong_base_gets_hydrochloride_near_the_top():
    # common practice: hydrochloride is the first salt tried for an aliphatic-amine base
    plan = plan_salts(BASE[0], measured=BASE[1], dose_mg=100).to_dict()
    assert _best(plan, "hydrochloride")["counterion_rank"] <= 3


def test_carboxylic_acid_gets_sodium_near_the_top_and_a_calcium_2_1_salt():
    # common practice: sodium first for acids; divalent cations give 2:1 API:metal salts
    plan = plan_salts(ACID[0], measured=ACID[1], dose_mg=100).to_dict()
    assert _best(plan, "sodium")["counterion_rank"] <= 3
    calcium = _best(plan, "calcium")
    assert calcium is not None and calcium["stoichiometry"] == "2:1"


def test_breakdown_sums_to_the_score_and_ranks_are_ordered():
    plan = plan_salts(BASE[0], measured=BASE[1], dose_mg=100).to_dict()
    feasible = [c for c in plan["candidates"] if c["feasible"]]
    for c in feasible:
        assert math.isclose(sum(c["breakdown"].values()), c["score"], abs_tol=0.02), c["counterion"]
    scores = [c["score"] for c in feasible]
    assert scores == sorted(scores, reverse=True)
    assert [c["rank"] for c in feasible] == list(range(1, len(feasible) + 1))


def test_ranking_is_deterministic(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    a = plan_salts(BASE[0], measured=BASE[1], dose_mg=100).to_dict()
    b = plan_salts(BASE[0], measured=BASE[1], dose_mg=100).to_dict()
    assert a == b


def test_weights_override_changes_the_score(tmp_path):
    heavy = tmp_path / "weights.yaml"
    heavy.write_text("weights:\n  precedence: 0.0\n", encoding="utf-8")
    default = plan_salts(BASE[0], measured=BASE[1]).to_dict()
    changed = plan_salts(BASE[0], measured=BASE[1], weights=str(heavy)).to_dict()
    hcl_default = _best(default, "hydrochloride")["score"]
    hcl_changed = _best(changed, "hydrochloride")["score"]
    assert hcl_changed < hcl_default      # the precedence bonus is gone


def test_unknown_weight_key_is_refused(tmp_path):
    bad = tmp_path / "weights.yaml"
    bad.write_text("weights:\n  precednce: 1.0\n", encoding="utf-8")
    with pytest.raises(ParameterError, match="precednce"):
        plan_salts(BASE[0], measured=BASE[1], weights=str(bad))
