"""The "Rationale for the CMC file": plain prose generated from the plan's data.

Each paragraph is plain text (no markup); the HTML template escapes it and the Markdown
template neutralizes it, so user-supplied names inside it stay inert. The wording is the
tool's own; the science it states is the ΔpKa rule (common practice, Stahl & Wermuth 2011;
Cruz-Cabeza 2012) as recorded in the plan.
"""
from __future__ import annotations

from typing import Any


#: how many lower-ranked or excluded candidates the prose names before "and N more"
MAX_LISTED = 8


def _site_phrase(s: dict) -> str:
    if s["provenance"] == "estimated":
        how = f"estimated {s['uncertainty_text']}" if s["uncertainty_text"] != "n/a" \
            else "estimated"
        if s["source_short"]:
            how += f" by {s['source_short']}"
    elif s["provenance"] == "measured":
        how = f"measured ({s['source'] or 'user'})"
    else:
        how = s["provenance"]
    article = "an" if s["group"][:1].lower() in "aeiou" else "a"
    return (f"{article} {s['group']} at atom {s['label']} ({s['kind']}, pKa {s['pka_text']}, "
            f"{how})")


def _num(x: float) -> str:
    return f"{x:g}".replace("-", "−")


def _dropped_groups(dropped: list[dict]) -> list[str]:
    """Dropped screen combinations grouped by counterion, stoichiometry, solvent and reason."""
    groups: dict[tuple, list[str]] = {}
    for d in dropped:
        key = (d.get("counterion") or "", d.get("stoichiometry") or "", d.get("solvent") or "",
               d.get("reason") or "")
        modes = groups.setdefault(key, [])
        if d.get("mode") and d["mode"] not in modes:
            modes.append(d["mode"])
    out = []
    for (cid, st, sv, reason), modes in groups.items():
        what = " ".join(x for x in (cid, st) if x)
        if sv:
            what += f" in {sv}"
        if modes:
            what += f" ({', '.join(modes)})"
        out.append(f"{what}: {reason}" if reason else what)
    return out


def _join(items: list[str]) -> str:
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def _candidate_sentence(c: dict) -> str:
    s = (f"{c['label']} at {c['stoichiometry']} (API:counterion): ΔpKa {c['delta_pka_text']}"
         f" ({c['category_label']}; proton-transfer probability {c['probability_text']})")
    if c["tier"] is not None:
        s += f", acceptability tier {c['tier']}"
    s += f", drug content {c['drug_content_text']} w/w"
    major = [t for t in c.get("caveat_tags") or [] if t["severity"] in ("serious", "warning")]
    if major:
        s += "; liabilities to control: " + ", ".join(
            f"{t['code'].replace('_', ' ')} ({t['id']})" for t in major) + "."
    elif c["caveats"]:
        s += "; no warning-level liability flagged (information notes are listed in the report)."
    else:
        s += "; no liability flagged by the tool."
    return s


def _section(sid: str, title: str, paragraphs: list[str]) -> dict:
    return {"id": sid, "title": title, "paragraphs": paragraphs}


def _risks(ctx: dict[str, Any]) -> list[str]:
    """What could go wrong: API caveats, caveats of the recommended candidates, the rest."""
    out: list[str] = []
    for cv in ctx.get("api_caveats") or []:
        out.append(f"From the API structure ({cv.get('severity')}): {cv.get('text')}"
                   + (f" ({cv['source']})" if cv.get("source") else ""))
    top_ranks = {c["rank"] for c in ctx["candidates"][:3]}
    groups = ctx.get("caveat_groups") or []
    for g in groups:
        if any(m["rank"] in top_ranks for m in g["members"]):
            out.append(f"{g['id']} ({g['severity']}, {g['code'].replace('_', ' ')}; applies to "
                       f"{g['members_text']}): {g['text']}")
    others = [g for g in groups if g["severity"] in ("serious", "warning")
              and not any(m["rank"] in top_ranks for m in g["members"])]
    if others:
        out.append("Lower-ranked candidates carry further warning-level caveats: " + "; ".join(
            f"{g['id']} {g['code'].replace('_', ' ')} ({', '.join(g['ions'])})" for g in others)
            + " (each written out under Ranked candidates).")
    if not out:
        out.append("The tool flagged no liability of the API or of the recommended counterions; "
                   "the cautions below still apply.")
    return out


