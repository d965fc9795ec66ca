"""Interruption: SIGTERM and SIGINT stop a run cleanly.

Real signals are sent to real processes. The run must stop its workers (no process left
after the parent exits), remove its temporaries (the hidden ``.NAME.part`` files), leave
nothing under a final name, print one line saying how far it got and that nothing was
written, and exit 130 (SIGINT) or 143 (SIGTERM), as a shell reports a process stopped by
that signal (128 + signal number, POSIX).
"""
from __future__ import annotations

import csv
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import psutil
import pytest
from hostile import files_under

pytestmark = pytest.mark.skipif(os.name != "posix", reason="POSIX signals")

API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base; screens with the defaults
SMILES = ["CCN(CC)CC", "CC(=O)O", "c1ccncc1", "Oc1ccccc1", "CN(C)CCc1ccc(Cl)cc1",
          "NCCc1ccccc1", "OC(=O)c1ccccc1N", "CCCCN"]
CODE = {signal.SIGINT: 130, signal.SIGTERM: 143}


def _table(path: Path, n: int) -> Path:
    with path.open("w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        for i in range(n):
            w.writerow([f"HRN-{i:05d}", SMILES[i % len(SMILES)] + "C" * (i % 5)])
    return path


def _cli(*args) -> list[str]:
    """The installed ``saltplan`` command (beside this interpreter), as a user runs it."""
    script = Path(sys.executable).with_name("saltplan")
    if script.exists():
        return [str(script), *[str(a) for a in args]]
    return [sys.executable, "-c", "from saltplan.cli import main; main(prog_name='saltplan')",
            *[str(a) for a in args]]


def _wait_for_rows(folder: Path, proc, timeout=60.0) -> None:
    """Wait until the hidden output temporary exists and holds rows (the run has started)."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        assert proc.poll() is None, proc.communicate()
        parts = [p for p in folder.glob(".*.part") if p.is_file()]
        if parts and any(p.stat().st_size > 0 for p in parts):
            return
        time.sleep(0.02)
    raise AssertionError("the run did not start writing rows")


def _workers(pid: int) -> list[psutil.Process]:
    return psutil.Process(pid).children(recursive=True)


def _assert_gone(procs: list[psutil.Process]) -> None:
    end = time.monotonic() + 10
    alive = procs
    while time.monotonic() < end:
        alive = [p for p in procs if p.is_running() and p.status() != psutil.STATUS_ZOMBIE]
        if not alive:
            return
        time.sleep(0.05)
    raise AssertionError(f"orphaned worker processes: {[p.pid for p in alive]}")


def _assert_one_line(err: str, signame: str) -> str:
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert "Traceback" not in err, err
    assert len(lines) == 1, lines
    assert signame in lines[0] and "nothing was written" in lines[0], lines[0]
    return lines[0]


# ------------------------------------------------------------------ batch, real CLI
@pytest.mark.parametrize("sig", [signal.SIGTERM, signal.SIGINT], ids=["SIGTERM", "SIGINT"])
def test_batch_jobs_2_stops_cleanly_on_signal(tmp_path, sig):
    src = _table(tmp_path / "in.csv", 1500)
    out = tmp_path / "out"
    out.mkdir()
    proc = subprocess.Popen(_cli("batch", src, "--out", out / "t.csv", "--summary",
                                 out / "s.html", "--jobs", 2, "--chunk-size", 10, "--quiet"),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    _wait_for_rows(out, proc)
    workers = _workers(proc.pid)
    assert len(workers) >= 1
    proc.send_signal(sig)
    stdout, err = proc.communicate(timeout=60)
    assert proc.returncode == CODE[sig], (proc.returncode, err)
    line = _assert_one_line(err, sig.name)
    done = int(line.split(" after ")[1].split()[0].replace(",", ""))
    assert 0 < done < 1500, line
    assert files_under(out) == []            # no table, no summary, no temporary
    _assert_gone(workers)


def test_parent_killed_by_sigkill_takes_its_workers_along(tmp_path):
    src = _table(tmp_path / "in.csv", 1500)
    proc = subprocess.Popen(_cli("batch", src, "--out", tmp_path / "t.csv", "--jobs", 2,
                                 "--chunk-size", 10, "--quiet"),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    _wait_for_rows(tmp_path, proc)
    workers = _workers(proc.pid)
    assert workers
    proc.kill()
    proc.communicate(timeout=30)
    _assert_gone(workers)            # Linux: the workers follow their parent (PDEATHSIG)


# ------------------------------------------------------------------ batch, library
_LIBRARY_RUN = textwrap.dedent("""
    import os, signal, sys, threading
    from saltplan.batch import run_batch
    from saltplan._io import stop_on_signals
    from saltplan.errors import Interrupted

    src, out, mode = sys.argv[1], sys.argv[2], sys.argv[3]
    def progress(done, total):
        if done >= 40 and not getattr(progress, "sent", False):
            progress.sent = True
            print("workers", *[p for p in os.popen(f"pgrep -P {os.getpid()}").read().split()],
                  flush=True)
            os.kill(os.getpid(), signal.SIGINT if mode == "sigint" else signal.SIGTERM)
    try:
        if mode == "sigint":        # no handler installed: Python's KeyboardInterrupt
            run_batch(src, out, jobs=2, chunk_size=10, progress=progress)
        else:                       # a script asking for SIGTERM to unwind the same way
            with stop_on_signals():
                run_batch(src, out, jobs=2, chunk_size=10, progress=progress)
    except Interrupted as exc:
        print("interrupted", exc.exit_code, exc.one_line(), flush=True)
    except KeyboardInterrupt:
        print("keyboard interrupt", flush=True)
    else:
        print("finished", flush=True)
""")


@pytest.mark.parametrize("mode", ["sigint", "sigterm"])
def test_library_run_batch_unwinds_on_signal(tmp_path, mode):
    src = _table(tmp_path / "in.csv", 600)
    out = tmp_path / "out"
    out.mkdir()
    res = subprocess.run([sys.executable, "-c", _LIBRARY_RUN, src, out / "t.csv", mode],
                         capture_output=True, text=True, timeout=120)
    assert res.returncode == 0, res.stderr
    lines = res.stdout.splitlines()
    workers = [psutil.Process(int(p)) for p in lines[0].split()[1:] if psutil.pid_exists(int(p))]
    if mode == "sigint":
        assert lines[-1] == "keyboard interrupt", res.stdout
    else:
        assert lines[-1].startswith("interrupted 143 interrupted by SIGTERM after "), res.stdout
        assert "nothing was written" in lines[-1]
    assert files_under(out) == []
    _assert_gone(workers)


# ------------------------------------------------------------------ screen, select, demo
_SIGNAL_AT = textwrap.dedent("""
    import importlib, os, signal, sys
    module, attr, signame = sys.argv[1], sys.argv[2], sys.argv[3]
    mod = importlib.import_module(module)
    original = getattr(mod, attr)
    def patched(*a, **k):           # a real signal, sent while the outputs are rendered
        os.kill(os.getpid(), getattr(signal, signame))
        return original(*a, **k)
    setattr(mod, attr, patched)
    from saltplan.cli import main
    main(sys.argv[4:], prog_name="saltplan")
""")


@pytest.fixture(scope="module")
def screened(tmp_path_factory):
    from saltplan.demo.results import make_demo_results
    from saltplan.screen.output import screen_structure

    tmp = tmp_path_factory.mktemp("screened")
    design, _ = screen_structure(API, 500, out_dir=tmp / "design")
    results = tmp / "results.csv"
    results.write_text(make_demo_results(design.to_dict()), encoding="utf-8")
    return tmp / "design", results, _table(tmp / "in.csv", 20)


CASES = {
    "screen": ("saltplan.screen.output", "results_template_csv",
               lambda t, s: ["screen", API, "--api-budget-mg", 500, "--out", t]),
    "select": ("saltplan.reports.decision", "render_decision_json",
               lambda t, s: ["select", s[0], s[1], "--out", t]),
    "demo": ("saltplan.demo", "_write_environment", lambda t, s: ["demo", "--out", t]),
    "batch": ("saltplan.reports.portfolio", "render_summary",
              lambda t, s: ["batch", s[2], "--out", t / "t.csv", "--summary", t / "s.html",
                            "--quiet"]),
}


@pytest.mark.parametrize("sig", ["SIGTERM", "SIGINT"])
@pytest.mark.parametrize("command", [pytest.param(c, marks=pytest.mark.slow) if c == "demo"
                                     else c for c in sorted(CASES)])   # demo: ~5 s
def test_commands_stop_cleanly_on_signal(tmp_path, screened, command, sig):
    module, attr, build = CASES[command]
    out = tmp_path / "out"
    args = build(out, screened)
    res = subprocess.run([sys.executable, "-c", _SIGNAL_AT, module, attr, sig, *map(str, args)],
                         capture_output=True, text=True, timeout=300)
    assert res.returncode == CODE[getattr(signal, sig)], (res.returncode, res.stderr[-800:])
    _assert_one_line(res.stderr, sig)
    assert files_under(out) == [], files_under(out)
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]  # no staging folder


def test_signal_while_outputs_are_renamed_waits_for_the_set(tmp_path, cli, monkeypatch):
    """A signal arriving while the files are being put in place is acted on once all are
    there: the set is complete and the line says so."""
    import saltplan._io as io_

    original = io_._publish
    sent = []

    def publish(tmp, path):
        if not sent:
            sent.append(path)
            os.kill(os.getpid(), signal.SIGTERM)
        return original(tmp, path)

    monkeypatch.setattr(io_, "_publish", publish)
    res = cli("screen", API, "--api-budget-mg", 500, "--out", tmp_path / "out")
    assert res.exit_code == 143
    assert "already written (4 files)" in res.stderr, res.stderr
    assert sorted(files_under(tmp_path / "out")) == sorted(
        ["design.json", "plate.csv", "results-template.csv", "worksheet.csv"])


# ------------------------------------------------------------------ Dask engine
@pytest.mark.slow
def test_dask_engine_cancels_its_work_on_sigterm(tmp_path):
    distributed = pytest.importorskip("distributed")
    src = _table(tmp_path / "in.csv", 3000)
    out = tmp_path / "out"
    out.mkdir()
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False,
                                  protocol="tcp://", host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        proc = subprocess.Popen(_cli("batch", src, "--out", out / "t.csv", "--engine", "dask",
                                     "--scheduler", cluster.scheduler_address, "--chunk-size",
                                     10, "--quiet"),
                                stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        _wait_for_rows(out, proc, timeout=120)
        proc.send_signal(signal.SIGTERM)
        _, err = proc.communicate(timeout=60)
        assert proc.returncode == 143, err
        _assert_one_line(err, "SIGTERM")
        assert files_under(out) == []
        end = time.monotonic() + 20          # the scheduler forgets the cancelled chunks
        while cluster.scheduler.tasks and time.monotonic() < end:
            time.sleep(0.1)
        assert not cluster.scheduler.tasks, len(cluster.scheduler.tasks)
