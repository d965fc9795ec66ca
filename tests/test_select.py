"""Tests of `saltplan select`: results validation, tiered evaluation, decision record.

External references used below (named beside each check):
- Ph. Eur. 5.11 (Characters section in monographs), hygroscopicity classes after 24 h at
  25 °C / 80 % RH: ≥ 15 % very hygroscopic; < 15 % and ≥ 2 % hygroscopic; < 2 % and
  ≥ 0.2 % slightly hygroscopic (from memory of the text).
- ICH M9 (2019) BCS-based biowaivers: highly soluble = highest single dose dissolved in
  ≤ 250 mL, so the solubility needed is dose / 250 mL.
- SBS/SLAS microplate standard (ANSI SLAS 4-2004): 96 wells A1–H12.
The fixture design and results below are hand-written test inputs, not measurements.
"""
from __future__ import annotations

import json
import random

import pytest

from saltplan.errors import ParameterError, ResultsError
from saltplan.select.criteria import hygroscopicity_class, load_thresholds, required_solubility_mg_ml
from saltplan.select.evaluate import evaluate_results, load_design
from saltplan.select.results import parse_results, read_results

HEADER = ("well,counterion,stoichiometry,solvent,mode,outcome,form_label,melting_onset_c,"
          "weight_gain_80rh_pct,solubility_mg_ml,saturated_ph,stoichiometry_found,"
          "solvent_content_pct,notes")


def _well(w, ci, st, solvent, mode, kind="sample", flags=()):
    return {"well": w, "counterion": ci, "stoichiometry": st, "equivalents": 1.0 if st else None,
            "solvent": solvent, "mode": mode, "api_mg": 5.0, "counterion_mg": 1.0,
            "counterion_ul": None, "stock_ul": 10.0, "solvent_ul": 100.0, "flags": list(flags),
            "kind": kind}


def fixture_design(dose_mg=500.0):
    """A small hand-made design in the ScreenDesign.to_dict() shape (DEVELOPERS.md)."""
    wells = [
        _well("A1", "mesylate", "1:1", "ethanol", "slurry", flags=["sulfonate_ester_risk"]),
        _well("A2", "mesylate", "1:1", "acetone", "slurry"),
        _well("A3", "mesylate", "1:1", "ethyl acetate", "cooling"),
        _well("B1", "hydrochloride", "1:1", "ethanol", "slurry"),
        _well("B2", "hydrochloride", "1:1", "acetone", "slurry"),
        _well("B3", "hydrochloride", "1:1", "ethyl acetate", "cooling"),
        _well("C1", "fumarate", "1:1", "ethanol", "slurry"),
        _well("C2", "fumarate", "2:1", "acetone", "slurry"),
        _well("C3", "fumarate", "1:1", "ethyl acetate", "cooling"),
        _well("H1", None, None, "ethanol", "slurry", kind="control"),
        _well("H2", None, None, "acetone", "slurry", kind="control"),
    ]
    cands = [
        {"counterion": "mesylate", "stoichiometry": "1:1", "delta_pka": 10.9, "rank": 1,
         "drug_content": 76.0, "ph_max": 4.2,
         "caveats": [{"code": "sulfonate_ester", "severity": "warning", "text": "sulfonate esters"}]},
        {"counterion": "hydrochloride", "stoichiometry": "1:1", "delta_pka": 15.0, "rank": 2,
         "drug_content": 90.0, "caveats": []},
        {"counterion": "fumarate", "stoichiometry": "1:1", "delta_pka": 6.0, "rank": 3,
         "drug_content": 73.0, "caveats": []},
        {"counterion": "fumarate", "stoichiometry": "2:1", "delta_pka": 4.6, "rank": 4,
         "drug_content": 84.0, "caveats": []},
        {"counterion": "tosylate", "stoichiometry": "1:1", "delta_pka": 9.8, "rank": 5,
         "drug_content": 63.0, "caveats": []},
    ]
    plan = {"name": "TST-001",
            "inputs": {"smiles": "CN1CCC(CC1)Oc1ccccc1", "dose_mg": dose_mg, "route": "oral"},
            "parent": {"smiles": "CN1CCC(CC1)Oc1ccccc1", "mw": 191.27, "formula": "C12H17NO"},
            "sites": [{"atom": 1, "kind": "base", "pka": 9.1, "uncertainty": 0.5,
                       "group": "tertiary aliphatic amine", "provenance": "estimated"}],
            "candidates": cands, "verdict": {"code": "salt_candidates", "text": "salts expected"},
            "provenance": {"tool": "saltplan", "version": "0.1.0", "library_hash": "abc123",
                           "input_hash": "def456", "created": "2026-01-01T00:00:00Z"}}
    return {"plan": plan, "settings": {}, "solvents": [{"name": "ethanol", "reason": "protic"}],
            "wells": wells, "dropped": [{"counterion": "tosylate", "solvent": "ethanol",
                                         "reason": "sulfonate + alcohol"}],
            "totals": {"api_mg": 55.0}, "budget": {"api_mg": 400.0}}


@pytest.fixture
def design():
    return fixture_design()


