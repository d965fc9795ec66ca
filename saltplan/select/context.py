"""The context of a selection: what the plan and the screen said, tier-3 open questions,
next steps when no lead emerged, and the cautions of the decision record.

Plain functions over the design dict and the evaluated groups; no chemistry is redone
here (the plan's numbers are carried with the plan's provenance).
"""
from __future__ import annotations

import re
from typing import Any

#: sulfonic-acid counterions: with alcohols they can form alkyl sulfonate esters
#: (potential mutagenic impurities, ICH M7) (domain.md §5, common practice)
_SULFONATE = re.compile(r"(mes|es|bes|tos|edis|napadis|naps|cams)ylate|isethionate|sulfon",
                        re.IGNORECASE)
_ALCOHOL = re.compile(r"methanol|ethanol|propanol|butanol|\bipa\b|alcohol", re.IGNORECASE)
TOP_CANDIDATES = 8


def _plan(design: dict) -> dict:
    return design.get("plan") or {}


def plan_summary(design: dict) -> dict[str, Any]:
    """The plan's rationale as the decision record needs it (numbers as the plan gave them)."""
    plan = _plan(design)
    parent = plan.get("parent") or {}
    inputs = plan.get("inputs") or {}
    screened = {w.get("counterion") for w in design.get("wells", []) if w.get("counterion")}
    cands = []
    for c in (plan.get("candidates") or [])[:TOP_CANDIDATES]:
        cands.append({
            "rank": c.get("rank"), "counterion": c.get("counterion"),
            "name": c.get("counterion_name") or c.get("name"),
            "stoichiometry": c.get("stoichiometry"), "delta_pka": c.get("delta_pka"),
            "category": c.get("category"), "drug_content": c.get("drug_content"),
            "ph_max": c.get("ph_max"), "ph_max_basis": c.get("ph_max_basis"),
            "screened": c.get("counterion") in screened,
            "caveats": [_caveat_text(k) for k in c.get("caveats") or []],
        })
    sites = [{"kind": s.get("kind"), "pka": s.get("pka"), "uncertainty": s.get("uncertainty"),
              "group": s.get("group"), "provenance": s.get("provenance")}
             for s in plan.get("sites") or []]
    verdict = plan.get("verdict") or {}
    return {
        "name": plan.get("name"), "smiles": parent.get("smiles") or inputs.get("smiles"),
        "mw": parent.get("mw"), "formula": parent.get("formula"),
        "dose_mg": inputs.get("dose_mg"), "route": inputs.get("route"),
        "verdict": {"code": verdict.get("code"), "text": verdict.get("text")},
        "sites": sites, "candidates": cands,
        "cautions": [str(x) for x in plan.get("cautions") or []],
        "provenance": plan.get("provenance") or {},
    }


def _caveat_text(caveat) -> str:
    if isinstance(caveat, dict):
        sev = caveat.get("severity")
        text = caveat.get("text") or caveat.get("code") or ""
        return f"{sev}: {text}" if sev else str(text)
    return str(caveat)


def _dropped_text(value) -> str:
    """One dropped combination as a line: what, where, why, source."""
    if isinstance(value, dict) and "reason" in value:
        what = (f"{value.get('counterion')} {value.get('stoichiometry') or ''}".strip()
                if value.get("counterion") else "free-form control")
        where = " / ".join(str(value[k]) for k in ("solvent", "mode") if value.get(k))
        src = f" [{value['source']}]" if value.get("source") else ""
        return f"{what} in {where}: {value['reason']}{src}"
    return _text(value)


def _text(value) -> str:
    if isinstance(value, dict):
        return "; ".join(f"{k}: {v}" for k, v in value.items() if v not in (None, "", [], {}))
    return str(value)


