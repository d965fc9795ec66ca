"""Salt-screen design: amounts by hand, risky combinations, budget, layout, outputs, CLI.

Most tests use small stand-in counterion objects (fields as in DEVELOPERS.md) so the
amounts are checked against hand calculations written out here; the last tests run the
real planner and counterion library.
"""
from __future__ import annotations

import csv
import io
import json
import re
from dataclasses import dataclass

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from saltplan.errors import BudgetError, ParameterError, SaltplanError
from saltplan.library.solvents import load_solvents
from saltplan.screen import MODES, PLATE_WELLS, counterion_amounts, design_screen, equivalents_for, write_screen
from saltplan.screen.output import RESULTS_COLUMNS, plate_csv, results_template_csv, worksheet_csv
from saltplan.screen.solvent_choice import select_solvents


@dataclass(frozen=True)
class CI:
    """Stand-in with the Counterion fields the screen reads (DEVELOPERS.md contract)."""

    id: str
    name: str
    smiles: str
    mw: float
    form: str = "solid"
    density_g_ml: float | None = None
    solution_w_w: float | None = None
    flags: tuple = ()
    role: str = "acid"
    n_protons: int = 1


class Lib:
    def __init__(self, items):
        self._items = {c.id: c for c in items}

    def get(self, cid):
        return self._items[cid]


# Molar masses from IUPAC standard atomic weights (C 12.011, H 1.008, O 15.999, S 32.06,
# Cl 35.45, N 14.007, Na 22.990): CH4O3S 96.10, C6H6O3S 158.17, C4H4O4 116.07, HCl 36.46,
# C4H11NO3 121.14, NaOH 40.00. Densities: methanesulfonic acid 1.48 g/mL (CRC Handbook,
# from memory); 37 % w/w hydrochloric acid 1.18 g/mL (CRC Handbook, from memory).
MESYLATE = CI("mesylate", "methanesulfonic acid", "CS(=O)(=O)O", 96.10, "liquid", 1.48,
              flags=("sulfonate_ester_risk", "corrosive"))
BESYLATE = CI("besylate", "benzenesulfonic acid", "OS(=O)(=O)c1ccccc1", 158.17,
              flags=("sulfonate_ester_risk",))
FUMARATE = CI("fumarate", "fumaric acid", "OC(=O)/C=C/C(O)=O", 116.07, n_protons=2)
HCL = CI("hydrochloride", "hydrochloric acid", "Cl", 36.46, "gas_solution", 1.18, 37,
         flags=("volatile_acid", "corrosive"))
TROMETHAMINE = CI("tromethamine", "tromethamine", "NC(CO)(CO)CO", 121.14, role="base")
SODIUM = CI("sodium", "sodium hydroxide", "[Na+].[OH-]", 40.00, role="base",
            flags=("strongly_basic_solution",))
LIB = Lib([MESYLATE, BESYLATE, FUMARATE, HCL, TROMETHAMINE, SODIUM])


def _cand(ci, stoich, rank, feasible=True, caveats=()):
    return {"counterion": ci, "stoichiometry": stoich, "rank": rank, "feasible": feasible,
            "delta_pka": 6.0 if feasible else 0.5, "caveats": list(caveats)}


def base_plan(cands=None, mw=300.0, smiles="CN(C)CCc1ccccc1"):
    """A plan dict for an invented base of MW 300 g/mol."""
    if cands is None:
        cands = [_cand("mesylate", "1:1", 1), _cand("hydrochloride", "1:1", 2),
                 _cand("fumarate", "2:1", 3, caveats=[{"code": "michael_acceptor",
                                                       "severity": "warning",
                                                       "text": "adds to amines",
                                                       "source": "common practice"}]),
                 _cand("besylate", "1:1", 4), _cand("mesylate", "1:2", 5)]
    return {"name": "HX-101 (invented)", "inputs": {"smiles": smiles},
            "parent": {"smiles": smiles, "mw": mw}, "candidates": cands, "excluded": [],
            "verdict": {"code": "salt_candidates", "text": "ok"}}


