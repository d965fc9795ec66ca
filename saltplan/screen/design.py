"""Salt-screen design: counterion × solvent × crystallization mode, amounts, layout, budget.

:func:`design_screen` turns a :class:`~saltplan.plan.Plan` into a :class:`ScreenDesign`: the
top candidates (or the user's counterions) crossed with a diverse solvent set
(:func:`saltplan.solvent_selection.select_solvents`) and crystallization modes, plus free-form
controls; amounts per well (API mass, counterion equivalents, mass, neat volume from the
density or stock volume from the molarity, solvent volume); an SBS 96-well map (A1–H12) at
plate scale or a vial list at vial scale; totals checked against the API budget.

Risky combinations (a sulfonic acid with an alcohol, ...) are dropped by default and listed
with the reason; with ``include_risky=True`` they stay and carry a flag. Over budget or
over 96 wells is an error that says what to cut, never a silent truncation.

Notes
-----
Amounts (mmol = mg / (g/mol); density g/mL = mg/µL; molarity mol/L = mmol/mL):

.. math::

    n_\\mathrm{API} = m_\\mathrm{API} / M_\\mathrm{API}, \\quad
    n_\\mathrm{ci} = n_\\mathrm{API} \\cdot eq, \\quad
    m_\\mathrm{ci} = n_\\mathrm{ci} M_\\mathrm{ci}, \\quad
    V_\\mathrm{neat} = m_\\mathrm{ci} / (\\rho \\, w), \\quad
    V_\\mathrm{stock} = 1000 \\, n_\\mathrm{ci} / c

with eq = (counterion per API of the stoichiometry) × (1 + excess), w the mass fraction of
a solution reagent (1 for a neat liquid) and c the stock molarity. Scale and equivalents
follow common practice (tier-1 screens 2–10 mg API per well, confirmatory 20–100 mg;
1.0–1.1 eq for a monoprotic counterion, 0.5 eq for a 2:1 salt, 2.0–2.2 eq for a bis-salt).

This is a planning aid: confirm solid forms by XRPD, DSC/TGA and NMR; strong acids, bases
and many solvents are hazardous — handle them under the site's safety rules, and defer to
ICH Q3C and M7, the pharmacopoeias, local regulation and qualified staff.
"""
from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

from ..errors import ParameterError
from .amounts import (
    MIN_PIPETTE_UL,
    check_budget,
    counterion_amounts,
    cut_options,
    equivalents_for,
    get_counterion,
    mass_fraction,
    parse_stoichiometry,
    positive_number,
    totals_of,
    well_entry,
)
from .layout import PLATE_COLUMNS, PLATE_ROWS, PLATE_WELLS, Well, place_wells
from .rules import FLAG_TEXT, api_has_primary_amine, risks_for

if TYPE_CHECKING:
    from pathlib import Path

    from ..library.counterions import Library
    from ..library.solvents import SolventLibrary
    from ..plan import Plan

__all__ = ["MODES", "SCALES", "Mode", "Scale", "Well", "ScreenDesign", "design_screen",
           "counterion_amounts", "equivalents_for", "mass_fraction",
           "parse_stoichiometry", "PLATE_ROWS", "PLATE_COLUMNS", "PLATE_WELLS",
           "MIN_PIPETTE_UL"]


@dataclass(frozen=True)
class Mode:
    """A crystallization mode and what it asks of the solvent."""

    id: str
    label: str
    api_mg_ml: float  # default API concentration [mg/mL] that sets the solvent volume
    how: str
    min_bp_c: float | None = None
    max_bp_c: float | None = None
    end_c: float | None = None       # lowest temperature the mode reaches [°C]
    needs_antisolvent: bool = False


