"""Portfolio runs of the workbench: a CSV/SDF of candidates planned outside the request.

An upload becomes a :class:`Job` with a random id (the page of a run is ``/p/<id>``, so a
run can be left and found again). Jobs run one at a time, in arrival order, each in its own
**process** (a fresh interpreter, no state copied from the threaded server), which
runs :func:`saltplan.batch.iter_evaluate` (``python -m saltplan.web.jobs``) and writes the
rows back chunk by chunk as JSON lines; a thread of the server collects them. The chemistry never holds the server's
interpreter, so pages stay responsive during a long run. A run can be stopped (its process
is terminated). The upload is stored under a folder the server made for the run; no path
comes from the user.

Exports reuse the batch writers (:func:`saltplan.batch.outputs.open_table_writer`: CSV with
spreadsheet-safe cells, XLSX with text cells) and the batch summary page
(:func:`saltplan.reports.portfolio.render_summary`).
"""
from __future__ import annotations

import contextlib
import itertools
import queue as queue_mod
import re
import secrets
import shutil
import tempfile
import threading
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..errors import SaltplanError

#: most rows one portfolio upload may have (larger sets: ``saltplan batch``)
MAX_ROWS = 5000
#: rows per chunk sent back by the worker (the progress bar's step)
CHUNK_ROWS = 20
#: jobs kept in memory; the oldest finished ones are forgotten first
MAX_JOBS = 20
JOB_ID = re.compile(r"^[A-Za-z0-9_-]{10,16}$")
SORTABLE = ("row", "id", "name", "verdict", "most_basic_pka", "most_acidic_pka",
            "n_feasible", "main_risk")
PAGE_ROWS = 50


@dataclass
class Job:
    id: str
    name: str                          # the uploaded file's name, for display only
    folder: Path
    input: Path
    smiles_column: str
    total: int | None
    created: float = field(default_factory=time.time)
    state: str = "queued"              # queued, running, done, failed, stopped
    error: str | None = None
    rows: list[dict[str, Any]] = field(default_factory=list)
    finished: float | None = None
    stop: threading.Event = field(default_factory=threading.Event)
    thumbs: dict[int, str] = field(default_factory=dict)
    exports: dict[str, bytes] = field(default_factory=dict)

    @property
    def done(self) -> int:
        return len(self.rows)

    @property
    def running(self) -> bool:
        return self.state in ("queued", "running")

    def percent(self) -> int:
        if self.state == "done":
            return 100
        if not self.total:
            return 0
        return min(99, int(100 * self.done / self.total))


def count_rows(path: Path) -> int:
    """Data rows of an uploaded CSV (lines less the header) or SDF (records)."""
    data = path.read_bytes()
    if path.suffix == ".sdf":
        return len(re.findall(rb"^\$\$\$\$", data, flags=re.M)) or (1 if data.strip() else 0)
    lines = [line for line in data.splitlines() if line.strip()]
    return max(len(lines) - 1, 0)


def check_upload(path: Path, smiles_column: str) -> int:
    """Refuse a file the batch would refuse as a whole (header, column, encoding) or one
    beyond :data:`MAX_ROWS`, before a job is made; returns the row count."""
    from ..batch.sources import column_spec, open_source

    source = open_source(path, column_spec(smiles_column))
    rows = count_rows(path)
    if path.suffix == ".csv":
        next(iter(source.chunks(1)), None)       # the first row parses
    if rows == 0:
        raise SaltplanError("the file has no candidate rows", file=path.name)
    if rows > MAX_ROWS:
        raise SaltplanError(f"{rows:,} rows: the workbench takes at most {MAX_ROWS:,} per "
                            "upload; run 'saltplan batch' for larger sets", file=path.name)
    return rows


def _worker_setup() -> None:
    """In the worker: Ctrl-C is the server's to handle; on Linux, die with the server."""
    import signal
    import sys

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    if sys.platform.startswith("linux"):
        with contextlib.suppress(OSError, AttributeError):
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG


def _work(input_path: str, smiles_column: str, out) -> None:
    """The worker: plan every row, write one JSON line per chunk to ``out``
    (``["rows", [...]]``), then ``["done", null]`` or ``["error", message]``."""
    import json

    _worker_setup()
    from ..batch import iter_evaluate

    def send(kind, payload):
        out.write(json.dumps([kind, payload], default=str) + "\n")
        out.flush()

    try:
        for rows in iter_evaluate(input_path, smiles_column=smiles_column,
                                  chunk_size=CHUNK_ROWS):
            send("rows", rows)
        send("done", None)
    except SaltplanError as exc:
        send("error", exc.one_line())
    except Exception as exc:  # a bug must end the job with a message, not hang it
        first = (str(exc).splitlines() or [""])[0]
        send("error", f"internal error ({type(exc).__name__}: {first})")