def design(**kw):
    kw.setdefault("library", LIB)
    plan = kw.pop("plan", None) or base_plan()
    budget = kw.pop("budget", 1000.0)
    return design_screen(plan, budget, **kw)


# --------------------------------------------------------------------------- amounts
def test_mesylate_amounts_match_hand_calculation():
    # 5.0 mg of a 300 g/mol base = 0.016667 mmol; 1.05 eq -> 0.017500 mmol;
    # x 96.10 g/mol = 1.68175 mg; / 1.48 g/mL (mg/µL) = 1.13632 µL.
    # (Rounding the mass to 1.682 mg first gives 1.1365 µL.)
    eq = equivalents_for("1:1", 0.05)
    assert eq == pytest.approx(1.05)
    a = counterion_amounts(5.0, 300.0, eq, MESYLATE, stock_molarity=0.5)
    assert a["api_mmol"] == pytest.approx(0.0166667, rel=1e-5)
    assert a["counterion_mmol"] == pytest.approx(0.017500, rel=1e-6)
    assert a["counterion_mg"] == pytest.approx(1.68175, rel=1e-6)
    assert a["counterion_ul"] == pytest.approx(1.13632, rel=1e-5)
    assert a["stock_ul"] is None  # a liquid is dosed neat by volume


def test_solid_from_stock_by_molarity():
    # besylate (solid): 0.017500 mmol / 0.5 mol/L (= mmol/mL) = 0.035 mL = 35.0 µL;
    # mass 0.0175 x 158.17 = 2.76798 mg.
    a = counterion_amounts(5.0, 300.0, 1.05, BESYLATE, stock_molarity=0.5)
    assert a["stock_ul"] == pytest.approx(35.0)
    assert a["counterion_mg"] == pytest.approx(2.76798, rel=1e-5)
    assert a["counterion_ul"] is None
    # 0.25 M doubles the volume
    assert counterion_amounts(5.0, 300.0, 1.05, BESYLATE, stock_molarity=0.25)["stock_ul"] \
        == pytest.approx(70.0)


def test_two_to_one_salt_takes_half_the_equivalents():
    # common practice: 0.5 eq for a 2:1 (API:counterion) salt, 0.525 with 5 % excess;
    # 0.016667 mmol x 0.525 = 0.00875 mmol fumaric acid; x 116.07 = 1.01561 mg;
    # / 0.5 M = 17.5 µL of stock.
    assert equivalents_for("2:1", 0.05) == pytest.approx(0.525)
    assert equivalents_for("1:2", 0.05) == pytest.approx(2.10)   # bis-salt, 2.0-2.2 eq
    assert equivalents_for("1:1", 0.0) == pytest.approx(1.0)
    d = design(counterions=["fumarate"], solvents=["water"], modes=["slurry"])
    w = next(w for w in d.wells if w.kind == "sample")
    assert w.equivalents == pytest.approx(0.525)
    assert w.counterion_mmol == pytest.approx(0.00875, rel=1e-4)
    assert w.counterion_mg == pytest.approx(1.0156, abs=1e-4)
    assert w.stock_ul == pytest.approx(17.5)


def test_solution_reagent_volume_uses_mass_fraction():
    # 37 % w/w HCl, 1.18 g/mL (CRC Handbook, from memory): 0.0175 mmol x 36.46 = 0.63805 mg
    # HCl; / 1.18 mg/µL / 0.37 = 1.46140 µL of the concentrated acid.
    a = counterion_amounts(5.0, 300.0, 1.05, HCL, stock_molarity=0.5)
    assert a["counterion_mg"] == pytest.approx(0.63805, rel=1e-5)
    assert a["counterion_ul"] == pytest.approx(1.46140, rel=1e-5)


def test_solvent_volume_from_concentration_minus_stock():
    # slurry default 50 mg/mL: 5 mg -> 100 µL in the well; the besylate stock (35 µL, made in
    # the same solvent) is part of it, so 65 µL of solvent is added.
    d = design(counterions=["besylate"], solvents=["water"], modes=["slurry"])
    sample = next(w for w in d.wells if w.kind == "sample")
    control = next(w for w in d.wells if w.kind == "control")
    assert sample.stock_ul == pytest.approx(35.0)
    assert sample.solvent_ul == pytest.approx(65.0)
    assert control.solvent_ul == pytest.approx(100.0) and control.counterion is None
    # evaporation 10 mg/mL -> 500 µL; a fixed volume overrides the concentration
    d = design(counterions=["besylate"], solvents=["water"], modes=["evaporation"],
               solvent_ul=250.0)
    assert {w.solvent_ul for w in d.wells} == {215.0, 250.0}


