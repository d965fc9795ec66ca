"""Batch input: CSV, SDF or a DataFrame, read in chunks of :class:`Record`.

Files are never held in memory whole. A CSV is first scanned once in 1 MiB blocks (is it
UTF-8 text? how many lines, for the progress bar?), then read record by record with the
standard :mod:`csv` module. We use :mod:`csv` rather than ``pandas.read_csv`` here on
purpose: pandas stops the whole file at the first line with a wrong number of fields (or
drops it), while a batch must keep every input row and flag the bad ones.

Conventions
-----------
* ``row`` is the 1-based number of the data record (the header is not counted; blank lines
  are skipped and not counted, but a line of empty fields is a row; a quoted field spanning
  lines is one record). For an SDF it is the record number.
* Column names are matched exactly, then case-insensitively (``SMILES`` finds ``smiles``).
  ``id``, ``name``, dose and measured-pKa columns are optional: when not named they are
  looked up under their default names (``id``; ``name``; ``dose_mg``; ``pka``), and a
  column named explicitly but absent is an error.
* A later row repeating an earlier ``id`` is kept and evaluated; its ``duplicate_of`` holds
  the row number where that id first appeared (ids are compared after stripping spaces;
  empty ids are never duplicates). Remembering every id costs memory in proportion to the
  number of distinct ids (roughly 100 bytes each).
"""
from __future__ import annotations

import codecs
import contextlib
import csv
import sys
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from ..errors import InputFileError

_BLOCK = 1 << 20
DEFAULT_ID = "id"
DEFAULT_NAME = "name"
DEFAULT_DOSE = "dose_mg"
DEFAULT_PKA = "pka"


@dataclass(frozen=True)
class Record:
    """One input row, as text, before evaluation."""

    row: int
    smiles: str = ""
    id: str = ""
    name: str = ""
    dose: str = ""
    pka: str = ""
    error: str | None = None       # a problem found while reading (wrong field count ...)
    duplicate_of: int | None = None


@dataclass(frozen=True)
class ColumnSpec:
    """Which input columns hold what; ``None`` means "the default name, if present"."""

    smiles: str = "smiles"
    id: str | None = None
    name: str | None = None
    dose: str | None = None
    pka: tuple[str, ...] | None = None


def column_spec(smiles_column="smiles", id_column=None, name_column=None, dose_column=None,
                pka_columns=None) -> ColumnSpec:
    if isinstance(pka_columns, str):
        pka_columns = (pka_columns,)
    elif pka_columns is not None:
        pka_columns = tuple(pka_columns)
    return ColumnSpec(smiles_column, id_column, name_column, dose_column, pka_columns)


# --------------------------------------------------------------------------- column lookup
def _find(header: Sequence[str], wanted: str) -> int | None:
    if wanted in header:
        return list(header).index(wanted)
    low = [h.lower() for h in header]
    if low.count(wanted.lower()) == 1:
        return low.index(wanted.lower())
    return None


def _found_list(header: Sequence[str]) -> str:
    shown = [f"'{h}'" for h in header[:20]]
    if len(header) > 20:
        shown.append(f"... ({len(header)} in all)")
    return ", ".join(shown) if shown else "none"


@dataclass(frozen=True)
class _Layout:
    smiles: int | None
    id: int | None
    name: int | None
    dose: int | None
    pka: tuple[int, ...]
    width: int


def _layout(header: Sequence[str], spec: ColumnSpec, label: str, *,
            need_smiles: bool = True) -> _Layout:
    def optional(explicit, default, field):
        if explicit is None:
            return _find(header, default)
        idx = _find(header, explicit)
        if idx is None:
            raise InputFileError(f"no {field} column '{explicit}' (columns found: "
                                 f"{_found_list(header)})", file=label)
        return idx

    smiles = None
    if need_smiles:
        smiles = _find(header, spec.smiles)
        if smiles is None:
            raise InputFileError(
                f"no SMILES column '{spec.smiles}' (columns found: {_found_list(header)}); "
                "name the column with --smiles-column / smiles_column", file=label)
    if spec.pka is None:
        found = _find(header, DEFAULT_PKA)
        pka = () if found is None else (found,)
    else:
        pka = tuple(optional(c, DEFAULT_PKA, "measured pKa") for c in spec.pka)
    return _Layout(smiles, optional(spec.id, DEFAULT_ID, "id"),
                   optional(spec.name, DEFAULT_NAME, "name"),
                   optional(spec.dose, DEFAULT_DOSE, "dose"), pka, len(header))


def _cell(value: Any) -> str:
    """Text of one cell (None and NaN become empty)."""
    if value is None:
        return ""
    if isinstance(value, float) and value != value:
        return ""
    text = str(value)
    return "" if text in ("nan", "NaN", "<NA>", "None") and not isinstance(value, str) else text.strip()