#: modes and their defaults (common practice, from memory; concentrations are settings)
MODES: dict[str, Mode] = {m.id: m for m in (
    Mode("slurry", "slurry / ripening", 50.0,
         "suspend above the solubility, shake or stir with temperature cycling (e.g. 5-40 °C) "
         "for 3-7 days; isolate the solid"),
    Mode("cooling", "cooling", 25.0,
         "dissolve at up to 50 °C (at least 10 °C below the boiling point), cool slowly "
         "(about 0.1-0.5 °C/min) to 5 °C", min_bp_c=60.0, end_c=5.0),
    Mode("evaporation", "evaporation", 10.0,
         "dissolve (filter if needed) and let the solvent evaporate slowly at ambient "
         "temperature (pierced cap or gentle nitrogen flow)", max_bp_c=150.0),
    Mode("antisolvent", "anti-solvent addition", 25.0,
         "dissolve, then add the anti-solvent slowly with stirring; age 1-2 days",
         needs_antisolvent=True),
)}


@dataclass(frozen=True)
class Scale:
    id: str
    api_mg: float        # default API per well/vial [mg]
    min_api_mg: float    # lowest sensible per-well amount for suggestions [mg]
    capacity_ul: float   # default working volume of a well/vial [µL]
    basis: str


SCALES = {
    "plate": Scale("plate", 5.0, 2.0, 1000.0,
                   "tier-1 plate screen, 2-10 mg API per well (common practice); 1 mL glass "
                   "inserts or deep wells in an SBS 96 block"),
    "vial": Scale("vial", 50.0, 20.0, 8000.0,
                  "confirmatory vial scale, 20-100 mg API per vial (common practice); 8 mL vials"),
}
DEFAULTS: dict[str, Any] = {"top": 4, "n_solvents": 4, "modes": ("slurry", "evaporation"),
            "stock_molarity": 0.5, "excess": 0.05, "antisolvent_ratio": 2.0,
            "stock_overage": 0.2}
#: a cooling end point must lie this far above the solvent's melting point [°C]
FREEZE_MARGIN_C = 5.0
#: below this a neat liquid volume is hard to dispense accurately (common practice)
API_MW_SOURCE = "RDKit Descriptors.MolWt of the parent (IUPAC standard atomic weights)"
CI_MW_SOURCE = "RDKit Descriptors.MolWt of the counterion library SMILES (as dosed)"
@dataclass(frozen=True)
class ScreenDesign:
    """The designed screen; see DEVELOPERS.md for the contract."""

    plan: dict
    settings: dict
    solvents: tuple[dict, ...]
    modes: tuple[dict, ...]
    candidates: tuple[dict, ...]
    wells: tuple[Well, ...]
    dropped: tuple[dict, ...]
    totals: dict
    budget: dict
    layout: dict
    basis: dict
    flag_legend: dict
    cautions: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        return {
            "plan": self.plan, "settings": self.settings, "solvents": list(self.solvents),
            "modes": list(self.modes), "candidates": list(self.candidates),
            "wells": [w.to_dict() for w in self.wells], "dropped": list(self.dropped),
            "totals": self.totals, "budget": self.budget, "layout": self.layout,
            "basis": self.basis, "flag_legend": self.flag_legend,
            "cautions": list(self.cautions),
        }

    def _repr_html_(self) -> str:
        """Inline HTML report in Jupyter."""
        from ..reports import repr_html

        return repr_html(self)

CAUTIONS = (
    "Planning aid, not a measurement: confirm salt formation and solid form by XRPD, DSC/TGA "
    "and NMR stoichiometry before drawing conclusions.",
    "Strong acids and bases (neat methanesulfonic acid, concentrated hydrochloric acid, "
    "hydroxides) are corrosive and many solvents are flammable or toxic: dispense under the "
    "site's safety rules.",
    "Residual solvents follow ICH Q3C(R8); sulfonic acids with alcohols can form alkyl "
    "sulfonate esters, potential mutagenic impurities under ICH M7 - defer to qualified staff.",
    "Counterion stocks are assumed to dissolve in the well's solvent at the stated molarity; "
    "where one does not (metal hydroxides in organic solvents, most acids in hydrocarbons), "
    "make the stocks in one volatile solvent (stock_solvent) and evaporate it before the "
    "crystallization solvent is added.",
)