def test_antisolvent_volume_and_partner():
    d = design(counterions=["hydrochloride"], solvents=["acetone"], modes=["antisolvent"])
    w = next(w for w in d.wells if w.kind == "sample")
    assert w.antisolvent == "heptane"           # library pairing (common practice)
    assert w.antisolvent_ul == pytest.approx(2 * 200.0)   # 25 mg/mL -> 200 µL, ratio 2



@settings(max_examples=60, deadline=None)
@given(api_mg=st.floats(0.5, 200), mw=st.floats(100, 900), eq=st.floats(0.4, 2.3),
       molarity=st.floats(0.05, 5))
def test_amounts_are_consistent(api_mg, mw, eq, molarity):
    # definitions: mmol = mg / MW; µL stock x M / 1000 = mmol; µL neat x density = mg
    solid = counterion_amounts(api_mg, mw, eq, BESYLATE, stock_molarity=molarity)
    assert solid["counterion_mmol"] == pytest.approx(api_mg / mw * eq)
    assert solid["stock_ul"] * molarity / 1000 == pytest.approx(solid["counterion_mmol"])
    assert solid["counterion_mg"] == pytest.approx(solid["counterion_mmol"] * 158.17)
    liquid = counterion_amounts(api_mg, mw, eq, MESYLATE, stock_molarity=molarity)
    assert liquid["counterion_ul"] * 1.48 == pytest.approx(liquid["counterion_mg"])


# --------------------------------------------------------------------------- risky combinations
ALCOHOLS = ["ethanol", "methanol", "2-propanol"]


@pytest.mark.parametrize("include_risky", [False, True])
def test_no_sulfonic_acid_alcohol_well_without_its_flag(include_risky):
    # ICH M7(R2): alkyl sulfonate esters from sulfonic acids + alcohols are potential
    # mutagenic impurities; such wells never appear unflagged.
    slib = load_solvents()
    d = design(solvents=ALCOHOLS + ["acetone"], modes=["slurry", "antisolvent"], top=5,
               include_risky=include_risky, budget=5000)
    risky = 0
    for w in d.wells:
        if w.counterion is None:
            continue
        media = [slib.get(w.solvent)] + ([slib.get(w.antisolvent)] if w.antisolvent else [])
        if "sulfonate_ester_risk" in LIB.get(w.counterion).flags and \
                any(s.is_alcohol for s in media):
            risky += 1
            assert "sulfonate_ester" in w.flags, w
    if include_risky:
        assert risky > 0 and "sulfonate_ester" in d.flag_legend
    else:
        assert risky == 0
        dropped = [x for x in d.dropped if x["rule"] == "sulfonate_ester"]
        # mesylate 1:1, mesylate 1:2 and besylate x 3 alcohols x 2 modes
        assert len(dropped) == 3 * 3 * 2
        assert all("ICH M7" in x["source"] for x in dropped)
        # mesylate in acetone is fine and stays
        assert any(w.counterion == "mesylate" and w.solvent == "acetone" for w in d.wells)


def test_strong_base_with_ester_and_primary_amine_with_ketone_are_dropped():
    plan = base_plan([_cand("sodium", "1:1", 1), _cand("tromethamine", "1:1", 2)],
                     smiles="OC(=O)c1ccccc1")
    d = design(plan=plan, solvents=["ethyl-acetate", "acetone", "water"], modes=["slurry"])
    rules = {(x["counterion"], x["solvent"], x["rule"]) for x in d.dropped}
    assert ("sodium", "ethyl-acetate", "ester_solvolysis") in rules
    assert ("tromethamine", "acetone", "imine_formation") in rules
    kept = {(w.counterion, w.solvent) for w in d.wells}
    assert ("sodium", "water") in kept and ("tromethamine", "ethyl-acetate") in kept


