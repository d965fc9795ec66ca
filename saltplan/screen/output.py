"""Screen-design outputs: dispensing worksheet, plate map, results template, JSON.

Everything is rendered in memory first and written with :class:`saltplan._io.OutputSet`,
so a failure leaves no partial file. Same design → same bytes (the JSON carries the plan's
``provenance.created`` timestamp; the CSV files carry none).
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any

from .layout import PLATE_COLUMNS, PLATE_ROWS

#: worksheet columns and the decimals each number is written with
WORKSHEET_COLUMNS = (
    ("well", None), ("kind", None), ("counterion", None), ("stoichiometry", None),
    ("equivalents", 3), ("solvent", None), ("mode", None), ("api_mg", 3),
    ("counterion_mmol", 5), ("counterion_mg", 3), ("counterion_ul", 3), ("stock_ul", 1),
    ("solvent_ul", 1), ("antisolvent", None), ("antisolvent_ul", 1), ("flags", None),
    ("notes", None),
)
#: results template (read by ``saltplan select``); units are part of the names
RESULTS_COLUMNS = ("well", "counterion", "stoichiometry", "solvent", "mode", "outcome",
                   "form_label", "melting_onset_c", "weight_gain_80rh_pct",
                   "solubility_mg_ml", "saturated_ph", "stoichiometry_found",
                   "solvent_content_pct", "notes")
FILES = ("worksheet.csv", "plate.csv", "design.json", "results-template.csv")


def _design(design) -> dict[str, Any]:
    return design.to_dict() if hasattr(design, "to_dict") else design


def _csv(rows: list[list[str]]) -> str:
    from .._io import csv_text

    return csv_text(rows)  # spreadsheet-safe cells (no formula injection)


def _cell(value, decimals) -> str:
    if value is None:
        return ""
    if isinstance(value, (list, tuple)):
        return "; ".join(str(v) for v in value)
    if decimals is not None:
        return f"{value:.{decimals}f}"
    return str(value)


def worksheet_csv(design) -> str:
    """Dispensing worksheet: one row per well, amounts in mg, mmol and µL."""
    d = _design(design)
    rows = [[name for name, _ in WORKSHEET_COLUMNS]]
    for w in d["wells"]:
        rows.append([_cell(w.get(name), dec) for name, dec in WORKSHEET_COLUMNS])
    return _csv(rows)


def well_label(w: dict) -> str:
    """Short text of a well for the plate map: "mesylate 1:1 | ethanol | slurry"."""
    what = f"{w['counterion']} {w['stoichiometry']}" if w.get("counterion") else "free form"
    return f"{what} | {w['solvent']} | {w['mode']}"


def plate_csv(design) -> str:
    """8 × 12 grid (rows A–H, columns 1–12) with one label per used well."""
    d = _design(design)
    cells = {w["well"]: well_label(w) for w in d["wells"]}
    rows = [["row"] + [str(c) for c in range(1, PLATE_COLUMNS + 1)]]
    for r in PLATE_ROWS:
        rows.append([r] + [cells.get(f"{r}{c}", "") for c in range(1, PLATE_COLUMNS + 1)])
    return _csv(rows)


def results_template_csv(design) -> str:
    """One row per well with the design context filled in and the observations empty."""
    d = _design(design)
    rows = [list(RESULTS_COLUMNS)]
    for w in d["wells"]:
        context = {"well": w["well"], "counterion": w.get("counterion") or "",
                   "stoichiometry": w.get("stoichiometry") or "", "solvent": w["solvent"],
                   "mode": w["mode"]}
        rows.append([context.get(c, "") for c in RESULTS_COLUMNS])
    return _csv(rows)


def design_json(design) -> str:
    return json.dumps(_design(design), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def render_screen(design) -> dict[str, str]:
    """File name → text of every output (``plate.csv`` only at plate scale)."""
    d = _design(design)
    out = {"worksheet.csv": worksheet_csv(d)}
    if (d.get("layout") or {}).get("scale") != "vial":
        out["plate.csv"] = plate_csv(d)
    out["design.json"] = design_json(d)
    out["results-template.csv"] = results_template_csv(d)
    return out


def write_screen(design, out_dir: str | Path) -> list[Path]:
    """Write worksheet.csv, plate.csv (plate scale), design.json and results-template.csv.

    All files are rendered before any is written; each is written atomically.
    """
    from .._io import OutputSet

    files = render_screen(design)
    outputs = OutputSet(out_dir)
    for name, text in files.items():
        outputs.add(name, text)
    return outputs.commit()


def screen_structure(structure, api_budget_mg: float, *, out_dir: str | Path | None = None,
                     name: str | None = None, dose_mg: float | None = None, measured=None,
                     libraries=None, max_heavy_atoms: int = 150, solvent_library=None,
                     inhouse=None, **options):
    """Plan the salts of a structure, design the screen and (optionally) write it.

    Parameters
    ----------
    structure : str or Path
        SMILES or structure file, as for :func:`saltplan.plan.plan_salts`.
    api_budget_mg : float
        API available for the screen [mg].
    out_dir : str or Path, optional
        Where to write the outputs (nothing is written when None).
    name, dose_mg, measured, libraries, max_heavy_atoms
        Passed to :func:`saltplan.plan.plan_salts` (the counterion library is loaded once
        and used by both the plan and the design).
    solvent_library : path, optional
        Solvent library file replacing the built-in one.
    inhouse : optional
        In-house evidence of a ledger for the plan's ranking (see
        :func:`saltplan.plan.plan_salts`); None: the published prior only.
    **options
        Passed to :func:`saltplan.screen.design_screen`.

    Returns
    -------
    (ScreenDesign, list of Path)
    """
    from ..library.counterions import load_counterions
    from ..plan.planner import plan_salts
    from .design import design_screen

    library = load_counterions(list(libraries) if libraries else None)
    plan = plan_salts(structure, name=name, dose_mg=dose_mg, measured=measured,
                      libraries=library, max_heavy_atoms=max_heavy_atoms, inhouse=inhouse)
    design = design_screen(plan, api_budget_mg, library=library,
                           solvent_library=solvent_library, **options)
    written = write_screen(design, out_dir) if out_dir is not None else []
    return design, written
