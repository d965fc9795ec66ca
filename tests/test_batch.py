"""Batch evaluation: reading, streaming, order, error rows, engines, writers, summary, CLI.

Most tests run the batch machinery with a small stand-in evaluator defined here
(:func:`standin_plan`), so they test batch itself and not the chemistry of
:func:`saltplan.plan.planner.plan_salts`; the end-to-end tests at the bottom use the real planner
and skip while it is not installed. Canonical SMILES are checked against RDKit itself
(reference library) and fixture molecules are common laboratory chemicals.
"""
from __future__ import annotations

import csv
import json
import os
import re
import time
import zlib
from pathlib import Path

import pandas as pd
import pytest

from saltplan.batch.run import COLUMNS, evaluate_many, iter_evaluate, run_batch, summarize_plan
from saltplan.errors import InputFileError, ParameterError
from saltplan.structure import read_structure

FIX = Path(__file__).resolve().parent / "fixtures"


# --------------------------------------------------------------------------- stand-in
_PATTERNS = None


def _patterns():
    global _PATTERNS
    if _PATTERNS is None:
        from rdkit import Chem

        _PATTERNS = [
            ("base", "amine", 10.0, Chem.MolFromSmarts("[NX3;!$(N-C=[O,N]);!$(N-a);!$(N-[S,P]=O)]")),
            ("base", "pyridine", 5.2, Chem.MolFromSmarts("[nX2;r6]")),
            ("acid", "carboxylic_acid", 4.5, Chem.MolFromSmarts("[CX3](=O)[OX2H1]")),
            ("acid", "phenol", 10.0, Chem.MolFromSmarts("c[OX2H1]")),
        ]
    return _PATTERNS


def standin_plan(smiles, *, name=None, dose_mg=None, measured=None, libraries=None):
    """Stand-in for plan_salts: a Plan-shaped dict from four fixed group patterns.

    Not chemistry worth testing: it only gives the batch code realistic dict shapes.
    """
    parent = read_structure(smiles, name=name)
    sites = []
    for kind, group, pka, patt in _patterns():
        for match in parent.mol.GetSubstructMatches(patt):
            atom = match[-1] if kind == "acid" else match[0]
            sites.append({"atom": atom, "kind": kind, "pka": pka, "group_id": group,
                          "provenance": "estimated"})
    if measured and sites:  # [(selector, pKa), ...]: the first value replaces the first site
        sites[0] = dict(sites[0], pka=measured[0][1], provenance="measured")
    cands = []
    for s in sites:
        if s["kind"] == "base":
            for ion, ion_pka in (("hydrochloride", -6.0), ("mesylate", -1.9), ("fumarate", 3.0)):
                cands.append((ion, s["pka"] - ion_pka))
        else:
            for ion, ion_pka in (("sodium", 14.0), ("tromethamine", 8.1)):
                cands.append((ion, ion_pka - s["pka"]))
    cands.sort(key=lambda c: (-c[1], c[0]))
    candidates = [{"counterion": ion, "stoichiometry": "1:1", "delta_pka": round(d, 2),
                   "feasible": d >= 2, "rank": i + 1,
                   "caveats": ([{"code": "sulfonate_ester_risk", "severity": "warning",
                                 "text": "..."}] if ion == "mesylate" else [])}
                  for i, (ion, d) in enumerate(cands)]
    code = "salt_candidates" if any(c["feasible"] for c in candidates) else (
        "weak_sites_only" if sites else "no_ionizable_site")
    return {"parent": parent.to_dict(), "sites": sites, "candidates": candidates,
            "verdict": {"code": code, "text": code}, "dose_mg": dose_mg}


def jittery_plan(smiles, **kw):
    """Stand-in whose time per row varies, so that parallel chunks finish out of order."""
    time.sleep((zlib.crc32(smiles.encode()) % 7) / 1000)
    return standin_plan(smiles, **kw)


class _Interrupt(BaseException):
    pass


def crashing_plan(smiles, **kw):
    if smiles == "c1ccncc1":
        raise _Interrupt("simulated crash")
    return standin_plan(smiles, **kw)


def _many(n, tmp_path, name="many.csv"):
    smiles = ["CCN(CC)CC", "CC(=O)O", "c1ccccc1", "c1ccncc1", "Oc1ccccc1", "C1CC(", "CCN"]
    path = tmp_path / name
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        for i in range(n):
            w.writerow([f"SP-{i:05d}", smiles[i % len(smiles)]])
    return path


