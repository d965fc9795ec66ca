"""Portfolio batch evaluation: many candidates in, one row per candidate out.

Each input row (CSV, SDF or DataFrame; see :mod:`saltplan.batch_input`) is planned with
:func:`saltplan.plan.plan_salts` and flattened to one output row (:data:`COLUMNS`). Rows
come out in input order and none is dropped: a row that cannot be planned carries the
reason in ``error`` and the run goes on.

Work is done chunk by chunk (``chunk_size`` rows) in this process (``jobs=1``), in a pool
of local processes (``jobs=N``) or on a Dask distributed cluster (``engine="dask"``,
``scheduler=ADDRESS``). Only a bounded number of chunks is in flight at a time, so the
memory used does not grow with the input; the results are identical whichever engine or
number of jobs is used. :func:`iter_evaluate` streams the rows;
:func:`evaluate_many` collects them into a DataFrame; :func:`run_batch` streams them to
files (what ``saltplan batch`` calls).

This module orchestrates; it holds no chemistry.
"""
from __future__ import annotations

import contextlib
import math
import threading
from collections import deque
from collections.abc import Callable, Generator, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from ..errors import Interrupted, ParameterError, SaltplanError
from .sources import ColumnSpec, Record, column_spec, mark_duplicates, open_source

if TYPE_CHECKING:
    from pathlib import Path

    import pandas as pd

#: output columns, in order
COLUMNS = (
    "row", "id", "name", "input", "smiles", "supplied_as",
    "most_basic_pka", "most_basic_site", "most_acidic_pka", "most_acidic_site",
    "sites", "verdict", "n_feasible", "top_counterions", "caveats", "duplicate_of", "error",
)
ENGINES = ("local", "dask")
DEFAULT_CHUNK_SIZE = 200
#: chunks in flight per worker slot (bounded memory, workers kept busy)
_WINDOW_PER_WORKER = 2
_SEVERITY_ORDER = {"serious": 0, "warning": 1, "info": 2}


@dataclass(frozen=True)
class Settings:
    """What every worker needs to evaluate a chunk (picklable)."""

    evaluator: Callable[..., Any] | None = None
    libraries: tuple[str, ...] | None = None
    top: int = 3
    keep_plan: bool = False       # rows also carry the full plan dict ("_plan"), for a ledger
    inhouse: Any = None           # ledger evidence for the ranking (InhouseEvidence), or None


# --------------------------------------------------------------------------- one row
def _parse_dose(text: str) -> float | None:
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        raise ParameterError(f"dose '{text}' is not a number of mg") from None
    if not math.isfinite(value) or value <= 0:
        raise ParameterError(f"dose '{text}' must be a positive number of mg")
    return value


def _parse_measured(text: str):
    """A measured-pKa cell, values separated by ``;``: ``"9.1; 4.2"``, ``"base=9.1"``,
    ``"12=9.1; acid=4.2"`` (syntax of :func:`saltplan.ionization.parse_measured`)."""
    if not text:
        return None
    if "," in text:
        raise ParameterError(f"measured pKa '{text}': separate values with ';' "
                             "(a comma may be a decimal comma)")
    parts = [p for p in (x.strip() for x in text.split(";")) if p]
    if not parts:
        return None
    from ..ionization import parse_measured

    try:
        return parse_measured(parts)
    except ParameterError as exc:
        raise ParameterError(exc.message.replace("--pka ", "measured pKa ", 1)) from None


def _default_evaluator():
    from ..plan.planner import plan_salts

    return plan_salts


