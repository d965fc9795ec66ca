"""Hostile files at every file-taking command: structure files (parent / sites / plan /
screen FILE), screen results and design folders (select), batch inputs.

Files are generated in tmp_path; their contents are invented.
"""
from __future__ import annotations

import csv
import json

import pytest
from hostile import assert_refused, files_under

API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base; screens with the defaults

# ------------------------------------------------------------------ structure files
# name -> (file name, bytes or None for "make a folder" / "do not create", error words)
STRUCTURE_FILES = {
    "missing_smi": ("missing.smi", None, ("not found",)),
    "missing_sdf": ("missing.sdf", None, ("not found",)),
    "missing_mol": ("missing.mol", None, ("not found",)),
    "directory": ("folder.smi", "dir", ("directory",)),
    "directory_sdf": ("folder.sdf", "dir", ("directory",)),
    "binary": ("binary.smi", bytes(range(256)) * 8, ("binary",)),
    "binary_mol": ("binary.mol", b"\x00\x01\x02M  END\n", ("binary",)),
    "utf16": ("utf16.smi", "CCN\n".encode("utf-16"), ("binary",)),
    "latin1": ("latin1.smi", "CCN \xe9thyl\n".encode("latin-1"), ("utf-8",)),
    "empty": ("empty.smi", b"", ("empty",)),
    "whitespace_only": ("blank.smi", b" \n\r\n\t\n", ("empty",)),
    "comments_only": ("comments.smi", b"# nothing\n# here\n", ("0 smiles lines",)),
    "two_smiles": ("two.smi", b"CCN\nCCO\n", ("2 smiles lines",)),
    "garbage": ("garbage.smi", b"not a smiles at all\n", ("unparsable",)),
    "huge_line_1e6_atoms": ("huge.smi", b"C" * 1_000_000 + b"\n", ("heavy atoms",)),
    "unicode_in_smiles": ("uni.smi", "CCN\u00e9 x\n".encode("utf-8"), ("character",)),
    "two_sdf_records": ("two.sdf", None, ("2 records",)),
    "broken_molblock": ("broken.mol", b"x\n  RDKit\n\n  2  1  0  0  0  0  0  0  0  0999 V2000\n"
                                      b"garbage\nM  END\n", ("could not be read",)),
}

# name -> (file bytes, canonical parent SMILES)
ACCEPTED_FILES = {
    "bom_crlf": (b"\xef\xbb\xbfCCN ethylamine\r\n", "CCN"),
    "crlf": (b"CCN ethylamine\r\n", "CCN"),
    "cr_only": (b"CCN ethylamine\r", "CCN"),
    "comment_then_smiles": (b"# invented test file\nCCN\n", "CCN"),
    "tab_title": (b"CCN\tethylamine\n", "CCN"),
    "no_newline": (b"CCN", "CCN"),
}


def _mol_block(smiles: str) -> str:
    from rdkit import Chem

    return Chem.MolToMolBlock(Chem.MolFromSmiles(smiles))


def _make(tmp_path, name, content):
    path = tmp_path / name
    if content == "dir":
        path.mkdir()
    elif content is not None:
        path.write_bytes(content)
    elif name == "two.sdf":
        path.write_text(_mol_block("CCN") + "$$$$\n" + _mol_block("CCO") + "$$$$\n")
    return path


def _structure_cmd(cmd, path, out):
    if cmd == "screen":
        return ["screen", path, "--api-budget-mg", 500, "--out", out]
    return [cmd, path]


@pytest.mark.parametrize("cmd", ["parent", "sites", "plan", "screen"])
@pytest.mark.parametrize("case", sorted(STRUCTURE_FILES))
def test_hostile_structure_file_refused(cli, tmp_path, monkeypatch, case, cmd):
    monkeypatch.chdir(tmp_path)
    name, content, words = STRUCTURE_FILES[case]
    path = _make(tmp_path, name, content)
    before = files_under(tmp_path)
    line = assert_refused(cli(*_structure_cmd(cmd, name, tmp_path / "out")), mentions=words)
    assert name in line                      # names the file
    assert files_under(tmp_path) == before   # nothing written
    assert path.exists() == (content is not None or name == "two.sdf")


@pytest.mark.parametrize("cmd", ["parent", "sites", "plan"])
@pytest.mark.parametrize("case", sorted(ACCEPTED_FILES))
def test_structure_file_encodings_accepted(cli, tmp_path, case, cmd):
    content, expected = ACCEPTED_FILES[case]
    path = tmp_path / "in.smi"
    path.write_bytes(content)
    result = cli(cmd, path, "--json")
    assert result.exit_code == 0, result.stderr
    data = json.loads(result.stdout)
    parent = data.get("parent", data)
    assert (parent.get("smiles") or data.get("smiles")) == expected


