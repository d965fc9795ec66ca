"""Atomic file output: write to a temporary file in the same folder, then rename.

A failed run never leaves a partial output file behind: a file is either complete or not
there, and an :class:`OutputSet` writes all its files or none. A folder or file that
cannot be written raises :class:`~saltplan.errors.OutputFileError` naming the path.
"""
from __future__ import annotations

import contextlib
import csv
import io
import os
import re
import signal
import tempfile
import threading
from collections.abc import Iterable
from pathlib import Path
from typing import Any


def _cannot_write(path: Path, exc: OSError):
    from .errors import OutputFileError

    reason = exc.strerror or type(exc).__name__
    where = exc.filename if exc.filename else path
    return OutputFileError(f"cannot write output: {reason}", file=str(where))


def _stage(path: Path, data: bytes) -> str:
    """Write ``data`` to a hidden temporary file beside ``path``; returns its name."""
    with uninterrupted():
        return _stage_now(path, data)


def _stage_now(path: Path, data: bytes) -> str:
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    except OSError as exc:
        raise _cannot_write(path, exc) from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o644)  # mkstemp creates 0600; outputs are ordinary shared files
    except BaseException as exc:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise _cannot_write(path, exc) from None
        raise
    return tmp


def _publish(tmp: str, path: Path) -> None:
    try:
        os.replace(tmp, path)
        published(path)
    except OSError as exc:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise _cannot_write(path, exc) from None


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    path = Path(path)
    with uninterrupted():
        _publish(_stage(path, data), path)
    return path


def write_text_atomic(path: str | Path, text: str, encoding: str = "utf-8") -> Path:
    return write_bytes_atomic(path, text.encode(encoding))


class OutputSet:
    """Collect several output files and write them all at the end, or none.

    Contents are rendered first (``add``); ``commit`` stages every file as a temporary
    beside its target and only then renames them into place. If rendering or staging
    fails, nothing reaches the disk under the final names.
    """

    def __init__(self, out_dir: str | Path):
        self.out_dir = Path(out_dir)
        self._items: list[tuple[Path, bytes]] = []

    def add(self, name: str, content: str | bytes) -> None:
        data = content.encode("utf-8") if isinstance(content, str) else content
        self._items.append((self.out_dir / name, data))

    def commit(self) -> list[Path]:
        if self.out_dir.exists() and not self.out_dir.is_dir():
            from .errors import InputFileError
            raise InputFileError("output path exists and is not a folder", file=str(self.out_dir))
        staged: list[tuple[str, Path]] = []
        try:
            for path, data in self._items:
                staged.append((_stage(path, data), path))
        except BaseException:
            for tmp, _ in staged:
                with contextlib.suppress(FileNotFoundError):
                    os.unlink(tmp)
            raise
        with uninterrupted():  # a signal waits until every file is in place
            return self._publish_all(staged)

    @staticmethod
    def _publish_all(staged: list[tuple[str, Path]]) -> list[Path]:
        existed = [path.exists() for _, path in staged]
        written: list[Path] = []
        for i, (tmp, path) in enumerate(staged):
            try:
                _publish(tmp, path)
            except BaseException:
                # renames within one folder rarely fail; if one does, take back the files
                # this commit created so the set is not left half-written
                for later, _ in staged[i:]:
                    with contextlib.suppress(FileNotFoundError):
                        os.unlink(later)
                for done, was_there in zip(written, existed, strict=False):
                    if not was_there:
                        with contextlib.suppress(FileNotFoundError):
                            os.unlink(done)
                raise
            written.append(path)
        return written


# --------------------------------------------------------------------------- signals
class _Signals:
    """Process-wide state of :func:`stop_on_signals` (main thread only)."""

    installed = 0
    depth = 0                      # nesting of :func:`uninterrupted` sections
    pending: int | None = None     # a signal that arrived inside such a section
    section: list[str] = []        # files put in place inside the current section


def _ignore_further() -> None:
    # one signal is enough: a second Ctrl-C must not break off the clean-up
    for sig in (signal.SIGINT, signal.SIGTERM):
        with contextlib.suppress(ValueError, OSError):
            signal.signal(sig, signal.SIG_IGN)


