"""Per-well results kept by the workbench, validated exactly as a results file is.

Each save is checked by :func:`saltplan.select.results.parse_results` on a one-row CSV, so a
value the results file would refuse is refused here with the same message. Saves are
append-only versions; a save must name the version it was edited from (optimistic locking):
a second tab saving from an older version is refused, and neither value is lost.
"""
from __future__ import annotations

import threading
from dataclasses import dataclass, field

from .._io import csv_text
from ..errors import ResultsError

#: the fields a well's form offers (results-file column names)
FIELDS = ("outcome", "form_label", "melting_onset_c", "weight_gain_80rh_pct",
          "solubility_mg_ml", "stoichiometry_found", "notes")
MAX_FIELD_CHARS = 2000


class Conflict(Exception):
    """The well changed since the form was loaded."""

    def __init__(self, well: str, current: int, given: int):
        super().__init__(f"well {well} was saved elsewhere (now version {current}, this form was "
                         f"opened at version {given}); nothing was overwritten: your values are "
                         "still in the form below, reload the well to compare and save again")
        self.current = current


@dataclass
class WellRecord:
    version: int = 0
    values: dict[str, str] = field(default_factory=dict)
    history: list[dict[str, str]] = field(default_factory=list)


def _one_row_csv(well: str, values: dict[str, str]) -> str:
    return csv_text([("well", *FIELDS), (well, *(values.get(f, "") for f in FIELDS))])


def validate(design: dict, well: str, values: dict[str, str]) -> dict[str, str]:
    """Clean values of one well, or ResultsError with the results file's message."""
    from ..select.results import parse_results

    clean = {f: str(values.get(f) or "").strip()[:MAX_FIELD_CHARS] for f in FIELDS}
    if not any(clean.values()):
        return clean                                   # cleared: the well is not reported
    try:
        parse_results(_one_row_csv(well, clean), design, origin=f"well {well}")
    except ResultsError as exc:             # the one-row file's row number means nothing here
        raise ResultsError(exc.message, file=exc.file, field=exc.field) from None
    return clean


class WellBook:
    """The wells of one screen design."""

    def __init__(self):
        self._lock = threading.Lock()
        self.wells: dict[str, WellRecord] = {}

    def get(self, well: str) -> WellRecord:
        return self.wells.get(well) or WellRecord()

    def save(self, design: dict, well: str, values: dict[str, str], version: int) -> WellRecord:
        clean = validate(design, well, values)
        with self._lock:
            rec = self.wells.setdefault(well, WellRecord())
            if version != rec.version:
                raise Conflict(well, rec.version, version)
            rec.history.append(dict(rec.values))
            rec.values, rec.version = clean, rec.version + 1
            return rec

    def load_file(self, design: dict, data: bytes, origin: str) -> int:
        """Take every observed well of a results file (validated whole first); returns count."""
        from ..select.results import parse_results

        results = parse_results(data, design, origin=origin)
        with self._lock:
            for obs in results.observations:
                rec = self.wells.setdefault(obs.well, WellRecord())
                rec.history.append(dict(rec.values))
                rec.values = {f: _text(getattr(obs, f, None)) for f in FIELDS}
                rec.version += 1
        return len(results.observations)

    def results_csv(self, design: dict) -> str:
        """The observed wells as a results file (spreadsheet-safe cells)."""
        rows: list[tuple] = [("well", *FIELDS)]
        for well in design["wells"]:
            rec = self.wells.get(str(well["well"]))
            if rec and rec.values.get("outcome"):
                rows.append((well["well"], *(rec.values.get(f, "") for f in FIELDS)))
        return csv_text(rows)


def _text(value) -> str:
    if value is None:
        return ""
    return f"{value:g}" if isinstance(value, float) else str(value)


def not_ready(book: WellBook) -> ResultsError | None:
    if not any(r.values.get("outcome") for r in book.wells.values()):
        return ResultsError("no well has an outcome yet: enter results for the wells you observed")
    return None