def test_volatile_acid_in_evaporation_is_flagged_not_dropped():
    d = design(counterions=["hydrochloride"], solvents=["acetone"],
               modes=["slurry", "evaporation"])
    by_mode = {w.mode: w for w in d.wells if w.kind == "sample"}
    assert "volatile_acid_loss" in by_mode["evaporation"].flags
    assert "volatile_acid_loss" not in by_mode["slurry"].flags


def test_plan_caveats_travel_as_flags():
    d = design(counterions=["fumarate"], solvents=["water"], modes=["slurry"])
    w = next(w for w in d.wells if w.kind == "sample")
    assert "caveat:michael_acceptor" in w.flags
    assert "adds to amines" in d.flag_legend["caveat:michael_acceptor"]


def test_mode_solvent_misfits_are_dropped_with_reason():
    d = design(counterions=["besylate"], solvents=["dichloromethane", "dmso"],
               modes=["cooling", "evaporation"])
    reasons = {(x["solvent"], x["mode"]): x["reason"] for x in d.dropped}
    assert "boiling point" in reasons[("dichloromethane", "cooling")]   # bp 39.6 °C
    assert "impractical" in reasons[("dmso", "evaporation")]            # bp 189 °C
    assert "melting point" in reasons[("dmso", "cooling")]              # mp 18.5 °C > 5 °C
    assert {(w.solvent, w.mode) for w in d.wells} == {("dichloromethane", "evaporation")}
    d = design(counterions=["besylate"], solvents=["water", "ethanol", "acetone"],
               modes=["cooling"])
    # water (mp 0, bp 100 °C) and ethanol (bp 78.3 °C) cool; acetone (bp 56.1 °C) does not
    assert {w.solvent for w in d.wells} == {"water", "ethanol"}


def test_stock_solvent_counts_as_a_medium_for_the_rules():
    # besylate from a methanol stock: the acid meets methanol even in an acetone well
    d = design(counterions=["besylate", "fumarate"], solvents=["acetone"], modes=["slurry"],
               stock_solvent="methanol")
    assert not [w for w in d.wells if w.counterion == "besylate"]
    assert any(x["rule"] == "sulfonate_ester" and "methanol" in x["reason"] for x in d.dropped)
    w = next(w for w in d.wells if w.counterion == "fumarate")
    assert w.stock_ul == pytest.approx(17.5)       # 2:1: 0.00875 mmol / 0.5 M
    assert w.solvent_ul == pytest.approx(100.0)    # the stock solvent is evaporated first
    assert d.totals["stocks"][0]["solvent"] == "methanol"
    with pytest.raises(ParameterError, match="class 1"):
        design(stock_solvent="benzene")


# --------------------------------------------------------------------------- solvents
def test_solvent_selection_spans_polarity_and_hydrogen_bonding():
    lib = load_solvents()
    chosen = [c.solvent for c in select_solvents(lib, 4)]
    assert chosen == [c.solvent for c in select_solvents(lib, 4)]  # deterministic
    assert all(s.ich_class != 1 for s in chosen)
    assert min(s.dielectric for s in chosen) < 5 < 30 < max(s.dielectric for s in chosen)
    assert any(s.kt_alpha > 0.5 for s in chosen) and any(s.kt_alpha == 0 for s in chosen)
    # class 3 preferred: a large class-2 penalty leaves only class 3 / water in the set
    strict = select_solvents(lib, 6, class2_penalty=100.0)
    assert all(c.solvent.ich_class in (3, None) for c in strict)
    # first pick without a request is a class 3 solvent; later picks say why
    assert chosen[0].ich_class == 3
    assert all("distance" in c.reason for c in select_solvents(lib, 4)[1:])


def test_requested_solvents_come_first_and_class1_is_refused():
    lib = load_solvents()
    picks = select_solvents(lib, 3, requested=["toluene"])
    assert picks[0].solvent.id == "toluene" and picks[0].reason == "requested by the user"
    with pytest.raises(ParameterError, match="class 1"):
        select_solvents(lib, 2, requested=["benzene"])
    with pytest.raises(SaltplanError, match="unknown solvent"):
        select_solvents(lib, 2, requested=["benzine"])
    d = design(solvents=["acetone"], n_solvents=3, modes=["slurry"])
    assert [s["id"] for s in d.solvents][0] == "acetone" and len(d.solvents) == 3