def _plan_dict(plan) -> dict:
    d = plan.to_dict() if hasattr(plan, "to_dict") else plan
    if not isinstance(d, dict) or "candidates" not in d or "parent" not in d:
        raise ParameterError("expected a Plan (or its to_dict()) with 'parent' and 'candidates'",
                             field="plan")
    return d



def _setting(value, default, basis: str) -> dict:
    return {"value": default if value is None else value,
            "provenance": "default" if value is None else "user", "basis": basis}


# --------------------------------------------------------------------------- design
def design_screen(plan: Plan | Mapping[str, Any], api_budget_mg: float, *, library: Library | None = None,
                  top: int | None = None,
                  counterions: Sequence[str] | None = None,
                  solvents: Sequence[str] | None = None, n_solvents: int | None = None,
                  modes: Sequence[str] | None = None, scale: str = "plate",
                  api_mg_per_well: float | None = None, stock_molarity: float | None = None,
                  excess: float | None = None, include_risky: bool = False,
                  controls: bool = True, concentrations: dict[str, float] | None = None,
                  solvent_ul: float | None = None, antisolvent_ratio: float | None = None,
                  liquid_dosing: str = "neat", stock_solvent: str | None = None,
                  counterion_budget_mg: dict[str, float] | None = None,
                  well_capacity_ul: float | None = None, layout: str = "auto",
                  solvent_library: SolventLibrary | str | Path | None = None) -> ScreenDesign:
    """Design a salt screen from a plan.

    Parameters
    ----------
    plan : Plan or dict
        Output of :func:`saltplan.plan.plan_salts` (or its ``to_dict()``).
    api_budget_mg : float
        API (free form) available for the whole screen [mg].
    library : counterion Library, optional
        Default: :func:`saltplan.counterions.load_counterions` of the plan's libraries.
    top : int, optional
        Number of feasible plan candidates (counterion + stoichiometry), best ranked
        first (default 4). Ignored when ``counterions`` is given.
    counterions : sequence of str, optional
        Counterion ids; every feasible stoichiometry of each in the plan is screened.
    solvents, n_solvents
        Solvent ids to use first and the total number (default 4, or as many as given);
        the rest is chosen by max-min diversity
        (:func:`saltplan.solvent_selection.select_solvents`).
    modes : sequence of str
        Crystallization modes, from :data:`MODES` (default slurry and evaporation).
    scale : {"plate", "vial"}
        SBS 96-well plate (at most 96 wells) or vial list.
    api_mg_per_well : float, optional
        Default 5 mg (plate) or 50 mg (vial).
    stock_molarity : float, optional
        Counterion stock concentration [mol/L] (default 0.5).
    excess : float, optional
        Relative counterion excess (default 0.05: 1.05 eq for 1:1).
    include_risky : bool
        Keep risky combinations (flagged) instead of dropping them.
    controls : bool
        Free-form control (no counterion) in each solvent and mode.
    concentrations : dict, optional
        API concentration per mode [mg/mL], sets the solvent volume.
    solvent_ul : float, optional
        Fixed solvent volume per well [µL] instead of a concentration.
    antisolvent_ratio : float, optional
        Anti-solvent volume per volume of solvent (default 2).
    liquid_dosing : {"neat", "stock"}
        Liquid and solution counterions dosed neat by volume, or from a stock.
    stock_solvent : str, optional
        Solvent id of the counterion stocks (dispensed and evaporated before the
        crystallization solvent is added); default: each stock in the well's own solvent.
    counterion_budget_mg : dict, optional
        Available mass per counterion id [mg].
    well_capacity_ul : float, optional
        Working volume of a well or vial [µL] (default 1000 plate, 8000 vial).
    layout : {"auto", "grid", "rows"}
        Plate map: ``grid`` puts one candidate per row and one solvent × mode per
        column (controls in the last row); ``rows`` fills A1, A2, …, A12, B1, … (row-major)
        in design order; ``auto`` uses the grid when it fits.
    solvent_library : SolventLibrary or path, optional

    Returns
    -------
    ScreenDesign

    Raises
    ------
    BudgetError
        API or a counterion over budget (the message says what to cut).
    ParameterError
        Bad options, more than 96 wells at plate scale, a well over its capacity.
    """
    from ..library.solvents import SolventLibrary, load_solvents
    from .solvent_choice import select_solvents

    pd = _plan_dict(plan)
    if scale not in SCALES:
        raise ParameterError(f"scale must be one of {', '.join(SCALES)}, got {scale!r}",
                             field="scale")
    sc = SCALES[scale]
    if layout not in ("auto", "grid", "rows"):
        raise ParameterError(f"layout must be auto, grid or rows, got {layout!r}", field="layout")
    if liquid_dosing not in ("neat", "stock"):
        raise ParameterError(f"liquid_dosing must be neat or stock, got {liquid_dosing!r}",
                             field="liquid_dosing")
    budget = positive_number("api_budget_mg", api_budget_mg)
    api_mg = positive_number("api_mg_per_well",
                             sc.api_mg if api_mg_per_well is None else api_mg_per_well,
                       high=10000)
    molarity = positive_number("stock_molarity",
                               DEFAULTS["stock_molarity"] if stock_molarity is None
                         else stock_molarity, high=20)
    exc = DEFAULTS["excess"] if excess is None else excess
    if isinstance(exc, bool) or not isinstance(exc, (int, float)) or not 0 <= exc <= 0.5:
        raise ParameterError(f"excess must be between 0 and 0.5, got {exc!r}", field="excess")
    ratio = positive_number("antisolvent_ratio", DEFAULTS["antisolvent_ratio"] if antisolvent_ratio
                      is None else antisolvent_ratio, high=20)
    capacity = positive_number("well_capacity_ul", sc.capacity_ul if well_capacity_ul is None
                         else well_capacity_ul)
    fixed_ul = None if solvent_ul is None else positive_number("solvent_ul", solvent_ul)
    mode_ids = tuple(DEFAULTS["modes"] if not modes else modes)
    for m in mode_ids:
        if m not in MODES:
            raise ParameterError(f"unknown mode '{m}' (known: {', '.join(MODES)})", field="modes")
    if len(set(mode_ids)) != len(mode_ids):
        raise ParameterError("a mode is listed twice", field="modes")
    conc = {m: MODES[m].api_mg_ml for m in mode_ids}
    for m, v in (concentrations or {}).items():
        if m not in MODES:
            raise ParameterError(f"unknown mode '{m}' in concentrations", field="concentrations")
        conc[m] = positive_number(f"concentration of {m}", v, high=1000)

    if library is None:
        from ..library.counterions import load_counterions

        library = load_counterions((pd.get("inputs") or {}).get("libraries") or None)
    if isinstance(solvent_library, SolventLibrary):
        slib = solvent_library
    else:
        slib = load_solvents(solvent_library)
    stock_sv = None
    if stock_solvent is not None:
        stock_sv = slib.get(stock_solvent)
        if stock_sv.ich_class == 1:
            raise ParameterError(f"stock solvent '{stock_sv.id}' is ICH Q3C class 1",
                                 field="stock_solvent")

    cands = _choose_candidates(pd, library, top, counterions)
    requested = tuple(solvents or ())
    n_total = n_solvents if n_solvents is not None else (len(requested) or DEFAULTS["n_solvents"])
    if isinstance(n_total, bool) or not isinstance(n_total, int):
        raise ParameterError(f"n_solvents must be a whole number, got {n_total!r}",
                             field="n_solvents")
    choices = select_solvents(slib, n_total, requested=requested)
    chosen = [c.solvent for c in choices]

    api_mw = float(pd["parent"]["mw"])
    api_smiles = pd["parent"].get("smiles") or (pd.get("inputs") or {}).get("smiles") or ""
    api_amine = api_has_primary_amine(api_smiles)

    entries: list[dict] = []   # wells before placement, in design order
    dropped: list[dict] = []
    used_flags: set[str] = set()
    groups = [("sample", c) for c in cands] + ([("control", None)] if controls else [])
    for kind, cand in groups:
        ci = cand["ci"] if cand else None
        for sv in chosen:
            for m in mode_ids:
                mode = MODES[m]
                anti = (slib.get(sv.antisolvent) if mode.needs_antisolvent and sv.antisolvent
                        else None)
                unfit = _mode_unfit(mode, sv)
                if unfit:
                    dropped.append(_drop(cand, sv, m, "mode_solvent", unfit,
                                         "common practice (mode needs)"))
                    continue
                risks = risks_for(ci, sv, anti, stock_sv, m, api_amine) if ci is not None \
                    else risks_for(None, sv, anti, None, m, api_amine)
                blocking = [r for r in risks if r.drop]
                if blocking and not include_risky:
                    for r in blocking:
                        dropped.append(_drop(cand, sv, m, r.code, r.reason, r.source))
                    continue
                flags = [r.code for r in risks]
                if cand:
                    flags += [f"caveat:{cv['code']}" for cv in cand["caveats"]
                              if cv.get("severity") in ("warning", "serious")]
                used_flags.update(flags)
                entries.append(well_entry(kind, cand, sv, mode, anti, api_mg, api_mw, exc,
                                              molarity, liquid_dosing, stock_sv, conc, fixed_ul,
                                              ratio, capacity, tuple(flags), risks))

    if not entries:
        raise ParameterError("every combination was dropped (see the reasons with "
                             "--include-risky off); choose other solvents or modes",
                             field="wells")
    order_keys = {"solvent": [s.id for s in chosen], "mode": list(mode_ids),
                  "counterion": [c["key"] for c in cands]}
    if scale == "plate" and len(entries) > PLATE_WELLS:
        cuts = cut_options(entries, order_keys, PLATE_WELLS)
        raise ParameterError(f"design needs {len(entries)} wells; an SBS 96-well plate holds "
                             f"{PLATE_WELLS}: " + " or ".join(cuts + ["use --scale vial"]),
                             field="wells")
    wells, layout_info = place_wells(entries, scale, layout, cands, chosen, mode_ids, controls)
    totals = totals_of(wells, library, molarity, stock_sv)
    budget_info = check_budget(wells, entries, budget, api_mg, sc, order_keys, totals,
                                counterion_budget_mg or {})

    settings = {
        "scale": _setting(scale, scale, sc.basis),
        "api_mg_per_well": _setting(api_mg_per_well, sc.api_mg, sc.basis),
        "api_budget_mg": _setting(budget, budget, "user"),
        "top": _setting(None if counterions else top, DEFAULTS["top"],
                        "feasible plan candidates taken in rank order"),
        "counterions": _setting(list(counterions) if counterions else None, None,
                                "counterions requested by the user"),
        "n_solvents": _setting(n_solvents, n_total, "max-min diversity over solvent properties"),
        "modes": _setting(list(modes) if modes else None, list(DEFAULTS["modes"]),
                          "common practice: slurry ripening and evaporation are the workhorses"),
        "excess": _setting(excess, DEFAULTS["excess"],
                           "common practice: 1.0-1.1 eq of a monoprotic counterion"),
        "stock_molarity": _setting(stock_molarity, DEFAULTS["stock_molarity"], "mol/L"),
        "liquid_dosing": _setting(None if liquid_dosing == "neat" else liquid_dosing, "neat",
                                  "liquids dosed by volume from their density (common practice)"),
        "stock_solvent": _setting(stock_solvent, None,
                                  "None: each stock is made in the well's own solvent"),
        "concentrations_mg_ml": _setting(concentrations, conc,
                                         "API concentration per mode, sets the solvent volume "
                                         "(common practice rule of thumb)"),
        "solvent_ul": _setting(solvent_ul, None,
                               "fixed volume per well instead of a concentration"),
        "antisolvent_ratio": _setting(antisolvent_ratio, DEFAULTS["antisolvent_ratio"],
                                      "volumes of anti-solvent per volume of solvent"),
        "well_capacity_ul": _setting(well_capacity_ul, sc.capacity_ul, sc.basis),
        "include_risky": _setting(include_risky or None, False, "risky combinations dropped"),
        "controls": _setting(None if controls else False, True,
                             "free form in each solvent and mode"),
        "layout": _setting(None if layout == "auto" else layout, "auto", layout_info["format"]),
    }
    basis = _basis(api_mw, cands, exc, conc, fixed_ul, molarity, ratio, slib)
    legend = {code: FLAG_TEXT[code.split(":", 1)[0]] if not code.startswith("caveat:")
              else _caveat_text(cands, code[7:]) for code in sorted(used_flags)}
    return ScreenDesign(
        plan=pd, settings=settings, solvents=tuple(c.to_dict() for c in choices),
        modes=tuple({"id": m, "label": MODES[m].label, "how": MODES[m].how,
                     "api_mg_ml": conc[m]} for m in mode_ids),
        candidates=tuple({k: v for k, v in c.items() if k != "ci"} for c in cands),
        wells=tuple(wells), dropped=tuple(dropped), totals=totals, budget=budget_info,
        layout=layout_info, basis=basis, flag_legend=legend, cautions=CAUTIONS)

