"""Hostile YAML at every YAML-taking option: counterion libraries, ranking weights,
selection thresholds, solvent libraries.

Loading is safe (no Python object construction; PyYAML docs, "Loading YAML": only
``safe_load``-style loaders are safe on untrusted input), duplicate keys are refused,
alias bombs ("billion laughs", the XML entity-expansion attack carried over to YAML
aliases) and deep nesting are refused before they can hang, exhaust memory or crash the
interpreter. Every file here is generated in tmp_path; all contents are invented.
"""
from __future__ import annotations

import time

import pytest
from hostile import assert_refused, files_under

API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base; screens with the defaults


def _bomb(levels: int = 9, key_prefix: str = "x") -> str:
    lines = [f"{key_prefix}0: &a0 [lol, lol, lol, lol, lol, lol, lol, lol, lol]"]
    for i in range(1, levels):
        lines.append(f"{key_prefix}{i}: &a{i} [" + ", ".join([f"*a{i - 1}"] * 9) + "]")
    return "\n".join(lines) + "\n"


def _nested_bomb_under(key: str) -> str:
    """The alias bomb as the value of an allowed key (so no 'unknown key' check stops it)."""
    lines = [f"{key}:", "  - &a0 [lol, lol, lol, lol, lol, lol, lol, lol, lol]"]
    for i in range(1, 9):
        lines.append(f"  - &a{i} [" + ", ".join([f"*a{i - 1}"] * 9) + "]")
    return "\n".join(lines) + "\n"


GOOD_ENTRY = """\
family: test
counterions:
  - id: {id}
    name: {name}
"""

# name -> (file bytes, words the error must contain). Applies to every YAML option.
CASES: dict[str, tuple[bytes, tuple[str, ...]]] = {
    "binary": (bytes(range(256)) * 4, ("utf-8",)),
    "latin1": ("notes: caf\xe9\n".encode("latin-1"), ("utf-8",)),
    "utf16": ("a: 1\n".encode("utf-16"), ("utf-8",)),
    "python_object_apply": (
        b'x: !!python/object/apply:os.system ["echo hacked > HACKED"]\n', ("constructor",)),
    "python_object_new": (b"x: !!python/object/new:os.system [echo hacked]\n", ("constructor",)),
    "python_name": (b"x: !!python/name:os.system\n", ("constructor",)),
    "python_module": (b"x: !!python/module:os\n", ("constructor",)),
    "custom_tag": (b"x: !shell rm -rf /\n", ("constructor",)),
    "alias_bomb_top": (_bomb().encode(), ("aliases expand",)),
    "alias_bomb_in_counterions": (_nested_bomb_under("counterions").encode(), ("aliases expand",)),
    "alias_bomb_in_solvents": (_nested_bomb_under("solvents").encode(), ("aliases expand",)),
    "alias_bomb_in_weights": (_nested_bomb_under("weights").encode(), ("aliases expand",)),
    "alias_bomb_in_thresholds": (_nested_bomb_under("thresholds").encode(), ("aliases expand",)),
    "recursive_alias": (b"counterions: &a [*a]\n", ("recursive",)),
    "deep_flow_nesting": (("x: " + "[" * 100_000 + "]" * 100_000 + "\n").encode(), ("nested",)),
    "deep_block_nesting": (("x:\n" + "".join(" " * (i + 1) + "x:\n" for i in range(3000))).encode(),
                           ("nested",)),
    "duplicate_key": (b"counterions: []\ncounterions: []\n", ("duplicate key",)),
    "unterminated_quote": (b'x: "abc\n', ("not valid yaml",)),
    "tab_indent": (b"x:\n\t- 1\n", ("not valid yaml",)),
    "list_top_level": (b"- 1\n- 2\n", ("mapping",)),
    "scalar_top_level": (b"hello\n", ("mapping",)),
    "null_bytes_text": (b"x: 1\x00\n", ("control characters",)),
    "huge_unknown_key_2mb": (("zz_unknown: " + "x" * 2_000_000 + "\n").encode(), ("unknown",)),
}

# the option each command takes a YAML file with; {f} is the file, {d} a design dir, {r} results
TARGETS = {
    "library_check": ["library", "check", "{f}"],
    "library_list": ["library", "list", "--library", "{f}"],
    "plan_library": ["plan", API, "--library", "{f}"],
    "plan_weights": ["plan", API, "--weights", "{f}"],
    "screen_library": ["screen", API, "--api-budget-mg", "500", "--out", "{o}", "--library", "{f}"],
    "screen_solvents": ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                        "--solvent-library", "{f}"],
    "solvents_list": ["solvents", "list", "--library", "{f}"],
    "select_thresholds": ["select", "{d}", "{r}", "--out", "{o}", "--thresholds", "{f}"],
}


@pytest.fixture(scope="module")
def screened(tmp_path_factory):
    """A real design folder and (invented) results for it, made by the tool itself."""
    from click.testing import CliRunner

    from saltplan.cli import main
    from saltplan.demo.results import make_demo_results

    base = tmp_path_factory.mktemp("screened")
    design_dir = base / "design"
    res = CliRunner().invoke(main, ["screen", API, "--api-budget-mg", "500", "--out",
                                    str(design_dir)], catch_exceptions=False)
    assert res.exit_code == 0, res.stderr
    import json

    design = json.loads((design_dir / "design.json").read_text(encoding="utf-8"))
    results = base / "results.csv"
    results.write_text(make_demo_results(design), encoding="utf-8")
    return design_dir, results