@pytest.fixture
def good(fixtures_dir):
    return fixtures_dir / "results_good.csv"


def _csv(*rows, header="well,outcome,form_label,melting_onset_c,weight_gain_80rh_pct,"
         "solubility_mg_ml,saturated_ph,stoichiometry_found,solvent_content_pct,notes"):
    return "\n".join([header, *rows]) + "\n"


def _error(text, design) -> ResultsError:
    with pytest.raises(ResultsError) as info:
        parse_results(text, design, origin="r.csv")
    return info.value


# --------------------------------------------------------------------------- Ph. Eur. 5.11
@pytest.mark.parametrize("gain, expected", [
    # band edges as Ph. Eur. 5.11 states them (lower edge inclusive)
    (0.0, "non_hygroscopic"), (0.19, "non_hygroscopic"), (0.2, "slightly_hygroscopic"),
    (1.99, "slightly_hygroscopic"), (2.0, "hygroscopic"), (14.9, "hygroscopic"),
    (15.0, "very_hygroscopic"), (40.0, "very_hygroscopic"),
])
def test_hygroscopicity_bands_ph_eur_511(gain, expected):
    assert hygroscopicity_class(gain) == expected


def test_deliquescence_overrides_the_bands_ph_eur_511():
    # Ph. Eur. 5.11: deliquescent = sufficient water absorbed to form a liquid
    assert hygroscopicity_class(3.0, deliquescent=True) == "deliquescent"
    assert hygroscopicity_class(None) is None


def test_deliquescent_note_gives_the_class(design):
    text = _csv("A1,crystalline,A,,1.0,,,1:1,,deliquescent after 2 days at 80 % RH")
    sel = evaluate_results(design, parse_results(text, design))
    assert sel.not_shortlisted == ()
    ev = [e for e in sel.lead.evidence if e.criterion == "hygroscopicity"][0]
    assert ev.value == "deliquescent" and ev.status == "fail" and ev.wells == ("A1",)


# --------------------------------------------------------------------------- ICH M9
def test_dose_in_250_ml_worked_numbers_ich_m9():
    # ICH M9: dose / 250 mL; 500 mg → 2.0 mg/mL, 100 mg → 0.4 mg/mL
    assert required_solubility_mg_ml(500) == pytest.approx(2.0)
    assert required_solubility_mg_ml(100) == pytest.approx(0.4)
    with pytest.raises(ParameterError):
        required_solubility_mg_ml(0)


@pytest.mark.parametrize("solubility, status", [(1.5, "fail"), (2.5, "pass"), (2.0, "pass")])
def test_solubility_against_dose_ich_m9(design, solubility, status):
    # ICH M9 worked numbers: 500 mg dose needs 2.0 mg/mL; 1.5 fails, 2.5 passes
    text = _csv(f"A1,crystalline,A,,,{solubility},5.0,1:1,,")
    sel = evaluate_results(design, parse_results(text, design))
    ev = [e for e in sel.lead.evidence if e.criterion == "solubility"][0]
    assert ev.status == status
    assert ev.threshold == pytest.approx(2.0)
    assert ev.wells == ("A1",)


def test_solubility_without_dose_is_not_assessed():
    design = fixture_design(dose_mg=None)
    text = _csv("A1,crystalline,A,,,2.5,5.0,1:1,,")
    sel = evaluate_results(design, parse_results(text, design))
    ev = [e for e in sel.lead.evidence if e.criterion == "solubility"][0]
    assert ev.status == "not_assessed" and "no dose" in ev.text
    # a dose given by the user is used instead: 1000 mg / 250 mL = 4 mg/mL (ICH M9)
    sel = evaluate_results(design, parse_results(text, design), dose_mg=1000)
    ev = [e for e in sel.lead.evidence if e.criterion == "solubility"][0]
    assert ev.status == "fail" and ev.threshold == pytest.approx(4.0)


# --------------------------------------------------------------------------- validation
def test_good_file_reads_and_lists_not_reported(design, good):
    res = read_results(good, design)
    assert [o.well for o in res.observations] == ["A1", "A2", "A3", "B1", "B2", "B3", "C1", "C2",
                                                  "C3", "H1"]
    assert res.not_reported == ("H2",)  # blank template row: listed, not ignored
    assert not res.invented
    c3 = next(o for o in res.observations if o.well == "C3")
    assert c3.outcome == "clear_solution"


def test_nothing_reported_is_an_error(design):
    err = _error(_csv("A1,,,,,,,,,", "B1,,,,,,,,,"), design)
    assert "no well has an outcome yet" in err.message and err.field == "outcome"


def test_missing_rows_are_reported_not_ignored(design):
    res = parse_results(_csv("B2,amorphous,,,,,,,,"), design)
    assert res.not_reported == ("A1", "A2", "A3", "B1", "B3", "C1", "C2", "C3", "H1", "H2")


def test_unknown_well(design):
    err = _error(_csv("D7,crystalline,,,,,,,,"), design)
    assert "unknown well D7" in err.one_line() and err.row == 2 and err.field == "well"
    assert err.file == "r.csv"