def test_mol_file_accepted(cli, tmp_path):
    path = tmp_path / "amine.mol"
    path.write_text(_mol_block("CCN(CC)CC").replace("\n", "\r\n"), encoding="utf-8")
    result = cli("parent", path, "--json")
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["smiles"] == "CCN(CC)CC"


# ------------------------------------------------------------------ select: results files
@pytest.fixture(scope="module")
def screened(tmp_path_factory):
    from click.testing import CliRunner

    from saltplan.cli import main
    from saltplan.demo.results import make_demo_results

    base = tmp_path_factory.mktemp("screened")
    design_dir = base / "design"
    res = CliRunner().invoke(main, ["screen", API, "--api-budget-mg", "500", "--out",
                                    str(design_dir)], catch_exceptions=False)
    assert res.exit_code == 0, res.stderr
    design = json.loads((design_dir / "design.json").read_text(encoding="utf-8"))
    text = make_demo_results(design)
    return design_dir, design, text


def _results_variants(good: str) -> dict:
    lines = good.splitlines()
    header_at = next(i for i, ln in enumerate(lines) if ln.startswith("well,"))
    header = lines[header_at]
    first = lines[header_at + 1]
    cols = header.split(",")
    notes_at = cols.index("notes")

    def with_notes(text):
        cells = next(csv.reader([first]))
        cells[notes_at] = text
        import io

        buf = io.StringIO()
        csv.writer(buf, lineterminator="\n").writerow(cells)
        return header + "\n" + buf.getvalue()

    return {
        # name -> (bytes, error words)
        "empty": (b"", ("no header",)),
        "binary": (bytes(range(256)) * 8, ("utf-8",)),
        "latin1": ((header + "\n" + first + "\n").encode("utf-8") + b"caf\xe9\n", ("utf-8",)),
        "header_only": ((header + "\n").encode(), ("no well has an outcome",)),
        "unknown_column": ((b"well,outcome,colour\nA1,crystalline,red\n"), ("colour",)),
        "no_outcome_column": (b"well,form_label\nA1,A\n", ("outcome",)),
        "huge_field_2mb": (with_notes("x" * 2_000_000).encode(), ("field",)),
        "ragged_row": ((header + "\n" + first + ",extra,extra\n").encode(), ()),
        "unknown_well": ((header + "\n" + first.replace(first.split(",")[0], "Z99", 1) + "\n")
                         .encode(), ("well",)),
        "nul_byte": ((header + "\n" + first + "\x00\n").encode(), ()),
        "unbalanced_quote": ((header + "\n" + first + ',"open\n').encode(), ()),
        "outcome_bogus": ((header + "\n" + ",".join(
            [c if i != cols.index("outcome") else "sparkly"
             for i, c in enumerate(next(csv.reader([first])))]) + "\n").encode(), ("outcome",)),
        "nan_value": ((header + "\n" + ",".join(
            [c if i != cols.index("melting_onset_c") else "nan"
             for i, c in enumerate(next(csv.reader([first])))]) + "\n").encode(), ()),
    }


@pytest.fixture(scope="module")
def results_variants(screened):
    return _results_variants(screened[2])


RESULTS_CASES = ("empty", "binary", "latin1", "header_only", "unknown_column",
                 "no_outcome_column", "huge_field_2mb", "ragged_row", "unknown_well", "nul_byte",
                 "unbalanced_quote", "outcome_bogus", "nan_value")


@pytest.mark.parametrize("case", RESULTS_CASES)
def test_hostile_results_file_refused(cli, tmp_path, screened, results_variants, case):
    data, words = results_variants[case]
    path = tmp_path / "results.csv"
    path.write_bytes(data)
    out = tmp_path / "out"
    line = assert_refused(cli("select", screened[0], path, "--out", out), mentions=words)
    assert "results.csv" in line
    assert not out.exists()


@pytest.mark.parametrize("variant", ["bom", "crlf", "bom_crlf"])
def test_results_file_bom_and_crlf_accepted(cli, tmp_path, screened, variant):
    text = screened[2]
    data = text.encode("utf-8")
    if "crlf" in variant:
        data = data.replace(b"\n", b"\r\n")
    if "bom" in variant:
        data = b"\xef\xbb\xbf" + data
    path = tmp_path / "results.csv"
    path.write_bytes(data)
    plain = tmp_path / "plain.csv"
    plain.write_text(text, encoding="utf-8")
    a = cli("select", screened[0], path, "--out", tmp_path / "a", "--json")
    b = cli("select", screened[0], plain, "--out", tmp_path / "b", "--json")
    assert a.exit_code == 0 and b.exit_code == 0, a.stderr + b.stderr
    sa, sb = json.loads(a.stdout), json.loads(b.stdout)
    assert sa["shortlist"] == sb["shortlist"]      # same evaluation, nothing lost


