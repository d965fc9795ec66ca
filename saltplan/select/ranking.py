"""Ranking of the forms that passed tier 1, and the lead / back-up roles.

The order is explicit and total (:data:`RANKING_ORDER`, ending in identifiers), so the
same results always give the same shortlist.
"""
from __future__ import annotations

from dataclasses import replace
from typing import Any

from .criteria import HYGROSCOPICITY_CLASSES, HYGROSCOPICITY_TEXT

#: the groups are :class:`saltplan.select.evaluate.FormGroup` dataclasses; evaluate imports
#: this module, so the class is not imported back (no import cycle) and typed loosely here
FormGroup = Any

#: tie-breaks of the shortlist, in order (each a plain sentence shown in the record)
RANKING_ORDER = (
    "tier 1: confirmed stoichiometry before unconfirmed",
    "tier 2: fewer failed criteria (a suspected solvate/hydrate counts as one)",
    "tier 2: fewer criteria not measured",
    "lower Ph. Eur. 5.11 hygroscopicity class (not measured last)",
    "higher melting onset (not measured last)",
    "more wells showing the form",
    "better rank of the counterion/stoichiometry in the plan",
    "counterion id, then form label (alphabetical)",
)


def _counts(g: FormGroup) -> tuple[int, int, int]:
    t2 = [e for e in g.evidence if e.tier == 2]
    return (sum(e.status in ("pass",) for e in t2), sum(e.status in ("fail", "concern") for e in t2),
            sum(e.status in ("not_measured", "not_assessed") for e in t2))


def rank_key(g: FormGroup) -> tuple:
    """Sort key implementing :data:`RANKING_ORDER` (smaller is better); total, so ties
    cannot depend on input order."""
    _, bad, unknown = _counts(g)
    hyg = HYGROSCOPICITY_CLASSES.index(g.hygroscopicity) if g.hygroscopicity else len(HYGROSCOPICITY_CLASSES)
    melt = [e.value for e in g.evidence if e.criterion == "melting_onset" and e.value is not None]
    return (0 if g.tier1 == "confirmed" else 1, bad, unknown, hyg, -(melt[0]) if melt else float("inf"),
            -len(g.wells), g.plan_rank if g.plan_rank is not None else 10**6,
            g.counterion, g.form_label or "", g.wells[0])


def _why(g: FormGroup, position: int) -> list[str]:
    good, bad, unknown = _counts(g)
    fails = [e.criterion.replace("_", " ") for e in g.evidence if e.tier == 2 and e.status in ("fail", "concern")]
    lines = [f"tier 1 {g.tier1}: crystalline in {', '.join(g.wells)}",
             f"tier 2: {good} pass, {bad} fail or concern{' (' + ', '.join(fails) + ')' if fails else ''}, "
             f"{unknown} not measured/assessed"]
    if g.hygroscopicity:
        lines.append(f"hygroscopicity {HYGROSCOPICITY_TEXT[g.hygroscopicity]}")
    if g.plan_rank is not None:
        lines.append(f"plan rank {g.plan_rank}" + (f", ΔpKa {g.delta_pka:.1f}" if g.delta_pka is not None else ""))
    lines.append(f"position {position} by the ranking order")
    return lines


def assign_roles(eligible: list[FormGroup], other_counterion: bool) -> list[FormGroup]:
    """Rank, role (lead / backup / reserve) and the reasons for each ranked form.

    The back-up is the next form, or with ``other_counterion`` the best form of another
    counterion than the lead (common practice), falling back to the next form.
    """
    if not eligible:
        return []
    lead = eligible[0]
    backup = None
    if len(eligible) > 1:
        if other_counterion:
            backup = next((g for g in eligible[1:] if g.counterion != lead.counterion), eligible[1])
        else:
            backup = eligible[1]
    out = []
    for i, g in enumerate(eligible, start=1):
        role = "lead" if g is lead else "backup" if g is backup else "reserve"
        why = _why(g, i)
        if role == "backup" and other_counterion:
            why.append("back-up: best-ranked form of another counterion than the lead"
                       if g.counterion != lead.counterion else
                       "back-up: no form of another counterion qualified; next form of the same counterion")
        out.append(replace(g, rank=i, role=role, placed_because=tuple(why)))
    return out