def _caveat_text(cands, code: str) -> str:
    for c in cands:
        for cv in c["caveats"]:
            if cv.get("code") == code:
                return f"plan caveat ({cv.get('severity')}): {cv.get('text')}"
    return "plan caveat"


def _choose_candidates(pd: dict, library, top, wanted) -> list[dict]:
    all_c = sorted(pd.get("candidates") or [], key=lambda c: (c.get("rank") is None,
                                                               c.get("rank") or 0,
                                                               c.get("counterion") or ""))
    if wanted:
        picked = []
        for cid in wanted:
            ci = get_counterion(library, cid)
            mine = [c for c in all_c if c.get("counterion") == ci.id]
            feasible = [c for c in mine if c.get("feasible")]
            if not feasible:
                why = next((e for e in pd.get("excluded") or [] if e.get("counterion") == ci.id),
                           None)
                if mine or why:
                    dp = (mine or [why])[0].get("delta_pka")
                    reason = (why or {}).get("reason") or f"ΔpKa {dp} below the minimum"
                    raise ParameterError(f"counterion '{ci.id}' is not a feasible candidate of "
                                         f"the plan ({reason})", entry=ci.id, field="counterions")
                raise ParameterError(f"counterion '{ci.id}' is not among the plan's candidates",
                                     entry=ci.id, field="counterions")
            picked += [c for c in feasible if c not in picked]
    else:
        n = DEFAULTS["top"] if top is None else top
        if isinstance(n, bool) or not isinstance(n, int) or n < 1:
            raise ParameterError(f"top must be a whole number of at least 1, got {n!r}",
                                 field="top")
        picked = [c for c in all_c if c.get("feasible")][:n]
        if not picked:
            verdict = pd.get("verdict") or {}
            raise ParameterError("the plan has no feasible salt candidate to screen "
                                 f"({verdict.get('code', 'no candidates')}: "
                                 f"{verdict.get('text', '')})".rstrip(": )") + ")",
                                 field="candidates")
    out = []
    for c in picked:
        ci = get_counterion(library, c["counterion"])
        parse_stoichiometry(c["stoichiometry"])
        out.append({"key": f"{ci.id} {c['stoichiometry']}", "counterion": ci.id,
                    "name": getattr(ci, "name", ci.id), "stoichiometry": c["stoichiometry"],
                    "rank": c.get("rank"), "delta_pka": c.get("delta_pka"),
                    "caveats": [dict(cv) for cv in c.get("caveats") or []], "ci": ci})
    return out


