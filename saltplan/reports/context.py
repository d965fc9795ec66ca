"""Turn a plan dict (and a screen dict) into the view model the templates render.

The templates stay dumb: every derived string, table row and chart is made here, once,
for HTML and Markdown alike. Required keys of the input dicts are read with
:func:`need`, which raises a ``KeyError`` naming the dotted path of a missing key;
optional sections (screen, solubility, sites) may be absent or empty.
"""
from __future__ import annotations

from typing import Any

from . import charts, drawing, rationale
from .context_base import (CATEGORY_LABELS, PROVENANCE_SHORT, SEVERITY_ORDER, MissingKey,
                           fmt, need, plain, text_of)
from .screenview import screen_view

__all__ = ["build_context", "MissingKey", "need", "fmt"]

#: keys every plan dict must carry (DEVELOPERS.md, plan.Plan); others are optional
REQUIRED_PLAN_KEYS = ("name", "inputs", "parent", "sites", "candidates", "excluded", "verdict",
                      "cautions", "references", "provenance")

PART_LABELS = {"delta_pka": "ΔpKa", "delta_pka_margin": "ΔpKa margin",
               "drug_content": "drug content"}


# --------------------------------------------------------------------------- sections
def thresholds_of(plan: dict) -> dict:
    inputs = need(plan, "inputs", "plan")
    found = inputs.get("thresholds") or plan.get("thresholds")
    if found:
        return dict(found)
    from ..plan.assessment import DEFAULT_THRESHOLDS

    out = DEFAULT_THRESHOLDS.to_dict()
    out["source"] = f"{out['source']} (defaults; the plan did not record its thresholds)"
    return out


def bands_of(th: dict) -> list[dict]:
    return [{"code": "unlikely", "lo": None, "hi": th["uncertain"]},
            {"code": "uncertain", "lo": th["uncertain"], "hi": th["likely"]},
            {"code": "likely", "lo": th["likely"], "hi": th["salt_expected"]},
            {"code": "salt_expected", "lo": th["salt_expected"], "hi": None}]


def site_views(plan: dict) -> list[dict]:
    from rdkit import Chem

    from ..structure import rdkit_messages

    parent = need(plan, "parent", "plan")
    with rdkit_messages():
        mol = Chem.MolFromSmiles(need(parent, "smiles", "plan.parent"))
    out = []
    for i, s in enumerate(need(plan, "sites", "plan")):
        where = f"plan.sites[{i}]"
        atom = int(need(s, "atom", where))
        symbol = (mol.GetAtomWithIdx(atom).GetSymbol()
                  if mol is not None and 0 <= atom < mol.GetNumAtoms() else "?")
        prov = need(s, "provenance", where)
        steps = []
        for j, st in enumerate(need(s, "steps", where)):
            w = f"{where}.steps[{j}]"
            steps.append({"label": need(st, "label", w), "value": need(st, "value", w),
                          "value_text": fmt(need(st, "value", w)),
                          "detail": st.get("detail") or "", "source": st.get("source") or ""})
        out.append({
            "atom": atom, "label": f"{symbol}{atom}", "kind": need(s, "kind", where),
            "pka": need(s, "pka", where), "pka_text": fmt(need(s, "pka", where)),
            "uncertainty": s.get("uncertainty"),
            "uncertainty_text": "±" + fmt(s["uncertainty"]) if s.get("uncertainty") else
            ("—" if prov != "estimated" else "n/a"),
            "group": need(s, "group", where), "group_id": s.get("group_id") or "",
            "provenance": prov, "provenance_short": PROVENANCE_SHORT.get(prov, prov),
            "source": s.get("source") or "", "steps": steps,
            "source_short": _short_source(s.get("source") or "", prov),
            "source_clean": _strip_prefix(s.get("source") or "", prov),
            "drawing_label": drawing.site_label(s),
        })
    return out


