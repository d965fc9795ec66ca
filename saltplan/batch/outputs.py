"""Batch output: stream rows to CSV, JSON, JSON Lines or XLSX, atomically.

Every writer writes into a temporary file beside the target and renames it only in
``commit()``; ``abort()`` deletes it. A run that fails half-way leaves no partial file
(the same rule as :mod:`saltplan._io`, here for files written incrementally).

Formats, chosen by the extension of the output path:

``.csv``
    UTF-8, a header row, ``\\n`` line ends; empty cells for missing values. Text cells
    starting with ``=``, ``+``, ``-``, ``@``, tab or CR get a leading single quote so that
    a spreadsheet never runs them as formulas (:func:`saltplan._io.spreadsheet_safe`);
    numbers such as ``-1.2`` are written as they are.
``.json``
    One JSON array of row objects (keys in column order), written a row at a time.
``.jsonl``
    JSON Lines: one row object per line.
``.xlsx``
    One sheet written with openpyxl's write-only mode (rows go to disk as they come, but
    the workbook is zipped at the end). A sheet holds at most 1,048,576 rows
    (:data:`XLSX_MAX_ROWS` data rows plus the header): a larger batch is refused when it
    reaches that size; write CSV or JSON for those. Every cell is stored as text or number,
    never as a formula.
"""
from __future__ import annotations

import contextlib
import json
import math
import os
import tempfile
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from ..errors import ParameterError

TABLE_FORMATS = (".csv", ".json", ".jsonl", ".xlsx")
#: data rows an XLSX sheet can hold (1,048,576 rows less the header)
XLSX_MAX_ROWS = 1_048_575


class PendingFile:
    """A file whose whole content is already rendered; written atomically on commit."""

    def __init__(self, path, content: str | bytes):
        self.path = Path(path)
        self.data = content.encode("utf-8") if isinstance(content, str) else content

    def commit(self) -> Path:
        target = _TempTarget(self.path)
        try:
            target.tmp.write_bytes(self.data)
        except BaseException:
            target.remove()
            raise
        return target.replace()

    def abort(self) -> None:
        pass


class _TempTarget:
    """A temporary file next to ``path`` that becomes ``path`` on commit."""

    def __init__(self, path):
        self.path = Path(path)
        if self.path.is_dir():
            raise ParameterError("output path is a directory", file=str(self.path))
        self.path.parent.mkdir(parents=True, exist_ok=True)
        from .._io import uninterrupted

        with uninterrupted():  # a signal here must not leave a temporary nobody knows of
            fd, tmp = tempfile.mkstemp(prefix=f".{self.path.name}.", suffix=".part",
                                       dir=self.path.parent)
            os.close(fd)
            self.tmp = Path(tmp)
        os.chmod(self.tmp, 0o666 & ~_umask())  # mkstemp makes 0600; give the usual mode

    def replace(self) -> Path:
        from .._io import published

        os.replace(self.tmp, self.path)
        published(self.path)
        return self.path

    def remove(self) -> None:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(self.tmp)


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def csv_value(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    return str(value)


class _TextWriter:
    def __init__(self, path, columns: Sequence[str]):
        self.columns = tuple(columns)
        self.target = _TempTarget(path)
        self.fh = open(self.target.tmp, "w", encoding="utf-8", newline="")
        self.count = 0
        self.start()

    def start(self) -> None:
        pass

    def finish(self) -> None:
        pass

    def write(self, rows) -> None:  # pragma: no cover - abstract
        raise NotImplementedError

    def commit(self) -> Path:
        self.finish()
        self.fh.close()
        return self.target.replace()

    def abort(self) -> None:
        with contextlib.suppress(Exception):
            self.fh.close()
        self.target.remove()


class CsvWriter(_TextWriter):
    def start(self):
        from .._io import SafeCsvWriter

        # text cells that a spreadsheet would run as a formula get a leading quote
        self.csv = SafeCsvWriter(self.fh, lineterminator="\n")
        self.csv.writerow(self.columns)

    def write(self, rows):
        cols = self.columns
        self.csv.writerows([csv_value(row.get(c)) for c in cols] for row in rows)
        self.count += len(rows)


def _json_value(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None  # JSON has no NaN or infinity
    return value


def _json_row(row, cols) -> str:
    return json.dumps({c: _json_value(row.get(c)) for c in cols}, ensure_ascii=False,
                      allow_nan=False)


class JsonWriter(_TextWriter):
    def start(self):
        self.fh.write("[")

    def write(self, rows):
        cols = self.columns
        for row in rows:
            self.fh.write(("\n" if self.count == 0 else ",\n") + _json_row(row, cols))
            self.count += 1

    def finish(self):
        self.fh.write("\n]\n" if self.count else "]\n")


class JsonLinesWriter(_TextWriter):
    def write(self, rows):
        cols = self.columns
        self.fh.writelines(_json_row(row, cols) + "\n" for row in rows)
        self.count += len(rows)


class XlsxWriter:
    """openpyxl write-only workbook; rows are spooled to disk as they are appended."""

    def __init__(self, path, columns: Sequence[str], sheet: str = "batch"):
        from openpyxl import Workbook

        self.columns = tuple(columns)
        self.target = _TempTarget(path)
        self.wb = Workbook(write_only=True)
        self.ws = self.wb.create_sheet(sheet)
        self.ws.append(list(self.columns))
        self.count = 0

    def _cell(self, value):
        from openpyxl.cell import WriteOnlyCell
        from openpyxl.cell.cell import ILLEGAL_CHARACTERS_RE

        if value is None or isinstance(value, (int, float)):
            return value
        cell = WriteOnlyCell(self.ws, value=ILLEGAL_CHARACTERS_RE.sub("\ufffd", str(value)))
        cell.data_type = "s"  # a name like "=HYPERLINK(...)" stays text, never a formula
        return cell

    @property
    def max_rows(self) -> int:
        return XLSX_MAX_ROWS

    def refuse(self, rows: int | None = None) -> None:
        found = f" (the input has about {rows:,})" if rows else ""
        raise ParameterError(f"an XLSX sheet holds at most {XLSX_MAX_ROWS:,} data rows{found}; "
                             "write .csv or .json for a batch this large",
                             file=str(self.target.path))

    def write(self, rows):
        if self.count + len(rows) > XLSX_MAX_ROWS:
            self.refuse()
        for row in rows:
            self.ws.append([self._cell(row.get(c)) for c in self.columns])
        self.count += len(rows)

    def commit(self) -> Path:
        self.wb.save(self.target.tmp)
        return self.target.replace()

    def abort(self) -> None:
        with contextlib.suppress(Exception):
            self.ws.close()  # end openpyxl's row stream, then drop its spool file
            spool = self.ws._writer.out
            if isinstance(spool, str):
                os.unlink(spool)
        self.target.remove()


def open_table_writer(path, columns: Sequence[str]):
    """A streaming writer for ``path``, by extension (see :data:`TABLE_FORMATS`)."""
    suffix = Path(path).suffix.lower()
    writers = {".csv": CsvWriter, ".json": JsonWriter, ".jsonl": JsonLinesWriter,
               ".xlsx": XlsxWriter}
    if suffix not in writers:
        raise ParameterError(f"unknown output type '{suffix or '(none)'}' (expected "
                             f"{', '.join(TABLE_FORMATS)})", file=str(path))
    return writers[suffix](path, columns)