class JobRunner:
    """The portfolio jobs of one workbench and the thread that runs them."""

    def __init__(self, root: Path | None = None):
        self.root = Path(root or tempfile.mkdtemp(prefix="saltplan-workbench-"))
        self._jobs: dict[str, Job] = {}
        self._lock = threading.Lock()
        self._queue: queue_mod.Queue[Job | None] = queue_mod.Queue()
        self._thread: threading.Thread | None = None
        self._closed = False

    # ------------------------------------------------------------ jobs
    def submit(self, data: bytes, filename: str, smiles_column: str) -> Job:
        """A job for uploaded bytes (refused with SaltplanError before anything runs)."""
        suffix = Path(filename or "").suffix.lower()
        if suffix in (".sd", ".sdf"):
            suffix = ".sdf"
        elif suffix in (".csv", ".txt", ""):
            suffix = ".csv"
        else:
            raise SaltplanError(f"'{Path(filename).name[:80]}': expected a .csv or .sdf file")
        if b"\0" in data[:4096]:
            raise SaltplanError(f"'{Path(filename).name[:80]}' is binary; expected CSV or SDF text")
        job_id = secrets.token_urlsafe(9)
        folder = self.root / job_id
        folder.mkdir(parents=True)
        path = folder / f"input{suffix}"              # the server names the file
        path.write_bytes(data)
        try:
            total = check_upload(path, smiles_column)
        except SaltplanError as exc:
            shutil.rmtree(folder, ignore_errors=True)
            raise SaltplanError(exc.message, file=Path(filename).name[:80] or None,
                                field=exc.field) from None
        job = Job(job_id, Path(filename).name[:120] or "upload", folder, path, smiles_column,
                  total)
        with self._lock:
            self._jobs[job_id] = job
            self._forget_old()
        self._queue.put(job)
        self._start_thread()
        return job

    def get(self, job_id: str) -> Job | None:
        return self._jobs.get(job_id) if JOB_ID.match(job_id or "") else None

    def all(self) -> list[Job]:
        with self._lock:
            return sorted(self._jobs.values(), key=lambda j: -j.created)

    def stop(self, job: Job) -> None:
        job.stop.set()
        if job.state == "queued":
            job.state, job.finished = "stopped", time.time()

    def close(self) -> None:
        """Stop every job and remove the run folders (server shutdown)."""
        self._closed = True
        for job in list(self._jobs.values()):
            job.stop.set()
        self._queue.put(None)
        if self._thread is not None:
            self._thread.join(10)
        shutil.rmtree(self.root, ignore_errors=True)

    def _forget_old(self) -> None:
        old = [j for j in sorted(self._jobs.values(), key=lambda j: j.created) if not j.running]
        while len(self._jobs) > MAX_JOBS and old:
            job = old.pop(0)
            del self._jobs[job.id]
            shutil.rmtree(job.folder, ignore_errors=True)

    # ------------------------------------------------------------ the worker thread
    def _start_thread(self) -> None:
        with self._lock:
            if self._thread is None or not self._thread.is_alive():
                self._thread = threading.Thread(target=self._loop, name="saltplan-portfolio",
                                                daemon=True)
                self._thread.start()

    def _loop(self) -> None:
        while True:
            job = self._queue.get()
            if job is None or self._closed:
                return
            if job.stop.is_set():
                continue
            self._run(job)

    def _run(self, job: Job) -> None:
        import json
        import subprocess
        import sys

        # a fresh interpreter (python -m saltplan.web.jobs): nothing of the threaded server
        # is copied into it, and the chemistry never holds the server's interpreter
        proc = subprocess.Popen([sys.executable, "-m", "saltplan.web.jobs", str(job.input),
                                 job.smiles_column], stdout=subprocess.PIPE,
                                stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL,
                                text=True, encoding="utf-8")
        job.state = "running"
        lines: queue_mod.Queue[str | None] = queue_mod.Queue()

        def reader():
            assert proc.stdout is not None
            for line in proc.stdout:
                lines.put(line)
            lines.put(None)

        threading.Thread(target=reader, daemon=True).start()
        try:
            while True:
                if job.stop.is_set():
                    job.state = "stopped"
                    return
                try:
                    line = lines.get(timeout=0.25)
                except queue_mod.Empty:
                    continue
                if line is None:
                    proc.wait(10)
                    job.state = "failed"
                    job.error = (f"the worker process ended unexpectedly (exit code "
                                 f"{proc.returncode}) after {job.done:,} rows")
                    return
                kind, payload = json.loads(line)
                if kind == "rows":
                    job.rows.extend(payload)
                elif kind == "done":
                    job.state = "done"
                    return
                else:
                    job.state, job.error = "failed", str(payload)
                    return
        finally:
            job.finished = time.time()
            if proc.poll() is None:
                proc.terminate()
            try:
                proc.wait(5)
            except subprocess.TimeoutExpired:  # pragma: no cover - SIGTERM is not caught
                proc.kill()
                proc.wait(5)