# --------------------------------------------------------------------------- reading
def test_valid_csv_one_row_per_input_in_order():
    from rdkit import Chem

    df = evaluate_many(FIX / "batch_valid.csv", evaluator=standin_plan)
    src = pd.read_csv(FIX / "batch_valid.csv", dtype=str, keep_default_na=False)
    assert list(df.columns) == list(COLUMNS)
    assert list(df["row"]) == list(range(1, len(src) + 1))
    assert list(df["id"]) == list(src["id"])
    assert df["error"].isna().all()
    # canonical parent SMILES = RDKit's canonical SMILES of the free form (reference library)
    for given, got in zip(src["smiles"], df["smiles"], strict=True):
        largest = max(given.split("."), key=len)
        assert got == Chem.MolToSmiles(Chem.MolFromSmiles(largest))
    tea = df.iloc[0]
    assert tea["most_basic_pka"] == 10.0 and pd.isna(tea["most_acidic_pka"])
    assert tea["sites"] == "base 10.0 (amine, est.)"
    assert tea["top_counterions"].startswith("hydrochloride 1:1 ΔpKa 16.0; mesylate 1:1 ΔpKa 11.9")
    assert tea["caveats"] == "sulfonate_ester_risk (warning): mesylate"
    assert df.iloc[2]["verdict"] == "no_ionizable_site" and df.iloc[2]["n_feasible"] == 0
    assert df.iloc[5]["supplied_as"] == "hydrochloride"
    # measured pKa column: the stand-in marks its first site measured
    assert df.iloc[1]["sites"] == "acid 4.8 (carboxylic_acid, meas.)"
    assert df.iloc[1]["most_acidic_pka"] == 4.76


def test_bad_rows_carry_errors_and_the_run_goes_on():
    df = evaluate_many(FIX / "batch_bad_rows.csv", evaluator=standin_plan)
    assert len(df) == 8 and list(df["row"]) == list(range(1, 9))
    err = dict(zip(df["id"], df["error"], strict=True))
    assert err["SP-0101"] is None and err["SP-0108"] is None
    assert "unparsable SMILES" in err["SP-0102"]
    assert err["SP-0103"] == "empty SMILES"
    assert "6 fields" in err["SP-0104"] and "header has 5" in err["SP-0104"]
    assert "positive" in err["SP-0105"] and "-5" in err["SP-0105"]
    assert "not a number" in err["SP-0106"]
    assert "high" in err["SP-0107"]
    for text in err.values():
        assert text is None or "\n" not in text
    failed = df[df["error"].notna()]
    assert failed["verdict"].isna().all() and failed["smiles"].isna().all()


def test_bom_and_crlf_read_like_plain_utf8():
    plain = evaluate_many(FIX / "batch_valid.csv", evaluator=standin_plan)
    bom = evaluate_many(FIX / "batch_bom_crlf.csv", evaluator=standin_plan)
    assert (FIX / "batch_bom_crlf.csv").read_bytes().startswith(b"\xef\xbb\xbf")
    pd.testing.assert_frame_equal(plain, bom)


def test_wrong_encoding_names_file_and_byte():
    raw = (FIX / "batch_latin1.csv").read_bytes()
    offset = raw.index(b"\xe9")
    with pytest.raises(InputFileError) as exc:
        evaluate_many(FIX / "batch_latin1.csv", evaluator=standin_plan)
    msg = exc.value.one_line()
    assert "batch_latin1.csv" in msg and f"byte {offset}" in msg and "line 2" in msg
    assert "UTF-8" in msg


def test_utf16_is_refused_at_byte_zero(tmp_path):
    path = tmp_path / "u16.csv"
    path.write_bytes("smiles\nCCO\n".encode("utf-16"))
    with pytest.raises(InputFileError, match="byte 0"):
        evaluate_many(path, evaluator=standin_plan)


def test_missing_smiles_column_names_file_column_and_columns_found():
    with pytest.raises(InputFileError) as exc:
        evaluate_many(FIX / "batch_no_smiles.csv", evaluator=standin_plan)
    msg = exc.value.one_line()
    assert "batch_no_smiles.csv" in msg and "'smiles'" in msg
    assert "'id', 'name', 'structure'" in msg
    df = evaluate_many(FIX / "batch_no_smiles.csv", smiles_column="structure",
                       evaluator=standin_plan)
    assert df["smiles"].tolist() == ["CCN(CC)CC"]


