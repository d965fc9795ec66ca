"""Atomic file output: write to a temporary file in the same folder, then rename.

A failed run never leaves a partial output file behind: a file is either complete or not
there, and an :class:`OutputSet` writes all its files or none. A folder or file that
cannot be written raises :class:`~saltplan.errors.OutputFileError` naming the path.
"""
from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path


def _cannot_write(path: Path, exc: OSError):
    from .errors import OutputFileError

    reason = exc.strerror or type(exc).__name__
    where = exc.filename if exc.filename else path
    return OutputFileError(f"cannot write output: {reason}", file=str(where))


def _stage(path: Path, data: bytes) -> str:
    """Write ``data`` to a hidden temporary file beside ``path``; returns its name."""
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
    except OSError as exc:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise _cannot_write(path, exc) from None


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    path = Path(path)
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