def _basis_text(t: dict | None, site_label: dict, unc: float | None) -> str:
    """ "N6 pKa 3.07 (est. ±0.40) vs counterion pKa −6.10" for the limiting transfer."""
    if not t:
        return ""
    prov = t.get("api_pka_provenance") or ""
    tag = PROVENANCE_SHORT.get(prov, prov)
    if unc:
        tag += f" ±{unc:.2f}"
    site = site_label.get(t.get("api_atom"), f"atom {t.get('api_atom')}")
    return (f"{site} pKa {fmt(t.get('api_pka'))} ({tag}) vs counterion pKa "
            f"{fmt(t.get('counterion_pka'))}")


def _strip_prefix(source: str, provenance: str) -> str:
    """A site's source without a leading "estimated:" that repeats its provenance."""
    if source.lower().startswith(provenance.lower() + ":"):
        return source[len(provenance) + 1:].strip()
    return source


def _short_source(source: str, provenance: str) -> str:
    """First clause of a site's source (the rule), for the summary table."""
    return _strip_prefix(source, provenance).split(";")[0].strip()


def candidate_views(cands: list[dict], where: str, sites: list[dict]) -> list[dict]:
    site_label = {s["atom"]: s["label"] for s in sites}
    site_unc = {s["atom"]: s["uncertainty"] for s in sites if s["provenance"] == "estimated"}
    keys: list[str] = []
    for c in cands:
        for k in (c.get("breakdown") or {}):
            if k not in keys:
                keys.append(k)
    top = max([float(c.get("score") or 0.0) for c in cands] + [1e-9])
    out = []
    for i, c in enumerate(cands):
        w = f"{where}[{i}]"
        cid = need(c, "counterion", w)
        name = c.get("counterion_name") or ""
        bd = c.get("breakdown") or {}
        parts = [{"key": k, "label": PART_LABELS.get(k, k.replace("_", " ")), "value": float(bd[k]),
                  "text": fmt(float(bd[k]), 3), "colour": charts.part_colour(keys.index(k))}
                 for k in keys if k in bd]
        if c.get("precedence_basis"):            # only with a ledger's in-house evidence
            for p in parts:
                if p["key"] == "precedence":
                    p["text"] += f" ({c['precedence_basis']})"
        positive_total = sum(p["value"] for p in parts if p["value"] > 0)
        caveats = sorted((c.get("caveats") or []),
                         key=lambda cv: (SEVERITY_ORDER.get(cv.get("severity"), 9),
                                         cv.get("code") or ""))
        transfers = []
        for t in c.get("transfers") or []:
            prov = t.get("api_pka_provenance") or ""
            transfers.append({
                "site": site_label.get(t.get("api_atom"), f"atom {t.get('api_atom')}"),
                "api_pka": fmt(t.get("api_pka")), "api_provenance": prov,
                "api_provenance_short": PROVENANCE_SHORT.get(prov, prov),
                "api_source": t.get("api_pka_source") or "",
                "api_source_short": _short_source(t.get("api_pka_source") or "", prov),
                "counterion_pka": fmt(t.get("counterion_pka")),
                "counterion_source": t.get("counterion_pka_source") or "",
                "delta_pka": fmt(t.get("delta_pka")),
                "api_kind": t.get("api_kind") or "",
            })
        dpkas = c.get("delta_pkas") or []
        raw_t = c.get("transfers") or []
        limiting = min(raw_t, key=lambda t: (float(t.get("delta_pka") or 0.0),
                                             t.get("api_atom") or 0), default=None)
        limiting_unc = (site_unc.get(limiting.get("api_atom"))
                        if limiting and limiting.get("api_pka_provenance") == "estimated"
                        else None)
        out.append({
            "rank": c.get("rank"), "counterion": cid, "counterion_name": name,
            "label": f"{cid} ({name})" if name and name != cid else cid,
            "stoichiometry": need(c, "stoichiometry", w),
            "delta_pka": need(c, "delta_pka", w), "delta_pka_text": fmt(c["delta_pka"]),
            "delta_pkas_text": ", ".join(fmt(d) for d in dpkas) if len(dpkas) > 1 else "",
            "category": need(c, "category", w),
            "category_label": CATEGORY_LABELS.get(c["category"], c["category"]),
            "feasible": bool(c.get("feasible", True)),
            "probability": c.get("probability"),
            "probability_text": "n/a" if c.get("probability") is None
            else f"{100 * float(c['probability']):.0f} %",
            "tier": c.get("tier"), "formula_display": c.get("formula_display") or
            c.get("formula") or "", "salt_mw_text": fmt(c.get("salt_mw"), 2, "g/mol"),
            "drug_content": c.get("drug_content"),
            "drug_content_text": fmt(c.get("drug_content"), 1, "%"),
            "mass_source": c.get("mass_source") or "",
            "score": c.get("score"), "score_text": fmt(c.get("score"), 3),
            "parts": parts,
            "bar_svg": charts.score_bar([(p["key"], p["value"]) for p in parts],
                                        scale=max(top, positive_total)),
            "caveats": caveats, "top_caveat": caveats[0] if caveats else None,
            "caveats_major": [cv for cv in caveats if cv.get("severity") in ("serious", "warning")],
            "n_minor": sum(1 for cv in caveats if cv.get("severity") not in ("serious", "warning")),
            "parts_nonzero": [p for p in parts if p["value"] != 0],
            "n_zero_parts": sum(1 for p in parts if p["value"] == 0),
            "transfers": transfers, "api_sites": [site_label.get(a, str(a))
                                                  for a in c.get("api_sites") or []],
            "ph_max_text": fmt(c.get("ph_max")), "ph_max_basis": c.get("ph_max_basis") or "",
            "reason": c.get("reason") or "", "limiting_uncertainty": limiting_unc,
            "dpka_basis": _basis_text(limiting, site_label, limiting_unc),
        })
    return out