def test_smiles_column_matches_case_insensitively(tmp_path):
    path = tmp_path / "upper.csv"
    path.write_text("ID,SMILES\nX1,CCO\n", encoding="utf-8")
    df = evaluate_many(path, evaluator=standin_plan)
    assert df["id"].tolist() == ["X1"] and df["smiles"].tolist() == ["CCO"]


def test_named_optional_column_must_exist():
    with pytest.raises(InputFileError, match="no dose column 'dose'"):
        evaluate_many(FIX / "batch_valid.csv", dose_column="dose", evaluator=standin_plan)


@pytest.mark.parametrize("name, pattern", [("batch_empty.csv", "empty file"),
                                           ("batch_header_only.csv", "no data rows")])
def test_empty_inputs_are_clear_errors(name, pattern):
    with pytest.raises(InputFileError, match=pattern) as exc:
        evaluate_many(FIX / name, evaluator=standin_plan)
    assert name in exc.value.one_line()


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(InputFileError, match="not found"):
        evaluate_many(tmp_path / "nope.csv", evaluator=standin_plan)
    with pytest.raises(InputFileError, match="directory"):
        evaluate_many(tmp_path, evaluator=standin_plan)


def test_binary_file_refused(tmp_path):
    path = tmp_path / "bin.csv"
    path.write_bytes(b"smiles\nCC\x00O\n")
    with pytest.raises(InputFileError, match="binary file"):
        evaluate_many(path, evaluator=standin_plan)


def test_duplicate_ids_are_flagged_not_dropped():
    df = evaluate_many(FIX / "batch_duplicate_ids.csv", evaluator=standin_plan)
    assert len(df) == 7
    assert df["duplicate_of"].tolist() == [pd.NA, pd.NA, 1, pd.NA, pd.NA, 2, 1] or \
        [None if pd.isna(v) else int(v) for v in df["duplicate_of"]] == [None, None, 1, None, None, 2, 1]
    assert df["error"].isna().all()        # duplicates are planned, flagged, not failed
    assert df.iloc[2]["smiles"] == "c1ccncc1"


def test_unterminated_quote_becomes_an_error_row(tmp_path):
    path = tmp_path / "quote.csv"
    path.write_text('id,smiles\nA,CCO\nB,"CCN\nC,CCC\n', encoding="utf-8")
    df = evaluate_many(path, evaluator=standin_plan)
    assert df["id"].tolist()[0] == "A" and df["error"].iloc[0] is None
    assert len(df) == 2 and df["error"].iloc[1] is not None


def test_dataframe_input_with_missing_cells():
    frame = pd.DataFrame({"smiles": ["CCN(CC)CC", None, "CC(=O)O"], "id": ["a", "b", float("nan")],
                          "dose_mg": [10.0, float("nan"), 5]})
    df = evaluate_many(frame, evaluator=standin_plan)
    assert df["error"].tolist() == [None, "empty SMILES", None]
    assert df["id"].tolist() == ["a", "b", ""]


def test_sdf_input_keeps_order_and_flags_bad_records(tmp_path):
    from rdkit import Chem

    path = tmp_path / "in.sdf"
    blocks = []
    for ident, smi in (("S1", "CCN(CC)CC"), ("S2", "CC(=O)O")):
        mol = Chem.MolFromSmiles(smi)
        mol.SetProp("_Name", f"name-{ident}")
        mol.SetProp("id", ident)
        mol.SetProp("pka", "9.9" if ident == "S1" else "")
        blocks.append(Chem.MolToMolBlock(mol) + "> <id>\n" + ident + "\n\n"
                      + ("> <pka>\n9.9\n\n" if ident == "S1" else "") + "$$$$\n")
    bad = "broken\n  x\n\n  1  0  0  0  0  0  0  0  0  0999 V2000\nnot an atom line\nM  END\n$$$$\n"
    path.write_text(blocks[0] + bad + blocks[1], encoding="utf-8")
    df = evaluate_many(path, evaluator=standin_plan)
    assert df["row"].tolist() == [1, 2, 3]
    assert df["id"].tolist() == ["S1", "", "S2"]
    assert df["name"].tolist()[0] == "name-S1"
    assert df["error"].iloc[0] is None and df["error"].iloc[2] is None
    assert "SDF record 2" in df["error"].iloc[1]
    assert df["most_basic_pka"].iloc[0] == 9.9  # measured pKa from the SDF data field


