"""Reading and validating a salt-screen results file against its design.

The results file is a CSV keyed by the worksheet's wells (``results-template.csv`` is
written beside the worksheet). One row per well; every field is optional except the
outcome. Units are part of the column name, as a suffix (one convention, checked):

============================  ======  ==========================================
column                        unit    meaning
============================  ======  ==========================================
``well``                              well id as in the design: SBS A1–H12 (``A01`` is
                                      read as A1) or vial V01…
``counterion``, ``stoichiometry``, ``solvent``, ``mode``
                                      copied from the worksheet; checked against
                                      the design when present
``outcome``                           crystalline / amorphous / oil / gel /
                                      clear_solution (required)
``form_label``                        label of a distinct XRPD pattern ("A", "B");
                                      the same label within one counterion means
                                      the same pattern; label the free form's
                                      pattern (controls) distinctly
``melting_onset_c``           °C      DSC onset
``weight_gain_80rh_pct``      %       mass gain at 80 % RH, 25 °C (Ph. Eur. 5.11)
``solubility_mg_ml``          mg/mL   aqueous solubility
``saturated_ph``              pH      pH of the saturated solution
``stoichiometry_found``               API:counterion found (e.g. 1H NMR), "1:1"
``solvent_content_pct``       % w/w   solvent/water content (TGA, KF)
``notes``                             free text
============================  ======  ==========================================

A numeric column without its unit suffix (``melting_onset``) is refused ("units
missing"), so is any column we do not know. Lines starting with ``#`` are comments; a
comment holding ``INVENTED DATA`` marks the file as invented (the decision record says
so). UTF-8 (with or without BOM) and UTF-16 with BOM are read; CRLF line ends are fine;
``;`` or tab separated files (spreadsheet exports) are recognised from the header line,
and then a decimal comma is accepted.

Row numbers in errors are line numbers of the file (1 = first line), as an editor
shows them.
"""
from __future__ import annotations

import csv
import hashlib
import math
import re
from collections.abc import Iterable
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

from .._io import spreadsheet_text
from ..errors import ResultsError

#: marker a comment line carries in an invented (demo) results file
INVENTED_MARKER = "INVENTED DATA"

#: outcome vocabulary (domain.md §6–7) and the spellings accepted for each
OUTCOMES = ("crystalline", "amorphous", "oil", "gel", "clear_solution")
_OUTCOME_ALIASES = {
    "crystalline": "crystalline", "crystalline_solid": "crystalline", "crystal": "crystalline",
    "crystals": "crystalline", "xtal": "crystalline",
    "amorphous": "amorphous", "amorphous_solid": "amorphous",
    "oil": "oil", "oiled_out": "oil", "oiling_out": "oil",
    "gel": "gel",
    "clear_solution": "clear_solution", "clear": "clear_solution", "solution": "clear_solution",
    "no_solid": "clear_solution",
}


@dataclass(frozen=True)
class _Numeric:
    unit: str
    low: float
    high: float
    label: str


#: numeric columns: unit as shown, physical range (inclusive) and label for messages.
#: Ranges are plausibility limits against typing errors, not specifications.
NUMERIC_COLUMNS = {
    "melting_onset_c": _Numeric("°C", -50.0, 450.0, "melting onset"),
    "weight_gain_80rh_pct": _Numeric("%", -5.0, 200.0, "weight gain at 80 % RH"),
    "solubility_mg_ml": _Numeric("mg/mL", 0.0, 1000.0, "aqueous solubility"),
    "saturated_ph": _Numeric("pH", 0.0, 14.0, "pH of the saturated solution"),
    "solvent_content_pct": _Numeric("% w/w", 0.0, 100.0, "solvent/water content"),
}
#: design columns copied into the template; checked against the design when present
CONTEXT_COLUMNS = ("counterion", "stoichiometry", "solvent", "mode")
TEXT_COLUMNS = ("form_label", "stoichiometry_found", "notes")
#: every accepted column, in the order of the results template (saltplan.screen_output)
COLUMNS = ("well", *CONTEXT_COLUMNS, "outcome", "form_label", "melting_onset_c",
           "weight_gain_80rh_pct", "solubility_mg_ml", "saturated_ph", "stoichiometry_found",
           "solvent_content_pct", "notes")