@pytest.mark.parametrize("text, words", [("Z13", "unknown well Z13"), ("A-1", "not a well id"),
                                         ("12", "not a well id"), ("", "well id missing")])
def test_bad_well_ids(design, text, words):
    err = _error(_csv(f"{text},crystalline,,,,,,,,"), design)  # SBS 96-well: A–H, 1–12
    assert words in err.message and err.field == "well"


def test_vial_ids(design):
    design["wells"][0]["well"] = "V01"  # vial scale ids (saltplan.screen.layout)
    res = parse_results(_csv("v1,crystalline,A,,,,,,,"), design)
    assert res.observations[0].well == "V01"


def test_duplicate_well_also_with_leading_zero(design):
    err = _error(_csv("A1,crystalline,,,,,,,,", "# a comment", "A01,amorphous,,,,,,,,"), design)
    assert "duplicate well A1 (first on row 2)" in err.message and err.row == 4


def test_bad_outcome_lists_allowed_values(design):
    err = _error(_csv("A1,powder,,,,,,,,"), design)
    assert err.field == "outcome" and err.row == 2
    assert "crystalline, amorphous, oil, gel, clear_solution" in err.message


def test_outcome_missing_while_data_given(design):
    err = _error(_csv("A1,,A,180,,,,,,"), design)
    assert err.field == "outcome" and "outcome missing" in err.message


@pytest.mark.parametrize("spelling, outcome", [
    ("Crystalline", "crystalline"), ("crystalline solid", "crystalline"), ("crystals", "crystalline"),
    ("Amorphous solid", "amorphous"), ("oiled out", "oil"), ("GEL", "gel"),
    ("clear solution", "clear_solution"), ("clear-solution", "clear_solution"),
])
def test_outcome_spellings(design, spelling, outcome):
    res = parse_results(_csv(f"A1,{spelling},,,,,,,,"), design)
    assert res.observations[0].outcome == outcome


@pytest.mark.parametrize("column, low, high", [
    ("melting_onset_c", -50, 450), ("weight_gain_80rh_pct", -5, 200),
    ("solubility_mg_ml", 0, 1000), ("saturated_ph", 0, 14), ("solvent_content_pct", 0, 100),
])
def test_physical_ranges(design, column, low, high):
    header = f"well,outcome,{column}"
    for ok in (low, high):
        parse_results(_csv(f"A1,crystalline,{ok}", header=header), design)
    for bad in (low - 0.1, high + 0.1):
        err = _error(_csv(f"A1,crystalline,{bad}", header=header), design)
        assert err.field == column and err.row == 2 and "outside the physical range" in err.message


def test_not_a_number(design):
    err = _error(_csv("A1,crystalline,,,,<0.1,,,,"), design)
    assert err.field == "solubility_mg_ml" and "not a number" in err.message
    err = _error(_csv("A1,crystalline,,nan,,,,,,"), design)
    assert err.field == "melting_onset_c"


def test_units_missing(design, fixtures_dir):
    with pytest.raises(ResultsError) as info:
        read_results(fixtures_dir / "results_units_missing.csv", design)
    assert "units missing" in info.value.message and info.value.field == "melting_onset"
    assert "melting_onset_c" in info.value.message and info.value.row == 1


@pytest.mark.parametrize("header, words", [
    ("well,outcome,melting_onset_k", "unit 'k' not accepted"),
    ("well,outcome,melting_onset [°C]", "suffix"),
    ("well,outcome,solubility", "units missing"),
    ("well,outcome,colour", "unknown column 'colour'"),
    ("well,outcome,notes,notes", "appears twice"),
    ("well,form_label", "no 'outcome' column"),
    ("outcome,notes", "no 'well' column"),
])
def test_header_errors(design, header, words):
    err = _error(_csv(header=header), design)
    assert words in err.message and err.row == 1


def test_contradicting_counterion(design):
    err = _error(_csv("A1,tosylate,1:1,ethanol,slurry,crystalline",
                      header="well,counterion,stoichiometry,solvent,mode,outcome"), design)
    assert err.field == "counterion" and err.row == 2 and "mesylate" in err.message


@pytest.mark.parametrize("row, field", [
    ("A1,mesylate,2:1,ethanol,slurry,crystalline", "stoichiometry"),
    ("A1,mesylate,1:1,methanol,slurry,crystalline", "solvent"),
    ("A1,mesylate,1:1,ethanol,cooling,crystalline", "mode"),
    ("H1,mesylate,,ethanol,slurry,crystalline", "counterion"),
])
def test_contradicting_design_columns(design, row, field):
    err = _error(_csv(row, header="well,counterion,stoichiometry,solvent,mode,outcome"), design)
    assert err.field == field and err.row == 2 and "contradicts the design" in err.message


def test_design_columns_tolerate_case_and_spacing(design):
    res = parse_results(_csv("A3,Mesylate, 1:1 ,Ethyl-Acetate,Cooling,amorphous",
                             "H1,,,ethanol,slurry,crystalline",
                             header="well,counterion,stoichiometry,solvent,mode,outcome"), design)
    assert [o.well for o in res.observations] == ["A3", "H1"]