# ------------------------------------------------------------ the result table
def row_view(row: dict[str, Any]) -> dict[str, Any]:
    """One line of the result table."""
    return {
        "row": row.get("row"), "id": row.get("id") or "", "name": row.get("name") or "",
        "smiles": row.get("smiles"),
        "verdict": "error" if row.get("error") else (row.get("verdict") or ""),
        "most_basic_pka": row.get("most_basic_pka"), "basic_unc": row.get("_basic_unc"),
        "most_acidic_pka": row.get("most_acidic_pka"), "acidic_unc": row.get("_acidic_unc"),
        "top": list(row.get("_top") or ()), "n_feasible": row.get("n_feasible"),
        "main_risk": row.get("_serious") or "", "error": row.get("error") or "",
        "duplicate_of": row.get("duplicate_of"),
    }


def table(job: Job, sort: str = "row", desc: bool = False, verdict: str = "", q: str = "",
          page: int = 1) -> dict[str, Any]:
    """Sorted, filtered, paged lines of a job's rows (missing values sort last)."""
    rows = [row_view(r) for r in list(job.rows)]
    verdicts = sorted({r["verdict"] for r in rows if r["verdict"]})
    if verdict:
        rows = [r for r in rows if r["verdict"] == verdict]
    if q:
        needle = q.lower()
        rows = [r for r in rows if needle in r["id"].lower() or needle in r["name"].lower()]
    sort = sort if sort in SORTABLE else "row"

    def key(r):
        v = r[sort]
        missing = v is None or v == ""
        return (missing, (v.lower() if isinstance(v, str) else v) if not missing else 0)

    present = sorted((r for r in rows if not key(r)[0]), key=lambda r: (key(r)[1], r["row"]),
                     reverse=desc)
    rows = present + [r for r in rows if key(r)[0]]
    pages = max(1, -(-len(rows) // PAGE_ROWS))
    page = min(max(page, 1), pages)
    return {"rows": rows[(page - 1) * PAGE_ROWS: page * PAGE_ROWS], "matched": len(rows),
            "page": page, "pages": pages, "verdicts": verdicts, "sort": sort, "desc": desc,
            "verdict": verdict, "q": q}


def thumbnail(job: Job, row: int) -> str | None:
    """SVG drawing of a row's parent structure (cached), or None."""
    if row in job.thumbs:
        return job.thumbs[row]
    from ..reports.drawing import structure_svg

    found = next((r for r in job.rows if r.get("row") == row), None)
    if not found or not found.get("smiles"):
        return None
    try:
        svg = structure_svg(found["smiles"], [], width=180, height=120)
    except SaltplanError:
        return None
    if not svg.lstrip().startswith("<?xml"):
        svg = '<?xml version="1.0" encoding="UTF-8"?>\n' + svg
    job.thumbs[row] = svg
    return svg


EXPORTS = {"portfolio.csv": "text/csv", "portfolio.xlsx":
           "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet",
           "summary.html": "text/html"}


def export(job: Job, kind: str) -> bytes:
    """The finished job's rows as ``portfolio.csv``/``portfolio.xlsx`` (the batch table
    writers) or ``summary.html`` (the batch summary page)."""
    if kind in job.exports:
        return job.exports[kind]
    from ..batch import COLUMNS
    from ..batch.outputs import open_table_writer

    if kind == "summary.html":
        from ..batch.summary import SummaryBuilder
        from ..reports.portfolio import render_summary

        builder = SummaryBuilder(source=job.name)
        builder.add(job.rows)
        data = render_summary(builder.result()).encode("utf-8")
    else:
        target = job.folder / kind
        writer = open_table_writer(target, COLUMNS)
        try:
            for start in itertools.count(0, 500):
                chunk = job.rows[start:start + 500]
                if not chunk:
                    break
                writer.write(chunk)
            path = writer.commit()
        except BaseException:
            writer.abort()
            raise
        data = Path(path).read_bytes()
    job.exports[kind] = data
    return data


if __name__ == "__main__":  # the worker process of JobRunner._run
    import sys

    _work(sys.argv[1], sys.argv[2], sys.stdout)