#: observation fields (all but ``well`` and the design context)
OBSERVATION_COLUMNS = tuple(c for c in COLUMNS if c not in ("well", *CONTEXT_COLUMNS))

#: a header naming a numeric quantity without its unit suffix -> the expected column
_UNITLESS = {
    "melting_onset": "melting_onset_c", "melting_point": "melting_onset_c", "mp": "melting_onset_c",
    "onset": "melting_onset_c", "melting": "melting_onset_c",
    "weight_gain": "weight_gain_80rh_pct", "weight_gain_80rh": "weight_gain_80rh_pct",
    "mass_gain": "weight_gain_80rh_pct", "hygroscopicity": "weight_gain_80rh_pct",
    "solubility": "solubility_mg_ml",
    "solvent_content": "solvent_content_pct", "water_content": "solvent_content_pct",
    "tga": "solvent_content_pct",
}
_NUMERIC_BASES = {
    "melting_onset": "melting_onset_c", "weight_gain_80rh": "weight_gain_80rh_pct",
    "weight_gain": "weight_gain_80rh_pct", "solubility": "solubility_mg_ml",
    "solvent_content": "solvent_content_pct",
}
#: what a control well's counterion cell may say (compared after :func:`_token`)
_CONTROL_TOKENS = ("", "none", "control", "free form", "no counterion", "n/a", "na")
_ANY_ID_RE = re.compile(r"^([A-Za-z]{1,3})0*(\d{1,4})$")
_RATIO_RE = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*:\s*(\d+(?:\.\d+)?)\s*$")


@dataclass(frozen=True)
class Observation:
    """One well's reported results, joined with what the design put in the well.

    ``counterion``, ``stoichiometry`` (intended, API:counterion), ``solvent`` and ``mode``
    come from the design; the rest is measured (the results file). Numbers in the units
    of :data:`NUMERIC_COLUMNS`; None = not reported.
    """

    well: str
    row: int
    kind: str
    counterion: str | None
    stoichiometry: str | None
    solvent: str | None
    mode: str | None
    outcome: str
    form_label: str | None = None
    melting_onset_c: float | None = None
    weight_gain_80rh_pct: float | None = None
    solubility_mg_ml: float | None = None
    saturated_ph: float | None = None
    stoichiometry_found: str | None = None
    solvent_content_pct: float | None = None
    notes: str | None = None

    def to_dict(self) -> dict[str, Any]:
        return {f.name: getattr(self, f.name) for f in fields(self)}


@dataclass(frozen=True)
class Results:
    """A validated results file.

    ``observations`` follow the design's well order; ``not_reported`` lists the design
    wells without a row or whose row holds no observation (a blank template row).
    """

    file: str
    sha256: str
    invented: bool
    columns: tuple[str, ...]
    comments: tuple[str, ...]
    observations: tuple[Observation, ...]
    not_reported: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "file": self.file,
            "sha256": self.sha256,
            "invented": self.invented,
            "columns": list(self.columns),
            "comments": list(self.comments),
            "observations": [o.to_dict() for o in self.observations],
            "not_reported": list(self.not_reported),
        }


# --------------------------------------------------------------------------- helpers
def design_dict(design) -> dict[str, Any]:
    """The design as a plain dict (a ScreenDesign, its ``to_dict()``, or a mapping)."""
    if hasattr(design, "to_dict"):
        design = design.to_dict()
    if not isinstance(design, dict) or not isinstance(design.get("wells"), list):
        raise ResultsError("design has no 'wells' list (expected ScreenDesign.to_dict())",
                           field="wells")
    return design


def well_key(text: str) -> str | None:
    """Comparison key of a well or vial id: letters upper-cased, leading zeros dropped
    (``"a01"`` and ``"A1"`` → ``"A1"``; ``"v3"`` and ``"V03"`` → ``"V3"``); None if the
    text is not an id of that shape."""
    m = _ANY_ID_RE.match(text.strip())
    if not m:
        return None
    return f"{m.group(1).upper()}{int(m.group(2))}"


def parse_ratio(text: str) -> tuple[float, float] | None:
    """``"2:1"`` → (2.0, 1.0); None if not ``n:m`` with n, m > 0."""
    m = _RATIO_RE.match(text)
    if not m:
        return None
    n, k = float(m.group(1)), float(m.group(2))
    if n <= 0 or k <= 0:
        return None
    return n, k