@pytest.mark.parametrize("value", ["1/1", "1:0", "one to one", "1:"])
def test_stoichiometry_format(design, value):
    err = _error(_csv(f"A1,crystalline,,,,,,{value},,"), design)
    assert err.field == "stoichiometry_found" and "n:m" in err.message


def test_stoichiometry_found_on_a_control(design):
    err = _error(_csv("H1,crystalline,FF-I,,,,,1:1,,"), design)
    assert err.field == "stoichiometry_found" and "control" in err.message


def test_extra_cells_and_bad_encoding(design):
    err = _error(_csv("A1,crystalline,,,,,,,,,surplus"), design)
    assert "header has 10 columns" in err.message
    with pytest.raises(ResultsError) as info:
        parse_results("well,outcome\nA1,crystalline,caf\xe9\n".encode("latin-1"), design, origin="x")
    assert "not UTF-8" in info.value.message


def test_trailing_empty_columns_of_a_spreadsheet(design):
    res = parse_results("well,outcome,,\nA1,oil,,\n", design)
    assert res.observations[0].outcome == "oil"
    err = _error("well,outcome,,\nA1,oil,,stray\n", design)
    assert "header has 2 columns" in err.message and err.row == 2


def test_bom_crlf_semicolon_decimal_comma(design, fixtures_dir):
    res = read_results(fixtures_dir / "results_semicolon_bom_crlf.csv", design)
    a1, b1 = res.observations
    assert (a1.well, a1.outcome, a1.melting_onset_c, a1.weight_gain_80rh_pct) == ("A1", "crystalline", 182.5, 0.8)
    assert b1.outcome == "oil"


def test_utf16_with_bom(design):
    res = parse_results("well,outcome\r\nA2,gel\r\n".encode("utf-16"), design)
    assert res.observations[0].outcome == "gel"


def test_invented_marker(design, fixtures_dir):
    res = read_results(fixtures_dir / "results_invented_marker.csv", design)
    assert res.invented
    sel = evaluate_results(design, res)
    assert sel.invented_data and sel.cautions[0].startswith("INVENTED DATA")


def test_missing_file(design, tmp_path):
    with pytest.raises(ResultsError, match="file not found"):
        read_results(tmp_path / "nope.csv", design)


# --------------------------------------------------------------------------- evaluation
def test_ranking_lead_and_backup(design, good):
    sel = evaluate_results(design, good)
    assert sel.outcome == "lead_and_backup"
    # mesylate/A passes every tier-2 criterion; the others each fail one; among those the
    # tie-breaks go hygroscopicity class, then melting onset (RANKING_ORDER)
    assert [g.id for g in sel.shortlist] == ["mesylate/A", "fumarate/B", "fumarate/A", "hydrochloride/A"]
    assert sel.lead.id == "mesylate/A" and sel.backup.id == "fumarate/B"
    assert [g.role for g in sel.shortlist] == ["lead", "backup", "reserve", "reserve"]
    assert sel.lead.tier1 == "confirmed" and sel.lead.wells == ("A1", "A2")
    solvate = [e for e in sel.backup.evidence if e.criterion == "solvate"][0]
    assert solvate.status == "concern" and solvate.wells == ("C2",)


def test_backup_same_counterion_when_allowed(design, good):
    text = good.read_text().replace("fumarate,2:1,acetone,slurry,crystalline,B,160.0",
                                    "fumarate,2:1,acetone,slurry,crystalline,B,100.0")
    sel = evaluate_results(design, parse_results(text, design),
                           thresholds={"backup_other_counterion": True})
    assert sel.backup.counterion != sel.lead.counterion


def test_backup_prefers_other_counterion(design):
    text = _csv("A1,crystalline,A,180,0.1,,,1:1,,", "A2,crystalline,B,175,0.1,,,1:1,,",
                "B1,crystalline,A,150,0.5,,,1:1,,")
    sel = evaluate_results(design, parse_results(text, design))
    assert [g.id for g in sel.shortlist] == ["mesylate/A", "mesylate/B", "hydrochloride/A"]
    assert sel.backup.id == "hydrochloride/A"
    sel = evaluate_results(design, parse_results(text, design),
                           thresholds={"backup_other_counterion": False})
    assert sel.backup.id == "mesylate/B"


def test_evidence_traceable_to_wells(design, good):
    sel = evaluate_results(design, good)
    obs = {o.well: o for o in sel.observations}
    controls = {o.well for o in sel.observations if o.kind == "control"}
    attr = {"melting_onset": "melting_onset_c", "solubility": "solubility_mg_ml",
            "solvate": "solvent_content_pct"}
    for g in sel.shortlist:
        assert g.placed_because and g.wells
        for e in g.evidence:
            assert e.wells, (g.id, e.criterion)
            assert set(e.wells) <= set(g.wells) | controls
            for w in e.wells:
                assert obs[w].outcome == "crystalline"
            if e.criterion in attr and e.value is not None:
                # the value shown is one of the cited wells' own measurement
                assert e.value in {getattr(obs[w], attr[e.criterion]) for w in e.wells}
    # the JSON carries the same wells
    data = sel.to_dict()
    assert data["lead"] == "mesylate/A"
    assert all(ev["wells"] for g in data["shortlist"] for ev in g["evidence"])


