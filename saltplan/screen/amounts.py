"""Amounts of a salt screen: equivalents, masses, volumes, totals and the budget check.

Units: mg, mmol, µL; density g/mL = mg/µL; molarity mol/L = mmol/mL; molar mass
g/mol = mg/mmol. See :mod:`saltplan.screen` for the equations and their basis.
"""
from __future__ import annotations

import math
from typing import Any

from ..errors import BudgetError, ParameterError, SaltplanError

#: below this a neat liquid volume is hard to dispense accurately (common practice)
MIN_PIPETTE_UL = 2.0
#: extra stock made for dead volume, and the smallest stock worth weighing (common practice)
STOCK_OVERAGE = 0.2
MIN_STOCK_ML = 0.5
#: below this dielectric constant a salt former rarely dissolves at stock strength
LOW_POLARITY_DIELECTRIC = 5.0


def rnd(x: float | None, nd: int) -> float | None:
    return None if x is None else round(x + 0.0, nd)


def parse_stoichiometry(text: str) -> tuple[int, int]:
    """``"2:1"`` → (2, 1): API molecules per counterion molecules."""
    try:
        a, b = (int(p) for p in str(text).split(":"))
    except ValueError:
        raise ParameterError(f"stoichiometry '{text}' is not 'API:counterion' (e.g. 1:1, 2:1)",
                             field="stoichiometry") from None
    if a < 1 or b < 1:
        raise ParameterError(f"stoichiometry '{text}' needs positive whole numbers",
                             field="stoichiometry")
    return a, b


def equivalents_for(stoichiometry: str, excess: float) -> float:
    """Counterion equivalents (mol per mol API) for a stoichiometry with a relative excess.

    >>> round(equivalents_for("1:1", 0.05), 3), round(equivalents_for("2:1", 0.05), 3)
    (1.05, 0.525)
    """
    a, b = parse_stoichiometry(stoichiometry)
    return b / a * (1.0 + excess)


def mass_fraction(counterion) -> float:
    """Mass fraction of the reagent as dosed: ``solution_w_w`` [% w/w] / 100, or 1 (neat).

    >>> class HCl: solution_w_w = 37
    >>> mass_fraction(HCl)
    0.37
    """
    w = getattr(counterion, "solution_w_w", None)
    if w is None:
        return 1.0
    w = float(w)
    if not 0.0 < w <= 100.0:
        raise ParameterError(f"solution content {w:g} % w/w is outside 0-100",
                             entry=getattr(counterion, "id", None), field="solution_w_w")
    return w / 100.0


def counterion_amounts(api_mg: float, api_mw: float, equivalents: float, counterion, *,
                       stock_molarity: float, liquid_dosing: str = "neat") -> dict[str, Any]:
    """Amounts for one well.

    Parameters
    ----------
    api_mg : float
        API (free form) per well [mg].
    api_mw : float
        Molar mass of the free form [g/mol].
    equivalents : float
        mol counterion per mol API.
    counterion
        Object with ``mw`` [g/mol], ``form`` (solid|liquid|gas_solution), ``density_g_ml``
        and ``solution_w_w``.
    stock_molarity : float
        Stock concentration for solids (and liquids when ``liquid_dosing="stock"``) [mol/L].

    Returns
    -------
    dict
        ``api_mmol``, ``counterion_mmol``, ``counterion_mg``, ``counterion_ul`` (neat or
        solution reagent volume, liquids), ``stock_ul`` (stock volume).
    """
    api_mmol = api_mg / api_mw
    ci_mmol = api_mmol * equivalents
    ci_mg = ci_mmol * float(counterion.mw)
    neat_ul = stock_ul = None
    form = getattr(counterion, "form", "solid")
    if form in ("liquid", "gas_solution") and liquid_dosing == "neat":
        density = getattr(counterion, "density_g_ml", None)
        if not density:
            raise ParameterError(f"counterion '{counterion.id}' is a {form} without a density; "
                                 "cannot dose it by volume", entry=counterion.id,
                                 field="density_g_ml")
        neat_ul = ci_mg / float(density) / mass_fraction(counterion)  # mg / (mg/µL)
    else:
        stock_ul = ci_mmol / stock_molarity * 1000.0                 # mmol / (mmol/mL) -> µL
    return {"api_mmol": api_mmol, "counterion_mmol": ci_mmol, "counterion_mg": ci_mg,
            "counterion_ul": neat_ul, "stock_ul": stock_ul}



def get_counterion(library, cid: str):
    try:
        return library.get(cid)
    except (KeyError, SaltplanError):
        raise ParameterError(f"counterion '{cid}' is not in the counterion library",
                             entry=cid, field="counterions") from None