# --------------------------------------------------------------------------- measured pKa cells
def _seen_measured(cell):
    seen = []

    def capture(smiles, *, measured=None, **kw):
        seen.append(measured)
        return standin_plan(smiles, **kw)

    frame = pd.DataFrame({"smiles": ["CCN(CC)CC"], "pka": [cell]})
    df = evaluate_many(frame, evaluator=capture)
    return (seen[0] if seen else None), df["error"].iloc[0]


def test_measured_pka_cells_are_parsed_or_flagged():
    assert _seen_measured("9.1; 4.2") == ([(None, 9.1), (None, 4.2)], None)
    assert _seen_measured("base=9.1; acid=4.2") == ([("base", 9.1), ("acid", 4.2)], None)
    assert _seen_measured("3=10.5") == ([(3, 10.5)], None)
    assert _seen_measured(" ; ") == (None, None)
    for bad, words in (("9,1", "separate values with ';'"), ("base=x", "not a number"),
                       ("25", "within"), ("nonsense_group=4", "not an atom index")):
        measured, error = _seen_measured(bad)
        assert measured is None and words in error and error.startswith("measured pKa")


# --------------------------------------------------------------------------- streaming and engines
def test_iter_evaluate_streams_chunk_by_chunk(tmp_path):
    path = _many(1000, tmp_path)
    calls = []

    def counting(smiles, **kw):
        calls.append(smiles)
        return standin_plan(smiles, **kw)

    gen = iter_evaluate(path, chunk_size=50, evaluator=counting)
    first = next(gen)
    assert len(first) == 50 and [r["row"] for r in first] == list(range(1, 51))
    assert len(calls) <= 50          # nothing beyond the first chunk was evaluated yet
    rest = [r for chunk in gen for r in chunk]
    assert len(rest) == 950 and rest[-1]["row"] == 1000


def test_progress_callback_reaches_total(tmp_path):
    path = _many(120, tmp_path)
    seen = []
    evaluate_many(path, chunk_size=50, evaluator=standin_plan,
                  progress=lambda done, total: seen.append((done, total)))
    assert [d for d, _ in seen] == [50, 100, 120]
    assert all(t is not None and t >= 120 for _, t in seen)


def test_results_identical_across_jobs_and_chunk_sizes(tmp_path):
    path = _many(300, tmp_path)
    base = evaluate_many(path, evaluator=standin_plan)
    for jobs, chunk in ((1, 7), (2, 13), (2, 300)):
        other = evaluate_many(path, jobs=jobs, chunk_size=chunk, evaluator=jittery_plan)
        pd.testing.assert_frame_equal(base, other)


def test_results_identical_on_dask_local_cluster(tmp_path):
    distributed = pytest.importorskip("distributed")
    path = _many(150, tmp_path)
    base = evaluate_many(path, evaluator=standin_plan)
    with distributed.LocalCluster(processes=False, n_workers=1, threads_per_worker=2,
                                  dashboard_address=None) as cluster:
        by_address = evaluate_many(path, engine="dask", scheduler=cluster.scheduler_address,
                                   chunk_size=11, evaluator=jittery_plan)
        with distributed.Client(cluster) as client:
            by_client = evaluate_many(path, engine="dask", scheduler=client, chunk_size=40,
                                      evaluator=standin_plan)
            assert client.status == "running"  # a client passed in is not closed
    pd.testing.assert_frame_equal(base, by_address)
    pd.testing.assert_frame_equal(base, by_client)


def test_bad_options():
    with pytest.raises(ParameterError, match="engine"):
        evaluate_many(FIX / "batch_valid.csv", engine="spark", evaluator=standin_plan)
    with pytest.raises(ParameterError, match="jobs"):
        evaluate_many(FIX / "batch_valid.csv", jobs=0, evaluator=standin_plan)
    with pytest.raises(ParameterError, match="chunk_size"):
        evaluate_many(FIX / "batch_valid.csv", chunk_size=0, evaluator=standin_plan)
    with pytest.raises(ParameterError, match="scheduler"):
        evaluate_many(FIX / "batch_valid.csv", engine="dask", evaluator=standin_plan)


