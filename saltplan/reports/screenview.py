"""View model of a screen design (``ScreenDesign.to_dict()``) for the report templates."""
from __future__ import annotations

from typing import Any

from . import platemap
from .context_base import MissingKey, fmt, need, plain, text_of


def _setting_rows(settings: dict) -> list[dict]:
    rows = []
    for key, value in settings.items():
        if isinstance(value, dict) and "value" in value:
            prov = value.get("provenance") or ""
            basis = value.get("basis") or ""
            rows.append({"label": key.replace("_", " "), "value": plain(value["value"]),
                         "prov": f"{prov}: {basis}" if basis and basis != prov else prov})
        else:
            rows.append({"label": key.replace("_", " "), "value": plain(value), "prov": ""})
    return rows


def _num(value: Any, digits: int) -> str:
    return "—" if value is None else fmt(value, digits)


def _note_index(wells: list[dict], names: dict[str, str] | None = None) -> list[dict]:
    """Each distinct well note once, numbered in order of first appearance, with its wells.

    Notes that differ only by the well's own solvent ("0.5 M stock in water" / "... in
    heptane") are written once with "the well's solvent"; the solvent of each well is in
    the plate map and the well table.
    """
    names = names or {}
    notes: dict[str, list[str]] = {}
    originals: dict[str, set[str]] = {}
    for w in wells:
        for n in w.get("notes") or []:
            key = _note_key(str(n), w, names)
            notes.setdefault(key, []).append(w["well"])
            originals.setdefault(key, set()).add(str(n))
    return [{"number": i + 1, "key": key, "wells": ", ".join(ws),
             "text": next(iter(originals[key])) if len(originals[key]) == 1 else key}
            for i, (key, ws) in enumerate(notes.items())]


def _note_key(text: str, w: dict, names: dict[str, str]) -> str:
    sv = w.get("solvent") or ""
    for token in sorted({names.get(sv, ""), sv} - {""}, key=len, reverse=True):
        if token in text:
            return text.replace(token, "the well's solvent")
    return text


def _well_row(w: dict, numbers: dict[str, int], names: dict[str, str] | None = None) -> dict:
    return {
        "well": w["well"], "kind": w["kind"], "counterion": w.get("counterion") or "—",
        "stoichiometry": w.get("stoichiometry") or "—",
        "equivalents": _num(w.get("equivalents"), 2), "solvent": w.get("solvent") or "",
        "antisolvent": (f"{w['antisolvent']} {fmt(w.get('antisolvent_ul'), 0)} µL"
                        if w.get("antisolvent") else "—"),
        "mode": w.get("mode") or "", "api_mg": _num(w.get("api_mg"), 2),
        "counterion_mg": _num(w.get("counterion_mg"), 3),
        "counterion_ul": _num(w.get("counterion_ul"), 2),
        "stock_ul": _num(w.get("stock_ul"), 1), "solvent_ul": _num(w.get("solvent_ul"), 0),
        "flags": ", ".join(w.get("flags") or []),
        "notes": ", ".join(str(numbers[_note_key(str(n), w, names or {})])
                           for n in (w.get("notes") or [])),
    }


_GROUP_FIELDS = ("kind", "counterion", "stoichiometry", "equivalents", "mode", "api_mg",
                 "counterion_mg", "counterion_ul", "stock_ul", "solvent_ul", "antisolvent",
                 "flags")


def well_groups(rows: list[dict]) -> list[dict]:
    """Wells that get the same amounts, grouped (for the Markdown and Word reports).

    Wells differing only in solvent and notes share one row listing the wells and their
    solvents; every well's own row stays in ``worksheet.csv`` and in the HTML well table.
    """
    groups: dict[tuple, dict] = {}
    for r in rows:
        key = tuple(r[k] for k in _GROUP_FIELDS)
        g = groups.setdefault(key, dict({k: r[k] for k in _GROUP_FIELDS}, wells=[],
                                        solvents=[], notes=[]))
        g["wells"].append(r["well"])
        if r["solvent"] not in g["solvents"]:
            g["solvents"].append(r["solvent"])
        for n in (r["notes"].split(", ") if r["notes"] else []):
            if n not in g["notes"]:
                g["notes"].append(n)
    out = list(groups.values())
    for g in out:
        g["wells_text"] = ", ".join(g["wells"])
        g["solvents_text"] = ", ".join(g["solvents"])
        g["notes_text"] = ", ".join(g["notes"])
    return out


def _totals(totals: dict) -> tuple[list[dict], list[dict], list[dict]]:
    rows, ions, stocks = [], [], []
    for key, value in totals.items():
        if key == "counterions" and isinstance(value, dict):
            for cid, t in value.items():
                t = t if isinstance(t, dict) else {"mg": t}
                ions.append({"counterion": cid, "wells": plain(t.get("wells", "")),
                             "mmol": _num(t.get("mmol"), 4), "mg": _num(t.get("mg"), 2),
                             "neat_ul": _num(t.get("neat_ul"), 1),
                             "stock_ul": _num(t.get("stock_ul"), 1)})
        elif key == "stocks" and isinstance(value, list):
            for t in value:
                stocks.append({"counterion": t.get("counterion") or "",
                               "solvent": t.get("solvent") or "",
                               "molarity": _num(t.get("molarity_m"), 2),
                               "prepare_ml": _num(t.get("prepare_ml"), 2),
                               "weigh_mg": _num(t.get("weigh_mg"), 2),
                               "basis": t.get("basis") or ""})
        else:
            rows.append({"label": key.replace("_", " "), "value": plain(value)})
    return rows, ions, stocks