def _record(row: int, fields: Sequence[Any], lay: _Layout, error: str | None = None) -> Record:
    def get(i):
        return _cell(fields[i]) if i is not None and i < len(fields) else ""

    pka = "; ".join(v for v in (get(i) for i in lay.pka) if v)
    return Record(row=row, smiles=get(lay.smiles), id=get(lay.id), name=get(lay.name),
                  dose=get(lay.dose), pka=pka, error=error)


# --------------------------------------------------------------------------- file checks
def _check_file(path: Path) -> None:
    if not path.exists():
        raise InputFileError("input file not found", file=str(path))
    if path.is_dir():
        raise InputFileError("is a directory, expected a CSV or SDF file", file=str(path))


def scan_text(path: str | Path, count: bytes = b"\n") -> int:
    """Check that a file is UTF-8 text (a BOM is fine) and count ``count`` occurrences.

    Reads 1 MiB at a time. Raises :class:`InputFileError` naming the byte offset (0-based)
    and line of the first byte that is not UTF-8, or saying the file is binary or empty.
    """
    path = Path(path)
    _check_file(path)
    decoder = codecs.getincrementaldecoder("utf-8")("strict")
    offset = lines = hits = 0
    nonblank = False
    with open(path, "rb") as fh:
        while True:
            block = fh.read(_BLOCK)
            final = not block
            try:
                text = decoder.decode(block, final=final)
            except UnicodeDecodeError as exc:
                pending = len(decoder.getstate()[0]) if not final else 0
                at = offset - pending + exc.start
                with open(path, "rb") as again:
                    line = again.read(at).count(b"\n") + 1 if at < 64 * _BLOCK else None
                where = f"byte {at}" + (f", line {line}" if line else "")
                raise InputFileError(
                    f"not UTF-8 text ({where}: 0x{exc.object[exc.start]:02x}); "
                    "save the file as UTF-8", file=str(path)) from None
            if final:
                break
            nul = block.find(b"\0")
            if nul >= 0:
                raise InputFileError(f"binary file (NUL byte at byte {offset + nul}), "
                                     "expected text", file=str(path))
            if not nonblank and text.lstrip("\ufeff").strip():
                nonblank = True
            lines += block.count(b"\n")
            hits += block.count(count) if count != b"\n" else 0
            offset += len(block)
    if not nonblank:
        raise InputFileError("empty file (no header, no rows)", file=str(path))
    return lines if count == b"\n" else hits


# --------------------------------------------------------------------------- sources
class Source:
    """A batch input: ``label``, ``estimated_rows`` (for progress; may be off) and chunks."""

    label: str = ""
    estimated_rows: int | None = None

    def chunks(self, size: int) -> Iterator[list[Record]]:  # pragma: no cover - abstract
        raise NotImplementedError

    def records(self) -> Iterator[Record]:  # pragma: no cover - abstract
        raise NotImplementedError


class CsvSource(Source):
    def __init__(self, path: str | Path, spec: ColumnSpec):
        self.path = Path(path)
        self.label = str(path)
        self.spec = spec
        lines = scan_text(self.path)
        self.estimated_rows = max(lines - 1, 0) + 1
        with open(self.path, encoding="utf-8-sig", newline="") as fh:
            header = self._header(fh)
        self.header = header
        self.layout = _layout(header, spec, self.label)

    def _header(self, fh) -> list[str]:
        try:
            with _wide_fields():
                for fields in csv.reader(fh, strict=True):
                    if any(f.strip() for f in fields):
                        return [f.strip() for f in fields]
        except csv.Error as exc:
            raise InputFileError(f"header row is not valid CSV: {exc}", file=self.label) from None
        raise InputFileError("empty file (no header, no rows)", file=self.label)

    def records(self) -> Iterator[Record]:
        lay, width = self.layout, self.layout.width
        with _wide_fields(), open(self.path, encoding="utf-8-sig", newline="") as fh:
            reader = csv.reader(fh, strict=True)
            seen_header = False
            row = 0
            while True:
                try:
                    fields = next(reader)
                except StopIteration:
                    break
                except csv.Error as exc:  # the reader resumes on the next line
                    row += 1
                    yield Record(row=row, error=f"not valid CSV (line {reader.line_num}): {exc}")
                    continue
                if not seen_header:
                    if any(f.strip() for f in fields):
                        seen_header = True
                    continue
                if not fields or (len(fields) == 1 and not fields[0].strip()):
                    continue  # a blank line (a line of commas is a row: it gets an error)
                row += 1
                error = None
                if len(fields) != width:
                    error = (f"row has {len(fields)} fields, the header has {width} "
                             f"(line {reader.line_num})")
                yield _record(row, fields, lay, error)
        if row == 0:
            raise InputFileError("the file has a header but no data rows", file=self.label)

    def chunks(self, size: int) -> Iterator[list[Record]]:
        return _chunked(self.records(), size)