def test_summarize_plan_orders_sites_and_limits_top():
    plan = {"parent": {"smiles": "X"},
            "sites": [{"atom": 3, "kind": "acid", "pka": 9.87, "group_id": "phenol",
                       "provenance": "estimated"},
                      {"atom": 1, "kind": "base", "pka": 5.0, "group_id": "pyridine",
                       "provenance": "measured"},
                      {"atom": 2, "kind": "base", "pka": 9.5, "group_id": "amine",
                       "provenance": "estimated"},
                      {"atom": 4, "kind": "acid", "pka": 4.2, "group_id": "carboxylic_acid",
                       "provenance": "estimated"}],
            "candidates": [{"counterion": "b", "stoichiometry": "1:1", "delta_pka": 3,
                            "feasible": True, "rank": 2, "caveats": []},
                           {"counterion": "c", "stoichiometry": "2:1", "delta_pka": 1,
                            "feasible": False, "rank": 4, "caveats": []},
                           {"counterion": "a", "stoichiometry": "1:2", "delta_pka": 5.04,
                            "feasible": True, "rank": 1,
                            "caveats": [{"code": "z_info", "severity": "info"},
                                        {"code": "y_serious", "severity": "serious"}]}],
            "verdict": {"code": "salt_candidates"},
            "caveats": [{"code": "x_warn", "severity": "warning"}]}
    out = summarize_plan(plan, top=1)
    assert out["sites"] == ("base 9.5 (amine, est.); base 5.0 (pyridine, meas.); "
                            "acid 4.2 (carboxylic_acid, est.); acid 9.9 (phenol, est.)")
    assert out["most_basic_pka"] == 9.5 and out["most_acidic_pka"] == 4.2
    assert out["top_counterions"] == "a 1:2 ΔpKa 5.0" and out["n_feasible"] == 2
    assert out["caveats"] == "y_serious (serious): a; x_warn (warning): API; z_info (info): a"


# --------------------------------------------------------------------------- writers
@pytest.mark.parametrize("ext", [".csv", ".json", ".jsonl", ".xlsx"])
def test_writers_round_trip(tmp_path, ext):
    frame = evaluate_many(FIX / "batch_bad_rows.csv", evaluator=standin_plan)
    out = tmp_path / f"out{ext}"
    res = run_batch(FIX / "batch_bad_rows.csv", out, evaluator=standin_plan, chunk_size=3)
    assert res.rows == 8 and res.failed == 6 and res.outputs == (str(out),)
    if ext == ".csv":
        back = pd.read_csv(out, dtype=str, keep_default_na=False)
        assert back["error"].tolist() == [e or "" for e in frame["error"]]
    elif ext == ".json":
        back = pd.DataFrame(json.loads(out.read_text(encoding="utf-8")))
    elif ext == ".jsonl":
        back = pd.DataFrame([json.loads(line) for line in out.read_text().splitlines()])
    else:
        back = pd.read_excel(out, dtype=str, keep_default_na=False)
    assert list(back.columns) == list(COLUMNS)
    assert back["id"].tolist() == frame["id"].tolist()
    assert [str(v) for v in back["row"]] == [str(v) for v in frame["row"]]
    assert not list(tmp_path.glob("*.part"))
    assert oct(os.stat(out).st_mode & 0o077) != "0o0"  # readable by the group like any file


def test_xlsx_keeps_formula_like_text_as_text(tmp_path):
    from openpyxl import load_workbook

    src = tmp_path / "inj.csv"
    src.write_text('id,name,smiles\n"=1+1","=HYPERLINK(""x"")",CCO\n', encoding="utf-8")
    out = tmp_path / "inj.xlsx"
    run_batch(src, out, evaluator=standin_plan)
    ws = load_workbook(out).active
    cells = {ws.cell(1, c).value: ws.cell(2, c) for c in range(1, ws.max_column + 1)}
    assert cells["id"].value == "=1+1" and cells["id"].data_type == "s"
    assert cells["name"].data_type == "s"


def test_xlsx_row_cap_refuses_without_partial_file(tmp_path, monkeypatch):
    import saltplan.batch.outputs as bo

    monkeypatch.setattr(bo, "XLSX_MAX_ROWS", 5)
    out = tmp_path / "big.xlsx"
    with pytest.raises(ParameterError, match="at most 5"):
        run_batch(_many(20, tmp_path), out, evaluator=standin_plan, chunk_size=4)
    assert not out.exists() and not list(tmp_path.glob("*.part"))


