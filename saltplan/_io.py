"""Atomic file output: write to a temporary file in the same folder, then rename.

A failed run never leaves a partial output file behind.
"""
from __future__ import annotations

import contextlib
import os
import tempfile
from pathlib import Path


def write_text_atomic(path: str | Path, text: str, encoding: str = "utf-8") -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "w", encoding=encoding, newline="") as fh:
            fh.write(text)
        os.chmod(tmp, 0o644)  # mkstemp creates 0600; outputs are ordinary shared files
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    return path


def write_bytes_atomic(path: str | Path, data: bytes) -> Path:
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        os.chmod(tmp, 0o644)  # mkstemp creates 0600; outputs are ordinary shared files
        os.replace(tmp, path)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)
        raise
    return path


class OutputSet:
    """Collect several output files and write them all at the end, or none.

    Contents are rendered first (``add``); ``commit`` writes every file atomically.
    If rendering fails before ``commit``, nothing reaches the disk.
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
        written = []
        for path, data in self._items:
            written.append(write_bytes_atomic(path, data))
        return written