# ------------------------------------------------------------------ select: design folders
def _design_variants(design: dict) -> dict:
    def edit(fn):
        d = json.loads(json.dumps(design))
        fn(d)
        return json.dumps(d).encode()

    def setp(path, value):
        def fn(d):
            node = d
            for key in path[:-1]:
                node = node[key]
            node[path[-1]] = value
        return fn

    return {
        # name -> (design.json bytes, error words)
        "not_json": (b"{nope", ("not a readable",)),
        "empty": (b"", ("not a readable",)),
        "binary": (bytes(range(256)), ("utf-8",)),
        "json_list": (b"[]", ("screen design",)),
        "deep_nesting": (b"[" * 100_000 + b"]" * 100_000, ("nested",)),
        "nan_dose": (edit(setp(["plan", "inputs", "dose_mg"], float("nan"))), ("nan",)),
        "infinity_number": (edit(setp(["wells", 0, "api_mg"], float("inf"))), ("infinity",)),
        "no_wells": (edit(lambda d: d.pop("wells")), ("wells",)),
        "wells_text": (edit(setp(["wells"], "x")), ("wells",)),
        "well_not_mapping": (edit(setp(["wells", 0], 7)), ("wells[0]",)),
        "well_id_null": (edit(setp(["wells", 0, "well"], None)), ("wells[0].well",)),
        "flags_number": (edit(setp(["wells", 0, "flags"], 7)), ("wells[0].flags",)),
        "plan_text": (edit(setp(["plan"], "x")), ("plan",)),
        "candidates_number": (edit(setp(["plan", "candidates"], 5)), ("plan.candidates",)),
        "candidate_delta_text": (edit(setp(["plan", "candidates", 0, "delta_pka"], "x")),
                                 ("delta_pka",)),
        "candidate_id_number": (edit(setp(["plan", "candidates", 0, "counterion"], 5)),
                                ("counterion",)),
        "site_number": (edit(setp(["plan", "sites"], [5])), ("plan.sites[0]",)),
        "site_pka_null": (edit(setp(["plan", "sites", 0, "pka"], None)), ("pka",)),
        "negative_dose": (edit(setp(["plan", "inputs", "dose_mg"], -5)), ("dose",)),
    }


@pytest.fixture(scope="module")
def design_variants(screened):
    return _design_variants(screened[1])


DESIGN_CASES = ("not_json", "empty", "binary", "json_list", "deep_nesting", "nan_dose",
                "infinity_number", "no_wells", "wells_text", "well_not_mapping", "well_id_null",
                "flags_number", "plan_text", "candidates_number", "candidate_delta_text",
                "candidate_id_number", "site_number", "site_pka_null", "negative_dose")


@pytest.mark.parametrize("case", DESIGN_CASES)
def test_hostile_design_refused(cli, tmp_path, screened, design_variants, case):
    data, words = design_variants[case]
    folder = tmp_path / "design"
    folder.mkdir()
    (folder / "design.json").write_bytes(data)
    results = tmp_path / "results.csv"
    results.write_text(screened[2], encoding="utf-8")
    out = tmp_path / "out"
    line = assert_refused(cli("select", folder, results, "--out", out), mentions=words)
    assert "design.json" in line
    assert not out.exists()


def test_design_folder_without_design(cli, tmp_path, screened):
    results = tmp_path / "results.csv"
    results.write_text(screened[2], encoding="utf-8")
    (tmp_path / "empty_folder").mkdir()
    assert_refused(cli("select", tmp_path / "empty_folder", results, "--out", tmp_path / "o"),
                   mentions=("design.json not found",))
    assert_refused(cli("select", tmp_path / "nowhere", results, "--out", tmp_path / "o"),
                   code=2)
    assert_refused(cli("select", screened[0], tmp_path / "nowhere.csv", "--out", tmp_path / "o"),
                   code=2)
    assert_refused(cli("select", screened[0], tmp_path, "--out", tmp_path / "o"), code=2)
    assert not (tmp_path / "o").exists()