def solubility_view(sol: Any) -> dict | None:
    """Normalize the plan's solubility sketch (``SolubilitySketch.to_dict()``); None if absent."""
    if not sol:
        return None
    total: list[tuple[float, float]] = []
    free: list[tuple[float, float]] = []
    for p in sol.get("profile") or []:
        if isinstance(p, dict):
            ph, s_tot, s_free = p.get("ph"), p.get("s_mg_ml"), p.get("free_form_mg_ml")
        else:
            ph, s_tot, s_free = (list(p) + [None, None])[:3]
        if ph is None:
            continue
        if s_tot is not None:
            total.append((float(ph), float(s_tot)))
        if s_free is not None:
            free.append((float(ph), float(s_free)))
    intrinsic = sol.get("intrinsic") or {}
    rows = []
    if sol.get("s0_mg_ml") is not None:
        rows.append({"label": "intrinsic solubility S₀ of the free form",
                     "value": f"{sol['s0_mg_ml']:.3g} mg/mL"
                     + (f" (log S {intrinsic['log_s_mol_l']:.2f} mol/L)"
                        if intrinsic.get("log_s_mol_l") is not None else ""),
                     "prov": " · ".join(str(x) for x in (
                         sol.get("s0_provenance") or intrinsic.get("provenance"),
                         sol.get("s0_method") or intrinsic.get("method"),
                         intrinsic.get("source")) if x)})
        if intrinsic.get("inputs"):
            rows.append({"label": "S₀ inputs", "value": "; ".join(
                f"{k} {plain(v)}" for k, v in intrinsic["inputs"].items()), "prov": "computed"})
    if sol.get("salt_solubility_mg_ml") is not None:
        rows.append({"label": "salt solubility (for pHmax)",
                     "value": f"{sol['salt_solubility_mg_ml']:.3g} mg/mL as free form",
                     "prov": sol.get("salt_solubility_basis") or ""})
    for site in sol.get("ph_max_sites") or []:
        rows.append({"label": f"pHmax, {site.get('kind')} site atom {site.get('atom')}",
                     "value": f"{fmt(site.get('ph_max'))} (site pKa {fmt(site.get('pka'))})",
                     "prov": sol.get("ph_max_source") or "estimated"})
    for note in sol.get("notes") or []:
        rows.append({"label": "solubility note", "value": str(note), "prov": ""})
    sites = sol.get("profile_sites") or []
    return {"points": total, "free_points": free, "s0": sol.get("s0_mg_ml"),
            "ph_max": sol.get("ph_max"), "unit": "mg/mL", "rows": rows,
            "profile_sites": ", ".join(f"{x.get('kind')} atom {x.get('atom')} pKa "
                                       f"{fmt(x.get('pka'))}" for x in sites)}