def test_crash_leaves_no_partial_output_and_old_file_intact(tmp_path):
    out = tmp_path / "out.csv"
    summary = tmp_path / "summary.html"
    out.write_text("previous\n", encoding="utf-8")
    with pytest.raises(_Interrupt):
        run_batch(FIX / "batch_valid.csv", out, summary=summary, evaluator=crashing_plan,
                  chunk_size=2)
    assert out.read_text(encoding="utf-8") == "previous\n"
    assert not summary.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.csv"]


def test_unknown_output_extension(tmp_path):
    with pytest.raises(ParameterError, match="unknown output type"):
        run_batch(FIX / "batch_valid.csv", tmp_path / "out.parquet", evaluator=standin_plan)


# --------------------------------------------------------------------------- HTML summary
def test_summary_counts_escaping_and_determinism(tmp_path):
    src = tmp_path / "hostile.csv"
    src.write_text("id,name,smiles\n<script>alert(1)</script>,x,C1CC(\nok,<b>bold</b>,CCN(CC)CC\n"
                   "a2,y,CC(=O)O\n", encoding="utf-8")
    first, second = tmp_path / "s1.html", tmp_path / "s2.html"
    run_batch(src, tmp_path / "o.csv", summary=first, evaluator=standin_plan)
    run_batch(src, tmp_path / "o2.csv", summary=second, evaluator=standin_plan)
    html = first.read_text(encoding="utf-8")
    assert first.read_bytes() == second.read_bytes()
    assert "<script>alert(1)" not in html and "&lt;script&gt;alert(1)" in html
    assert html.count("<script>") == 1            # the page's own table script, nothing else
    assert html.count('class="sp-structure"') == 2  # thumbnails of the two readable rows
    assert html.count("<svg") == 4                   # + the two histograms (no margin plot:
                                                     # the stand-in planner sets no thresholds)
    # namespace names (xmlns='http://…') are identifiers, never fetched
    assert "http://" not in re.sub(r"""xmlns(:\w+)?=['"][^'"]*['"]""", "", html)
    assert "https://" not in html and " src=" not in html
    assert ">salt_candidates</td><td class=\"n\">2<" in html
    assert ">hydrochloride</td><td class=\"n\">1<" in html  # listed once, first once
    assert ">error</td><td class=\"n\">1<" in html


# --------------------------------------------------------------------------- CLI
@pytest.fixture
def standin(monkeypatch):
    import saltplan.batch.run as batch_mod

    monkeypatch.setattr(batch_mod, "_default_evaluator", lambda: standin_plan)
    monkeypatch.setattr(batch_mod, "_preflight_libraries", lambda libraries, evaluator: None)


def test_cli_all_rows_ok_exit_0(cli, standin, tmp_path):
    out = tmp_path / "o.csv"
    res = cli("batch", FIX / "batch_valid.csv", "--out", out, "--summary", tmp_path / "s.html")
    assert res.exit_code == 0, res.output
    assert res.stderr.strip() == "6 rows, 0 failed (see column error)"
    assert f"wrote {out}" in res.stdout
    assert len(pd.read_csv(out)) == 6 and (tmp_path / "s.html").exists()


def test_cli_failed_rows_exit_1_with_one_line_summary(cli, standin, tmp_path):
    out = tmp_path / "o.json"
    res = cli("batch", FIX / "batch_bad_rows.csv", "--out", out, "--json", "--jobs", "2",
              "--chunk-size", "2")
    assert res.exit_code == 1
    assert res.stderr.strip() == "8 rows, 6 failed (see column error)"
    report = json.loads(res.stdout)
    assert report["rows"] == 8 and report["failed"] == 6 and report["outputs"] == [str(out)]
    assert len(json.loads(out.read_text(encoding="utf-8"))) == 8


def test_cli_duplicates_reported(cli, standin, tmp_path):
    res = cli("batch", FIX / "batch_duplicate_ids.csv", "--out", tmp_path / "o.xlsx", "--quiet")
    assert res.exit_code == 0
    assert "3 repeated ids (see column duplicate_of)" in res.stderr


def test_cli_input_errors_are_one_line_exit_1(cli, standin, tmp_path):
    res = cli("batch", FIX / "batch_no_smiles.csv", "--out", tmp_path / "o.csv")
    assert res.exit_code == 1
    assert "no SMILES column 'smiles'" in res.stderr and len(res.stderr.strip().splitlines()) == 1
    assert "Traceback" not in res.stderr and not list(tmp_path.iterdir())
    res = cli("batch", FIX / "batch_valid.csv", "--out", tmp_path / "o.txt")
    assert res.exit_code == 1 and "unknown output type" in res.stderr