# --------------------------------------------------------------------------- budget
def test_budget_overrun_is_an_error_that_says_what_to_cut():
    d = design(modes=["slurry"])      # default 4 candidates x 4 solvents x slurry + controls
    need = d.totals["api_mg"]
    budget = need * 0.6
    with pytest.raises(BudgetError) as info:
        design(modes=["slurry"], budget=budget)
    msg = info.value.one_line()
    assert f"design needs {need:g} mg API for {len(d.wells)} wells at 5 mg" in msg
    assert "drop" in msg and "mg per well" in msg
    # the suggested amount per well really fits
    per_well = float(re.search(r"use ([0-9.]+) mg per well", msg).group(1))
    ok = design(modes=["slurry"], budget=budget, api_mg_per_well=per_well)
    assert ok.totals["api_mg"] <= budget
    # so does the suggested number of solvents to drop
    k = int(re.search(r"drop (\d+) solvents?", msg).group(1))
    ok = design(modes=["slurry"], budget=budget, n_solvents=4 - k)
    assert ok.totals["api_mg"] <= budget


def test_total_api_is_wells_times_amount():
    d = design(api_mg_per_well=3.0)
    assert d.totals["api_mg"] == pytest.approx(3.0 * len(d.wells))
    assert d.budget["api_left_mg"] == pytest.approx(1000.0 - d.totals["api_mg"])
    # per-counterion totals add up the wells
    mg = sum(w.counterion_mg for w in d.wells if w.counterion == "besylate")
    assert d.totals["counterions"]["besylate"]["mg"] == pytest.approx(mg, abs=1e-3)


def test_counterion_budget_is_checked():
    with pytest.raises(BudgetError, match="of besylate"):
        design(counterion_budget_mg={"besylate": 1.0})


# --------------------------------------------------------------------------- layout
def test_plate_overflow_is_an_error_naming_cuts():
    with pytest.raises(ParameterError) as info:
        design(top=5, n_solvents=8, modes=["slurry", "cooling", "evaporation"], budget=10000)
    msg = info.value.one_line()
    assert "96-well" in msg and "drop" in msg and "--scale vial" in msg
    n = int(re.search(r"needs (\d+) wells", msg).group(1))
    assert n > PLATE_WELLS
    vials = design(top=5, n_solvents=8, modes=["slurry", "cooling", "evaporation"],
                   budget=100000, scale="vial")
    assert len(vials.wells) == n
    assert vials.wells[0].well == "V001" and vials.wells[-1].well == f"V{n:03d}"


def test_grid_layout_rows_are_candidates_and_columns_solvent_modes():
    d = design()
    assert d.layout["format"] == "grid"
    rows = d.layout["rows"]
    assert rows["A"] == "mesylate 1:1" and list(rows.values())[-1] == "controls"
    ids = [w.well for w in d.wells]
    assert len(ids) == len(set(ids))
    assert all(re.fullmatch(r"[A-H](1[0-2]|[1-9])", i) for i in ids)


def test_row_major_layout_fills_a1_to_a12_then_b1():
    d = design(layout="rows", modes=["slurry", "evaporation", "cooling"])
    ids = [w.well for w in d.wells]
    assert ids[:13] == [f"A{i}" for i in range(1, 13)] + ["B1"]


def test_controls_one_per_solvent_and_mode():
    d = design(modes=["slurry", "evaporation"])
    controls = [w for w in d.wells if w.kind == "control"]
    kept = {(w.solvent, w.mode) for w in controls}
    assert len(controls) == len(kept) == 4 * 2 - sum(
        1 for x in d.dropped if x["kind"] == "control")
    assert all(w.counterion is None and w.equivalents is None for w in controls)
    assert not [w for w in design(controls=False).wells if w.kind == "control"]


