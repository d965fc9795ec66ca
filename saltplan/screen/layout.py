"""Placement of a screen's wells: SBS 96-well plate map (A1–H12) or vial list.

Plate wells follow the SBS/SLAS microplate standard: rows A–H, columns 1–12. Two plate
formats, both deterministic: ``grid`` (one candidate per row, one solvent × mode per column,
controls in the last used row) and ``rows`` (row-major fill A1, A2, …, A12, B1, … in design
order). Vials are numbered V01, V02, … in design order.
"""
from __future__ import annotations

from dataclasses import dataclass, fields
from typing import Any

from ..errors import ParameterError
from .amounts import rnd

PLATE_ROWS = "ABCDEFGH"
PLATE_COLUMNS = 12
PLATE_WELLS = len(PLATE_ROWS) * PLATE_COLUMNS

@dataclass(frozen=True)
class Well:
    """One well (plate) or vial of the design; amounts in mg, mmol and µL."""

    well: str
    kind: str                      # "sample" | "control"
    counterion: str | None
    stoichiometry: str | None      # API:counterion
    equivalents: float | None      # mol counterion per mol API
    solvent: str
    mode: str
    api_mg: float
    api_mmol: float
    counterion_mmol: float | None
    counterion_mg: float | None
    counterion_ul: float | None    # neat liquid / solution reagent volume
    stock_ul: float | None         # stock solution volume
    solvent_ul: float
    antisolvent: str | None = None
    antisolvent_ul: float | None = None
    candidate_rank: int | None = None
    flags: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["flags"] = list(self.flags)
        out["notes"] = list(self.notes)
        return out


def place_wells(entries, scale, layout, cands, chosen, mode_ids, controls):
    """Wells with their ids, and a description of the layout."""
    if scale == "vial":
        width = max(2, len(str(len(entries))))
        ids = [f"V{i + 1:0{width}d}" for i in range(len(entries))]
        info = {"format": "vial list", "scale": "vial", "order": "design order: candidate "
                "rank, then solvent selection order, then mode; controls last"}
        return [_well(i, e) for i, e in zip(ids, entries, strict=True)], info
    row_keys = [c["key"] for c in cands if any(e["cand"] is c for e in entries)]
    if controls and any(e["kind"] == "control" for e in entries):
        row_keys.append("controls")
    col_keys = [(s.id, m) for s in chosen for m in mode_ids
                if any(e["sv"].id == s.id and e["mode"] == m for e in entries)]
    fits = len(row_keys) <= len(PLATE_ROWS) and len(col_keys) <= PLATE_COLUMNS
    if layout == "grid" and not fits:
        raise ParameterError(f"a grid needs {len(row_keys)} rows and {len(col_keys)} columns; "
                             "the plate has 8 × 12: use layout 'rows'", field="layout")
    if layout == "grid" or (layout == "auto" and fits):
        placed = []
        for e in entries:
            rk = "controls" if e["kind"] == "control" else e["cand"]["key"]
            r, c = row_keys.index(rk), col_keys.index((e["sv"].id, e["mode"]))
            placed.append(((r, c), _well(f"{PLATE_ROWS[r]}{c + 1}", e)))
        placed.sort(key=lambda p: p[0])
        info = {"format": "grid", "scale": "plate",
                "plate": "SBS 96-well (8 rows A-H × 12 columns)",
                "rows": {PLATE_ROWS[i]: k for i, k in enumerate(row_keys)},
                "columns": {str(i + 1): f"{s} / {m}" for i, (s, m) in enumerate(col_keys)}}
        return [w for _, w in placed], info
    ids = [f"{PLATE_ROWS[i // PLATE_COLUMNS]}{i % PLATE_COLUMNS + 1}" for i in range(len(entries))]
    info = {"format": "row-major fill", "scale": "plate",
            "plate": "SBS 96-well (8 rows A-H × 12 columns)",
            "order": "A1, A2, ..., A12, B1, ... in design order: candidate rank, then solvent "
                     "selection order, then mode; controls last"}
    return [_well(i, e) for i, e in zip(ids, entries, strict=True)], info


def _well(well_id: str, e: dict) -> Well:
    cand, amt = e["cand"], e["amt"]
    return Well(
        well=well_id, kind=e["kind"], counterion=cand["counterion"] if cand else None,
        stoichiometry=cand["stoichiometry"] if cand else None, equivalents=rnd(e["eq"], 4),
        solvent=e["sv"].id, mode=e["mode"], api_mg=rnd(e["api_mg"], 3),
        api_mmol=rnd(amt["api_mmol"], 6), counterion_mmol=rnd(amt["counterion_mmol"], 6),
        counterion_mg=rnd(amt["counterion_mg"], 4), counterion_ul=rnd(amt["counterion_ul"], 4),
        stock_ul=rnd(amt["stock_ul"], 3), solvent_ul=rnd(e["solvent_ul"], 1),
        antisolvent=e["anti"].id if e["anti"] else None, antisolvent_ul=rnd(e["anti_ul"], 1),
        candidate_rank=cand["rank"] if cand else None, flags=e["flags"], notes=e["notes"])


