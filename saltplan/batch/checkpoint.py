"""Resumable batch runs: finished chunks kept in a folder, a rerun continues from them.

``saltplan batch --checkpoint DIR`` (``run_batch(..., checkpoint=DIR)``) writes every
finished chunk of output rows to ``DIR`` as it completes. When the run is stopped (Ctrl-C,
SIGTERM, SIGKILL, a power cut) and started again with the same input and options, the
chunks already in ``DIR`` are read back instead of being planned again and the run goes on
from the first missing chunk. The output is byte-identical to an uninterrupted run,
because a chunk is the same rows whichever run computed it (the batch is deterministic)
and the outputs are always written from the whole sequence of rows, in input order.

Layout of ``DIR``::

    manifest.json          what the run is: format, tool version, input and option
                           fingerprints (a rerun with anything different is refused),
                           and whether the run made the folder
    chunk-000000.json      the output rows of chunk 0 (rows 1..chunk_size), and so on
    temporaries.json       the hidden temporary output files of the current attempt: a run
                           killed outright (SIGKILL) cannot remove its own, so the next
                           attempt removes those listed here (and no other file)

Every file is written to a temporary name, flushed to disk and renamed, so a chunk file is
complete or absent, never half-written. A chunk read back is checked against the input
(same row numbers, in order); a file that does not match is reported, not trusted. When
the run completes and its outputs are in place, the folder's files are removed (and the
folder, if the run created it): a spent checkpoint is not left behind.
"""
from __future__ import annotations

import contextlib
import hashlib
import json
import os
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from ..errors import ParameterError

FORMAT = "saltplan-batch-checkpoint/1"
MANIFEST = "manifest.json"
#: hidden output temporaries of the run, removed by the next run if a SIGKILL left them
TEMPORARIES = "temporaries.json"
_CHUNK = re.compile(r"^chunk-(\d{6})\.json$")
#: settings that change the rows of a chunk (the others, such as jobs or engine, do not)
_ROW_OPTIONS = ("smiles_column", "id_column", "name_column", "dose_column", "pka_columns",
                "chunk_size", "top")