def test_free_form_pattern_is_not_a_hit(design):
    text = _csv("A1,crystalline,FF-I,140,,,,,,", "H1,crystalline,FF-I,141,,,,,,",
                "B1,crystalline,free base,,,,,,,")
    sel = evaluate_results(design, parse_results(text, design))
    assert sel.outcome == "no_lead"
    assert {g.tier1 for g in sel.not_shortlisted} == {"free_form_suspected"}
    a1 = next(g for g in sel.not_shortlisted if g.wells == ("A1",))
    assert "H1" in a1.reason
    assert any("free form crystallized" in s for s in sel.next_steps)


def test_stoichiometry_statuses(design):
    text = _csv("A1,crystalline,A,,,,,2:1,,",      # intended 1:1, found 2:1 → mismatch
                "B1,crystalline,A,,,,,1:1,,", "B2,crystalline,A,,,,,1:2,,",  # conflict
                "C1,crystalline,A,,,,,,,",           # unconfirmed
                "C2,crystalline,B,,,,,1:0.52,,")     # 2:1 within ±10 % (common practice)
    sel = evaluate_results(design, parse_results(text, design))
    status = {g.id: g.tier1 for g in sel.shortlist + sel.not_shortlisted}
    assert status == {"mesylate/A": "mismatch", "hydrochloride/A": "conflict",
                      "fumarate/A": "unconfirmed", "fumarate/B": "confirmed"}
    assert [g.id for g in sel.shortlist] == ["fumarate/B", "fumarate/A"]  # confirmed first


def test_no_lead(design, fixtures_dir):
    sel = evaluate_results(design, fixtures_dir / "results_no_crystals.csv")
    assert sel.outcome == "no_lead" and sel.lead is None and sel.backup is None
    assert sel.shortlist == () and sel.summary.startswith("No lead")
    text = " ".join(sel.next_steps)
    assert "A1" in text and "B1" in text and "tosylate" in text  # unscreened plan candidate


def test_thresholds_override(design, good, tmp_path):
    path = tmp_path / "t.yaml"
    path.write_text("thresholds:\n  melting_onset_min_c: {value: 183, source: site rule}\n")
    sel = evaluate_results(design, good, thresholds=path)
    melt = [e for e in next(g for g in sel.shortlist if g.id == "mesylate/A").evidence
            if e.criterion == "melting_onset"][0]
    assert melt.status == "fail" and "site rule" in melt.source
    assert sel.thresholds.get("melting_onset_min_c").provenance == "user"
    # every form now fails one criterion or more; mesylate/A and hydrochloride/A fail one
    # each and the hygroscopicity class breaks the tie (RANKING_ORDER)
    assert [g.id for g in sel.shortlist][:2] == ["mesylate/A", "hydrochloride/A"]


@pytest.mark.parametrize("text, words", [
    ("thresholds:\n  melting_min: 100\n", "unknown threshold"),
    ("thresholds:\n  hygroscopicity_max_class: damp\n", "not a Ph. Eur. 5.11 class"),
    ("thresholds:\n  melting_onset_min_c: hot\n", "expected a number"),
    ("thresholds:\n  solvent_content_max_pct: 150\n", "outside the accepted range"),
    ("limits: {}\n", "unknown threshold"),
])
def test_thresholds_errors(tmp_path, text, words):
    path = tmp_path / "t.yaml"
    path.write_text(text)
    with pytest.raises(ParameterError) as info:
        load_thresholds(path)
    assert words in info.value.message and info.value.file == str(path)


def test_default_thresholds_have_sources():
    th = load_thresholds()
    for item in th.items:
        assert item.source and item.provenance == "default"
    # ICH M9: 250 mL
    assert th["dissolution_volume_ml"] == 250