def evaluate_record(rec: Record, settings: Settings) -> dict[str, Any]:
    """The output row of one input record (never raises for a bad row)."""
    row: dict[str, Any] = dict.fromkeys(COLUMNS)
    row.update(row=rec.row, id=rec.id, name=rec.name, input=rec.smiles,
               duplicate_of=rec.duplicate_of)
    if rec.error:
        row["error"] = rec.error
        return row
    try:
        if not rec.smiles:
            raise ParameterError("empty SMILES")
        if "\n" in rec.smiles or "\r" in rec.smiles:
            raise ParameterError("the SMILES cell holds a line break (an unbalanced quote?)")
        dose = _parse_dose(rec.dose)
        measured = _parse_measured(rec.pka)
        evaluator = settings.evaluator or _default_evaluator()
        extra = {"inhouse": settings.inhouse} if settings.inhouse is not None else {}
        result = evaluator(rec.smiles, name=rec.name or None, dose_mg=dose, measured=measured,
                           libraries=list(settings.libraries) if settings.libraries else None,
                           **extra)
        data = result.to_dict() if hasattr(result, "to_dict") else result
        row.update(summarize_plan(data, settings.top))
        if settings.keep_plan:
            row["_plan"] = data
    except SaltplanError as exc:
        row["error"] = exc.one_line()
    except Exception as exc:  # a bug on one row must not stop a portfolio run
        first = str(exc).splitlines()[0] if str(exc) else ""
        row["error"] = " ".join(f"internal error ({type(exc).__name__}: {first})".split())
    return row


def _site_text(site: dict) -> str:
    prov = "meas." if site.get("provenance") == "measured" else "est."
    group = site.get("group_id") or site.get("group") or "site"
    return f"{site['kind']} {site['pka']:.1f} ({group}, {prov})"


def _site_label(site: dict) -> str:
    group = site.get("group_id") or site.get("group") or "site"
    return f"{group}, {site.get('provenance') or 'estimated'}, atom {site.get('atom')}"


def summarize_plan(plan: dict, top: int = 3) -> dict[str, Any]:
    """Flatten a ``Plan.to_dict()`` to the batch columns (pKa rounded to 2 decimals).

    ``sites`` lists bases (most basic first) then acids (most acidic first);
    ``top_counterions`` the ``top`` best-ranked feasible candidates; ``caveats`` the
    caveats of the API (labelled ``API``) and of those candidates, most severe first.
    """
    parent = plan.get("parent") or {}
    sites = list(plan.get("sites") or [])
    bases = sorted((s for s in sites if s.get("kind") == "base"),
                   key=lambda s: (-s["pka"], s.get("atom", 0)))
    acids = sorted((s for s in sites if s.get("kind") == "acid"),
                   key=lambda s: (s["pka"], s.get("atom", 0)))
    feasible = sorted((c for c in plan.get("candidates") or [] if c.get("feasible")),
                      key=lambda c: (c.get("rank", 0), c.get("counterion", "")))
    shown = feasible[:top]
    # caveat -> who it concerns ("API" first, then counterions in rank order)
    caveats: dict[tuple[int, str, str], list[str]] = {}
    sources = [("API", plan.get("caveats") or [])]
    sources += [(c["counterion"], c.get("caveats") or []) for c in shown]
    for who, items in sources:
        for cav in items:
            key = (_SEVERITY_ORDER.get(cav.get("severity"), 3), cav.get("code", ""),
                   cav.get("severity", ""))
            concerned = caveats.setdefault(key, [])
            if who not in concerned:
                concerned.append(who)
    verdict = plan.get("verdict") or {}
    worst = min(caveats.items(), default=None)          # most severe first (sorted keys)
    minimum = (plan.get("thresholds") or {}).get("likely")
    return {
        "smiles": parent.get("smiles"),
        "supplied_as": parent.get("supplied_as"),
        "most_basic_pka": round(bases[0]["pka"], 2) if bases else None,
        "most_basic_site": _site_label(bases[0]) if bases else None,
        "most_acidic_pka": round(acids[0]["pka"], 2) if acids else None,
        "most_acidic_site": _site_label(acids[0]) if acids else None,
        "sites": "; ".join(_site_text(s) for s in bases + acids),
        "verdict": verdict.get("code"),
        "n_feasible": len(feasible),
        "top_counterions": "; ".join(
            f"{c['counterion']} {c.get('stoichiometry', '1:1')} ΔpKa {c['delta_pka']:.1f}"
            for c in shown),
        "caveats": "; ".join(f"{code} ({sev}): {', '.join(who)}"
                             for (_o, code, sev), who in sorted(caveats.items())),
        # for the summary page; not columns
        "_top_ids": [c["counterion"] for c in shown],
        "_top": [f"{c['counterion']} {c.get('stoichiometry', '1:1')}" for c in shown],
        "_basic_unc": bases[0].get("uncertainty") if bases else None,
        "_acidic_unc": acids[0].get("uncertainty") if acids else None,
        "_margin": (round(shown[0]["delta_pka"] - minimum, 2)
                    if shown and minimum is not None else None),
        "_serious": (f"{worst[0][1]} ({worst[0][2]}): {', '.join(worst[1])}"
                     if worst is not None else None),
    }