def _mode_unfit(mode: Mode, sv) -> str | None:
    if mode.min_bp_c is not None and sv.bp_c < mode.min_bp_c:
        return (f"{mode.label} needs a boiling point of at least {mode.min_bp_c:g} °C "
                f"({sv.name}: {sv.bp_c:g} °C)")
    if mode.end_c is not None and sv.mp_c is not None \
            and sv.mp_c > mode.end_c - FREEZE_MARGIN_C:
        return (f"{mode.label} ends at {mode.end_c:g} °C, too close to the melting point of "
                f"{sv.name} ({sv.mp_c:g} °C)")
    if mode.max_bp_c is not None and sv.bp_c > mode.max_bp_c:
        return (f"{mode.label} is impractical above a boiling point of {mode.max_bp_c:g} °C "
                f"({sv.name}: {sv.bp_c:g} °C)")
    if mode.needs_antisolvent and not sv.antisolvent:
        return f"no anti-solvent is paired with {sv.name} in the solvent library"
    return None


def _drop(cand, sv, mode, rule, reason, source) -> dict:
    return {"counterion": cand["counterion"] if cand else None,
            "stoichiometry": cand["stoichiometry"] if cand else None,
            "kind": "sample" if cand else "control", "solvent": sv.id, "mode": mode,
            "rule": rule, "reason": reason, "source": source}