def test_deterministic(design, good, monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    a = json.dumps(evaluate_results(design, good).to_dict(), ensure_ascii=False)
    b = json.dumps(evaluate_results(fixture_design(), good).to_dict(), ensure_ascii=False)
    assert a == b


def test_row_order_does_not_change_the_ranking(design, good):
    lines = good.read_text().splitlines()
    head, body = lines[:2], lines[2:]
    expected = evaluate_results(design, good).to_dict()
    rng = random.Random(7)
    for _ in range(5):
        rng.shuffle(body)
        sel = evaluate_results(design, parse_results("\n".join(head + body) + "\n", design))
        assert sel.to_dict()["shortlist"] == expected["shortlist"]
        strip = [{k: v for k, v in o.items() if k != "row"} for o in sel.to_dict()["observations"]]
        assert strip == [{k: v for k, v in o.items() if k != "row"} for o in expected["observations"]]


def test_load_design(tmp_path, design):
    (tmp_path / "design.json").write_text(json.dumps(design))
    assert load_design(tmp_path)["wells"][0]["well"] == "A1"
    from saltplan.errors import InputFileError
    with pytest.raises(InputFileError):
        load_design(tmp_path / "missing")


# --------------------------------------------------------------------------- decision record
NASTY = "[click](http://x.example) <b>bold</b> <script>alert(1)</script> www.x.org a@b.example"


def _nasty_selection(design):
    text = _csv(f'A1,crystalline,A,180,0.5,12,3.0,1:1,0.2,"{NASTY}"', "H1,crystalline,FF-I,,,,,,,")
    return evaluate_results(design, parse_results(text, design))


def test_html_is_self_contained_and_escaped(design):
    from saltplan.reports.decision import render_decision_html

    html = render_decision_html(_nasty_selection(design))
    assert html.startswith("<!DOCTYPE html>")
    for forbidden in ("<script", "<link", "src=", "href=", "url(", "@import", "http://", "https://"):
        assert forbidden not in html.replace("http://x.example", ""), forbidden
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html and "<b>bold</b>" not in html
    assert "@media print" in html


def test_markdown_neutralizes_user_text(design):
    import re

    from saltplan.reports.decision import md_escape, render_decision_markdown

    md = render_decision_markdown(_nasty_selection(design))
    assert not re.search(r"(?<!\\)\]\(", md)  # no unescaped "](": no link
    assert not re.search(r"(?<!\\)<", md)  # no unescaped "<": no HTML, no autolink
    assert "http://" not in md and "www.x" not in md and "a@b" not in md
    assert md_escape(NASTY) in md
    # CommonMark 0.31 §2.4: a backslash before ASCII punctuation makes it literal
    assert md_escape("1. first") == "1\\. first" and md_escape("- item") == "\\- item"
    assert md_escape("182.5") == "182.5"


def test_record_labels_invented_data(design, fixtures_dir):
    from saltplan.reports.decision import render_decision_html, render_decision_markdown

    sel = evaluate_results(design, fixtures_dir / "results_invented_marker.csv")
    assert "INVENTED DATA" in render_decision_html(sel)
    assert "INVENTED DATA" in render_decision_markdown(sel).split("## 1.")[0]
    plain = evaluate_results(design, fixtures_dir / "results_good.csv")
    assert "INVENTED DATA" not in render_decision_html(plain)


def test_record_joins_plan_design_observations(design, good):
    from saltplan.reports.decision import render_decision_markdown

    md = render_decision_markdown(evaluate_results(design, good))
    for part in ("TST-001", "tosylate", "sulfonate + alcohol", "needles", "Not reported** (1): H2",
                 "ICH M7", "Ph. Eur. 5.11", "ICH Q6A", "USP–NF", "design hash", "results hash"):
        assert part in md, part


def test_write_decision_record_all_or_nothing(design, good, tmp_path, monkeypatch):
    import saltplan.reports.decision as rep

    sel = evaluate_results(design, good)
    written = rep.write_decision_record(sel, tmp_path / "rec")
    assert sorted(p.name for p in written) == ["decision.html", "decision.md", "selection.json"]
    assert json.loads((tmp_path / "rec" / "selection.json").read_text()) == json.loads(
        rep.render_decision_json(sel))

    def boom(_):
        raise RuntimeError("render failed")

    monkeypatch.setattr(rep, "render_decision_markdown", boom)
    with pytest.raises(RuntimeError):
        rep.write_decision_record(sel, tmp_path / "rec2")
    assert not (tmp_path / "rec2").exists()


def test_record_bytes_deterministic(design, good, monkeypatch):
    from saltplan.reports.decision import render_decision_html, render_decision_markdown

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    a, b = evaluate_results(design, good), evaluate_results(fixture_design(), good)
    assert render_decision_html(a) == render_decision_html(b)
    assert render_decision_markdown(a) == render_decision_markdown(b)


def test_record_renders_no_lead(design, fixtures_dir):
    from saltplan.reports.decision import render_decision_html, render_decision_markdown

    sel = evaluate_results(design, fixtures_dir / "results_no_crystals.csv")
    assert "No lead" in render_decision_html(sel) and "No lead" in render_decision_markdown(sel)


# --------------------------------------------------------------------------- CLI
@pytest.fixture
def design_dir(tmp_path, design):
    folder = tmp_path / "screen"
    folder.mkdir()
    (folder / "design.json").write_text(json.dumps(design), encoding="utf-8")
    return folder


def test_cli_select_writes_the_record(cli, design_dir, good, tmp_path):
    out = tmp_path / "decision"
    result = cli("select", design_dir, good, "--out", out)
    assert result.exit_code == 0, result.output
    assert "Lead: mesylate 1:1 form A" in result.stdout
    assert sorted(p.name for p in out.iterdir()) == ["decision.html", "decision.md", "selection.json"]


def test_cli_select_json(cli, design_dir, good, tmp_path):
    result = cli("select", design_dir, good, "--out", tmp_path / "o", "--json")
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    assert data["lead"] == "mesylate/A" and data["backup"] == "fumarate/B"


def test_cli_select_refuses_bad_results_without_output(cli, design_dir, tmp_path):
    bad = tmp_path / "bad.csv"
    bad.write_text(_csv("A1,crystalline,A,999,,,,,,"))
    out = tmp_path / "never"
    result = cli("select", design_dir, bad, "--out", out)
    assert result.exit_code == 1
    assert result.stdout == ""
    line = result.stderr.strip()
    assert len(line.splitlines()) == 1 and "row 2" in line and "melting_onset_c" in line
    assert not out.exists()


def test_cli_select_bad_thresholds_and_usage(cli, design_dir, good, tmp_path):
    th = tmp_path / "t.yaml"
    th.write_text("thresholds:\n  nonsense: 1\n")
    result = cli("select", design_dir, good, "--out", tmp_path / "o", "--thresholds", th)
    assert result.exit_code == 1 and "unknown threshold" in result.stderr
    assert not (tmp_path / "o").exists()
    result = cli("select", design_dir, good)  # --out missing: usage error
    assert result.exit_code == 2
    result = cli("select", tmp_path / "nothing", good, "--out", tmp_path / "o")
    assert result.exit_code == 2
    empty = tmp_path / "empty"
    empty.mkdir()
    result = cli("select", empty, good, "--out", tmp_path / "o")
    assert result.exit_code == 1 and "design.json not found" in result.stderr


def test_cli_dose_option(cli, design_dir, good, tmp_path):
    # ICH M9: 10000 mg / 250 mL = 40 mg/mL; every form's solubility (≤ 30 mg/mL) now fails
    result = cli("select", design_dir, good, "--out", tmp_path / "o", "--json", "--dose-mg", 10000)
    assert result.exit_code == 0
    data = json.loads(result.stdout)
    sol = [e for g in data["shortlist"] for e in g["evidence"] if e["criterion"] == "solubility"]
    assert sol and all(e["status"] == "fail" and e["threshold"] == 40.0 for e in sol)


# --------------------------------------------------------------------------- demo results
def test_demo_results_are_labelled_deterministic_and_valid(design):
    from saltplan.demo.results import HEADER_LINE, make_demo_results

    text = make_demo_results(design)
    assert text.splitlines()[0] == HEADER_LINE == "# INVENTED DATA for the saltplan demo — not measurements"
    assert make_demo_results(fixture_design()) == text
    res = parse_results(text, design)  # passes the same validation as a user's file
    assert res.invented
    assert len(res.observations) + len(res.not_reported) == len(design["wells"])
    assert evaluate_results(design, res).invented_data


def _plan_for_screen():
    """A hand-written plan dict in the Plan.to_dict() shape (DEVELOPERS.md), so that the real
    screen designer can run while the planner is written in parallel."""
    from saltplan.library.counterions import load_counterions

    lib = load_counterions()
    cands = [
        {"counterion": "mesylate", "stoichiometry": "1:1", "delta_pka": 10.9, "rank": 1,
         "feasible": True, "caveats": [{"code": "sulfonate_ester", "severity": "warning",
                                        "text": "sulfonate esters with alcohols"}]},
        {"counterion": "hydrochloride", "stoichiometry": "1:1", "delta_pka": 15.0, "rank": 2,
         "feasible": True, "caveats": []},
        {"counterion": "fumarate", "stoichiometry": "2:1", "delta_pka": 4.6, "rank": 3,
         "feasible": True, "caveats": []},
        {"counterion": "tosylate", "stoichiometry": "1:1", "delta_pka": 9.8, "rank": 4,
         "feasible": True, "caveats": []},
    ]
    smiles = "CN1CCC(CC1)Oc1ccc(cc1)C(=O)NC1CC1"
    plan = {"name": "TST-002", "inputs": {"smiles": smiles, "dose_mg": 50, "route": "oral"},
            "parent": {"smiles": smiles, "mw": 274.36}, "sites": [], "candidates": cands,
            "excluded": [], "verdict": {"code": "salt_candidates", "text": ""},
            "provenance": {"library_hash": lib.hash}}
    return plan, lib


def _round_trip(design, folder, tmp_path):
    from saltplan.demo.results import make_demo_results
    from saltplan.reports.decision import select_and_record

    template = (folder / "results-template.csv").read_text()
    # the untouched template has the right columns, but nothing is reported yet
    with pytest.raises(ResultsError, match="no well has an outcome yet"):
        parse_results(template, design)
    lines = template.splitlines()
    lines[1] = lines[1].replace(",,,,,,,,,", ",amorphous,,,,,,,,", 1)
    one = parse_results("\n".join(lines) + "\n", design)
    assert [o.well for o in one.observations] == [design.wells[0].well]
    assert len(one.not_reported) == len(design.wells) - 1
    results = tmp_path / "r.csv"
    results.write_text(make_demo_results(design), encoding="utf-8")
    sel, written = select_and_record(folder, results, tmp_path / "d")
    assert len(written) == 3 and sel.invented_data
    assert sel.provenance["library_hash"] == design.plan["provenance"]["library_hash"]
    for g in sel.shortlist:
        assert all(e.wells for e in g.evidence)
    return sel


def test_screen_design_round_trip(tmp_path):
    """A design from saltplan.screen.design.design_screen: template → results → selection → record."""
    from saltplan.screen.design import design_screen
    from saltplan.screen.output import write_screen

    plan, lib = _plan_for_screen()
    design = design_screen(plan, 400, library=lib)
    write_screen(design, tmp_path / "s")
    sel = _round_trip(design, tmp_path / "s", tmp_path)
    # the design's sulfonate caveat flag reaches the cautions (ICH M7)
    assert any("ICH M7" in c for c in sel.cautions)


def test_planner_round_trip(tmp_path):
    """The same loop from a structure through the planner."""
    from saltplan.screen.output import screen_structure

    design, _ = screen_structure("CN1CCC(CC1)Oc1ccc(cc1)C(=O)NC1CC1", 400,
                                 out_dir=tmp_path / "s", name="TST-003", dose_mg=50)
    _round_trip(design, tmp_path / "s", tmp_path)


# --------------------------------------------------------------------------- properties
def test_any_valid_results_evaluate_traceably():
    """Random in-range results (hypothesis): evaluation never fails, every finding names
    wells of its form or of controls, and the shortlist does not depend on row order."""
    from hypothesis import HealthCheck, given, settings
    from hypothesis import strategies as st

    design = fixture_design()
    samples = [w["well"] for w in design["wells"] if w["kind"] == "sample"]
    controls = [w["well"] for w in design["wells"] if w["kind"] == "control"]
    def num(lo, hi):
        return st.one_of(st.none(), st.floats(lo, hi, allow_nan=False).map(lambda v: round(v, 2)))

    row = st.fixed_dictionaries({
        "outcome": st.sampled_from(["crystalline", "crystalline", "amorphous", "oil", "gel",
                                    "clear_solution"]),
        "form_label": st.sampled_from(["", "A", "B", "FF-I"]),
        "melting_onset_c": num(-50, 450), "weight_gain_80rh_pct": num(-5, 200),
        "solubility_mg_ml": num(0, 1000), "saturated_ph": num(0, 14),
        "stoichiometry_found": st.sampled_from(["", "1:1", "2:1", "1:2"]),
        "solvent_content_pct": num(0, 100)})

    @settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(st.dictionaries(st.sampled_from(samples + controls), row, min_size=1), st.randoms())
    def check(rows, rnd):
        lines = []
        for well, r in rows.items():
            found = "" if well in controls else r["stoichiometry_found"]
            cells = [well, r["outcome"], r["form_label"]] + [
                "" if r[k] is None else repr(r[k]) for k in
                ("melting_onset_c", "weight_gain_80rh_pct", "solubility_mg_ml", "saturated_ph")]
            cells += [found, "" if r["solvent_content_pct"] is None else repr(r["solvent_content_pct"]), ""]
            lines.append(",".join(cells))
        sel = evaluate_results(design, parse_results(_csv(*lines), design))
        for g in sel.shortlist + sel.not_shortlisted:
            for e in g.evidence:
                assert e.wells and set(e.wells) <= set(g.wells) | set(controls)
        assert (sel.lead is None) == (sel.outcome == "no_lead")
        rnd.shuffle(lines)
        again = evaluate_results(design, parse_results(_csv(*lines), design))
        assert [g.to_dict() for g in again.shortlist] == [g.to_dict() for g in sel.shortlist]

    check()


# --------------------------------------------------------------------------- browser
_PROBE = """<script>
window.addEventListener('load', function () {
  var res = performance.getEntriesByType('resource').map(function (r) { return r.name; });
  var pre = document.createElement('pre'); pre.id = 'probe';
  pre.textContent = JSON.stringify({resources: res, tables: document.querySelectorAll('table').length});
  document.body.appendChild(pre);
});
</script>"""


def _chrome_dom(html: str, tmp_path) -> dict:
    import re
    import shutil
    import subprocess
    from html import unescape

    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        pytest.skip("headless Chromium not found")
    tmp_path.mkdir(parents=True, exist_ok=True)
    page = tmp_path / "page.html"
    # the probe needs scripts: drop the record's CSP in this copy only
    html = re.sub(r'<meta http-equiv="Content-Security-Policy"[^>]*>', "", html)
    page.write_text(html.replace("</body>", _PROBE + "</body>", 1), encoding="utf-8")
    proc = subprocess.run([chromium, "--headless", "--no-sandbox", "--disable-gpu",
                           "--disable-background-networking", f"--user-data-dir={tmp_path / 'p'}",
                           "--virtual-time-budget=3000", "--dump-dom", page.as_uri()],
                          capture_output=True, text=True, timeout=120)
    m = re.search(r'<pre id="probe">(.*?)</pre>', proc.stdout, re.S)
    assert m, proc.stderr[-1500:]
    return json.loads(unescape(m.group(1)))


@pytest.mark.slow
@pytest.mark.browser
def test_record_loads_offline_in_chromium(design, good, tmp_path):
    from saltplan.reports.decision import render_decision_html

    html = render_decision_html(evaluate_results(design, good))
    assert "Content-Security-Policy" in html
    seen = _chrome_dom(html, tmp_path)
    assert seen["resources"] == [] and seen["tables"] >= 8
    # negative control: the same probe sees a request when the page makes one
    bad = html.replace("</h1>", '</h1><img src="http://127.0.0.1:9/x.png" alt="">', 1)
    assert any("127.0.0.1:9" in r for r in _chrome_dom(bad, tmp_path / "b")["resources"])