@contextlib.contextmanager
def _wide_fields():
    """Lift csv's field-size limit while this file is read, and put it back afterwards.

    csv's default 128 KiB limit would stop the file at one huge cell; huge SMILES are
    refused per row by the structure reader instead. The limit is process-wide, so it is
    restored when reading ends (other CSV readers keep their protection).
    """
    previous = csv.field_size_limit()
    limit = sys.maxsize
    while True:
        try:
            csv.field_size_limit(limit)
            break
        except OverflowError:  # pragma: no cover - 32-bit C long
            limit //= 2
    try:
        yield
    finally:
        csv.field_size_limit(previous)


class SdfSource(Source):
    """An SDF file: SMILES from each record, id/name/dose/pKa from its data fields."""

    def __init__(self, path: str | Path, spec: ColumnSpec):
        self.path = Path(path)
        self.label = str(path)
        self.spec = spec
        self.estimated_rows = scan_text(self.path, count=b"$$$$") or None

    def records(self) -> Iterator[Record]:
        from ..structure import iter_sdf

        spec = self.spec
        n = 0
        for n, smiles, title, props, error in iter_sdf(self.path):
            keys = list(props)
            def prop(explicit, default, field):
                key = explicit or default
                idx = _find(keys, key)  # noqa: B023 - prop() runs within this iteration only
                if idx is None:
                    if explicit and error is None:  # noqa: B023 - as above
                        return None, f"no SDF data field '{explicit}' ({field})"
                    return "", None
                return _cell(props[keys[idx]]), None  # noqa: B023 - as above

            problems = []
            ident, p = prop(spec.id, DEFAULT_ID, "id")
            problems.append(p)
            if spec.name:
                name, p = prop(spec.name, DEFAULT_NAME, "name")
                problems.append(p)
            else:
                name = title or prop(None, DEFAULT_NAME, "name")[0]
            dose, p = prop(spec.dose, DEFAULT_DOSE, "dose")
            problems.append(p)
            pkas = []
            for col in (spec.pka if spec.pka is not None else (None,)):
                value, p = prop(col, DEFAULT_PKA, "measured pKa")
                problems.append(p)
                if value:
                    pkas.append(value)
            problem = error or next((p for p in problems if p), None)
            yield Record(row=n, smiles=smiles or "", id=ident or "", name=name or "",
                         dose=dose or "", pka="; ".join(pkas), error=problem)
        if n == 0:
            raise InputFileError("no SDF records found", file=self.label)

    def chunks(self, size: int) -> Iterator[list[Record]]:
        return _chunked(self.records(), size)


class FrameSource(Source):
    """A :class:`pandas.DataFrame` already in memory."""

    def __init__(self, frame, spec: ColumnSpec, label: str = "DataFrame"):
        self.frame = frame
        self.label = label
        self.estimated_rows = len(frame)
        header = [str(c).strip() for c in frame.columns]
        self.layout = _layout(header, spec, label)
        if len(frame) == 0:
            raise InputFileError("the table has no rows", file=label)

    def records(self) -> Iterator[Record]:
        for i, values in enumerate(self.frame.itertuples(index=False, name=None), start=1):
            yield _record(i, values, self.layout)

    def chunks(self, size: int) -> Iterator[list[Record]]:
        return _chunked(self.records(), size)


def open_source(source, spec: ColumnSpec) -> Source:
    """A :class:`Source` for a CSV path (``.csv``, ``.txt``), an SDF path (``.sdf``, ``.sd``)
    or a :class:`pandas.DataFrame`."""
    if hasattr(source, "itertuples") and hasattr(source, "columns"):
        return FrameSource(source, spec)
    path = Path(source)
    suffix = path.suffix.lower()
    if suffix in (".sdf", ".sd"):
        return SdfSource(path, spec)
    if suffix in (".csv", ".txt", ""):
        return CsvSource(path, spec)
    raise InputFileError(f"unknown input type '{suffix}' (expected .csv or .sdf)", file=str(path))


# --------------------------------------------------------------------------- chunking
def _chunked(records: Iterator[Record], size: int) -> Iterator[list[Record]]:
    chunk: list[Record] = []
    for rec in records:
        chunk.append(rec)
        if len(chunk) >= size:
            yield chunk
            chunk = []
    if chunk:
        yield chunk


def mark_duplicates(chunks: Iterator[list[Record]]) -> Iterator[list[Record]]:
    """Set ``duplicate_of`` on records whose id appeared in an earlier row (input order)."""
    first: dict[str, int] = {}
    for chunk in chunks:
        out = []
        for rec in chunk:
            if rec.id:
                seen = first.setdefault(rec.id, rec.row)
                if seen != rec.row:
                    rec = replace(rec, duplicate_of=seen)
            out.append(rec)
        yield out