# ------------------------------------------------------------------ batch inputs
BATCH_REFUSED = {
    # name -> (file name, bytes, error words): the whole input is unreadable (exit 1)
    "missing": ("missing.csv", None, ("not found",)),
    "empty": ("empty.csv", b"", ("empty",)),
    "header_only": ("header.csv", b"id,smiles\n", ("no data rows",)),
    "binary": ("binary.csv", bytes(range(256)) * 8, ()),
    "nul_byte": ("nul.csv", b"id,smiles\nr1,CC\x00N\n", ("binary",)),
    "latin1": ("latin1.csv", "id,smiles,name\nr1,CCN,caf\xe9\n".encode("latin-1"), ("utf-8",)),
    "no_smiles_column": ("nosmiles.csv", b"id,structure\nr1,CCN\n", ("smiles",)),
    "unknown_type": ("input.smi", b"CCN\n", ("unknown input type",)),
}


@pytest.mark.parametrize("case", sorted(BATCH_REFUSED))
def test_hostile_batch_input_refused(cli, tmp_path, case):
    name, content, words = BATCH_REFUSED[case]
    path = tmp_path / name
    if content is not None:
        path.write_bytes(content)
    out = tmp_path / "out"
    line = assert_refused(cli("batch", path, "--out", out / "table.csv", "--summary",
                              out / "summary.html", "--quiet"), mentions=words)
    assert name in line
    assert files_under(out) == []


# name -> (one CSV data row after "id,smiles", expected error words in the `error` column)
BATCH_ROWS = {
    "huge_smiles_1mb": ("huge," + "C" * 1_000_000, ("heavy atoms",)),
    "huge_rings": ("rings," + "c1ccccc1" * 50_000, ("heavy atoms",)),
    "garbage": ("garbage,xyz!!", ("unparsable",)),
    "empty_smiles": ("blank,", ("empty",)),
    "unicode_smiles": ("uni,CCN\u00e9", ("character",)),
    "radical": ("radical,[CH2]CC", ("radical",)),
    "line_break_in_cell": ('lb,"CCN\nCCO"', ("line break",)),
    "too_many_fields": ("ragged,CCN,extra,extra", ("fields",)),
    "no_carbon": ("salt,[Na+].[Cl-]", ("carbon",)),
}


@pytest.mark.parametrize("case", sorted(BATCH_ROWS))
def test_bad_batch_row_is_a_row_error_not_a_crash(cli, tmp_path, case):
    row, words = BATCH_ROWS[case]
    path = tmp_path / "in.csv"
    path.write_text(f"id,smiles\nfirst,CCN\n{row}\nlast,CCO\n", encoding="utf-8")
    out = tmp_path / "table.csv"
    result = cli("batch", path, "--out", out, "--quiet")
    assert result.exit_code == 1, result.stderr           # a row failed
    assert "Traceback" not in result.stderr and "internal error" not in result.stderr
    previous = csv.field_size_limit(2 ** 31 - 1)   # the output echoes the huge input cell
    try:
        with out.open(encoding="utf-8", newline="") as fh:
            rows = list(csv.DictReader(fh))
    finally:
        csv.field_size_limit(previous)
    assert [r["id"] for r in rows] == ["first", row.split(",", 1)[0], "last"]
    assert rows[0]["error"] == "" and rows[2]["error"] == ""   # neighbours planned: nothing lost
    err = rows[1]["error"].lower()
    for w in words:
        assert w in err, err
    assert len(rows[1]["error"]) < 500
    assert "\n" not in rows[1]["error"]


def test_batch_bom_crlf_same_as_plain(cli, tmp_path):
    plain = tmp_path / "plain.csv"
    plain.write_text("id,smiles\nr1,CCN\nr2,OC(=O)c1ccccc1\n", encoding="utf-8")
    odd = tmp_path / "odd.csv"
    odd.write_bytes(b"\xef\xbb\xbfid,smiles\r\nr1,CCN\r\nr2,OC(=O)c1ccccc1\r\n")
    a, b = tmp_path / "a.json", tmp_path / "b.json"
    assert cli("batch", plain, "--out", a, "--quiet").exit_code == 0
    assert cli("batch", odd, "--out", b, "--quiet").exit_code == 0
    assert json.loads(a.read_text(encoding="utf-8")) == json.loads(b.read_text(encoding="utf-8"))


def test_batch_leaves_the_csv_field_limit_alone(tmp_path):
    from saltplan.batch.run import run_batch

    csv.field_size_limit(131072)
    src = tmp_path / "in.csv"
    src.write_text("id,smiles\nr1,CCN\n", encoding="utf-8")
    run_batch(str(src), str(tmp_path / "out.csv"))
    try:
        assert csv.field_size_limit() == 131072
    finally:
        csv.field_size_limit(131072)