def input_rows(plan: dict, th: dict) -> list[dict]:
    inputs = need(plan, "inputs", "plan")
    parent = need(plan, "parent", "plan")
    prov = need(plan, "provenance", "plan")
    rows = [
        {"label": "compound", "value": plan.get("name") or "(unnamed)", "prov": "user"},
        {"label": "structure as supplied", "value": parent.get("input") or
         inputs.get("smiles") or "", "prov": "user"},
        {"label": "parent (free form) SMILES", "value": need(parent, "smiles", "plan.parent"),
         "prov": "computed: saltplan structure standardization (RDKit)"},
        {"label": "supplied form", "value": parent.get("supplied_as") or "free form",
         "prov": "computed from the supplied structure"},
        {"label": "formula, molecular weight", "value":
         f"{parent.get('formula') or ''}, {fmt(parent.get('mw'), 2, 'g/mol')}",
         "prov": "computed: RDKit average atomic weights (IUPAC)"},
        {"label": "dose", "value": fmt(inputs.get("dose_mg"), 0, "mg/day")
         if inputs.get("dose_mg") is not None else "not given: counterion exposure not assessed",
         "prov": "user" if inputs.get("dose_mg") is not None else "—"},
        {"label": "route", "value": inputs.get("route") or "not given", "prov": "user"},
        {"label": "measured pKa supplied", "value": _measured_text(inputs.get("measured")),
         "prov": "user" if inputs.get("measured") else "—"},
        {"label": "counterion libraries", "value": "built-in" + "".join(
            f"; {p}" for p in (inputs.get("libraries") or [])),
         "prov": f"library hash {str(need(prov, 'library_hash', 'plan.provenance'))[:16]}… "
                 "(full hash under Provenance)"},
        {"label": "ΔpKa category thresholds", "value":
         f"salt expected ≥ {fmt(th['salt_expected'], 1)}; likely ≥ {fmt(th['likely'], 1)}; "
         f"uncertain ≥ {fmt(th['uncertain'], 1)}; below: unlikely", "prov": th.get("source", "")},
    ]
    known = {"smiles", "structure", "dose_mg", "route", "measured", "libraries", "thresholds"}
    for key, value in inputs.items():
        if key in known or value is None or value == [] or value == {}:
            continue
        rows.append({"label": key.replace("_", " "), "value": plain(value), "prov": "user"})
    for key, value in (plan.get("settings") or {}).items():
        if key in ("min_delta_pka",) and "min_delta_pka" in inputs:
            continue
        if key == "weights" and isinstance(value, dict):
            value = "; ".join(f"{k} {plain(v)}" for k, v in value.items())
        rows.append({"label": key.replace("_", " "), "value": plain(value),
                     "prov": "setting (ranking configuration / default)"})
    return rows


def _measured_text(measured: Any) -> str:
    if not measured:
        return "none: every pKa shown is an estimate"
    if isinstance(measured, dict):
        return "; ".join(f"{k}: {fmt(v) if isinstance(v, (int, float)) else v}"
                         for k, v in measured.items())
    if isinstance(measured, (list, tuple)):
        return "; ".join(fmt(v) for v in measured)
    return str(measured)


