"""``saltplan ledger ...`` and ``--record``/``--ledger`` of the planning commands, through
the CLI (click's CliRunner), on SQLite and PostgreSQL."""
from __future__ import annotations

import json
import shutil

import pytest
from ledger_support import DESIGN, ENGINES, RESULTS, ROOT, fresh_url

from saltplan.ledger import ENV_VAR, open_ledger

SELECTION = ROOT / "reports" / "HRN-101" / "decision" / "selection.json"
PLAN = ROOT / "reports" / "HRN-101" / "plan.json"
#: the demo's HRN-101 (tertiary amine); a small stand-in keeps the planning tests fast
SMILES = "CN(C)CCc1ccc(Cl)cc1"


@pytest.fixture(params=ENGINES)
def url(request, tmp_path, monkeypatch):
    monkeypatch.delenv(ENV_VAR, raising=False)
    u, cleanup = fresh_url(request.param, tmp_path)
    yield u
    cleanup()


@pytest.fixture
def run(cli):
    def go(*args, code=0):
        res = cli(*args)
        assert res.exit_code == code, (res.output, res.stderr if hasattr(res, "stderr") else "")
        return res
    return go


def _design_dir(tmp_path):
    d = tmp_path / "screen"
    d.mkdir()
    shutil.copy(DESIGN, d / "design.json")
    return d


# --------------------------------------------------------------------------- record + read
def test_record_every_step_then_history_show_outcomes_verify(run, url, tmp_path):
    d = _design_dir(tmp_path)
    r = run("ledger", "record", "plan", PLAN, "--ledger", url, "--author", "A. Chemist",
            "--json")
    plan_ref = json.loads(r.stdout)
    assert plan_ref["kind"] == "plan" and plan_ref["uid"].startswith("pln-")
    r = run("ledger", "record", "screen", d, "--ledger", url, "--json")
    assert json.loads(r.stdout)["kind"] == "screen"
    r = run("ledger", "record", "results", d, RESULTS, "--ledger", url, "--json")
    res = json.loads(r.stdout)
    assert res["kind"] == "results" and res["revision"] == 1
    r = run("ledger", "record", "selection", SELECTION, "--ledger", url, "--json")
    sel = json.loads(r.stdout)
    assert sel["kind"] == "selection"
    r = run("ledger", "record", "decision", sel["uid"], "--chosen", "hydrochloride/A",
            "--rationale", "crystalline, non-hygroscopic (invented demo data)",
            "--ledger", url)
    assert "decision dec-" in r.stdout

    # recording the same plan again stores nothing new
    r = run("ledger", "record", "plan", PLAN, "--ledger", url)
    assert "already in" in r.stdout

    r = run("ledger", "history", "HRN-101", "--ledger", url)
    kinds = [line.split()[1] for line in r.stdout.splitlines()
             if line[:4].isdigit() and "T" in line.split()[0]]
    assert kinds == ["plan", "screen", "results", "selection", "decision"]
    assert "programme HRN" in r.stdout
    hist = json.loads(run("ledger", "history", "HRN-101", "--ledger", url, "--json").stdout)
    assert {x["author"] for x in hist["records"] if x["kind"] == "plan"} == {"A. Chemist"}

    shown = json.loads(run("ledger", "show", res["uid"], "--ledger", url).stdout)
    assert shown["kind"] == "results" and shown["current_observations"]

    # HRN-101's tertiary amine: the invented results give a crystalline 1:1 hydrochloride
    site = next(s for s in json.loads(DESIGN.read_text())["plan"]["sites"]
                if s["group_id"] == "amine_tertiary")["pka"]
    rng = f"{site - 1.5:.2f}:{site + 1.5:.2f}"
    r = run("ledger", "outcomes", "hydrochloride", "--site-class", "amine_tertiary",
            "--pka", rng, "--ledger", url)
    row = next(line for line in r.stdout.splitlines() if line.startswith("HRN"))
    assert row.split()[:3] == ["HRN", "1", "1"] and "HRN-101" in row
    out = json.loads(run("ledger", "outcomes", "hydrochloride", "--pka", "20:", "--ledger",
                         url, "--json").stdout)
    assert out["screens"] == 0 and out["by_programme"] == []

    r = run("ledger", "verify", "--ledger", url)
    assert r.stdout.startswith("ok: ") and "every checksum matches" in r.stdout


def test_export_import_through_the_cli_merges_without_duplicates(run, url, tmp_path):
    d = _design_dir(tmp_path)
    run("ledger", "record", "results", d, RESULTS, "--ledger", url)
    out = tmp_path / "a.jsonl"
    r = run("ledger", "export", out, "--ledger", url)
    assert out.exists() and "records from" in r.stdout
    other = tmp_path / "b.sqlite"
    first = json.loads(run("ledger", "import", out, "--ledger", other, "--json").stdout)
    again = json.loads(run("ledger", "import", out, "--ledger", other, "--json").stdout)
    assert first["added"] > 0 and first["skipped"] == 0
    assert again == dict(first, added=0, skipped=first["added"])
    assert out.read_text() == _export(run, other, tmp_path)
    # and back into the first ledger: nothing new
    back = json.loads(run("ledger", "import", out, "--ledger", url, "--json").stdout)
    assert back["added"] == 0


def _export(run, ledger, tmp_path):
    p = tmp_path / "again.jsonl"
    run("ledger", "export", p, "--ledger", ledger)
    return p.read_text()