def test_stock_larger_than_well_volume_is_an_error():
    with pytest.raises(ParameterError, match="raise the stock molarity"):
        design(counterions=["besylate"], solvents=["water"], modes=["slurry"],
               stock_molarity=0.05)


# --------------------------------------------------------------------------- options
def test_requested_counterions_must_be_feasible_plan_candidates():
    plan = base_plan([_cand("mesylate", "1:1", 1), _cand("fumarate", "1:1", 2, feasible=False)])
    with pytest.raises(ParameterError, match="not a feasible candidate"):
        design(plan=plan, counterions=["fumarate"])
    with pytest.raises(ParameterError, match="not among the plan's candidates"):
        design(plan=plan, counterions=["besylate"])
    with pytest.raises(ParameterError, match="not in the counterion library"):
        design(plan=plan, counterions=["pamoate"])
    plan = base_plan([_cand("mesylate", "1:1", 1, feasible=False)])
    with pytest.raises(ParameterError, match="no feasible salt candidate"):
        design(plan=plan)


@pytest.mark.parametrize("kw,field", [
    ({"modes": ["melt"]}, "modes"), ({"scale": "tube"}, "scale"),
    ({"api_mg_per_well": 0}, "api_mg_per_well"), ({"stock_molarity": -1}, "stock_molarity"),
    ({"excess": 0.9}, "excess"), ({"top": 0}, "top"), ({"budget": float("nan")}, "api_budget_mg"),
])
def test_bad_options_name_the_field(kw, field):
    with pytest.raises(ParameterError) as info:
        design(**kw)
    assert info.value.field == field


def test_every_setting_and_number_has_a_basis():
    d = design(api_mg_per_well=4.0)
    assert d.settings["api_mg_per_well"] == {"value": 4.0, "provenance": "user",
                                             "basis": d.settings["api_mg_per_well"]["basis"]}
    assert d.settings["excess"]["provenance"] == "default"
    assert "RDKit" in d.basis["api_mw"]["source"]
    assert "common practice" in d.basis["equivalents"]["source"]
    assert set(d.basis["counterions"]) == {"mesylate", "hydrochloride", "fumarate", "besylate"}
    assert set(MODES) >= {m["id"] for m in d.modes}


# --------------------------------------------------------------------------- outputs
def test_worksheet_columns_and_values():
    d = design(counterions=["mesylate"], solvents=["acetone"], modes=["slurry"])
    rows = list(csv.DictReader(io.StringIO(worksheet_csv(d))))
    for col in ("well", "counterion", "stoichiometry", "equivalents", "solvent", "mode",
                "api_mg", "counterion_mg", "counterion_ul", "solvent_ul", "flags", "kind",
                "stock_ul", "notes"):
        assert col in rows[0]
    first = next(r for r in rows if r["stoichiometry"] == "1:1")
    assert (first["api_mg"], first["equivalents"], first["counterion_mg"],
            first["counterion_ul"]) == ("5.000", "1.050", "1.682", "1.136")


def test_plate_csv_is_an_8_by_12_grid():
    d = design()
    grid = list(csv.reader(io.StringIO(plate_csv(d))))
    assert grid[0] == ["row"] + [str(i) for i in range(1, 13)]
    assert [r[0] for r in grid[1:]] == list("ABCDEFGH")
    assert all(len(r) == 13 for r in grid)
    assert grid[1][1] == next(f"{w.counterion} {w.stoichiometry} | {w.solvent} | {w.mode}"
                              for w in d.wells if w.well == "A1")


def test_results_template_has_the_select_columns_and_one_row_per_well():
    d = design()
    rows = list(csv.reader(io.StringIO(results_template_csv(d))))
    assert tuple(rows[0]) == RESULTS_COLUMNS
    assert [r[0] for r in rows[1:]] == [w.well for w in d.wells]
    # the select step reads the template once an outcome is filled in
    from saltplan.select import results as select_results
    rows[1][RESULTS_COLUMNS.index("outcome")] = "crystalline"
    filled = "".join(",".join(r) + "\n" for r in rows)
    parsed = select_results.parse_results(filled, d.to_dict())
    assert [o.well for o in parsed.observations] == [rows[1][0]]
    assert len(parsed.not_reported) == len(d.wells) - 1