def verdict_view(plan: dict, cands: list[dict]) -> dict:
    v = need(plan, "verdict", "plan")
    return {"code": need(v, "code", "plan.verdict"), "text": need(v, "text", "plan.verdict"),
            "alternatives": [text_of(a) for a in (v.get("alternatives") or [])],
            "top": [c for c in cands if c["feasible"]][:3],
            "has_salts": need(v, "code", "plan.verdict") == "salt_candidates" and bool(cands)}


# --------------------------------------------------------------------------- all together
def build_context(plan: dict, screen: dict | None = None, graphics: bool = True) -> dict:
    """The whole view model of one report (see templates/plan.html.j2).

    ``graphics=False`` skips the SVG drawing and charts (the Markdown report has none).
    """
    for key in REQUIRED_PLAN_KEYS:                      # fail fast, before any drawing
        need(plan, key, "plan")
    prov = plan["provenance"]
    for key in ("tool", "version", "library_hash", "input_hash", "created"):
        need(prov, key, "plan.provenance")
    for key in ("code", "text"):
        need(plan["verdict"], key, "plan.verdict")
    parent = plan["parent"]
    need(parent, "smiles", "plan.parent")
    sites = site_views(plan)
    cands = candidate_views(need(plan, "candidates", "plan"), "plan.candidates", sites)
    excluded = candidate_views(need(plan, "excluded", "plan"), "plan.excluded", sites)
    th = thresholds_of(plan)
    sol = solubility_view(plan.get("solubility"))
    screen_ctx = screen_view(screen)
    name = plan.get("name") or parent.get("name") or "unnamed compound"
    chart_list = []
    if graphics and (cands or excluded):
        shown_c = _one_per_counterion(cands)[:CHART_MAX_SHORTLISTED]
        shown_x = _one_per_counterion(sorted(
            excluded, key=lambda c: (-float(c["delta_pka"]), c["counterion"],
                                     c["stoichiometry"])))[:CHART_MAX_EXCLUDED]
        rows = [{"label": f"{c['counterion']} {c['stoichiometry']}",
                 "delta_pka": c["delta_pka"], "uncertainty": _dpka_uncertainty(c),
                 "shortlisted": True} for c in shown_c]
        rows += [{"label": f"{c['counterion']} {c['stoichiometry']} (excluded)",
                  "delta_pka": c["delta_pka"], "uncertainty": _dpka_uncertainty(c),
                  "shortlisted": False} for c in shown_x]
        n_ions = len({c["counterion"] for c in cands})
        n_excl = len({c["counterion"] for c in excluded})
        scope = (f"One bar per counterion (its best-ranked stoichiometry): {len(shown_c)} of "
                 f"{n_ions} shortlisted counterions in rank order")
        if excluded:
            scope += f", {len(shown_x)} of {n_excl} excluded ones (highest ΔpKa first)"
        scope += "; the tables above list every candidate. "
        chart_list.append({
            "id": "chart-dpka", "title": "ΔpKa per counterion against the category bands",
            "svg": charts.delta_pka_chart(rows, bands_of(th), plan["inputs"].get("min_delta_pka")),
            "note": scope + "Filled bars: shortlisted; hatched: excluded. Error bars: "
                    "± the estimate uncertainty of the API site of the limiting proton "
                    "transfer (none when that site was measured). "
                    f"Bands: {th.get('source', '')}."})
    if graphics and sites:
        chart_list.append({
            "id": "chart-ionized", "title": "Fraction ionized against pH, per site",
            "svg": charts.ionization_chart([{"kind": s["kind"], "pka": s["pka"],
                                             "label": f"{s['label']} {s['kind']} "
                                                      f"{s['drawing_label']}"}
                                            for s in sites]),
            "note": "Henderson–Hasselbalch for each site alone (site interactions ignored); "
                    "base pKa = pKa of the conjugate acid. Grey lines: pH 1.2 and 6.8 "
                    "(common dissolution media)."})
    if graphics and sol and sol["points"]:
        chart_list.append({
            "id": "chart-solubility", "title": "pH–solubility profile (estimate)",
            "svg": charts.solubility_chart(sol["points"], sol["ph_max"], sol["s0"], sol["unit"],
                                           free=sol["free_points"]),
            "note": "Henderson–Hasselbalch with a salt plateau (pHmax from S₀ and the salt "
                    "solubility, see Inputs and assumptions); intrinsic solubility from an "
                    "estimate, about ±1 log unit." + (f" Sites used: {sol['profile_sites']}."
                                                      if sol["profile_sites"] else "")})
    ctx = {
        "name": name, "plan": plan, "parent": parent,
        "created": prov["created"], "version": prov["version"], "tool": prov["tool"],
        "verdict": verdict_view(plan, cands),
        "structure_svg": drawing.structure_svg(parent["smiles"], need(plan, "sites", "plan"))
        if graphics else "",
        "inputs": input_rows(plan, th), "parent_notes": list(parent.get("notes") or []),
        "stripped": list(parent.get("stripped") or []),
        "sites": sites, "candidates": cands, "excluded": excluded, "thresholds": th,
        "breakdown_legend": _legend(cands), "charts": chart_list, "solubility": sol,
        "screen": screen_ctx,
        "cautions": _cautions(need(plan, "cautions", "plan"), screen_ctx),
        "references": [_reference(r) for r in need(plan, "references", "plan")],
        "api_caveats": sorted((plan.get("caveats") or []),
                              key=lambda cv: (SEVERITY_ORDER.get(cv.get("severity"), 9),
                                              cv.get("code") or "")),
        "provenance": [{"label": k.replace("_", " "), "value": plain(v)} for k, v in prov.items()],
    }
    ctx["rationale"] = rationale.paragraphs(ctx)
    return ctx