def _sha256_file(path: Path) -> str:
    h = hashlib.sha256()
    with path.open("rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def input_fingerprint(source) -> str:
    """sha256 of the input: the file's bytes, or a DataFrame's columns and values."""
    if hasattr(source, "columns"):
        import pandas as pd

        h = hashlib.sha256(json.dumps([str(c) for c in source.columns]).encode("utf-8"))
        h.update(pd.util.hash_pandas_object(source.astype(str), index=True).values.tobytes())
        return h.hexdigest()
    path = Path(source)
    try:
        return _sha256_file(path)
    except OSError:
        return "unreadable"      # the batch itself reports the file problem


def data_fingerprint() -> str:
    """sha256 over the package's data files (counterions, group parameters, rules)."""
    from .._data import counterion_dir

    root = Path(__file__).resolve().parent.parent
    files = [p for p in root.rglob("*") if p.is_file() and p.suffix in (".yaml", ".json")
             and "static" not in p.parts and "demo" not in p.parts]
    files += [p for p in counterion_dir().rglob("*.yaml") if p.is_file()]
    h = hashlib.sha256()
    for p in sorted(set(files)):
        h.update(p.name.encode("utf-8") + b"\0")
        h.update(_sha256_file(p).encode("ascii"))
    return h.hexdigest()


def describe_run(source, options: dict[str, Any]) -> dict[str, Any]:
    """What a checkpoint must agree with before its chunks may be reused."""
    from .._version import __version__

    evaluator = options.get("evaluator")
    libraries = options.get("libraries") or ()
    inhouse = options.get("inhouse")
    settings = {k: options.get(k) for k in _ROW_OPTIONS}
    if isinstance(settings["pka_columns"], (list, tuple)):
        settings["pka_columns"] = list(settings["pka_columns"])
    return {
        "format": FORMAT,
        "saltplan": __version__,
        "data": data_fingerprint(),
        "input": input_fingerprint(source),
        "settings": settings,
        "libraries": [input_fingerprint(p) for p in libraries],
        "evaluator": (None if evaluator is None else
                      f"{getattr(evaluator, '__module__', '?')}."
                      f"{getattr(evaluator, '__qualname__', type(evaluator).__name__)}"),
        "inhouse": (None if inhouse is None else
                    hashlib.sha256(repr(getattr(inhouse, "facts", inhouse)).encode("utf-8"))
                    .hexdigest()),
    }


_WHAT = {"format": "the checkpoint format", "saltplan": "the saltplan version",
         "data": "saltplan's data files", "input": "the input file",
         "settings": "the batch options", "libraries": "the counterion library files",
         "evaluator": "the evaluator", "inhouse": "the ledger's in-house screening evidence"}


def _write_durable(path: Path, data: bytes) -> None:
    """Write ``data`` to ``path`` so that it is complete or absent after any crash."""
    tmp = path.with_name(f".{path.name}.part")
    with open(tmp, "wb") as fh:
        fh.write(data)
        fh.flush()
        os.fsync(fh.fileno())
    os.replace(tmp, path)


class Checkpoint:
    """A folder of finished chunks for one batch run (see the module docstring)."""

    def __init__(self, folder: str | Path, run: dict[str, Any]):
        self.folder = Path(folder)
        self.run = run
        self.done: set[int] = set()
        self.created = False
        self.resumed_rows = 0        # rows read back from the folder
        self.kept_rows = 0           # rows the folder holds (read back or saved)

    # ---------------------------------------------------------------- opening
    @classmethod
    def open(cls, folder: str | Path, run: dict[str, Any]) -> Checkpoint:
        """Start a checkpoint in ``folder`` or take up the one there (refused if it belongs
        to a different run)."""
        ck = cls(folder, run)
        path = ck.folder
        if path.exists() and not path.is_dir():
            raise ParameterError("the checkpoint path is a file, not a folder", file=str(path))
        manifest = path / MANIFEST
        try:
            if not path.exists():
                path.mkdir(parents=True)
                ck.created = True
            if manifest.exists():
                ck._take_up(manifest)
            else:
                others = [p.name for p in path.iterdir() if not p.name.startswith(".")]
                if others:
                    raise ParameterError(
                        "the checkpoint folder is not empty and holds no saltplan checkpoint "
                        f"(found '{sorted(others)[0]}'); give an empty or new folder",
                        file=str(path))
                _write_durable(manifest, _dumps({**run, "made_folder": ck.created}))
        except OSError as exc:
            raise ParameterError(f"cannot use the checkpoint folder: "
                                 f"{exc.strerror or type(exc).__name__}", file=str(path)) from None
        return ck

    def _take_up(self, manifest: Path) -> None:
        try:
            saved = json.loads(manifest.read_text(encoding="utf-8"))
        except (ValueError, UnicodeDecodeError):
            raise ParameterError("the checkpoint manifest is damaged (not JSON); delete the "
                                 "folder to start afresh", file=str(manifest)) from None
        if not isinstance(saved, dict) or saved.get("format") != FORMAT:
            raise ParameterError("not a saltplan batch checkpoint of this format; delete the "
                                 "folder to start afresh", file=str(manifest))
        for key, label in _WHAT.items():
            if saved.get(key) != self.run.get(key):
                raise ParameterError(
                    f"the checkpoint was made for another run ({label} differs); rerun with "
                    "the same input and options, or give a new folder", file=str(self.folder))
        self.created = saved.get("made_folder") is True    # removed at the end if so
        for p in self.folder.iterdir():
            m = _CHUNK.match(p.name)
            if m:
                self.done.add(int(m.group(1)))
        self._sweep()

    # ---------------------------------------------------------------- temporaries
    def _sweep(self) -> None:
        """Remove the hidden temporaries a killed earlier attempt left (only those listed)."""
        listed = self.folder / TEMPORARIES
        try:
            names = json.loads(listed.read_text(encoding="utf-8"))
        except (OSError, ValueError, UnicodeDecodeError):
            return
        for name in names if isinstance(names, list) else []:
            path = Path(str(name))
            if path.name.startswith(".") and path.name.endswith(".part"):
                with contextlib.suppress(OSError):
                    path.unlink()

    def note_temporary(self, *paths: str | Path) -> None:
        """List this attempt's hidden temporary outputs (see :data:`TEMPORARIES`)."""
        try:
            _write_durable(self.folder / TEMPORARIES,
                           _dumps([str(Path(p).resolve()) for p in paths]))
        except OSError as exc:
            raise ParameterError(f"cannot write to the checkpoint folder: "
                                 f"{exc.strerror or type(exc).__name__}",
                                 file=str(self.folder)) from None

    # ---------------------------------------------------------------- chunks
    def _path(self, index: int) -> Path:
        return self.folder / f"chunk-{index:06d}.json"

    def has(self, index: int) -> bool:
        return index in self.done

    def load(self, index: int, rows: Sequence[int]) -> list[dict[str, Any]]:
        """The stored rows of chunk ``index``; ``rows`` are the input row numbers it must hold."""
        path = self._path(index)
        try:
            data = json.loads(path.read_text(encoding="utf-8"))
        except (OSError, ValueError, UnicodeDecodeError):
            data = None
        if (not isinstance(data, list) or [r.get("row") if isinstance(r, dict) else None
                                           for r in data] != list(rows)):
            raise ParameterError("a checkpoint chunk does not match the input (damaged or "
                                 "edited); delete the folder to start afresh", file=str(path))
        self.resumed_rows += len(data)
        self.kept_rows += len(data)
        return data

    def save(self, index: int, rows: Sequence[dict[str, Any]]) -> None:
        """Keep the rows of chunk ``index`` (without any full plan they carry)."""
        kept = [{k: v for k, v in row.items() if k != "_plan"} for row in rows]
        try:
            _write_durable(self._path(index), _dumps(kept))
        except OSError as exc:
            raise ParameterError(f"cannot write to the checkpoint folder: "
                                 f"{exc.strerror or type(exc).__name__}",
                                 file=str(self.folder)) from None
        self.done.add(index)
        self.kept_rows += len(kept)

    def finish(self) -> None:
        """The run is complete and its outputs are in place: remove the checkpoint."""
        for p in list(self.folder.iterdir()):
            if p.name in (MANIFEST, TEMPORARIES) or _CHUNK.match(p.name) or (
                    p.name.startswith(".") and p.name.endswith(".json.part")):
                with contextlib.suppress(OSError):
                    p.unlink()
        if self.created:
            with contextlib.suppress(OSError):
                self.folder.rmdir()


def _dumps(data) -> bytes:
    return json.dumps(data, ensure_ascii=False, allow_nan=True, separators=(",", ":"),
                      sort_keys=False).encode("utf-8")