def positive_number(name: str, value, *, high: float | None = None) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value) \
            or value <= 0 or (high is not None and value > high):
        limit = f" and at most {high:g}" if high is not None else ""
        raise ParameterError(f"{name} must be a number above 0{limit}, got {value!r}",
                             field=name)
    return float(value)



def well_entry(kind, cand, sv, mode, anti, api_mg, api_mw, exc, molarity, liquid_dosing,
                   stock_sv, conc, fixed_ul, ratio, capacity, flags, risks) -> dict:
    total_ul = fixed_ul if fixed_ul is not None else api_mg / conc[mode.id] * 1000.0
    notes = []
    amt = {"api_mmol": api_mg / api_mw, "counterion_mmol": None, "counterion_mg": None,
           "counterion_ul": None, "stock_ul": None}
    eq = None
    if cand:
        ci = cand["ci"]
        eq = equivalents_for(cand["stoichiometry"], exc)
        amt = counterion_amounts(api_mg, api_mw, eq, ci, stock_molarity=molarity,
                                 liquid_dosing=liquid_dosing)
        if amt["counterion_ul"] is not None:
            if amt["counterion_ul"] < MIN_PIPETTE_UL:
                notes.append(f"neat volume below {MIN_PIPETTE_UL:g} µL: weigh it, or dose from a "
                             "stock (liquid dosing 'stock')")
            if mass_fraction(ci) < 1.0:
                notes.append(f"{mass_fraction(ci) * 100:g} % w/w solution: brings "
                             f"{amt['counterion_ul'] * ci.density_g_ml - amt['counterion_mg']:.2f}"
                             " mg of its solvent")
        if "corrosive" in (getattr(ci, "flags", ()) or ()) and amt["counterion_ul"] is not None:
            notes.append("corrosive reagent: dispense under the site's safety rules")
        if amt["stock_ul"] is not None:
            where = stock_sv.name if stock_sv else sv.name
            notes.append(f"{molarity:g} M stock in {where}")
            if stock_sv:
                notes.append("evaporate the stock solvent before adding the crystallization "
                             "solvent")
            elif sv.dielectric < LOW_POLARITY_DIELECTRIC:
                notes.append(f"a {molarity:g} M stock is unlikely to dissolve in {sv.name}: use a "
                             "stock solvent (evaporated first) or add the counterion neat")
    added = 0.0 if stock_sv else (amt["stock_ul"] or 0.0) + (amt["counterion_ul"] or 0.0)
    if added > total_ul:
        raise ParameterError(
            f"the {cand['counterion']} stock alone ({added:.0f} µL) exceeds the "
            f"{total_ul:.0f} µL "
            f"of {mode.label} in {sv.name}: raise the stock molarity to at least "
            f"{molarity * added / total_ul:.2g} M or lower the API concentration",
            field="stock_molarity")
    anti_ul = ratio * total_ul if anti else None
    if total_ul + (anti_ul or 0.0) > capacity:
        raise ParameterError(
            f"{mode.label} in {sv.name} needs {total_ul + (anti_ul or 0):.0f} µL per well; the "
            f"well holds {capacity:.0f} µL: lower the API per well or raise the concentration",
            field="well_capacity_ul")
    for r in risks:
        if not r.drop:
            notes.append(r.reason)
    return {"kind": kind, "cand": cand, "sv": sv, "mode": mode.id, "anti": anti,
            "api_mg": api_mg, "eq": eq, "amt": amt, "solvent_ul": total_ul - added,
            "anti_ul": anti_ul, "flags": flags, "notes": tuple(notes)}