DEFERENCE = ("Final choices defer to the pharmacopoeias (USP–NF, Ph. Eur.), ICH Q3C, Q6A and "
             "M7, local regulation and the judgement of qualified staff.")


def _cautions(plan_cautions: list, screen_ctx: dict | None) -> list[str]:
    """Plan cautions, then the screen's, without repeats; the deference always present."""
    out: list[str] = []
    for c in list(plan_cautions) + (screen_ctx["cautions"] if screen_ctx else []):
        text = text_of(c)
        if text not in out:
            out.append(text)
    if not any("USP" in c and "qualified staff" in c for c in out):
        out.append(DEFERENCE)
    return out


def _reference(r: Any) -> str:
    text = text_of(r)
    if isinstance(r, dict) and r.get("used_for"):
        text += f" — used for: {r['used_for']}"
    return text


def _legend(cands: list[dict]) -> list[dict]:
    """Breakdown parts in first-seen order; ``penalty`` when a part is never positive."""
    seen: dict[str, dict] = {}
    for c in cands:
        for p in c["parts"]:
            entry = seen.setdefault(p["key"], {"label": p["label"], "colour": p["colour"],
                                               "penalty": True})
            if p["value"] > 0:
                entry["penalty"] = False
    return list(seen.values())


CHART_MAX_SHORTLISTED = 20
CHART_MAX_EXCLUDED = 8


def _one_per_counterion(cands: list[dict]) -> list[dict]:
    """First entry of each counterion, keeping the given order (rank, or ΔpKa for exclusions)."""
    seen: set[str] = set()
    out = []
    for c in cands:
        if c["counterion"] not in seen:
            seen.add(c["counterion"])
            out.append(c)
    return out


def _dpka_uncertainty(c: dict) -> float | None:
    """Uncertainty [pKa units] of the limiting transfer's API site; None when measured."""
    return c["limiting_uncertainty"]
