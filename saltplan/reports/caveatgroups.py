"""Caveats written once: group the caveats that several candidates share.

A caveat of one candidate often differs from another candidate's only by the counterion's
name ("Sulfonic acid (mesylate): ..." / "Sulfonic acid (besylate): ..."). The report writes
each such caveat once, with the candidates it applies to, and each candidate row keeps a
short tag (``C1``, ``C2`` ...) pointing to it. Tags are numbered by severity (serious first),
then by the best rank they apply to, so ``C1`` is always the most serious caveat.

The counterion intake note (``counterion_exposure`` / ``cation_load`` at info level) is a
number per candidate: it becomes a column of the candidate table, and the library's note
about that counterion (the same for all its stoichiometries) is listed once per counterion.
"""
from __future__ import annotations

import re

from .context_base import SEVERITY_ORDER

__all__ = ["group_caveats", "INTAKE_CODES"]

#: caveat codes whose info-level text is the counterion intake at the given dose
INTAKE_CODES = ("counterion_exposure", "cation_load")

_PLACE = "\x00"
_INTAKE = re.compile(
    r"^At (?P<dose>[0-9.eE+-]+) mg/day of free form the (?P<st>\S+) (?P<ci>.+?) salt delivers "
    r"about (?P<mg>[0-9.eE+-]+) mg/day of (?P<what>counterion|cation) "
    r"\((?P<mmol>[0-9.eE+-]+) mmol/day\)\.(?: Library note: (?P<note>.*))?$", re.S)
_LIBRARY_ENTRY = "counterion library entry '" + _PLACE + "'"


def _template(text: str, names: list[str]) -> str:
    for n in names:
        if n:
            text = text.replace(n, _PLACE)
    return text


def _fill(template: str, ions: list[str], source: bool = False) -> str:
    if _PLACE not in template:
        return template
    if source and _LIBRARY_ENTRY in template:
        if len(ions) == 1:
            template = template.replace(_LIBRARY_ENTRY, f"counterion library entry '{ions[0]}'")
        else:
            template = template.replace(_LIBRARY_ENTRY, "counterion library entries " + ", ".join(
                f"'{i}'" for i in ions))
    return template.replace(_PLACE, " / ".join(ions))


def group_caveats(cands: list[dict]) -> dict:
    """Group the caveats of candidate views (``context.candidate_views``) in place.

    Adds to each candidate ``caveat_tags`` (list of ``{"id", "severity", "code"}``) and
    ``intake_text`` (the intake at the dose, or ""), and returns::

        {"groups": [{"id", "code", "severity", "text", "source", "members": [...],
                     "ions": [...]}],
         "intake": {"dose": "50", "notes": [{"counterion", "note", "source"}]} or None}
    """
    groups: dict[tuple, dict] = {}
    notes: dict[str, dict] = {}
    dose = None
    for c in cands:
        names = sorted({c["counterion"], c.get("counterion_name") or ""}, key=len, reverse=True)
        c["intake_text"] = ""
        keys: list[tuple | None] = []
        for cv in c["caveats"]:
            text, src = str(cv.get("text") or ""), str(cv.get("source") or "")
            m = _INTAKE.match(text) if cv.get("code") in INTAKE_CODES else None
            if m and cv.get("severity") == "info" and m.group("ci") == c["counterion"]:
                dose = dose or m.group("dose")
                unit = "" if m.group("what") == "counterion" else " of cation"
                c["intake_text"] = f"{m.group('mg')} mg/day{unit} ({m.group('mmol')} mmol/day)"
                if m.group("note") and c["counterion"] not in notes:
                    notes[c["counterion"]] = {"counterion": c["counterion"],
                                              "note": m.group("note"), "source": src}
                elif c["counterion"] not in notes:
                    notes[c["counterion"]] = {"counterion": c["counterion"], "note": "",
                                              "source": src}
                keys.append(None)
                continue
            key = (cv.get("code") or "", cv.get("severity") or "", _template(text, names),
                   _template(src, names))
            g = groups.setdefault(key, {"code": key[0], "severity": key[1], "members": [],
                                        "ions": [], "_t": key[2], "_s": key[3]})
            g["members"].append({"rank": c["rank"], "counterion": c["counterion"],
                                 "stoichiometry": c["stoichiometry"]})
            if c["counterion"] not in g["ions"]:
                g["ions"].append(c["counterion"])
            keys.append(key)
        c["_group_keys"] = keys
    ordered = sorted(groups.values(), key=lambda g: (
        SEVERITY_ORDER.get(g["severity"], 9),
        min((m["rank"] if m["rank"] is not None else 10 ** 6) for m in g["members"]), g["code"]))
    for i, g in enumerate(ordered, 1):
        g["id"] = f"C{i}"
        g["text"] = _fill(g.pop("_t"), g["ions"])
        g["source"] = _fill(g.pop("_s"), g["ions"], source=True)
        g["members_text"] = ", ".join(
            f"{m['counterion']} {m['stoichiometry']}"
            + (f" (#{m['rank']})" if m["rank"] is not None else "") for m in g["members"])
    for c in cands:
        tags = []
        keys = c.pop("_group_keys")
        c["caveat_ids"] = [groups[k]["id"] if k is not None else "" for k in keys]
        for key in keys:
            if key is None:
                continue
            g = groups[key]
            if not any(t["id"] == g["id"] for t in tags):
                tags.append({"id": g["id"], "severity": g["severity"], "code": g["code"]})
        c["caveat_tags"] = tags
    intake = None
    if notes:
        intake = {"dose": dose, "notes": [n for n in notes.values()]}
    return {"groups": ordered, "intake": intake}
