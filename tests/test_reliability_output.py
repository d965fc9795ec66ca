"""Nothing partial on failure: a run that fails late (while rendering, or while the files
are being put in place) leaves no output file behind, and no hidden temporary either.

Failures are injected with monkeypatch into the last step before writing; the CLI must
report them (as an internal error: they stand for bugs) and leave the folder untouched.
"""
from __future__ import annotations

import json

import pytest
from hostile import files_under

API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base; screens with the defaults


class Boom(RuntimeError):
    pass


def _boom(*_a, **_k):
    raise Boom("injected failure")


def _assert_failed_cleanly(result):
    assert result.exit_code == 1, result.stdout[-300:]
    assert "Traceback" not in result.stderr
    assert "injected failure" in result.stderr and "internal error" in result.stderr


@pytest.fixture
def screened(tmp_path):
    from saltplan.demo.results import make_demo_results
    from saltplan.screen.output import screen_structure

    design, _ = screen_structure(API, 500, out_dir=tmp_path / "design")
    results = tmp_path / "results.csv"
    results.write_text(make_demo_results(design.to_dict()), encoding="utf-8")
    return tmp_path / "design", results


# (command builder, module attribute to break) — each is the last rendering step
LATE_FAILURES = {
    "plan_markdown": (lambda t, s: ["plan", API, "--out", t / "out"], "saltplan.reports._markdown"),
    "plan_json": (lambda t, s: ["plan", API, "--out", t / "out"],
                  "saltplan.reports.render_plan_json"),
    "screen_template": (lambda t, s: ["screen", API, "--api-budget-mg", 500, "--out", t / "out"],
                        "saltplan.screen.output.results_template_csv"),
    "select_json": (lambda t, s: ["select", s[0], s[1], "--out", t / "out"],
                    "saltplan.reports.decision.render_decision_json"),
    "select_markdown": (lambda t, s: ["select", s[0], s[1], "--out", t / "out"],
                        "saltplan.reports.decision.render_decision_markdown"),
    "batch_summary": (lambda t, s: ["batch", t / "in.csv", "--out", t / "out" / "table.csv",
                                    "--summary", t / "out" / "summary.html", "--quiet"],
                      "saltplan.reports.portfolio.render_summary"),
    "sites_svg": (lambda t, s: ["sites", API, "--svg", t / "out" / "sites.svg"],
                  "saltplan.ionization.report.draw_sites_svg"),
}


@pytest.mark.parametrize("case", sorted(LATE_FAILURES))
def test_late_render_failure_leaves_nothing(cli, tmp_path, monkeypatch, screened, case):
    build, target = LATE_FAILURES[case]
    (tmp_path / "in.csv").write_text("id,smiles\nr1,CCN\nr2,CCO\n", encoding="utf-8")
    module, _, attr = target.rpartition(".")
    monkeypatch.setattr(module + "." + attr, _boom)
    _assert_failed_cleanly(cli(*build(tmp_path, screened)))
    assert files_under(tmp_path / "out") == []


@pytest.mark.parametrize("command", ["plan", "screen", "select"])
def test_failure_while_moving_files_into_place(cli, tmp_path, monkeypatch, screened, command):
    """The second rename fails: the first file of the set is taken back."""
    import saltplan._io as io_mod

    real = io_mod._publish
    calls = []

    def flaky(tmp, path):
        calls.append(path)
        if len(calls) == 2:
            raise Boom("injected failure")
        real(tmp, path)

    monkeypatch.setattr(io_mod, "_publish", flaky)
    args = {"plan": ["plan", API, "--out", tmp_path / "out"],
            "screen": ["screen", API, "--api-budget-mg", 500, "--out", tmp_path / "out"],
            "select": ["select", screened[0], screened[1], "--out", tmp_path / "out"]}[command]
    _assert_failed_cleanly(cli(*args))
    assert len(calls) == 2
    assert files_under(tmp_path / "out") == []


def test_failure_keeps_earlier_outputs_intact(cli, tmp_path, monkeypatch):
    """A failing re-run leaves the previous complete run in place, byte for byte."""
    out = tmp_path / "out"
    assert cli("plan", API, "--out", out).exit_code == 0
    before = {p: (out / p).read_bytes() for p in files_under(out)}
    monkeypatch.setattr("saltplan.reports._markdown", _boom)
    _assert_failed_cleanly(cli("plan", API, "--name", "changed", "--out", out))
    assert {p: (out / p).read_bytes() for p in files_under(out)} == before