def screen_summary(design: dict) -> dict[str, Any]:
    """Wells, solvents and dropped combinations of the screen design."""
    wells = design.get("wells") or []
    samples = [w for w in wells if w.get("kind", "sample") != "control"]
    solvents = []
    for s in design.get("solvents") or []:
        if isinstance(s, dict):
            solvents.append({"name": s.get("name") or s.get("id") or s.get("solvent"),
                             "reason": s.get("reason") or s.get("why") or "",
                             "ich_class": s.get("ich_class") or s.get("ich_q3c_class")})
        else:
            solvents.append({"name": str(s), "reason": "", "ich_class": None})
    return {
        "wells": len(wells), "samples": len(samples), "controls": len(wells) - len(samples),
        "counterions": list(dict.fromkeys(w["counterion"] for w in samples if w.get("counterion"))),
        "modes": list(dict.fromkeys(str(w.get("mode")) for w in wells if w.get("mode"))),
        "solvents": solvents,
        "dropped": [_dropped_text(x) for x in design.get("dropped") or []],
        "cautions": [str(x) for x in design.get("cautions") or []],
        "totals": design.get("totals") or {},
        "well_table": [{"well": w.get("well"), "kind": w.get("kind", "sample"),
                        "counterion": w.get("counterion") or "", "stoichiometry": w.get("stoichiometry") or "",
                        "solvent": w.get("solvent"), "mode": w.get("mode"),
                        "flags": [str(f) for f in w.get("flags") or []]} for w in wells],
    }


def _wells_of(design: dict) -> dict[str, dict]:
    return {w["well"]: w for w in design.get("wells", [])}


def _is_alcohol(solvent_id, design: dict) -> bool:
    for s in design.get("solvents") or []:
        if isinstance(s, dict) and solvent_id in (s.get("id"), s.get("name")) and "is_alcohol" in s:
            return bool(s["is_alcohol"])
    return bool(_ALCOHOL.search(str(solvent_id or "")))


def _sulfonate_alcohol_wells(group_wells, design) -> tuple[str, ...]:
    """Wells where a sulfonic acid met an alcohol (design flag, or counterion + solvent)."""
    wells = _wells_of(design)
    hits = []
    for wid in group_wells:
        w = wells.get(wid, {})
        flags = " ".join(str(f) for f in w.get("flags") or [])
        if "sulfonate_ester" in flags or (_SULFONATE.search(str(w.get("counterion") or ""))
                                          and (_is_alcohol(w.get("solvent"), design)
                                               or _is_alcohol(w.get("antisolvent"), design))):
            hits.append(wid)
    return tuple(hits)


def open_questions(chosen, design: dict, observations) -> list[dict[str, Any]]:
    """Tier 3: what the scientist must still settle for the lead and back-up."""
    out: list[dict[str, Any]] = []
    plan = _plan(design)
    cands = {(c.get("counterion"), c.get("stoichiometry")): c for c in plan.get("candidates") or []}
    for g in chosen:
        ids = list(g.wells)
        name = g.title
        out.append({"topic": "stability", "form": g.id, "wells": ids, "text":
                    f"Physical and chemical stability of {name}: e.g. open and closed storage at "
                    "40 °C / 75 % RH (ICH Q1A(R2) accelerated condition), XRPD and purity after storage."})
        out.append({"topic": "polymorphism", "form": g.id, "wells": ids, "text":
                    f"Polymorph screen of {name}: seen in {len(ids)} well(s) from "
                    f"{len(g.solvents)} solvent(s) only; other forms or hydrates may exist "
                    "(slurry competition, temperature and water-activity ranges)."})
        out.append({"topic": "processability", "form": g.id, "wells": ids, "text":
                    f"Processability of {name}: particle size and habit, flow, compaction, "
                    "filtration and drying."})
        out.append({"topic": "scale-up", "form": g.id, "wells": ids, "text":
                    f"Reproduce {name} at 20–100 mg and then gram scale; confirm by XRPD, DSC/TGA "
                    "and 1H NMR stoichiometry (common practice)."})
        for e in g.evidence:
            if e.status in ("not_measured", "not_assessed", "unconfirmed") and e.criterion not in (
                    "free_form_check",):
                out.append({"topic": f"measure {e.criterion.replace('_', ' ')}", "form": g.id,
                            "wells": list(e.wells), "text": f"{name}: {e.text}."})
            if e.criterion == "free_form_check" and e.status == "not_assessed":
                out.append({"topic": "free form check", "form": g.id, "wells": list(e.wells),
                            "text": f"{name}: compare its XRPD pattern with the free form's."})
            if e.criterion == "solvate" and e.status == "concern":
                out.append({"topic": "solvate/hydrate", "form": g.id, "wells": list(e.wells),
                            "text": f"{name}: identify the solvent or water (TGA-MS, KF, DVS) and "
                                    "decide whether a solvate/hydrate is acceptable."})
        cand = cands.get((g.counterion, g.stoichiometry)) or {}
        if cand.get("ph_max") is not None:
            out.append({"topic": "disproportionation", "form": g.id, "wells": ids, "text":
                        f"{name}: pHmax {cand['ph_max']:.1f} (estimated in the plan"
                        + (f": {cand['ph_max_basis']}" if cand.get("ph_max_basis") else "")
                        + "): measure it, and check the risk of conversion to the free form in "
                        "the formulation microenvironment."})
        sulf = _sulfonate_alcohol_wells(ids, design)
        if sulf:
            out.append({"topic": "ICH M7", "form": g.id, "wells": list(sulf), "text":
                        f"{name}: formed with a sulfonic acid in an alcohol (wells {', '.join(sulf)}): "
                        "alkyl sulfonate esters are potential mutagenic impurities; plan the control "
                        "under ICH M7 or choose a non-alcohol process solvent."})
    return out