def _token(value: Any) -> str:
    """Case, hyphen, underscore and spacing-insensitive form of a label."""
    text = "" if value is None else str(value)
    return " ".join(text.lower().replace("-", " ").replace("_", " ").split())


def _norm_header(text: str) -> str:
    return "_".join(text.strip().lower().replace("-", " ").split())


#: longest cell accepted, whatever the process-wide ``csv.field_size_limit`` is (csv's
#: default; a note is a few lines, not a document)
MAX_CELL_CHARS = 131072

#: control characters other than tab, CR and LF: never typed in a sheet, a sign of a
#: binary or damaged file (and a NUL would reach the decision record)
_CONTROL_RE = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def _decode(data: bytes, origin: str) -> str:
    if data.startswith((b"\xff\xfe", b"\xfe\xff")):
        try:
            text = data.decode("utf-16")
        except UnicodeDecodeError as exc:
            raise ResultsError(f"not valid UTF-16 text (byte {exc.start})", file=origin) from None
    else:
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError as exc:
            raise ResultsError(f"not UTF-8 text (byte {exc.start}); save the sheet as 'CSV UTF-8'",
                               file=origin) from None
    bad = _CONTROL_RE.search(text)
    if bad:
        line = text.count("\n", 0, bad.start()) + 1
        raise ResultsError(f"control character U+{ord(bad.group()):04X} on line {line}: "
                           "binary or damaged file, expected CSV text", file=origin)
    return text


class _Lines:
    """Iterate the non-comment lines of a text, remembering physical line numbers."""

    def __init__(self, text: str):
        self.lines = text.replace("\r\n", "\n").replace("\r", "\n").split("\n")
        self.index = 0          # next line to read (0-based)
        self.comments: list[str] = []

    def __iter__(self):
        return self

    def __next__(self) -> str:
        while self.index < len(self.lines):
            line = self.lines[self.index]
            self.index += 1
            if line.lstrip().startswith("#"):
                self.comments.append(line.lstrip()[1:].strip())
                continue
            return line + "\n"
        raise StopIteration


def _delimiter(text: str) -> str:
    for line in text.replace("\r\n", "\n").split("\n"):
        if line.strip() and not line.lstrip().startswith("#"):
            counts = {d: line.count(d) for d in (",", ";", "\t")}
            best = max(counts, key=lambda d: (counts[d], d == ","))
            return best if counts[best] else ","
    return ","


def _header(cells: list[str], origin: str, row: int) -> list[str]:
    cells = list(cells)
    while cells and not cells[-1].strip():  # trailing empty cells of a spreadsheet export
        cells.pop()
    names: list[str] = []
    for i, raw in enumerate(cells, start=1):
        name = _norm_header(raw)
        if not name:
            raise ResultsError(f"column {i} has no name", file=origin, row=row)
        if name in COLUMNS:
            pass
        elif name in _UNITLESS:
            want = _UNITLESS[name]
            raise ResultsError(
                f"units missing in column '{raw.strip()}': name the unit as a suffix, "
                f"'{want}' ({NUMERIC_COLUMNS[want].unit})", file=origin, row=row, field=raw.strip())
        elif "[" in name or "(" in name:
            raise ResultsError(
                f"column '{raw.strip()}': write the unit as a name suffix (e.g. "
                "'melting_onset_c', 'solubility_mg_ml'), not in brackets",
                file=origin, row=row, field=raw.strip())
        else:
            base = next((b for b in sorted(_NUMERIC_BASES, key=len, reverse=True)
                         if name.startswith(b + "_")), None)
            if base is not None:
                want = _NUMERIC_BASES[base]
                raise ResultsError(
                    f"unit '{name[len(base) + 1:]}' not accepted in column '{raw.strip()}'; "
                    f"use '{want}' ({NUMERIC_COLUMNS[want].unit})",
                    file=origin, row=row, field=raw.strip())
            raise ResultsError(
                f"unknown column '{raw.strip()}'; accepted columns: {', '.join(COLUMNS)}",
                file=origin, row=row, field=raw.strip())
        if name in names:
            raise ResultsError(f"column '{name}' appears twice", file=origin, row=row, field=name)
        names.append(name)
    if "well" not in names:
        raise ResultsError("no 'well' column", file=origin, row=row, field="well")
    if "outcome" not in names:
        raise ResultsError("no 'outcome' column (the one required observation)",
                           file=origin, row=row, field="outcome")
    return names