def sections(ctx: dict[str, Any]) -> list[dict]:
    """The rationale in the order a CMC writer reads it.

    Why these counterions, why not the next ones, what could go wrong, what to confirm by
    experiment; each section a list of plain-text paragraphs.
    """
    why: list[str] = []
    name = ctx["name"]
    parent = ctx["parent"]
    sites = ctx["sites"]
    th = ctx["thresholds"]
    mw = parent.get("mw")
    ident = f"{name} ({parent.get('formula') or 'formula n/a'}"
    ident += f", MW {mw:.2f} g/mol)" if isinstance(mw, (int, float)) else ")"
    if sites:
        why.append(f"{ident} has {len(sites)} ionizable site{'s' if len(sites) != 1 else ''} "
                   f"relevant to salt formation: {_join([_site_phrase(s) for s in sites])}.")
    else:
        why.append(f"{ident} has no ionizable site in the range that matters for salt "
                   f"formation. {ctx['verdict']['text']}")
    if ctx["verdict"]["code"] != "salt_candidates":
        alts = ctx["verdict"]["alternatives"]
        text = f"Verdict: {ctx['verdict']['text']}" if sites else ""
        if alts:
            text += (" " if text else "") + "Alternatives to consider: " + "; ".join(alts) + "."
        if text:
            why.append(text)
    if ctx["candidates"] or ctx["excluded"]:
        minimum = ctx["plan"]["inputs"].get("min_delta_pka")
        rule = ("Counterions were shortlisted by the ΔpKa rule, ΔpKa = pKa(protonated base) − "
                f"pKa(acid) in water: salt expected at ΔpKa ≥ {_num(th['salt_expected'])}, likely "
                f"at ≥ {_num(th['likely'])}, mixed salt/co-crystal behaviour down to "
                f"{_num(th['uncertain'])} and co-crystals below ({th.get('source', '')}).")
        if minimum is not None:
            rule += (f" A stoichiometry was kept only when every proton transfer reached "
                     f"ΔpKa ≥ {_num(minimum)}.")
        keys = [p["label"] for p in ctx["breakdown_legend"]]
        if keys:
            rule += (" Feasible candidates were ranked by a score combining "
                     f"{_join(keys)}; the breakdown of each score is tabulated in the report.")
        why.append(rule)
    top = ctx["candidates"][:3]
    if top:
        lead = "The recommended counterions for the first screen are: " if len(top) > 1 \
            else "The recommended counterion for the first screen is: "
        why.append(lead + " ".join(f"({i + 1}) {_candidate_sentence(c)}"
                                   for i, c in enumerate(top)))
    not_next: list[str] = []
    rest = ctx["candidates"][3:]
    if rest:
        shown = rest[:MAX_LISTED]
        text = "Also feasible and ranked lower: " + "; ".join(
            f"{c['label']} {c['stoichiometry']} (ΔpKa {c['delta_pka_text']}, score "
            f"{c['score_text']})" for c in shown)
        if len(rest) > len(shown):
            text += f"; and {len(rest) - len(shown)} more (see the ranked table)"
        not_next.append(text + ".")
    if ctx["excluded"]:
        shown = ctx["excluded"][:MAX_LISTED]
        text = "Excluded from the shortlist: " + "; ".join(
            f"{c['label']} {c['stoichiometry']}, {c['reason'] or 'infeasible'}" for c in shown)
        if len(ctx["excluded"]) > len(shown):
            text += (f"; and {len(ctx['excluded']) - len(shown)} more (see the excluded "
                     "counterions table)")
        not_next.append(text + ".")
    risks = _risks(ctx)
    confirm: list[str] = []
    screen = ctx["screen"]
    if screen:
        solvents = [s.get("name") or s.get("id") for s in screen["solvents"]]
        text = (f"The screen uses {screen['n_samples']} sample well"
                f"{'s' if screen['n_samples'] != 1 else ''} and {screen['n_controls']} "
                f"control well{'s' if screen['n_controls'] != 1 else ''}")
        if solvents:
            text += f" across the solvents {_join([str(s) for s in solvents])}"
        text += "; solvents were chosen with their ICH Q3C class in view."
        if screen["raw_dropped"]:
            text += " Combinations left out of the screen: " + "; ".join(
                _dropped_groups(screen["raw_dropped"])) + "."
        confirm.append(text)
    confirm.append("All pKa values marked as estimates, and every ΔpKa derived from them, are "
                   "planning figures, not measurements: pKa should be confirmed by potentiometric "
                   "or UV titration, and salt formation by XRPD, DSC/TGA and NMR stoichiometry. "
                   "The final choice of salt form rests with qualified staff and defers to the "
                   "pharmacopoeias (USP–NF, Ph. Eur.), ICH Q3C, Q6A and M7, and local regulation.")
    prov = ctx["plan"]["provenance"]
    confirm.append(f"Prepared with {prov['tool']} {prov['version']} (counterion library hash "
                   f"{str(prov['library_hash'])[:12]}…, input hash {str(prov['input_hash'])[:12]}…) "
                   f"on {prov['created']}.")
    out = [_section("sp-why", "Why these counterions", why)]
    if not_next:
        out.append(_section("sp-why-not", "Why not the next ones", not_next))
    out.append(_section("sp-risks", "What could go wrong", risks))
    out.append(_section("sp-confirm", "What to confirm by experiment", confirm))
    return out


def paragraphs(ctx: dict[str, Any]) -> list[str]:
    """All paragraphs of :func:`sections`, in order."""
    return [p for sec in sections(ctx) for p in sec["paragraphs"]]
