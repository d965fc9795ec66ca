"""Resumable batch runs (``--checkpoint DIR``): a stopped run goes on where it stopped.

The property under test is the one a portfolio team relies on: a run interrupted at any
point (an exception, SIGTERM, SIGKILL of the whole command) and started again with the
same input and options writes exactly the bytes an uninterrupted run writes, plans only
the chunks that were missing, and leaves nothing behind once it completes. A checkpoint
of another run (other input, other options, damaged files) is refused with one line.
"""
from __future__ import annotations

import csv
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import psutil
import pytest

from saltplan.batch import run_batch
from saltplan.errors import ParameterError

SMILES = ["CCN(CC)CC", "CC(=O)O", "c1ccncc1", "Oc1ccccc1", "CN(C)CCc1ccc(Cl)cc1",
          "NCCc1ccccc1", "OC(=O)c1ccccc1N", "CCCCN", "not a smiles"]


def _table(path: Path, n: int) -> Path:
    """An invented portfolio: small acids and bases, one bad row in nine, repeated ids."""
    with path.open("w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles", "dose_mg"])
        for i in range(n):
            w.writerow([f"HRN-{i % (n - 3):05d}", SMILES[i % len(SMILES)] + "C" * (i % 4),
                        "" if i % 5 else "250"])
    return path


#: every SMILES the counting evaluator was asked to plan (this process only, jobs=1)
CALLS: list[str] = []


def counting_evaluator(smiles, **kwargs):
    from saltplan.plan.planner import plan_salts

    CALLS.append(smiles)
    return plan_salts(smiles, **kwargs)


class Stop(Exception):
    pass


def _stop_after(rows: int):
    def progress(done, _total):
        if done >= rows:
            raise Stop(done)
    return progress