def _number(text: str, column: str, decimal_comma: bool, origin: str, row: int) -> float:
    spec = NUMERIC_COLUMNS[column]
    raw = text.strip()
    candidate = raw.replace(",", ".") if decimal_comma and raw.count(",") == 1 and "." not in raw else raw
    try:
        value = float(candidate)
    except ValueError:
        raise ResultsError(
            f"'{raw}' is not a number ({spec.label}, {spec.unit}); give a value or leave the "
            "cell empty (qualifiers such as '<' go in notes)", file=origin, row=row, field=column) from None
    if not math.isfinite(value):
        raise ResultsError(f"'{raw}' is not a finite number", file=origin, row=row, field=column)
    if not spec.low <= value <= spec.high:
        raise ResultsError(
            f"{spec.label} {raw} {spec.unit} is outside the physical range "
            f"{spec.low:g} to {spec.high:g} {spec.unit}", file=origin, row=row, field=column)
    return value


def _check_context(column: str, given: str, well: dict, origin: str, row: int) -> None:
    """A design column copied into the results must still say what the design says."""
    text = given.strip()
    expected = well.get(column)
    if column == "counterion" and not expected:  # a control well
        if _token(text) in _CONTROL_TOKENS:
            return
        raise ResultsError(f"counterion '{text}' contradicts the design: well {well['well']} is a "
                           "control without counterion", file=origin, row=row, field=column)
    if not text:
        return  # cell left empty: nothing to compare
    if expected in (None, ""):
        if _token(text) in _CONTROL_TOKENS:
            return
    elif column == "stoichiometry":
        a, b = parse_ratio(text), parse_ratio(str(expected))
        if a is not None and b is not None and math.isclose(a[1] / a[0], b[1] / b[0]):
            return
    elif _token(text) == _token(expected):
        return
    raise ResultsError(f"{column} '{text}' contradicts the design (well {well['well']} has "
                       f"'{expected if expected not in (None, '') else 'none'}')",
                       file=origin, row=row, field=column)


# --------------------------------------------------------------------------- reading
def read_results(path: str | Path, design) -> Results:
    """Read and validate a results CSV against a screen design.

    Parameters
    ----------
    path
        The results CSV (see the module docstring for columns and units).
    design
        A ``ScreenDesign`` or its ``to_dict()``.

    Returns
    -------
    Results
        Observations in the design's well order and the wells not reported.

    Raises
    ------
    ResultsError
        Naming the file, row (line number) and field: unknown or duplicate well, bad
        outcome, value out of range, units missing, context contradicting the design, ...
    """
    path = Path(path)
    if not path.exists():
        raise ResultsError("file not found", file=str(path))
    if path.is_dir():
        raise ResultsError("is a folder, expected a results CSV", file=str(path))
    return parse_results(path.read_bytes(), design, origin=str(path))


def parse_results(data: bytes | str, design, origin: str = "results") -> Results:
    """Validate results given as bytes or text (see :func:`read_results`)."""
    raw = data.encode("utf-8") if isinstance(data, str) else data
    sha = hashlib.sha256(raw).hexdigest()
    text = _decode(raw, origin)
    design = design_dict(design)
    wells = {well_key(str(w["well"])) or str(w["well"]): w for w in design["wells"]}
    delimiter = _delimiter(text)
    lines = _Lines(text)
    reader = csv.reader(lines, delimiter=delimiter, strict=True)
    header: list[str] | None = None
    seen: dict[str, int] = {}
    found: dict[str, Observation] = {}
    try:
        for cells in reader:
            row = lines.index
            long = next((i for i, c in enumerate(cells) if len(c) > MAX_CELL_CHARS), None)
            if long is not None:
                where = header[long] if header is not None and long < len(header) else None
                raise ResultsError(f"cell of {len(cells[long]):,} characters exceeds the limit of "
                                   f"{MAX_CELL_CHARS:,} (not a results sheet?)", file=origin,
                                   row=row, field=where)
            if not any(c.strip() for c in cells):
                continue
            if header is None:
                header = _header(cells, origin, row)
                continue
            if len(cells) > len(header) and any(c.strip() for c in cells[len(header):]):
                raise ResultsError(f"{len(cells)} cells but the header has {len(header)} columns",
                                   file=origin, row=row)
            # a cell the tool neutralized for spreadsheets ("'=...") reads as its text
            record = dict(zip(header, (spreadsheet_text(c) for c in cells), strict=False))
            obs = _row(record, wells, seen, row, origin, delimiter != ",")
            if obs is not None:
                found[obs.well] = obs
    except csv.Error as exc:
        raise ResultsError(f"not readable as CSV: {exc}", file=origin, row=lines.index) from None
    if header is None:
        raise ResultsError("no header line (expected columns such as well, outcome, ...)", file=origin)
    if not found:
        raise ResultsError("no well has an outcome yet: fill in at least the 'outcome' column "
                           f"({', '.join(OUTCOMES)}) for the wells you observed",
                           file=origin, field="outcome")
    order = [w["well"] for w in design["wells"]]
    return Results(
        file=origin, sha256=sha,
        invented=any(INVENTED_MARKER in c for c in lines.comments),
        columns=tuple(header), comments=tuple(lines.comments),
        observations=tuple(found[w] for w in order if w in found),
        not_reported=tuple(w for w in order if w not in found),
    )