#: one chunk at a time per process: RDKit's message capture (and so the text of a row's
#: error) is process-global, so threads of one Dask worker must not interleave rows.
_CHUNK_LOCK = threading.Lock()


def evaluate_chunk(chunk: Sequence[Record], settings: Settings) -> list[dict[str, Any]]:
    """Output rows of one chunk, in order (what a worker runs)."""
    with _CHUNK_LOCK:
        return [evaluate_record(rec, settings) for rec in chunk]


# --------------------------------------------------------------------------- engines
def _run_local(chunks, settings) -> Generator[list[dict], None, None]:
    for chunk in chunks:
        yield evaluate_chunk(chunk, settings)


def _worker_init() -> None:
    """Set up a pool worker: the parent alone handles Ctrl-C and stops the workers (a
    terminal sends SIGINT to the whole process group); SIGTERM ends a worker at once; on
    Linux a worker also ends when its parent dies, even by SIGKILL (no orphans)."""
    import signal
    import sys

    signal.signal(signal.SIGINT, signal.SIG_IGN)
    signal.signal(signal.SIGTERM, signal.SIG_DFL)
    if sys.platform.startswith("linux"):
        try:
            import ctypes

            ctypes.CDLL(None, use_errno=True).prctl(1, signal.SIGTERM)  # PR_SET_PDEATHSIG
        except (OSError, AttributeError):  # pragma: no cover - prctl is always there on Linux
            pass


def _stop_pool(pool) -> None:
    """Stop a pool at once: pending chunks cancelled, running workers terminated."""
    procs = list((getattr(pool, "_processes", None) or {}).values())
    pool.shutdown(wait=False, cancel_futures=True)
    for proc in procs:
        with contextlib.suppress(Exception):
            proc.terminate()
    for proc in procs:
        with contextlib.suppress(Exception):
            proc.join(5)
            if proc.is_alive():  # pragma: no cover - SIGTERM is not caught by workers
                proc.kill()
                proc.join(5)


def _run_pool(chunks, settings, jobs: int) -> Generator[list[dict], None, None]:
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor

    # the platform's default start method: "fork" on Linux (an evaluator defined in a
    # script or notebook works as is), "spawn" on macOS and Windows
    pool = ProcessPoolExecutor(max_workers=jobs, mp_context=multiprocessing.get_context(),
                               initializer=_worker_init)
    pending: deque = deque()
    finished = False
    try:
        for chunk in chunks:
            pending.append(pool.submit(evaluate_chunk, chunk, settings))
            if len(pending) >= _WINDOW_PER_WORKER * jobs:
                yield pending.popleft().result()
        while pending:
            yield pending.popleft().result()
        finished = True
    finally:
        if finished:
            pool.shutdown(wait=True)
        else:  # interrupted, failed or abandoned: do not wait for the running chunks
            _stop_pool(pool)