def test_verify_exits_1_naming_the_edited_record(run, tmp_path):
    import sqlalchemy as sa

    from saltplan.ledger.models import Record

    path = tmp_path / "l.sqlite"
    ref = json.loads(run("ledger", "record", "plan", PLAN, "--ledger", path, "--json").stdout)
    with open_ledger(path) as led, led.engine.begin() as conn:
        conn.execute(sa.update(Record).where(Record.uid == ref["uid"])
                     .values(author="someone else"))
    r = run("ledger", "verify", "--ledger", path, code=1)
    assert f"mismatch  records {ref['uid']}" in r.stdout
    assert "1 of " in r.stderr and "do not match" in r.stderr


# --------------------------------------------------------------------------- bad input
@pytest.mark.parametrize("content, expect", [
    ("not json at all", "not JSON"),
    ('{"name": "x"}', "not a saltplan plan (needs the fields parent, candidates, provenance)"),
])
def test_a_bad_plan_file_is_one_line_naming_the_file(run, tmp_path, content, expect):
    bad = tmp_path / "plan.json"
    bad.write_text(content)
    r = run("ledger", "record", "plan", bad, "--ledger", tmp_path / "l.sqlite", code=1)
    err = r.stderr.strip()
    assert err.count("\n") == 0 and str(bad) in err and expect in err
    assert "saltplan plan --out" in err and "Traceback" not in r.output


def test_a_damaged_export_imports_nothing(run, tmp_path):
    path = tmp_path / "l.sqlite"
    run("ledger", "record", "plan", PLAN, "--ledger", path)
    out = tmp_path / "x.jsonl"
    run("ledger", "export", out, "--ledger", path)
    lines = out.read_text().splitlines()
    row = json.loads(lines[0])
    row["programme"] = "XYZ"
    out.write_text("\n".join([json.dumps(row)] + lines[1:]) + "\n")
    fresh = tmp_path / "fresh.sqlite"
    r = run("ledger", "import", out, "--ledger", fresh, code=1)
    assert f"{out}, row 1: checksum does not match" in r.stderr
    with open_ledger(fresh) as led:
        assert led.counts()["compound"] == 0


def test_reading_commands_do_not_create_a_ledger(run, tmp_path):
    missing = tmp_path / "none.sqlite"
    for args in (("history", "HRN-101"), ("show", "pln-x"), ("outcomes", "mesylate"),
                 ("verify",), ("export", tmp_path / "o.jsonl")):
        r = run("ledger", *args, "--ledger", missing, code=1)
        assert f"{missing}: no ledger here" in r.stderr
    assert not missing.exists()


def test_bad_pka_range_is_a_usage_error(run, tmp_path):
    r = run("ledger", "outcomes", "mesylate", "--pka", "9:7", "--ledger",
            tmp_path / "l.sqlite", code=2)
    assert "is not LOW:HIGH" in r.stderr


def test_unknown_uid_and_compound(run, url):
    run("ledger", "record", "plan", PLAN, "--ledger", url)
    r = run("ledger", "show", "pln-nothing", "--ledger", url, code=1)
    assert "no record 'pln-nothing'" in r.stderr
    r = run("ledger", "history", "HRN-999", "--ledger", url, code=1)
    assert "no compound 'HRN-999'" in r.stderr


def test_a_selection_before_its_results_says_what_to_do(run, tmp_path):
    r = run("ledger", "record", "selection", SELECTION.parent, "--ledger",
            tmp_path / "l.sqlite", code=1)
    assert "record the results first" in r.stderr


def test_ledger_from_the_environment_variable(run, tmp_path, monkeypatch):
    path = tmp_path / "env.sqlite"
    monkeypatch.setenv(ENV_VAR, str(path))
    run("ledger", "record", "plan", PLAN)
    with open_ledger(path) as led:
        assert led.counts()["plan"] == 1


# --------------------------------------------------------------------------- --record
def test_plan_record_and_history(run, url, tmp_path):
    r = run("plan", SMILES, "--name", "HRN-190", "--record", "--ledger", url,
            "--author", "B. Chemist")
    assert "plan pln-" in r.stderr and "recorded in" in r.stderr
    hist = json.loads(run("ledger", "history", "HRN-190", "--ledger", url, "--json").stdout)
    assert [x["kind"] for x in hist["records"]] == ["plan"]
    assert hist["records"][0]["author"] == "B. Chemist"


def test_screen_and_select_record(run, url, tmp_path):
    d = _design_dir(tmp_path)
    out = tmp_path / "decision"
    r = run("select", d, RESULTS, "--out", out, "--record", "--ledger", url)
    assert "results res-" in r.stderr and "selection sel-" in r.stderr
    with open_ledger(url) as led:
        c = led.counts()
        assert (c["plan"], c["screen"], c["results"], c["selection"]) == (1, 1, 1, 1)
    sdir = tmp_path / "s2"
    r = run("screen", SMILES, "--name", "HRN-191", "--api-budget-mg", "400", "--out", sdir,
            "--record", "--ledger", url)
    assert "screen scr-" in r.stderr
    with open_ledger(url) as led:
        assert [x["kind"] for x in led.history("HRN-191")["records"]] == ["plan", "screen"]


def test_batch_record_stores_every_planned_row(run, url, tmp_path):
    src = tmp_path / "in.csv"
    src.write_text("id,smiles\nHRN-192,CN(C)CCc1ccccc1\nHRN-193,not-a-smiles\n"
                   "HRN-194,OC(=O)c1ccccc1\n")
    r = run("batch", src, "--out", tmp_path / "o.csv", "--record", "--ledger", url, code=1)
    assert "2 plans recorded" in r.stderr
    with open_ledger(url) as led:
        assert led.counts()["plan"] == 2