def next_steps(outcome: str, set_aside, observations, design: dict) -> list[str]:
    """What to try when no lead emerged (common practice); empty when there is a lead."""
    if outcome != "no_lead":
        return []
    steps: list[str] = []
    by = {}
    for o in observations:
        if o.kind != "control" and o.counterion:
            by.setdefault(o.outcome, []).append(o.well)
    if by.get("amorphous") or by.get("oil") or by.get("gel"):
        wells = by.get("amorphous", []) + by.get("oil", []) + by.get("gel", [])
        steps.append("Ripen amorphous solids, oils and gels by slurrying or temperature cycling "
                     f"(e.g. 5–50 °C) in a few solvents; seed where possible (wells {', '.join(wells)}).")
    if by.get("clear_solution"):
        steps.append("Clear solutions: concentrate by slow evaporation, cool, or add an anti-solvent "
                     f"(wells {', '.join(by['clear_solution'])}).")
    for g in set_aside:
        steps.append(f"Review {g.title} (wells {', '.join(g.wells)}): {g.reason}.")
    plan = _plan(design)
    screened = {w.get("counterion") for w in design.get("wells", []) if w.get("counterion")}
    unscreened = [c.get("counterion") for c in plan.get("candidates") or []
                  if c.get("feasible", True) and c.get("counterion") not in screened]
    unscreened = list(dict.fromkeys(unscreened))
    if unscreened:
        steps.append("Screen further counterions from the plan not yet on the plate: "
                     + ", ".join(unscreened[:6]) + ".")
    ff = [o.well for o in observations if (o.kind == "control" or not o.counterion)
          and o.outcome == "crystalline"]
    if ff:
        steps.append(f"The free form crystallized (control wells {', '.join(ff)}): developing the "
                     "free form, or a co-crystal, remains an option.")
    steps.append("Where ΔpKa is small, consider co-crystals; for a poorly soluble compound an "
                 "amorphous solid dispersion is the usual fallback (common practice).")
    return steps


def cautions(design: dict, results, shortlist) -> list[str]:
    """The usual cautions of the decision record."""
    out = []
    if results.invented:
        out.append("INVENTED DATA: the results file is marked as invented demo data; nothing in this "
                   "record is a measurement.")
    out += [
        "This record is a planning aid: the decision rests on the measured data, reviewed by "
        "qualified staff, not on this tool.",
        "Confirm salt formation and the solid form by XRPD, DSC/TGA and 1H NMR (stoichiometry), "
        "ideally the proton position in a crystal structure.",
        "Hygroscopicity classes follow Ph. Eur. 5.11, whose test is 24 h at 25 °C / 80 % RH; a DVS "
        "reading at 80 % RH is an approximation of it.",
        "Aqueous solubility here is a single value in water at the saturated pH; the ICH M9 "
        "definition asks for the dose in 250 mL over pH 1.2–6.8 at 37 °C.",
        "Specifications of the selected form follow ICH Q6A; residual solvents ICH Q3C; defer to "
        "the pharmacopoeias (USP–NF, Ph. Eur.) and local regulation.",
    ]
    sulf = [w.get("well") for w in design.get("wells", [])
            if _SULFONATE.search(str(w.get("counterion") or ""))
            or any("sulfonate" in str(f) for f in w.get("flags") or [])]
    if sulf:
        out.append("Sulfonic acids were used in the screen (wells " + ", ".join(sulf) + "): alkyl "
                   "sulfonate esters formed with alcohols are potential mutagenic impurities; "
                   "ICH M7 applies.")
    out.append("Strong acids and bases and many solvents are hazardous: handle them under the "
               "site's safety rules.")
    return out