def _dask_client(scheduler):
    try:
        from distributed import Client
    except ImportError:
        raise ParameterError("engine 'dask' needs dask[distributed] "
                             "(pip install 'saltplan[dask]')") from None
    if isinstance(scheduler, Client):
        return scheduler, False
    if scheduler is None or (isinstance(scheduler, str) and not scheduler.strip()):
        raise ParameterError("engine 'dask' needs a scheduler address (--scheduler ADDRESS, "
                             "e.g. tcp://scheduler-host:8786)", field="scheduler")
    try:
        return Client(scheduler, timeout="20s", set_as_default=False), True
    except (OSError, TimeoutError, ValueError) as exc:
        first = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise ParameterError(f"cannot reach the Dask scheduler at '{scheduler}': {first}",
                             field="scheduler") from None


def _run_dask(chunks, settings, scheduler) -> Generator[list[dict], None, None]:
    client, own = _dask_client(scheduler)
    pending: deque = deque()
    try:
        slots = max(sum(client.nthreads().values()), 1)
        for chunk in chunks:
            pending.append(client.submit(evaluate_chunk, chunk, settings, pure=False))
            if len(pending) >= _WINDOW_PER_WORKER * slots:
                rows = pending[0].result()  # stays in `pending` until done (cancelled if not)
                pending.popleft().release()
                yield rows
        while pending:
            rows = pending[0].result()
            pending.popleft().release()
            yield rows
    finally:
        if pending:  # interrupted or failed: cancel the submitted work on the cluster
            with contextlib.suppress(Exception):
                client.cancel(list(pending))
        if own:
            client.close()


# --------------------------------------------------------------------------- public API
def _check_options(jobs, engine, chunk_size, top):
    if engine not in ENGINES:
        raise ParameterError(f"unknown engine '{engine}' (expected one of: {', '.join(ENGINES)})",
                             field="engine")
    if not isinstance(jobs, int) or jobs < 1:
        raise ParameterError(f"jobs must be a whole number >= 1, got {jobs!r}", field="jobs")
    if not isinstance(chunk_size, int) or chunk_size < 1:
        raise ParameterError(f"chunk_size must be a whole number >= 1, got {chunk_size!r}",
                             field="chunk_size")
    if not isinstance(top, int) or top < 0:
        raise ParameterError(f"top must be a whole number >= 0, got {top!r}", field="top")


def _preflight_libraries(libraries, evaluator):
    """Load user counterion libraries once up front: a broken file fails the run, not every row."""
    if evaluator is None and libraries:
        from ..library.counterions import load_counterions

        load_counterions(list(libraries))