def totals_of(wells, library, molarity: float, stock_sv=None) -> dict:
    """Totals of API, each counterion, stocks to prepare and each solvent."""
    per_ci: dict[str, dict] = {}
    stocks: dict[tuple[str, str], dict] = {}
    per_solvent: dict[str, float] = {}
    for w in wells:
        per_solvent[w.solvent] = per_solvent.get(w.solvent, 0.0) + w.solvent_ul
        if w.antisolvent:
            per_solvent[w.antisolvent] = per_solvent.get(w.antisolvent, 0.0) + w.antisolvent_ul
        if w.counterion is None:
            continue
        t = per_ci.setdefault(w.counterion, {"wells": 0, "mmol": 0.0, "mg": 0.0,
                                             "neat_ul": None, "stock_ul": None})
        t["wells"] += 1
        t["mmol"] += w.counterion_mmol
        t["mg"] += w.counterion_mg
        if w.counterion_ul is not None:
            t["neat_ul"] = (t["neat_ul"] or 0.0) + w.counterion_ul
        if w.stock_ul is not None:
            t["stock_ul"] = (t["stock_ul"] or 0.0) + w.stock_ul
            key = (w.counterion, stock_sv.id if stock_sv else w.solvent)
            s = stocks.setdefault(key, {"wells": 0, "stock_ul": 0.0})
            s["wells"] += 1
            s["stock_ul"] += w.stock_ul
    over = 1.0 + STOCK_OVERAGE
    stock_rows = []
    for (cid, sid), s in sorted(stocks.items()):
        ml = max(s["stock_ul"] * over / 1000.0, MIN_STOCK_ML)
        mw = float(get_counterion(library, cid).mw)
        stock_rows.append({"counterion": cid, "solvent": sid, "molarity_m": molarity,
                           "wells": s["wells"], "stock_ul_in_wells": round(s["stock_ul"], 1),
                           "prepare_ml": round(ml, 3), "weigh_mg": round(molarity * ml * mw, 2),
                           "basis": f"volume in wells + {STOCK_OVERAGE:.0%} for dead volume, at "
                                    f"least {MIN_STOCK_ML:g} mL (common practice); "
                                    "mg = M × mL × MW"})
    return {
        "wells": len(wells),
        "samples": sum(w.kind == "sample" for w in wells),
        "controls": sum(w.kind == "control" for w in wells),
        "api_mg": round(sum(w.api_mg for w in wells), 3),
        "counterions": {cid: {"wells": t["wells"], "mmol": round(t["mmol"], 5),
                              "mg": round(t["mg"], 3),
                              "neat_ul": rnd(t["neat_ul"], 3), "stock_ul": rnd(t["stock_ul"], 1)}
                        for cid, t in sorted(per_ci.items())},
        "stocks": stock_rows,
        "solvents_ul": {sid: round(v, 1) for sid, v in sorted(per_solvent.items())},
    }


def cut_options(entries, order_keys, max_wells: int) -> list[str]:
    n = len(entries)

    def key(e, what):
        if what == "solvent":
            return e["sv"].id
        if what == "mode":
            return e["mode"]
        return e["cand"]["key"] if e["cand"] else None

    opts = []
    for what in ("solvent", "mode", "counterion"):
        order = order_keys[what]
        for k in range(1, len(order)):
            cut = set(order[-k:])
            left = sum(1 for e in entries if key(e, what) not in cut)
            if left <= max_wells:
                noun = {"solvent": "solvent", "mode": "mode", "counterion": "candidate"}[what]
                opts.append(f"drop {k} {noun}{'s' if k > 1 else ''} ({', '.join(order[-k:])}; "
                            f"-{n - left} wells)")
                break
    return opts


def check_budget(wells, entries, budget, api_mg, sc, order_keys, totals, ci_budget) -> dict:
    need = totals["api_mg"]
    n = len(wells)
    if need > budget + 1e-9:
        max_wells = int(math.floor(budget / api_mg + 1e-9))
        cuts = cut_options(entries, order_keys, max_wells)
        per_well = math.floor(budget / n * 10) / 10
        if per_well >= sc.min_api_mg:
            cuts.append(f"use {per_well:g} mg per well")
        if not cuts:
            cuts.append(f"cut at least {n - max_wells} wells (fewer candidates, solvents or modes)")
        raise BudgetError(f"design needs {need:g} mg API for {n} wells at {api_mg:g} mg; budget "
                          f"{budget:g} mg: " + " or ".join(cuts), field="api_budget_mg")
    info = {"api_budget_mg": budget, "api_needed_mg": need, "api_left_mg": round(budget - need, 3),
            "counterion_budget_mg": {}}
    for cid, avail in sorted(ci_budget.items()):
        avail = positive_number(f"budget of {cid}", avail)
        t = totals["counterions"].get(cid)
        if t is None:
            raise ParameterError(f"budget given for counterion '{cid}', which is not in the design",
                                 entry=cid, field="counterion_budget_mg")
        weigh = sum(s["weigh_mg"] for s in totals["stocks"] if s["counterion"] == cid)
        needed = max(t["mg"], weigh)
        if needed > avail + 1e-9:
            per_well = t["mg"] / t["wells"]
            fit = int(math.floor(avail / (needed / t["wells"]) + 1e-9))
            raise BudgetError(f"design needs {needed:.3g} mg of {cid} ({t['wells']} wells, "
                              f"{per_well:.3g} mg each{', stocks included' if weigh else ''}); "
                              f"budget {avail:g} mg: drop {t['wells'] - fit} of its wells or "
                              "lower the API per well", entry=cid, field="counterion_budget_mg")
        info["counterion_budget_mg"][cid] = {"available": avail, "needed": round(needed, 3)}
    return info