def test_cli_help_states_exit_status(cli):
    res = cli("batch", "--help")
    assert res.exit_code == 0
    assert "Exit status" in res.stdout and "1 if any row failed" in res.stdout


# --------------------------------------------------------------------------- with plan_salts
def _real_planner():
    from saltplan import ionizable_sites, plan_salts  # noqa: F401  (the real planner is there)


def test_end_to_end_with_plan_salts(tmp_path):
    _real_planner()
    df = evaluate_many(FIX / "batch_valid.csv")
    assert df["row"].tolist() == list(range(1, 7))
    by_name = dict(zip(df["name"], df.to_dict("records"), strict=True))
    # triethylamine pKa(BH+) 10.75 (CRC Handbook, dissociation constants of organic bases)
    tea = by_name["triethylamine"]
    assert tea["error"] is None and abs(tea["most_basic_pka"] - 10.75) < 1.0
    assert tea["verdict"] == "salt_candidates" and tea["n_feasible"] > 0
    # acetic acid given as measured 4.76 (CRC Handbook): shown as measured
    assert by_name["acetic acid"]["most_acidic_pka"] == 4.76
    assert "meas." in by_name["acetic acid"]["sites"]
    # benzene has no ionizable site
    assert by_name["benzene"]["verdict"] == "no_ionizable_site"
    assert by_name["morpholine hydrochloride"]["supplied_as"] == "hydrochloride"


def test_xlsx_refused_early_from_the_row_estimate(tmp_path, monkeypatch):
    import saltplan.batch.outputs as bo

    monkeypatch.setattr(bo, "XLSX_MAX_ROWS", 100)
    calls = []

    def counting(smiles, **kw):
        calls.append(smiles)
        return standin_plan(smiles, **kw)

    with pytest.raises(ParameterError, match="about 1,00"):
        run_batch(_many(1000, tmp_path), tmp_path / "big.xlsx", evaluator=counting,
                  chunk_size=10)
    assert len(calls) == 10  # stopped after the first chunk
    assert not (tmp_path / "big.xlsx").exists()


def test_progress_bar_grows_past_the_estimate():
    from saltplan.cli.batch import _Progress

    bar = _Progress()
    for done, total in ((50, 100), (100, 100), (130, 100)):
        bar(done, total)
    assert bar.done == 130 and bar.bar.length == 130
    bar.close()


def test_broken_user_library_fails_before_any_row(tmp_path):
    from saltplan.errors import SaltplanError

    out = tmp_path / "o.csv"
    with pytest.raises(SaltplanError, match="nope.yaml"):
        run_batch(FIX / "batch_valid.csv", out, libraries=[str(tmp_path / "nope.yaml")])
    assert not out.exists() and not list(tmp_path.glob("*.part"))


def test_line_of_empty_fields_is_a_row_but_blank_lines_are_not(tmp_path):
    path = tmp_path / "blank.csv"
    path.write_text("\nid,smiles\nA,CCO\n\n,\nB,CCN\n\n", encoding="utf-8")
    df = evaluate_many(path, evaluator=standin_plan)
    assert df["id"].tolist() == ["A", "", "B"] and df["row"].tolist() == [1, 2, 3]
    assert df["error"].tolist() == [None, "empty SMILES", None]


def test_output_may_not_replace_the_input(tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("smiles\nCCO\n", encoding="utf-8")
    with pytest.raises(ParameterError, match="replace the input"):
        run_batch(src, src, evaluator=standin_plan)
    with pytest.raises(ParameterError, match="same file"):
        run_batch(src, tmp_path / "o.json", summary=tmp_path / "o.json", evaluator=standin_plan)
    assert src.read_text(encoding="utf-8") == "smiles\nCCO\n"


def test_json_writer_never_writes_nan(tmp_path):
    from saltplan.batch.outputs import JsonWriter

    out = tmp_path / "o.json"
    w = JsonWriter(out, ("row", "most_basic_pka"))
    w.write([{"row": 1, "most_basic_pka": float("nan")}, {"row": 2, "most_basic_pka": 9.5}])
    w.commit()
    assert json.loads(out.read_text(encoding="utf-8")) == [
        {"row": 1, "most_basic_pka": None}, {"row": 2, "most_basic_pka": 9.5}]