def _args(target, f, tmp_path, screened):
    d, r = screened
    return [a.format(f=f, o=tmp_path / "out", d=d, r=r) for a in TARGETS[target]]


def _expected_words(case, target):
    words = CASES[case][1]
    # each loader phrases structural problems its own way; the file name is always named
    if case in ("list_top_level", "scalar_top_level", "huge_unknown_key_2mb",
                "duplicate_key") and target in ("select_thresholds", "plan_weights",
                                                "screen_solvents", "solvents_list"):
        return ()
    return words


@pytest.mark.parametrize("target", sorted(TARGETS))
@pytest.mark.parametrize("case", sorted(CASES))
def test_hostile_yaml_refused(cli, tmp_path, monkeypatch, screened, case, target, hang_bound):
    monkeypatch.chdir(tmp_path)
    path = tmp_path / f"{case}.yaml"
    path.write_bytes(CASES[case][0])
    start = time.perf_counter()
    result = cli(*_args(target, path, tmp_path, screened))
    elapsed = time.perf_counter() - start
    line = assert_refused(result, code=1, mentions=_expected_words(case, target))
    assert path.name in line                      # names the file
    assert not (tmp_path / "HACKED").exists()     # no code ran
    assert files_under(tmp_path) == [path.name]   # nothing written
    assert elapsed < hang_bound(20)                # a bound against hangs, not a benchmark


@pytest.mark.parametrize("target", sorted(TARGETS))
def test_directory_or_missing_file_is_refused(cli, tmp_path, screened, target):
    folder = tmp_path / "folder.yaml"
    folder.mkdir()
    for f, code in ((folder, None), (tmp_path / "missing.yaml", 2)):
        result = cli(*_args(target, f, tmp_path, screened))
        # click refuses a missing file or a folder where a file is expected (usage, 2);
        # library paths accept folders of YAML files and refuse an empty one (1)
        folders_ok = target in ("library_check", "library_list", "screen_library")
        expected = code or (1 if folders_ok else 2)
        assert_refused(result, code=expected)
        assert not (tmp_path / "out").exists()


def test_bomb_refused_without_expanding(tmp_path, hang_bound):
    from saltplan._data import load_yaml_text
    from saltplan.errors import ParameterError

    start = time.perf_counter()
    with pytest.raises(ParameterError, match="aliases expand"):
        load_yaml_text(_bomb(12), "bomb.yaml")   # 9^12 nodes if expanded
    assert time.perf_counter() - start < hang_bound(2)


def test_ordinary_aliases_still_work():
    from saltplan._data import load_yaml_text

    data = load_yaml_text("a: &x [1, 2]\nb: *x\nc: {d: *x}\n", "ok.yaml")
    assert data == {"a": [1, 2], "b": [1, 2], "c": {"d": [1, 2]}}


def test_brackets_inside_quotes_and_comments_are_not_nesting():
    from saltplan._data import load_yaml_text

    text = 'a: "' + "[" * 500 + '"\nb: \'' + "{" * 500 + "'  # " + "[" * 500 + "\n"
    assert load_yaml_text(text, "q.yaml")["a"] == "[" * 500


# ----------------------------------------------------------------- library entries
LIBRARY_CASES = {
    # name -> (YAML text, words in the error)
    "wrong_type_pka": ("counterions:\n  - id: x_acid\n    pka: high\n", ("pka",)),
    "pka_out_of_range": ("counterions:\n  - id: x_acid\n    pka: [99]\n", ("pka",)),
    "entries_not_list": ("counterions: {a: 1}\n", ("counterions",)),
    "entry_is_string": ("counterions: [hello]\n", ("mapping",)),
    "unknown_top_key": ("family: t\nbogus: 1\ncounterions: []\n", ("bogus",)),
    "id_is_number": ("counterions:\n  - id: 12\n", ("id",)),
    "id_with_html": ("counterions:\n  - id: '<b>x</b>'\n", ("id",)),
    "empty_entries": ("counterions: []\n", ("non-empty",)),
}


@pytest.mark.parametrize("case", sorted(LIBRARY_CASES))
def test_broken_library_entries_refused(cli, tmp_path, case):
    text, words = LIBRARY_CASES[case]
    path = tmp_path / f"{case}.yaml"
    path.write_text(text, encoding="utf-8")
    for args in (["library", "check", path], ["plan", API, "--library", path]):
        assert_refused(cli(*args), code=1, mentions=words)


def test_duplicate_ids_across_entries_refused(cli, tmp_path, fixtures_dir):
    fixture = fixtures_dir / "library_broken_duplicate_id.yaml"
    assert_refused(cli("library", "check", fixture), code=1, mentions=("duplicate",))


def test_weights_wrong_types(cli, tmp_path):
    for text in ("weights: 5\n", "weights: {tier: high}\n", "weights: {no_such_term: 1}\n",
                 "thresholds: [1, 2]\n"):
        path = tmp_path / "w.yaml"
        path.write_text(text, encoding="utf-8")
        assert_refused(cli("plan", API, "--weights", path), code=1)


def test_thresholds_wrong_types(cli, tmp_path, screened):
    d, r = screened
    for text in ("thresholds: {melting_onset_min_c: warm}\n", "thresholds: {bogus: 1}\n",
                 "thresholds: [1]\n", "thresholds: {melting_onset_min_c: .nan}\n"):
        path = tmp_path / "t.yaml"
        path.write_text(text, encoding="utf-8")
        out = tmp_path / "out"
        assert_refused(cli("select", d, r, "--out", out, "--thresholds", path), code=1)
        assert not out.exists()