def test_same_input_same_bytes(tmp_path):
    a = write_screen(design(), tmp_path / "a")
    b = write_screen(design(), tmp_path / "b")
    assert [p.name for p in a] == ["worksheet.csv", "plate.csv", "design.json",
                                   "results-template.csv"]
    for pa, pb in zip(a, b, strict=True):
        assert pa.read_bytes() == pb.read_bytes()
    json.loads((tmp_path / "a" / "design.json").read_text(encoding="utf-8"))


def test_no_partial_files_on_failure(tmp_path, monkeypatch):
    import saltplan.screen.output as out

    def boom(_design):
        raise RuntimeError("rendering failed")

    monkeypatch.setattr(out, "results_template_csv", boom)
    target = tmp_path / "out"
    with pytest.raises(RuntimeError):
        write_screen(design(), target)
    assert not target.exists() or list(target.iterdir()) == []
    # an output path that is a file is refused before anything is written
    monkeypatch.undo()
    blocker = tmp_path / "file"
    blocker.write_text("x", encoding="utf-8")
    with pytest.raises(SaltplanError, match="not a folder"):
        write_screen(design(), blocker)


def test_vial_scale_writes_no_plate_map(tmp_path):
    written = write_screen(design(scale="vial", budget=10000), tmp_path)
    assert [p.name for p in written] == ["worksheet.csv", "design.json", "results-template.csv"]


# --------------------------------------------------------------------------- CLI
def test_solvents_list_cli(cli):
    result = cli("solvents", "list")
    assert result.exit_code == 0, result.output
    assert "methanol" in result.stdout and "3000" in result.stdout
    result = cli("solvents", "list", "--json")
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    assert {s["id"] for s in data["solvents"]} >= {"ethanol", "heptane", "benzene"}


def test_screen_cli_usage_errors_exit_2(cli):
    result = cli("screen", "CCN(CC)CC")
    assert result.exit_code == 2          # --api-budget-mg and --out are required
    result = cli("screen", "CCN(CC)CC", "--api-budget-mg", "100", "--out", "x",
                 "--scale", "tube")
    assert result.exit_code == 2


# --------------------------------------------------------------------------- real library
@pytest.fixture(scope="module")
def real_lib():
    from saltplan.library.counterions import load_counterions

    return load_counterions()


def test_real_library_mesylate_and_hydrochloride_amounts(real_lib):
    # Same hand calculation as above with the library's RDKit molar masses:
    # CH4O3S 96.107 g/mol -> 0.0175 mmol x 96.107 = 1.68187 mg; / 1.48 g/mL = 1.13640 µL.
    # HCl 36.461 g/mol, 37 % w/w, 1.18 g/mL -> 0.63807 mg; / 1.18 / 0.37 = 1.46145 µL.
    plan = base_plan([_cand("mesylate", "1:1", 1), _cand("hydrochloride", "1:1", 2)])
    d = design_screen(plan, 500, library=real_lib, solvents=["acetone"], modes=["slurry"])
    w = {x.counterion: x for x in d.wells if x.kind == "sample"}
    assert w["mesylate"].counterion_mg == pytest.approx(1.68187, abs=2e-4)
    assert w["mesylate"].counterion_ul == pytest.approx(1.13640, abs=2e-4)
    assert w["hydrochloride"].counterion_ul == pytest.approx(1.46145, abs=2e-4)
    assert d.basis["counterions"]["mesylate"]["density_source"].startswith("CRC")


def test_real_library_sulfonic_acids_never_meet_alcohols_unflagged(real_lib):
    # ICH M7(R2): every library entry flagged sulfonate_ester_risk, in every alcohol
    sulfonic = [c.id for c in real_lib if "sulfonate_ester_risk" in c.flags]
    assert {"mesylate", "besylate", "tosylate", "esylate"} <= set(sulfonic)
    plan = base_plan([_cand(cid, "1:1", i + 1) for i, cid in enumerate(sulfonic)])
    slib = load_solvents()
    alcohols = [s.id for s in slib if s.is_alcohol]
    for risky in (False, True):
        d = design_screen(plan, 1e6, library=real_lib, counterions=sulfonic,
                          solvents=alcohols + ["acetone"], modes=["slurry"], scale="vial",
                          include_risky=risky)
        for w in d.wells:
            if w.counterion and slib.get(w.solvent).is_alcohol:
                assert risky and "sulfonate_ester" in w.flags
        assert any(w.solvent == "acetone" and w.counterion for w in d.wells)