def test_demo_failure_leaves_nothing(cli, tmp_path, monkeypatch):
    monkeypatch.setattr("saltplan.demo._select", _boom)   # the last step of the demo
    _assert_failed_cleanly(cli("demo", "--out", tmp_path / "reports"))
    assert files_under(tmp_path) == []                     # no staging folder left either


def test_output_path_is_a_file(cli, tmp_path, screened):
    blocker = tmp_path / "blocker"
    blocker.write_text("x", encoding="utf-8")
    for args in (["plan", API, "--out", blocker / "sub"],
                 ["screen", API, "--api-budget-mg", 500, "--out", blocker / "sub"],
                 ["select", screened[0], screened[1], "--out", blocker / "sub"],
                 ["sites", API, "--svg", blocker / "sub" / "x.svg"],
                 ["demo", "--out", blocker]):
        result = cli(*args)
        assert result.exit_code in (1, 2), args
        assert "Traceback" not in result.stderr and "internal error" not in result.stderr, args
    assert blocker.read_text(encoding="utf-8") == "x"
    assert files_under(tmp_path) == ["blocker"] + [p for p in files_under(tmp_path)
                                                   if p.startswith("design") or p == "results.csv"]


def test_successful_runs_leave_no_temporaries(cli, tmp_path, screened):
    out = tmp_path / "out"
    assert cli("plan", API, "--out", out / "plan").exit_code == 0
    assert cli("screen", API, "--api-budget-mg", 500, "--out", out / "screen").exit_code == 0
    assert cli("select", screened[0], screened[1], "--out", out / "select").exit_code == 0
    names = files_under(out)
    assert names and not [n for n in names if n.rsplit("/", 1)[-1].startswith(".")]
    assert json.loads((out / "plan" / "plan.json").read_text(encoding="utf-8"))["parent"]


def test_io_errors_name_the_path(tmp_path, monkeypatch):
    import os

    import saltplan._io as io_mod
    from saltplan.errors import InputFileError, OutputFileError

    blocker = tmp_path / "blocker"
    blocker.write_text("x", encoding="utf-8")
    with pytest.raises(OutputFileError, match="blocker"):
        io_mod.write_text_atomic(blocker / "a.txt", "text")
    with pytest.raises(InputFileError, match="not a folder"):
        out = io_mod.OutputSet(blocker)
        out.add("a.txt", "x")
        out.commit()

    # a write error while staging (disk full) removes every temporary staged so far
    real_fdopen = os.fdopen
    calls = []

    def full_disk(fd, *a, **k):
        calls.append(fd)
        if len(calls) == 2:
            os.close(fd)
            raise OSError(28, "No space left on device")
        return real_fdopen(fd, *a, **k)

    monkeypatch.setattr(io_mod.os, "fdopen", full_disk)
    out = io_mod.OutputSet(tmp_path / "out")
    out.add("a.txt", "a")
    out.add("b.txt", "b")
    with pytest.raises(OutputFileError, match="No space left"):
        out.commit()
    assert files_under(tmp_path / "out") == []
    monkeypatch.undo()

    # a failing rename (e.g. target is a folder) is an OutputFileError, temporary removed
    (tmp_path / "dir_target").mkdir()
    (tmp_path / "dir_target" / "inner").mkdir()
    with pytest.raises(OutputFileError, match="inner"):
        io_mod.write_bytes_atomic(tmp_path / "dir_target" / "inner", b"x")
    assert files_under(tmp_path / "dir_target") == []


def test_demo_command_json(cli, tmp_path, monkeypatch):
    """The demo command prints its summary; the pipeline itself is checked by test_demo."""
    fake = {"programme": "Heron (invented)", "written": ["a", "b"],
            "compounds": [{"code": "HRN-1", "role": "lead", "verdict": "salt_candidates",
                           "top": ["hydrochloride 1:1"], "wells": 40}]}
    monkeypatch.setattr("saltplan.demo.run_demo", lambda out: fake)
    res = cli("demo", "--out", tmp_path / "r", "--json")
    assert res.exit_code == 0 and json.loads(res.stdout) == fake
    res = cli("demo", "--out", tmp_path / "r")
    assert res.exit_code == 0 and "HRN-1" in res.stdout and "2 files" in res.stdout
