"""Spreadsheet formula injection: no CSV the tool writes holds a live formula.

A cell starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return is run as a
formula by common spreadsheet programs when the CSV is opened. Following the OWASP "CSV
Injection" guidance (owasp.org/www-community/attacks/CSV_Injection), such text cells get a
leading single quote; real numbers (a negative pKa, "-0.5") stay numbers. Checked here for
the batch table, the screen worksheet, plate map and results template, and the demo's
invented results, through the library and the CLI.
"""
from __future__ import annotations

import ast
import csv
import io
from pathlib import Path

import pandas as pd
import pytest

from saltplan._io import FORMULA_TRIGGERS, csv_text, spreadsheet_safe, spreadsheet_text

ROOT = Path(__file__).resolve().parent.parent
API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base; screens with the defaults

#: hostile cell texts (the OWASP examples' shapes) and what they must become
HOSTILE = {
    "hyperlink": '=HYPERLINK("http://x.invalid")',
    "sum_plus": "=1+2",
    "plus_cmd": "+cmd",
    "at_sum": "@SUM(A1)",
    "minus_formula": "-2+3",
    "tab": "\tTAB",
    "cr": "\rCR",
}


def _cells(text: str) -> list[list[str]]:
    return list(csv.reader(io.StringIO(text, newline="")))


def _is_number(cell: str) -> bool:
    try:
        float(cell)
    except ValueError:
        return False
    return cell.strip() == cell and cell.lower().lstrip("+-") not in ("inf", "infinity", "nan")


def _assert_no_live_formula(text: str) -> None:
    for r, row in enumerate(_cells(text)):
        for c, cell in enumerate(row):
            if cell and cell[0] in FORMULA_TRIGGERS:
                assert _is_number(cell), (r, c, cell)


# ------------------------------------------------------------------ the shared helper
@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_helper_quotes_hostile_text_and_reads_it_back(case):
    text = HOSTILE[case]
    safe = spreadsheet_safe(text)
    assert safe == "'" + text
    assert spreadsheet_text(safe) == text
    _assert_no_live_formula(csv_text([[text, "ok"]]))


@pytest.mark.parametrize("number", ["-1.2", "-0.5", "+3", "-7", "-1e-3", "0.25", "12"])
def test_helper_keeps_numbers(number):
    assert spreadsheet_safe(number) == number
    assert spreadsheet_text(number) == number
    assert csv_text([[number, -1.2]]) == f"{number},-1.2\n"


@pytest.mark.parametrize("text", ["'=1+2", "''@x", "'plain", "-", "- 5", "-inf", "a=b"])
def test_helper_round_trips_quote_like_text(text):
    assert spreadsheet_text(spreadsheet_safe(text)) == text


def test_every_csv_writer_goes_through_the_helper():
    """Source audit: no module of saltplan makes a csv writer (or DataFrame.to_csv) itself."""
    offenders = []
    for path in sorted((ROOT / "saltplan").rglob("*.py")):
        if path.name == "_io.py" and path.parent.name == "saltplan":
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.Attribute) and node.attr in ("writer", "DictWriter", "to_csv"):
                if node.attr != "writer" or (isinstance(node.value, ast.Name)
                                             and node.value.id == "csv"):
                    offenders.append(f"{path.relative_to(ROOT)}:{node.lineno}")
    assert not offenders, offenders


