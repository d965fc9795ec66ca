"""The screen's plate map as a grid (SBS 96-well layout: rows A–H, columns 1–12).

Each counterion gets a light tint of an Okabe–Ito colour (M. Okabe, K. Ito, *Color
Universal Design*, 2008) with black text, and every cell also prints the counterion,
stoichiometry and solvent, so the map reads without colour (greyscale print, colour-vision
deficiency). Controls and empty wells are white with a dashed border.
"""
from __future__ import annotations

import re
from typing import Any

ROWS = "ABCDEFGH"
COLUMNS = tuple(range(1, 13))

# Okabe–Ito colours (black left out), tinted 45 % towards white for backgrounds
_BASE = ("#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442")
_PATTERNS = ("none", "stripes", "dots")
_WELL_RE = re.compile(r"^(?:(?P<plate>[^:]+):)?(?P<row>[A-H])(?P<col>[1-9]|1[0-2])$")


def tint(hex_colour: str, amount: float = 0.55) -> str:
    """Mix ``hex_colour`` with white by ``amount`` (0 = unchanged, 1 = white)."""
    r, g, b = (int(hex_colour[i:i + 2], 16) for i in (1, 3, 5))
    mix = [round(c + (255 - c) * amount) for c in (r, g, b)]
    return "#" + "".join(f"{c:02x}" for c in mix)


def parse_well(well: str) -> tuple[str, str, int]:
    """("plate", "A", 1) from "A1" or "P2:A1"; ValueError naming the well otherwise."""
    m = _WELL_RE.match(str(well).strip())
    if not m:
        raise ValueError(f"screen well '{well}' is not an SBS 96-well position (A1–H12)")
    return m.group("plate") or "", m.group("row"), int(m.group("col"))


def counterion_styles(wells: list[dict]) -> list[dict[str, Any]]:
    """Legend entries in order of first appearance on the plate (row-major)."""
    order: list[str] = []
    for w in sorted(wells, key=lambda w: _sort_key(w["well"])):
        cid = w.get("counterion")
        if cid and cid not in order:
            order.append(cid)
    out = []
    for i, cid in enumerate(order):
        base = _BASE[i % len(_BASE)]
        out.append({"counterion": cid, "colour": base, "fill": tint(base),
                    "pattern": _PATTERNS[(i // len(_BASE)) % len(_PATTERNS)],
                    "index": i + 1})
    return out


def _sort_key(well: str):
    plate, row, col = parse_well(well)
    return (plate, ROWS.index(row), col)


def plate_grids(wells: list[dict], solvent_names: dict[str, str]) -> list[dict[str, Any]]:
    """One grid per plate: ``{"plate", "rows": [{"row", "cells": [...]}]}``.

    A cell holds ``well``, ``kind`` (sample / control / empty), ``counterion``,
    ``stoichiometry``, ``solvent``, ``solvent_name``, ``mode``, ``fill``, ``pattern``,
    ``flags`` and ``title`` (one-line description for a tooltip).
    """
    styles = {s["counterion"]: s for s in counterion_styles(wells)}
    by_plate: dict[str, dict[tuple[str, int], dict]] = {}
    for w in wells:
        plate, row, col = parse_well(w["well"])
        cells = by_plate.setdefault(plate, {})
        if (row, col) in cells:
            raise ValueError(f"screen well '{w['well']}' is used twice")
        cells[(row, col)] = w
    grids = []
    for plate in sorted(by_plate):
        cells = by_plate[plate]
        rows = []
        for row in ROWS:
            out = []
            for col in COLUMNS:
                w = cells.get((row, col))
                out.append(_cell(f"{row}{col}", w, styles, solvent_names))
            rows.append({"row": row, "cells": out})
        grids.append({"plate": plate, "rows": rows})
    return grids


def _cell(pos: str, w: dict | None, styles: dict, solvent_names: dict[str, str]) -> dict:
    if w is None:
        return {"well": pos, "kind": "empty", "counterion": "", "stoichiometry": "",
                "solvent": "", "solvent_name": "", "mode": "", "fill": "#ffffff",
                "pattern": "none", "flags": [], "title": f"{pos}: empty"}
    kind = w["kind"]
    cid = w.get("counterion") or ""
    style = styles.get(cid)
    solvent = w.get("solvent") or ""
    solvent_name = solvent_names.get(solvent, solvent)
    stoich = w.get("stoichiometry") or ""
    if kind == "control" or not cid:
        label = "control (no counterion)"
    else:
        label = f"{cid} {stoich}".strip()
    title = f"{pos}: {label}; {solvent_name}; {w.get('mode') or ''}".rstrip("; ")
    return {"well": pos, "kind": kind, "counterion": cid if kind != "control" else "",
            "stoichiometry": stoich if kind != "control" else "", "solvent": solvent,
            "solvent_name": solvent_name, "mode": w.get("mode") or "",
            "fill": style["fill"] if style and kind != "control" else "#ffffff",
            "pattern": style["pattern"] if style and kind != "control" else "none",
            "flags": list(w.get("flags") or []), "title": title}