@pytest.fixture(autouse=True)
def _fixed_clock(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1764668284")   # the summary page's date


def _reference(tmp_path, src, suffix=".csv", **opts):
    ref = tmp_path / "reference"
    ref.mkdir(exist_ok=True)
    out, summary = ref / f"t{suffix}", ref / "s.html"
    run_batch(src, out, summary=summary, evaluator=counting_evaluator, **opts)
    return out.read_bytes(), summary.read_bytes()


@pytest.mark.parametrize("suffix", [".csv", ".jsonl", ".json"])
def test_interrupted_run_resumes_to_the_same_bytes(tmp_path, suffix):
    src = _table(tmp_path / "in.csv", 47)
    ref_table, ref_summary = _reference(tmp_path, src, suffix, chunk_size=5)
    CALLS.clear()
    ck, out, summary = tmp_path / "ck", tmp_path / f"t{suffix}", tmp_path / "s.html"
    with pytest.raises(Stop):
        run_batch(src, out, summary=summary, chunk_size=5, checkpoint=ck,
                  evaluator=counting_evaluator, progress=_stop_after(20))
    assert not out.exists() and not summary.exists()          # nothing under a final name
    kept = sorted(p.name for p in ck.glob("chunk-*.json"))
    # the progress callback runs before a chunk is handed over, so chunk 4 (rows 16-20) was
    # planned but not taken: only the chunks the consumer had taken are kept
    assert kept == [f"chunk-{i:06d}.json" for i in range(3)], kept
    assert len(CALLS) == 20           # rows 1-20 planned (row 20 closes chunk 3)
    CALLS.clear()
    result = run_batch(src, out, summary=summary, chunk_size=5, checkpoint=ck,
                       evaluator=counting_evaluator)
    assert out.read_bytes() == ref_table
    assert summary.read_bytes() == ref_summary
    assert result.resumed == 15 and result.rows == 47
    assert len(CALLS) == 47 - 15      # only rows 16-47 planned again
    assert not ck.exists()                       # spent checkpoint removed (this run made it)


def test_resume_with_other_jobs_gives_the_same_bytes(tmp_path):
    src = _table(tmp_path / "in.csv", 40)
    ref_table, _ = _reference(tmp_path, src, chunk_size=4)
    ck = tmp_path / "ck"
    with pytest.raises(Stop):
        run_batch(src, tmp_path / "t.csv", chunk_size=4, checkpoint=ck, jobs=2,
                  progress=_stop_after(17))
    assert len(list(ck.glob("chunk-*.json"))) >= 3
    run_batch(src, tmp_path / "t.csv", chunk_size=4, checkpoint=ck, jobs=1)
    assert (tmp_path / "t.csv").read_bytes() == ref_table


def test_a_complete_checkpoint_plans_nothing(tmp_path):
    src = _table(tmp_path / "in.csv", 12)
    ref_table, _ = _reference(tmp_path, src, chunk_size=4)
    ck = tmp_path / "ck"
    ck.mkdir()                         # made by the user: kept (emptied) at the end
    folder = tmp_path / "a-folder"
    folder.mkdir()                     # the summary cannot be written: fails after all chunks
    with pytest.raises(ParameterError, match="output path is a directory"):
        run_batch(src, tmp_path / "t.csv", summary=folder, chunk_size=4, checkpoint=ck,
                  evaluator=counting_evaluator)
    assert len(list(ck.glob("chunk-*.json"))) == 3
    CALLS.clear()
    run_batch(src, tmp_path / "t.csv", chunk_size=4, checkpoint=ck, evaluator=counting_evaluator)
    assert CALLS == []
    assert (tmp_path / "t.csv").read_bytes() == ref_table
    assert ck.is_dir() and list(ck.iterdir()) == []


def test_a_run_that_fails_before_any_chunk_leaves_no_folder(tmp_path):
    ck = tmp_path / "ck"
    with pytest.raises(Exception, match="not found|no such|cannot"):
        run_batch(tmp_path / "missing.csv", tmp_path / "t.csv", checkpoint=ck)
    assert not ck.exists()


# ------------------------------------------------------------------ refusals
def _interrupted(tmp_path, src, **opts) -> Path:
    ck = tmp_path / "ck"
    with pytest.raises(Stop):
        run_batch(src, tmp_path / "t.csv", checkpoint=ck, progress=_stop_after(10),
                  **{"chunk_size": 4, **opts})
    assert list(ck.glob("chunk-*.json"))
    return ck


@pytest.mark.parametrize("change, expected", [
    ("input", "the input file differs"),
    ("chunk_size", "the batch options differ"),
    ("top", "the batch options differ"),
    ("library", "the counterion library files differ"),
])
def test_a_checkpoint_of_another_run_is_refused(tmp_path, change, expected):
    src = _table(tmp_path / "in.csv", 30)
    ck = _interrupted(tmp_path, src)
    opts: dict = {"chunk_size": 4}
    if change == "input":
        with src.open("a", encoding="utf-8") as fh:
            fh.write("HRN-99999,CCO,\n")
    elif change == "chunk_size":
        opts["chunk_size"] = 5
    elif change == "top":
        opts["top"] = 2
    else:
        lib = tmp_path / "extra.yaml"
        lib.write_text("counterions: []\n", encoding="utf-8")
        opts["libraries"] = [str(lib)]
    before = sorted(p.name for p in ck.iterdir())
    with pytest.raises(ParameterError, match=expected) as err:
        run_batch(src, tmp_path / "t.csv", checkpoint=ck, **opts)
    assert "\n" not in err.value.one_line() and str(ck) in err.value.one_line()
    assert sorted(p.name for p in ck.iterdir()) == before     # the checkpoint is untouched
    assert not (tmp_path / "t.csv").exists()
    assert not list(tmp_path.glob(".*.part"))                 # and no temporary is left


def test_a_damaged_chunk_is_reported_not_trusted(tmp_path):
    src = _table(tmp_path / "in.csv", 30)
    ck = _interrupted(tmp_path, src)
    chunk = ck / "chunk-000001.json"
    rows = json.loads(chunk.read_text(encoding="utf-8"))
    del rows[0]                                   # a row lost: the chunk no longer matches
    chunk.write_text(json.dumps(rows), encoding="utf-8")
    with pytest.raises(ParameterError, match="does not match the input") as err:
        run_batch(src, tmp_path / "t.csv", checkpoint=ck, chunk_size=4)
    assert "chunk-000001.json" in err.value.one_line()
    assert not (tmp_path / "t.csv").exists()


@pytest.mark.parametrize("damage", ["not json", "other format"])
def test_a_damaged_manifest_is_refused(tmp_path, damage):
    src = _table(tmp_path / "in.csv", 30)
    ck = _interrupted(tmp_path, src)
    (ck / "manifest.json").write_text("{" if damage == "not json" else '{"format": "x"}',
                                      encoding="utf-8")
    with pytest.raises(ParameterError, match="manifest is damaged|not a saltplan batch"):
        run_batch(src, tmp_path / "t.csv", checkpoint=ck, chunk_size=4)


def test_a_folder_of_other_files_or_a_file_is_refused(tmp_path):
    src = _table(tmp_path / "in.csv", 8)
    other = tmp_path / "other"
    other.mkdir()
    (other / "notes.txt").write_text("mine", encoding="utf-8")
    with pytest.raises(ParameterError, match="not empty and holds no saltplan checkpoint"):
        run_batch(src, tmp_path / "t.csv", checkpoint=other)
    assert (other / "notes.txt").read_text(encoding="utf-8") == "mine"
    afile = tmp_path / "afile"
    afile.write_text("x", encoding="utf-8")
    with pytest.raises(ParameterError, match="is a file, not a folder"):
        run_batch(src, tmp_path / "t.csv", checkpoint=afile)


# ------------------------------------------------------------------ the real command
def _cli(*args) -> list[str]:
    script = Path(sys.executable).with_name("saltplan")
    if script.exists():
        return [str(script), *[str(a) for a in args]]
    return [sys.executable, "-c", "from saltplan.cli import main; main(prog_name='saltplan')",
            *[str(a) for a in args]]


def _wait_for_chunks(ck: Path, proc, n: int, timeout=120.0) -> None:
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        assert proc.poll() is None, proc.communicate()
        if len(list(ck.glob("chunk-*.json"))) >= n:
            return
        time.sleep(0.01)
    raise AssertionError("the run kept no chunk in time")


def _env():
    return {**os.environ, "SOURCE_DATE_EPOCH": "1764668284"}


@pytest.mark.skipif(os.name != "posix", reason="POSIX signals")
@pytest.mark.parametrize("how", ["SIGKILL", "SIGTERM"])
def test_cli_killed_mid_run_resumes_to_the_same_bytes(tmp_path, how):
    src = _table(tmp_path / "in.csv", 400)
    args = ["--summary", tmp_path / "s.html", "--jobs", 2, "--chunk-size", 10, "--quiet"]
    ref, ref_summary = tmp_path / "ref.csv", tmp_path / "ref.html"
    subprocess.run(_cli("batch", src, "--out", ref, "--summary", ref_summary, *args[2:]),
                   check=False, capture_output=True, env=_env(), timeout=600)
    assert ref.exists() and ref_summary.exists()
    ck, out = tmp_path / "ck", tmp_path / "t.csv"
    proc = subprocess.Popen(_cli("batch", src, "--out", out, "--checkpoint", ck, *args),
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=_env())
    _wait_for_chunks(ck, proc, 3)
    workers = psutil.Process(proc.pid).children(recursive=True)
    proc.send_signal(signal.SIGKILL if how == "SIGKILL" else signal.SIGTERM)
    _out, err = proc.communicate(timeout=60)
    if how == "SIGTERM":
        assert proc.returncode == 143, err
        assert "kept in the checkpoint folder" in err and "Traceback" not in err, err
    else:
        assert proc.returncode == -signal.SIGKILL
    end = time.monotonic() + 10                     # the workers follow their parent
    while any(p.is_running() and p.status() != psutil.STATUS_ZOMBIE for p in workers):
        assert time.monotonic() < end, "orphaned workers"
        time.sleep(0.05)
    assert not out.exists() and not (tmp_path / "s.html").exists()
    kept = len(list(ck.glob("chunk-*.json")))
    assert 3 <= kept < 40
    done = subprocess.run(_cli("batch", src, "--out", out, "--checkpoint", ck, *args),
                          capture_output=True, text=True, env=_env(), timeout=600)
    assert done.returncode == 1, done.stderr        # exit 1: the input has bad rows
    assert f"{kept * 10} read back from the checkpoint" in done.stderr, done.stderr
    assert out.read_bytes() == ref.read_bytes()
    assert (tmp_path / "s.html").read_bytes() == ref_summary.read_bytes()
    assert not ck.exists()
    leftovers = [p.name for p in tmp_path.iterdir() if p.name.startswith(".")]
    assert leftovers == []


# ------------------------------------------------------------------ with a ledger
def test_resumed_run_records_every_plan_once_in_the_ledger(tmp_path):
    """``--record`` with ``--checkpoint``: the plans recorded before the stop are not
    recorded twice (the ledger keeps one record per identical plan body), the rest are
    recorded on resume; the ledger ends as after an uninterrupted run."""
    from saltplan.ledger import open_ledger

    src = _table(tmp_path / "in.csv", 30)
    whole = open_ledger(tmp_path / "whole.sqlite")
    run_batch(src, tmp_path / "ref.csv", chunk_size=4, ledger=whole, learn=False)
    expected = whole.counts()
    whole.close()
    led = open_ledger(tmp_path / "resumed.sqlite")
    ck = tmp_path / "ck"
    with pytest.raises(Stop):
        run_batch(src, tmp_path / "t.csv", chunk_size=4, ledger=led, learn=False,
                  checkpoint=ck, progress=_stop_after(13))
    part = led.counts().get("plan", 0)
    assert 0 < part < expected["plan"]
    run_batch(src, tmp_path / "t.csv", chunk_size=4, ledger=led, learn=False, checkpoint=ck)
    assert led.counts() == expected
    led.close()
    assert (tmp_path / "t.csv").read_bytes() == (tmp_path / "ref.csv").read_bytes()