def iter_evaluate(dataframe_or_path: str | Path | pd.DataFrame, *, smiles_column: str = "smiles",
                  id_column: str | None = None, name_column: str | None = None,
                  dose_column: str | None = None,
                  pka_columns: str | Sequence[str] | None = None, jobs: int = 1,
                  engine: str = "local", scheduler: str | Any | None = None,
                  chunk_size: int = DEFAULT_CHUNK_SIZE,
                  libraries: Sequence[str] | None = None, top: int = 3,
                  progress: Callable[[int, int | None], None] | None = None,
                  evaluator: Callable[..., Any] | None = None,
                  keep_plan: bool = False, inhouse: Any = None,
                  checkpoint: Any = None,
                  ) -> Generator[list[dict[str, Any]], None, None]:
    """Evaluate a table of candidates, yielding the output rows chunk by chunk.

    Same parameters as :func:`evaluate_many`. Each item is a list of row dicts (keys
    :data:`COLUMNS`) for consecutive input rows; concatenated, they cover every input row
    in input order. Input problems that concern the whole file (missing file or column,
    empty file, not UTF-8) raise :class:`~saltplan.errors.InputFileError` before any row is
    yielded, except "header but no data rows", found when the file ends.

    ``checkpoint`` (a :class:`saltplan.batch.checkpoint.Checkpoint`): chunks it holds are
    read back instead of planned; every chunk planned is saved there once the consumer has
    taken it (asked for the next one), so a stopped run resumes where it stopped.
    """
    _check_options(jobs, engine, chunk_size, top)
    spec: ColumnSpec = column_spec(smiles_column, id_column, name_column, dose_column, pka_columns)
    source = open_source(dataframe_or_path, spec)
    _preflight_libraries(libraries, evaluator)
    settings = Settings(evaluator=evaluator, libraries=tuple(str(p) for p in libraries)
                        if libraries else None, top=top, keep_plan=keep_plan, inhouse=inhouse)
    chunks = mark_duplicates(source.chunks(chunk_size))
    # chunks in input order as the engine reads them: (index, row numbers, stored?)
    order: deque[tuple[int, list[int], bool]] = deque()

    def to_plan():
        for index, chunk in enumerate(chunks):
            stored = checkpoint is not None and checkpoint.has(index)
            order.append((index, [rec.row for rec in chunk], stored))
            if not stored:
                yield chunk

    if engine == "dask":
        results = _run_dask(to_plan(), settings, scheduler)
    elif jobs > 1:
        results = _run_pool(to_plan(), settings, jobs)
    else:
        results = _run_local(to_plan(), settings)
    done = 0

    def stored_before_next():
        while order and order[0][2]:
            index, numbers, _ = order.popleft()
            yield checkpoint.load(index, numbers)

    try:
        for rows in results:
            for kept in stored_before_next():
                done += len(kept)
                if progress is not None:
                    progress(done, source.estimated_rows)
                yield kept
            index = order.popleft()[0]
            done += len(rows)
            if progress is not None:
                progress(done, source.estimated_rows)
            yield rows
            if checkpoint is not None:   # the consumer has taken the rows: keep them
                checkpoint.save(index, rows)
        for kept in stored_before_next():
            done += len(kept)
            if progress is not None:
                progress(done, source.estimated_rows)
            yield kept
    finally:
        results.close()  # an abandoned run stops its workers now, not when collected


def evaluate_many(dataframe_or_path: str | Path | pd.DataFrame, *, smiles_column: str = "smiles",
                  id_column: str | None = None, name_column: str | None = None,
                  dose_column: str | None = None,
                  pka_columns: str | Sequence[str] | None = None, jobs: int = 1,
                  engine: str = "local", scheduler: str | Any | None = None,
                  chunk_size: int = DEFAULT_CHUNK_SIZE,
                  libraries: Sequence[str] | None = None, top: int = 3,
                  progress: Callable[[int, int | None], None] | None = None,
                  evaluator: Callable[..., Any] | None = None) -> pd.DataFrame:
    """Plan salts for many candidates: one output row per input row, in input order.

    Parameters
    ----------
    dataframe_or_path : pandas.DataFrame, str or pathlib.Path
        A table with a SMILES column, or the path of a CSV (UTF-8, BOM and CRLF fine) or
        SDF file.
    smiles_column : str
        Column holding the SMILES (CSV/DataFrame; an SDF gives its own structures).
    id_column, name_column, dose_column : str, optional
        Columns with an identifier, a name and the daily dose [mg]. When not given, columns
        named ``id``, ``name`` and ``dose_mg`` are used if present.
    pka_columns : str or sequence of str, optional
        Column(s) with measured pKa values, e.g. ``"9.1; 4.2"`` or ``"base=9.1"`` (default:
        a ``pka`` column if present). Several columns are joined.
    jobs : int
        Local worker processes (1 = this process).
    engine : {"local", "dask"}
        ``"dask"`` sends the chunks to a Dask distributed cluster.
    scheduler : str or distributed.Client, optional
        Scheduler address (``tcp://host:8786``) or a connected client, for ``engine="dask"``.
    chunk_size : int
        Rows per unit of work.
    libraries : sequence of str, optional
        Extra counterion library files, passed to :func:`~saltplan.plan.plan_salts`.
    top : int
        How many feasible counterions to list per row.
    progress : callable, optional
        Called as ``progress(rows_done, estimated_total_or_None)`` after each chunk.
    evaluator : callable, optional
        Replaces :func:`~saltplan.plan.plan_salts` (same keyword arguments; returns an
        object with ``to_dict()`` or the dict itself). Must be picklable for ``jobs > 1``
        and importable on the Dask workers.

    Returns
    -------
    pandas.DataFrame
        Columns :data:`COLUMNS`; ``error`` is empty (None) for rows that were planned.
    """
    rows: list[dict[str, Any]] = []
    for chunk in iter_evaluate(dataframe_or_path, smiles_column=smiles_column,
                               id_column=id_column, name_column=name_column,
                               dose_column=dose_column, pka_columns=pka_columns, jobs=jobs,
                               engine=engine, scheduler=scheduler, chunk_size=chunk_size,
                               libraries=libraries, top=top, progress=progress,
                               evaluator=evaluator):
        rows.extend(chunk)
    return rows_to_frame(rows)