def _basis(api_mw, cands, exc, conc, fixed_ul, molarity, ratio, slib) -> dict:
    cis = {}
    for c in cands:
        ci = c["ci"]
        if ci.id in cis:
            continue
        cis[ci.id] = {
            "mw": round(float(ci.mw), 3), "mw_source": CI_MW_SOURCE,
            "form": getattr(ci, "form", None), "density_g_ml": getattr(ci, "density_g_ml", None),
            "density_source": getattr(ci, "density_source", None)
            or "counterion library entry (see its references)",
            "mass_fraction": mass_fraction(ci),
            "dosing": "by volume: µL = mg / density / mass fraction"
            if getattr(ci, "form", "solid") in ("liquid", "gas_solution")
            else f"from a {molarity:g} M stock: µL = mmol / M × 1000",
        }
    return {
        "api_mw": {"value": round(api_mw, 3), "unit": "g/mol", "source": API_MW_SOURCE},
        "equivalents": {"excess": exc, "rule": "eq = counterion per API of the stoichiometry × "
                        "(1 + excess): 1:1 -> 1.05, 2:1 -> 0.525, 1:2 -> 2.1 at 5 % excess",
                        "source": "common practice (1.0-1.1 eq monoprotic, 0.5 eq for 2:1, "
                                  "2.0-2.2 eq bis-salt)"},
        "counterions": cis,
        "solvent_volume": {"rule": "fixed per well" if fixed_ul else
                           "µL = API mg / concentration (mg/mL) × 1000, minus the stock or "
                           "reagent volume added in the same solvent",
                           "concentrations_mg_ml": conc, "fixed_ul": fixed_ul,
                           "source": "common practice rule of thumb (settings)"},
        "antisolvent_volume": {"ratio": ratio, "rule": "anti-solvent µL = ratio × solvent µL"},
        "solvents": {"library": slib.source, "hash": slib.hash,
                     "selection": "max-min diversity over standardized log10 ε, Kamlet-Taft α, "
                                  "β, π* and water miscibility; class 1 never, class 2 "
                                  "penalized"},
    }