def _row(record: dict[str, str], wells: dict, seen: dict[str, int], row: int, origin: str,
         decimal_comma: bool) -> Observation | None:
    given = (record.get("well") or "").strip()
    if not given:
        raise ResultsError("well id missing", file=origin, row=row, field="well")
    key = well_key(given)
    if key is None:
        raise ResultsError(f"'{given}' is not a well id (A1–H12 on a 96-well plate, V01… for vials)",
                           file=origin, row=row, field="well")
    well_id = wells.get(key, {}).get("well")
    if well_id is None:
        raise ResultsError(f"unknown well {given}: not in the screen design", file=origin, row=row,
                           field="well")
    if well_id in seen:
        raise ResultsError(f"duplicate well {well_id} (first on row {seen[well_id]})", file=origin,
                           row=row, field="well")
    seen[well_id] = row
    well = wells[key]
    for column in CONTEXT_COLUMNS:
        if column in record:
            _check_context(column, record[column] or "", well, origin, row)
    values = {c: (record.get(c) or "").strip() for c in OBSERVATION_COLUMNS}
    if not values["outcome"]:
        if any(values.values()):
            filled = next(c for c in OBSERVATION_COLUMNS if values[c])
            raise ResultsError(f"outcome missing for well {well_id} although '{filled}' is given "
                               f"(allowed outcomes: {', '.join(OUTCOMES)})", file=origin, row=row,
                               field="outcome")
        return None  # a blank template row: the well is listed as not reported
    outcome = _OUTCOME_ALIASES.get(_norm_header(values["outcome"]))
    if outcome is None:
        raise ResultsError(f"outcome '{values['outcome']}' not recognised; allowed: "
                           f"{', '.join(OUTCOMES)}", file=origin, row=row, field="outcome")
    numbers = {c: (_number(values[c], c, decimal_comma, origin, row) if values[c] else None)
               for c in NUMERIC_COLUMNS}
    found = values["stoichiometry_found"] or None
    if found is not None:
        ratio = parse_ratio(found)
        if ratio is None:
            raise ResultsError(f"stoichiometry '{found}' is not of the form n:m (API:counterion, "
                               "e.g. 1:1 or 2:1)", file=origin, row=row, field="stoichiometry_found")
        if not well.get("counterion"):
            raise ResultsError(f"well {well_id} is a control without counterion: "
                               "stoichiometry_found does not apply", file=origin, row=row,
                               field="stoichiometry_found")
        found = f"{ratio[0]:g}:{ratio[1]:g}"
    return Observation(
        well=well_id, row=row, kind=str(well.get("kind") or "sample"),
        counterion=well.get("counterion") or None, stoichiometry=well.get("stoichiometry") or None,
        solvent=well.get("solvent"), mode=well.get("mode"), outcome=outcome,
        form_label=values["form_label"] or None, stoichiometry_found=found,
        notes=values["notes"] or None, **numbers,
    )


def iter_wells(design) -> Iterable[dict]:
    """The design's wells in order (plain dicts)."""
    return list(design_dict(design)["wells"])