# ------------------------------------------------------------------ batch table
def _hostile_table(tmp_path) -> Path:
    src = tmp_path / "in.csv"
    with src.open("w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "name", "smiles", "pka"])
        for _case, text in sorted(HOSTILE.items()):
            w.writerow([text, text, "c1ccncc1", "base=-1.2"])   # measured pKa negative
        w.writerow(["-0.5", "=bad smiles", "=1+2", ""])        # error row echoes the input
    return src


def _check_batch_table(text: str) -> None:
    _assert_no_live_formula(text)
    rows = list(csv.DictReader(io.StringIO(text, newline="")))
    by_id = {spreadsheet_text(r["id"]): r for r in rows}
    for text_ in HOSTILE.values():
        # the batch reader trims blanks (tab, CR) around a cell; what is left is kept
        kept = text_ if text_ in by_id else text_.strip()
        row = by_id[kept]
        assert row["id"] == spreadsheet_safe(kept)
        assert spreadsheet_text(row["name"]) in (text_, kept)
        assert row["most_basic_pka"] == "-1.2"              # a number stays a number
    assert "-0.5" in {r["id"] for r in rows}                 # numeric id kept
    bad = next(r for r in rows if r["id"] == "-0.5")
    assert bad["input"] == "'=1+2" and bad["error"]


def test_batch_csv_neutralized_library(tmp_path):
    from saltplan.batch import run_batch

    run_batch(_hostile_table(tmp_path), tmp_path / "out.csv")
    _check_batch_table((tmp_path / "out.csv").read_text(encoding="utf-8"))


def test_batch_csv_neutralized_cli(cli, tmp_path):
    res = cli("batch", _hostile_table(tmp_path), "--out", tmp_path / "out.csv", "--quiet")
    assert res.exit_code == 1, res.stderr            # the error row makes it 1
    _check_batch_table((tmp_path / "out.csv").read_text(encoding="utf-8"))


def test_batch_json_keeps_the_original_text(tmp_path):
    """Only CSV needs the quote: JSON keeps the text as given."""
    from saltplan.batch import run_batch

    frame = pd.DataFrame({"id": list(HOSTILE.values()), "smiles": ["CCN"] * len(HOSTILE)})
    run_batch(frame, tmp_path / "out.jsonl")
    text = (tmp_path / "out.jsonl").read_text(encoding="utf-8")
    import json

    assert [json.loads(line)["id"] for line in text.splitlines()] == [
        v.strip() for v in HOSTILE.values()]   # the reader trims blanks; nothing else changes


# ------------------------------------------------------------------ screen outputs
def _hostile_design():
    from saltplan.screen.output import screen_structure

    design, _ = screen_structure(API, 500)
    d = design.to_dict()
    for i, w in enumerate(d["wells"]):
        w["notes"] = list(HOSTILE.values())[i % len(HOSTILE)]
        if w.get("counterion"):
            w["counterion"] = "=" + w["counterion"]
        w["solvent"] = "@" + w["solvent"]
    return d


def test_screen_csvs_neutralized_library():
    from saltplan.screen.output import plate_csv, results_template_csv, worksheet_csv

    d = _hostile_design()
    for render in (worksheet_csv, plate_csv, results_template_csv):
        text = render(d)
        _assert_no_live_formula(text)
    sheet = list(csv.DictReader(io.StringIO(worksheet_csv(d), newline="")))
    assert sheet[0]["notes"] == "'" + d["wells"][0]["notes"]
    assert sheet[0]["solvent"] == "'" + d["wells"][0]["solvent"]
    template = list(csv.DictReader(io.StringIO(results_template_csv(d), newline="")))
    assert [spreadsheet_text(r["solvent"]) for r in template] == [w["solvent"] for w in d["wells"]]


def test_screen_and_demo_results_csvs_cli(cli, tmp_path):
    res = cli("screen", API, "--api-budget-mg", 500, "--out", tmp_path / "s")
    assert res.exit_code == 0, res.stderr
    csvs = sorted((tmp_path / "s").glob("*.csv"))
    assert {p.name for p in csvs} >= {"worksheet.csv", "plate.csv", "results-template.csv"}
    for p in csvs:
        _assert_no_live_formula(p.read_text(encoding="utf-8"))
    from saltplan.demo.results import make_demo_results

    design = (tmp_path / "s" / "design.json").read_text(encoding="utf-8")
    import json

    _assert_no_live_formula(make_demo_results(_hostile_design()))
    _assert_no_live_formula(make_demo_results(json.loads(design)))


def test_results_template_read_back_unquotes(tmp_path):
    """A results file saved from a neutralized template reads as the original text."""
    from saltplan.screen.output import screen_structure
    from saltplan.select.results import read_results

    design, _ = screen_structure(API, 500, out_dir=tmp_path / "d")
    d = design.to_dict()
    rows = [["well", "counterion", "stoichiometry", "solvent", "mode", "outcome", "notes"]]
    for w in d["wells"]:
        rows.append([w["well"], w.get("counterion") or "", w.get("stoichiometry") or "",
                     w["solvent"], w["mode"], "crystalline", "=1+2 then @x"])
    path = tmp_path / "results.csv"
    path.write_text(csv_text(rows), encoding="utf-8")
    assert "'=1+2" in path.read_text(encoding="utf-8")
    results = read_results(path, d)
    notes = {o.notes for o in results.observations}
    assert notes == {"=1+2 then @x"}