def _on_signal(signum, _frame):
    from .errors import Interrupted

    if _Signals.depth > 0:
        _Signals.pending = signum
        return
    _ignore_further()
    raise Interrupted(signum)


@contextlib.contextmanager
def stop_on_signals():
    """Turn SIGINT and SIGTERM into :class:`~saltplan.errors.Interrupted` while inside.

    The exception unwinds the run like any other: workers are stopped, temporaries
    removed, nothing partial is left under a final name. Used by every CLI command; a
    script may wrap a library call the same way. Does nothing outside the main thread.
    """
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = {sig: signal.getsignal(sig) for sig in (signal.SIGINT, signal.SIGTERM)}
    for sig in previous:
        signal.signal(sig, _on_signal)
    _Signals.installed += 1
    try:
        yield
    finally:
        _Signals.installed -= 1
        _Signals.pending = None
        for sig, handler in previous.items():
            signal.signal(sig, handler if handler is not None else signal.SIG_DFL)


@contextlib.contextmanager
def uninterrupted():
    """A section a signal must not cut in half (creating a temporary, renaming outputs).

    Under :func:`stop_on_signals`, a signal arriving inside is acted on when the outermost
    section ends; the :class:`~saltplan.errors.Interrupted` raised then lists the files the
    section had already put in place.
    """
    if _Signals.depth == 0:
        _Signals.section = []
    _Signals.depth += 1
    try:
        yield
    finally:
        _Signals.depth -= 1
        if _Signals.depth == 0 and _Signals.pending is not None and _Signals.installed:
            from .errors import Interrupted

            signum, _Signals.pending = _Signals.pending, None
            _ignore_further()
            raise Interrupted(signum, written=_Signals.section)


def published(path) -> None:
    """Note that ``path`` was put in place (for the message of an interrupted run)."""
    if _Signals.depth:
        _Signals.section.append(str(path))


# --------------------------------------------------------------------------- spreadsheet safety
#: first characters that make a spreadsheet read a CSV cell as a formula. The list and the
#: remedy (prefix the cell with a single quote so it is read as text) follow the OWASP
#: "CSV Injection" guidance (owasp.org/www-community/attacks/CSV_Injection).
FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
#: a plain decimal number ("-1.2", "+3", "-0.5e-3"): a number, never a formula
_NUMBER = re.compile(r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?\Z")


def _needs_quote(text: str) -> bool:
    if not text:
        return False
    if text[0] in FORMULA_TRIGGERS:
        return not _NUMBER.match(text)
    # a cell that already starts with the quote of a neutralized cell gets one more, so
    # that reading it back (:func:`spreadsheet_text`) gives the original text exactly
    return text[0] == "'" and _needs_quote(text[1:])


def spreadsheet_safe(value: Any) -> str:
    """The text of one CSV cell, neutralized so that no spreadsheet runs it as a formula.

    Text starting with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return gets a leading
    single quote (OWASP "CSV Injection"); real numbers (``-1.2``) are left as they are.
    """
    text = "" if value is None else str(value)
    return "'" + text if _needs_quote(text) else text


def spreadsheet_text(cell: str) -> str:
    """Undo :func:`spreadsheet_safe` on a cell read back from a CSV the tool wrote."""
    if cell.startswith("'") and _needs_quote(cell[1:]):
        return cell[1:]
    return cell


class SafeCsvWriter:
    """``csv.writer`` whose every cell goes through :func:`spreadsheet_safe`.

    Every CSV saltplan writes uses this class (checked by tests/test_reliability_csv.py).
    """

    def __init__(self, fh, **options):
        options.setdefault("lineterminator", "\n")
        self._writer = csv.writer(fh, **options)

    def writerow(self, row: Iterable[Any]) -> None:
        self._writer.writerow([spreadsheet_safe(v) for v in row])

    def writerows(self, rows: Iterable[Iterable[Any]]) -> None:
        self._writer.writerows([spreadsheet_safe(v) for v in row] for row in rows)


def csv_text(rows: Iterable[Iterable[Any]]) -> str:
    """CSV text of ``rows`` (``\\n`` line ends), every cell spreadsheet-safe."""
    buf = io.StringIO()
    SafeCsvWriter(buf).writerows(rows)
    return buf.getvalue()