def rows_to_frame(rows: list[dict[str, Any]]) -> pd.DataFrame:
    """A DataFrame of output rows with stable dtypes (nullable integers, float pKa)."""
    import pandas as pd

    # built column by column as object Series so that missing text stays None (not NaN)
    frame = pd.DataFrame({c: pd.Series([r.get(c) for r in rows], dtype=object) for c in COLUMNS})
    for col in ("row", "n_feasible", "duplicate_of"):
        frame[col] = frame[col].astype("Int64")
    for col in ("most_basic_pka", "most_acidic_pka"):
        frame[col] = frame[col].astype("float64")
    return frame


def _open_checkpoint(folder, source, options):
    """The run's :class:`~saltplan.batch.checkpoint.Checkpoint`, or None without a folder."""
    if folder is None:
        return None
    import inspect

    from .checkpoint import Checkpoint, describe_run

    defaults = {k: p.default for k, p in inspect.signature(iter_evaluate).parameters.items()
                if p.default is not inspect.Parameter.empty}
    return Checkpoint.open(folder, describe_run(source, {**defaults, **options}))


@dataclass(frozen=True)
class BatchRun:
    """What :func:`run_batch` did: counts and the files written."""

    rows: int
    failed: int
    duplicates: int
    by_verdict: dict[str, int] = field(default_factory=dict)
    outputs: tuple[str, ...] = ()
    recorded: int | None = None        # plans recorded in a ledger (None: no ledger)
    resumed: int | None = None         # rows read back from a checkpoint (None: no checkpoint)

    def to_dict(self) -> dict[str, Any]:
        out = {"rows": self.rows, "failed": self.failed, "duplicates": self.duplicates,
               "by_verdict": dict(self.by_verdict), "outputs": list(self.outputs)}
        if self.recorded is not None:
            out["recorded"] = self.recorded
        if self.resumed is not None:
            out["resumed"] = self.resumed
        return out