def _basis(basis: dict) -> tuple[list[dict], list[dict]]:
    """Rows explaining where the amounts come from, and one row per counterion as dosed."""
    rows, ions = [], []
    for key, value in basis.items():
        if key == "counterions" and isinstance(value, dict):
            for cid, b in value.items():
                b = b if isinstance(b, dict) else {"note": b}
                ions.append({
                    "counterion": cid, "mw": _num(b.get("mw"), 3),
                    "mw_source": b.get("mw_source") or "", "form": b.get("form") or "",
                    "density": _num(b.get("density_g_ml"), 3),
                    "density_source": b.get("density_source") or "",
                    "mass_fraction": _num(b.get("mass_fraction"), 2),
                    "dosing": b.get("dosing") or ""})
        elif isinstance(value, dict):
            rest = {k: v for k, v in value.items() if k != "source"}
            rows.append({"label": key.replace("_", " "),
                         "value": "; ".join(f"{k.replace('_', ' ')}: {plain(v)}"
                                            for k, v in rest.items()),
                         "prov": str(value.get("source") or "")})
        else:
            rows.append({"label": key.replace("_", " "), "value": plain(value), "prov": ""})
    return rows, ions


def screen_view(screen: dict | None) -> dict | None:
    """Normalized screen section; None without a screen."""
    if not screen:
        return None
    wells = need(screen, "wells", "screen")
    for i, w in enumerate(wells):
        need(w, "well", f"screen.wells[{i}]")
        need(w, "kind", f"screen.wells[{i}]")
    solvents = []
    for s in screen.get("solvents") or []:
        solvents.append({"id": s.get("id") or "", "name": s.get("name") or s.get("id") or "",
                         "ich_class": "n/a" if s.get("ich_class") is None else s["ich_class"],
                         "ich_limit": "" if s.get("ich_limit_ppm") is None
                         else f"{s['ich_limit_ppm']:g} ppm",
                         "reason": s.get("reason") or "",
                         "antisolvent": s.get("antisolvent") or ""})
    names = {s["id"]: s["name"] for s in solvents}
    layout = screen.get("layout") or {}
    grids = []
    if layout.get("scale", "plate") == "plate":
        try:
            grids = platemap.plate_grids(wells, names)
        except ValueError as exc:
            raise MissingKey(f"report input: {exc}") from None
    basis_rows, basis_ions = _basis(screen.get("basis") or {})
    notes = _note_index(wells, names)
    numbers = {n["key"]: n["number"] for n in notes}
    totals_rows, ion_totals, stocks = _totals(screen.get("totals") or {})
    budget = screen.get("budget") or {}
    n_samples = sum(1 for w in wells if w["kind"] == "sample")
    well_rows = [_well_row(w, numbers, names) for w in wells]
    totals_by_ion = {t["counterion"]: t for t in ion_totals}
    ions_merged = [dict(b, totals=totals_by_ion.get(b["counterion"])) for b in basis_ions]
    ions_merged += [dict(counterion=t["counterion"], mw="—", form="", density="—",
                         mass_fraction="—", dosing="", mw_source="", density_source="",
                         totals=t) for t in ion_totals
                    if t["counterion"] not in {b["counterion"] for b in basis_ions}]
    stock_groups: dict[tuple, dict] = {}
    for t in stocks:
        key = (t["counterion"], t["molarity"], t["prepare_ml"], t["weigh_mg"], t["basis"])
        stock_groups.setdefault(key, dict(t, solvents=[]))["solvents"].append(t["solvent"])
    return {
        "ions_merged": ions_merged,
        "stock_groups": [dict(g, solvents_text=", ".join(g["solvents"]))
                         for g in stock_groups.values()],
        "settings_rows": _setting_rows(screen.get("settings") or {}),
        "solvents": solvents,
        "modes": [{"id": m.get("id") or "", "label": m.get("label") or m.get("id") or "",
                   "how": m.get("how") or ""} for m in screen.get("modes") or []],
        "grids": grids, "is_plate": bool(grids),
        "layout_format": layout.get("format") or "",
        "layout_rows": [{"key": k, "value": plain(v)} for k, v in (layout.get("rows") or {}).items()],
        "layout_columns": [{"key": k, "value": plain(v)}
                           for k, v in (layout.get("columns") or {}).items()],
        "layout_order": layout.get("order") or "",
        "legend": platemap.counterion_styles(wells) if grids else [],
        "wells": well_rows, "well_groups": well_groups(well_rows), "notes": notes,
        "n_samples": n_samples,
        "n_controls": len(wells) - n_samples,
        "raw_dropped": [dict(d) for d in screen.get("dropped") or []],
        "dropped": [{"what": _combo(d), "reason": d.get("reason") or "",
                     "source": d.get("source") or ""} for d in screen.get("dropped") or []],
        "basis_rows": basis_rows, "basis_ions": basis_ions,
        "totals_rows": totals_rows, "ion_totals": ion_totals, "stocks": stocks,
        "budget_rows": ([{"label": k.replace("_", " "), "value": plain(v)}
                         for k, v in budget.items()] if isinstance(budget, dict)
                        else [{"label": "budget", "value": plain(budget)}]),
        "flag_legend": [{"flag": k, "text": plain(v)}
                        for k, v in (screen.get("flag_legend") or {}).items()],
        "cautions": [text_of(c) for c in screen.get("cautions") or []],
    }


def _combo(d: dict) -> str:
    parts = [str(d[k]) for k in ("counterion", "stoichiometry", "solvent", "mode") if d.get(k)]
    return " × ".join(parts) if parts else text_of(d.get("combination") or d)