# --------------------------------------------------------------------------- real plan, CLI
# An invented basic compound of the fictional programme (tertiary amine + aryl amide).
HX_SMILES = "CN1CCN(CC1)Cc1ccc(cc1)C(=O)Nc1ccccc1"


@pytest.fixture(scope="module")
def real_plan():
    from saltplan.plan.planner import plan_salts

    return plan_salts(HX_SMILES, name="HX-204 (invented)")


def test_design_from_the_real_plan(real_plan, real_lib):
    d = design_screen(real_plan, 400, library=real_lib)
    plan = real_plan.to_dict()
    top = [(c["counterion"], c["stoichiometry"]) for c in plan["candidates"][:4]]
    assert [(c["counterion"], c["stoichiometry"]) for c in d.candidates] == top
    # API MW is the plan's (RDKit) free-form MW and every sample's mmol follows from it
    for w in d.wells:
        assert w.api_mmol == pytest.approx(w.api_mg / plan["parent"]["mw"], rel=1e-4)
    slib = load_solvents()
    for w in d.wells:
        if w.counterion and "sulfonate_ester_risk" in real_lib.get(w.counterion).flags:
            assert not slib.get(w.solvent).is_alcohol
    assert d.totals["api_mg"] <= 400
    json.dumps(d.to_dict(), allow_nan=False)


def test_screen_cli_writes_files_and_exit_codes(cli, tmp_path):
    out = tmp_path / "screen"
    result = cli("screen", HX_SMILES, "--api-budget-mg", "400", "--out", out,
                 "--name", "HX-204 (invented)")
    assert result.exit_code == 0, result.output
    assert "wells" in result.stdout and "wrote" in result.stdout
    assert sorted(p.name for p in out.iterdir()) == ["design.json", "plate.csv",
                                                     "results-template.csv", "worksheet.csv"]
    # same input, same worksheet bytes
    again = tmp_path / "again"
    assert cli("screen", HX_SMILES, "--api-budget-mg", "400", "--out", again,
               "--name", "HX-204 (invented)").exit_code == 0
    for name in ("worksheet.csv", "plate.csv", "results-template.csv"):
        assert (out / name).read_bytes() == (again / name).read_bytes()
    # over budget: exit 1, one line saying what to cut, and no files
    broke = tmp_path / "broke"
    result = cli("screen", HX_SMILES, "--api-budget-mg", "20", "--out", broke)
    assert result.exit_code == 1
    assert "design needs" in result.stderr and "budget 20 mg" in result.stderr
    assert len(result.stderr.strip().splitlines()) == 1
    assert not broke.exists()
    # a class-1 solvent is refused
    result = cli("screen", HX_SMILES, "--api-budget-mg", "400", "--out", broke,
                 "--solvent", "benzene")
    assert result.exit_code == 1 and "class 1" in result.stderr


def test_screen_cli_json_and_options(cli, tmp_path):
    result = cli("screen", HX_SMILES, "--api-budget-mg", "2000", "--out", tmp_path / "v",
                 "--scale", "vial", "--api-mg", "20", "--solvent", "acetone",
                 "--solvent", "water", "--mode", "slurry", "--mode", "cooling",
                 "--stock-molarity", "1.0", "--top", "2", "--json")
    assert result.exit_code == 0, result.output
    d = json.loads(result.stdout)
    assert [s["id"] for s in d["solvents"]] == ["acetone", "water"]
    assert {w["mode"] for w in d["wells"]} <= {"slurry", "cooling"}
    assert all(w["well"].startswith("V") and w["api_mg"] == 20 for w in d["wells"])
    assert d["settings"]["stock_molarity"] == {"value": 1.0, "provenance": "user",
                                               "basis": "mol/L"}