def run_batch(dataframe_or_path: str | Path | pd.DataFrame, out: str | Path, *,
              summary: str | Path | None = None, **options: Any) -> BatchRun:
    """Evaluate and stream the rows to ``out`` (.csv, .json, .jsonl or .xlsx).

    ``summary``: also write the HTML summary there; ``source_label`` names the input on it
    (default: the input file's name). ``ledger`` (a :class:`saltplan.ledger.Ledger`):
    record every planned row's full plan there, one transaction per plan, as the rows
    arrive (a run stopped part-way keeps the plans recorded so far: each is complete);
    ``learn`` (default True with a ledger): rank with its in-house evidence; ``inhouse``
    (without ``ledger``): rank with that evidence
    (:meth:`saltplan.ledger.Ledger.inhouse_evidence`) but record nothing.
    ``checkpoint`` (a folder): keep every finished chunk there, so that the same call after
    an interruption goes on where it stopped and writes the same bytes as an uninterrupted
    run; refused when the folder belongs to another input or other options; emptied (and
    removed if this run made it) once the outputs are in place
    (:mod:`saltplan.batch.checkpoint`).
    Other options as for :func:`evaluate_many`.
    Files are written to temporary names and renamed only when the run completes, so a
    failed run leaves no partial output.
    """
    from pathlib import Path

    from ..reports.portfolio import render_summary
    from .outputs import open_table_writer
    from .summary import SummaryBuilder

    is_frame = hasattr(dataframe_or_path, "columns")
    label = options.pop("source_label", None) or (
        "a table passed in memory" if is_frame else Path(dataframe_or_path).name)
    targets = [Path(out).resolve()] + ([Path(summary).resolve()] if summary is not None else [])
    if not is_frame and Path(dataframe_or_path).resolve() in targets:
        raise ParameterError("the output would replace the input file", file=str(out))
    if summary is not None and targets[0] == targets[1]:
        raise ParameterError("the table and the summary would be the same file", file=str(out))
    builder = SummaryBuilder(source=label, top=options.get("top", 3))
    writer = open_table_writer(out, COLUMNS)
    user_progress = options.pop("progress", None)
    first_call = [True]

    estimated = [None]

    def progress(done, total):
        estimated[0] = total
        # refuse an oversized XLSX after the first chunk rather than at the sheet's end
        # (the row estimate counts lines, so allow it a little slack)
        cap = getattr(writer, "max_rows", None)
        if first_call[0] and cap is not None and total is not None and total > cap * 1.01:
            writer.refuse(total)
        first_call[0] = False
        if user_progress is not None:
            user_progress(done, total)

    ledger = options.pop("ledger", None)
    learn = options.pop("learn", True)
    try:
        if ledger is not None:
            options["keep_plan"] = True
            if learn:
                options["inhouse"] = ledger.inhouse_evidence()
        checkpoint = _open_checkpoint(options.pop("checkpoint", None), dataframe_or_path,
                                      options)
        if checkpoint is not None:
            options["checkpoint"] = checkpoint
            checkpoint.note_temporary(writer.target.tmp)
    except BaseException:
        writer.abort()            # a refused start leaves no temporary behind
        raise
    stream = iter_evaluate(dataframe_or_path, progress=progress, **options)
    done = 0
    recorded = 0
    try:
        for rows in stream:
            if ledger is not None:
                for row in rows:
                    plan = row.pop("_plan", None)
                    if plan is not None:
                        ledger.record_plan(plan)
                        recorded += 1
            writer.write(rows)
            builder.add(rows)
            done += len(rows)
        pending = [writer]
        if summary is not None:
            from .outputs import PendingFile

            pending.append(PendingFile(summary, render_summary(builder.result())))
        from .._io import uninterrupted

        with uninterrupted():  # all outputs or none, whenever a signal comes
            outputs = tuple(str(p.commit()) for p in pending)
    except BaseException as exc:
        stream.close()
        writer.abort()
        if checkpoint is not None and not checkpoint.done:
            checkpoint.finish()    # nothing kept: leave no empty checkpoint behind
        if isinstance(exc, Interrupted) and exc.done is None:
            total = estimated[0]
            exc.done = (f"{done:,} of about {total:,} rows" if total else f"{done:,} rows")
            if checkpoint is not None:
                exc.done += (f" ({checkpoint.kept_rows:,} kept in the checkpoint folder "
                             f"{checkpoint.folder}: run the same command again to go on)")
        raise
    if checkpoint is not None:
        checkpoint.finish()
    res = builder.result()
    return BatchRun(rows=res.rows, failed=res.failed, duplicates=res.duplicates,
                    by_verdict=dict(res.by_verdict), outputs=outputs,
                    recorded=recorded if ledger is not None else None,
                    resumed=checkpoint.resumed_rows if checkpoint is not None else None)
