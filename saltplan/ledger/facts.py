"""The outcome index: what each screen tried and whether it gave the intended salt.

One fact per results chain (a results file and its revisions) × counterion × intended
stoichiometry that the screen design put in a sample well. ``success`` is true when at
least one well of that counterion and stoichiometry is reported ``crystalline``, its
``form_label`` is not a pattern seen in a free-form control well, and its
``stoichiometry_found`` matches the intended API:counterion ratio within 10 % (the
default ``stoichiometry_tolerance`` of ``saltplan/data/selection_thresholds.yaml``, common
practice). The site is the plan's site of the limiting proton transfer (smallest ΔpKa):
its catalogue class (``group_id``, e.g. ``amine_tertiary``) and its pKa.

The functions here use SQLAlchemy Core on light table objects (only columns of the first
schema), so that migration 0002 can backfill the index of a first-schema ledger.
"""
from __future__ import annotations

import json
import re
from collections.abc import Iterable
from typing import Any

import sqlalchemy as sa

_records = sa.table("records", sa.column("uid"), sa.column("kind"), sa.column("chain"),
                    sa.column("parent_uid"), sa.column("compound_uid"), sa.column("replaces"),
                    sa.column("created"), sa.column("id"), sa.column("body"))
_compounds = sa.table("compounds", sa.column("uid"), sa.column("name"), sa.column("programme"))
_observations = sa.table("observations", sa.column("results_uid"), sa.column("well"),
                         sa.column("version"), sa.column("body"))
_facts = sa.table("outcome_facts", sa.column("results_chain"), sa.column("results_uid"),
                  sa.column("programme"), sa.column("compound"), sa.column("counterion"),
                  sa.column("stoichiometry"), sa.column("site_class"), sa.column("site_kind"),
                  sa.column("site_pka"), sa.column("wells"), sa.column("success"))

STOICHIOMETRY_TOLERANCE = 0.10
_RATIO = re.compile(r"^\s*(\d+(?:\.\d+)?)\s*:\s*(\d+(?:\.\d+)?)\s*$")


def _ratio(text: str | None) -> float | None:
    m = _RATIO.match(text or "")
    if not m or float(m.group(2)) == 0:
        return None
    return float(m.group(1)) / float(m.group(2))


def _site_of(plan: dict, counterion: str, stoichiometry: str) -> tuple[str, str, float] | None:
    """(class, kind, pKa) of the API site in the limiting transfer of that candidate."""
    for cand in list(plan.get("candidates") or []) + list(plan.get("excluded") or []):
        if cand.get("counterion") != counterion or cand.get("stoichiometry") != stoichiometry:
            continue
        transfers = cand.get("transfers") or []
        if not transfers:
            return None
        lim = min(transfers, key=lambda t: t.get("delta_pka", 0.0))
        for site in plan.get("sites") or []:
            if site.get("atom") == lim.get("api_atom") and site.get("kind") == lim.get("api_kind"):
                return (site.get("group_id") or site.get("group") or "unknown",
                        site["kind"], float(site["pka"]))
        return ("unknown", lim.get("api_kind", "?"), float(lim["api_pka"]))
    return None


def facts_for(design: dict, observations: Iterable[dict], *, programme: str,
              compound: str | None) -> list[dict[str, Any]]:
    """Outcome facts of one results record: its design (``ScreenDesign.to_dict()``) and its
    current per-well observations (dicts as in ``Results.to_dict()["observations"]``)."""
    plan = design.get("plan") or {}
    tried: dict[tuple[str, str], int] = {}
    for well in design.get("wells") or []:
        if well.get("kind") == "sample" and well.get("counterion"):
            key = (well["counterion"], well.get("stoichiometry") or "1:1")
            tried[key] = tried.get(key, 0) + 1
    obs = list(observations)
    free_labels = {o.get("form_label") for o in obs
                   if o.get("kind") == "control" and o.get("outcome") == "crystalline"
                   and o.get("form_label")}
    out = []
    for (counterion, stoich), wells in sorted(tried.items()):
        site = _site_of(plan, counterion, stoich)
        if site is None:
            continue
        want = _ratio(stoich)
        success = False
        for o in obs:
            if (o.get("counterion") != counterion or o.get("stoichiometry") != stoich
                    or o.get("outcome") != "crystalline"):
                continue
            if o.get("form_label") and o.get("form_label") in free_labels:
                continue
            found = _ratio(o.get("stoichiometry_found"))
            if want is not None and found is not None and \
                    abs(found - want) <= STOICHIOMETRY_TOLERANCE * want:
                success = True
                break
        out.append({"programme": programme, "compound": compound, "counterion": counterion,
                    "stoichiometry": stoich, "site_class": site[0], "site_kind": site[1],
                    "site_pka": round(site[2], 2), "wells": wells, "success": success})
    return out


def current_observations(conn, results_uid: str) -> list[dict]:
    """The newest version of every well of a results record, in well order of first save."""
    rows = conn.execute(
        sa.select(_observations.c.well, _observations.c.version, _observations.c.body)
        .where(_observations.c.results_uid == results_uid)
        .order_by(_observations.c.well, _observations.c.version)).all()
    latest: dict[str, dict] = {}
    for well, _version, body in rows:
        latest[well] = json.loads(body)
    return list(latest.values())


def refresh_chain(conn, chain: str) -> None:
    """Recompute the facts of one results chain (inside the caller's transaction)."""
    conn.execute(sa.delete(_facts).where(_facts.c.results_chain == chain))
    rows = conn.execute(
        sa.select(_records.c.uid, _records.c.parent_uid, _records.c.compound_uid,
                  _records.c.body)
        .where(_records.c.chain == chain, _records.c.kind == "results")
        .order_by(_records.c.created.desc(), _records.c.id.desc())).all()
    replaced = set(conn.execute(sa.select(_records.c.replaces)
                                .where(_records.c.chain == chain,
                                       _records.c.replaces.is_not(None))).scalars())
    current = [r for r in rows if r.uid not in replaced]
    if not current:
        return
    head = current[0]                        # a fork (two sites revised): the newest wins
    screen = conn.execute(sa.select(_records.c.body)
                          .where(_records.c.uid == head.parent_uid)).scalar()
    if screen is None:
        return
    comp = conn.execute(sa.select(_compounds.c.name, _compounds.c.programme)
                        .where(_compounds.c.uid == head.compound_uid)).first()
    programme = comp.programme if comp else "unassigned"
    facts = facts_for(json.loads(screen), current_observations(conn, head.uid),
                      programme=programme, compound=comp.name if comp else None)
    if facts:
        conn.execute(sa.insert(_facts),
                     [dict(f, results_chain=chain, results_uid=head.uid) for f in facts])


def rebuild_facts(conn) -> int:
    """Rebuild the whole outcome index; returns the number of results chains indexed."""
    conn.execute(sa.delete(_facts))
    chains = conn.execute(sa.select(_records.c.chain).where(_records.c.kind == "results")
                          .distinct().order_by(_records.c.chain)).scalars().all()
    for chain in chains:
        refresh_chain(conn, chain)
    return len(chains)
