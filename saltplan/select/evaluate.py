"""From screen results to a selected salt form: the tiered evaluation.

:func:`evaluate_results` joins a screen design (``ScreenDesign`` or its dict) with a
validated results file (:func:`read_results`) and returns a :class:`Selection`:

* tier 1: crystalline hits, grouped by counterion and solid form (``form_label``), with
  the stoichiometry found against the intended one (within a tolerance) and a check
  that the pattern is not the free form's (control wells);
* tier 2: melting onset against a minimum, Ph. Eur. 5.11 hygroscopicity class, aqueous
  solubility against the dose in 250 mL (ICH M9), solvate/hydrate status from the
  solvent content. A form is judged on its worst well (lowest onset, highest weight
  gain, lowest solubility, highest solvent content): conservative on purpose;
* tier 3: what the screen cannot answer (stability, polymorph screen, processability,
  scale-up) as open questions for the scientist.

Ranking of the forms that pass tier 1 (confirmed or unconfirmed stoichiometry, not the
free form), explicit and deterministic, see :data:`RANKING_ORDER`. Every claim carries
the wells it rests on. The tool is a planning aid: the decision rests on measured data
reviewed by qualified staff.
"""
from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, fields
from pathlib import Path
from typing import Any

from .._data import sha256_text
from .._provenance import provenance
from ..errors import ParameterError
from .context import cautions, next_steps, open_questions, plan_summary, screen_summary
from .criteria import (
    HYGROSCOPICITY_CLASSES,
    HYGROSCOPICITY_TEXT,
    Thresholds,
    hygroscopicity_class,
    load_thresholds,
    required_solubility_mg_ml,
)
from .ranking import RANKING_ORDER, assign_roles, rank_key
from .results import OUTCOMES, Observation, Results, design_dict, parse_ratio, read_results

__all__ = ["Evidence", "FormGroup", "Selection", "evaluate_results", "read_results",
           "load_design", "RANKING_ORDER"]

_FREE_FORM_WORDS = ("free form", "free base", "free acid", "parent", "freebase")


@dataclass(frozen=True)
class Evidence:
    """One claim about a form, with the wells it rests on."""

    tier: int
    criterion: str    # crystalline | stoichiometry | free_form_check | reproducibility |
    #                   melting_onset | hygroscopicity | solubility | solvate
    status: str       # pass | fail | concern | unconfirmed | not_measured | not_assessed | info
    text: str
    wells: tuple[str, ...]
    value: float | str | None = None
    unit: str | None = None
    threshold: float | str | None = None
    provenance: str = "measured (results file)"
    source: str = ""

    def to_dict(self) -> dict[str, Any]:
        out = {f.name: getattr(self, f.name) for f in fields(self)}
        out["wells"] = list(self.wells)
        if isinstance(out["value"], float):
            out["value"] = round(out["value"], 3)
        return out


@dataclass(frozen=True)
class FormGroup:
    """A crystalline solid form of one counterion: the wells that gave it and the verdict."""

    id: str
    counterion: str
    form_label: str | None
    wells: tuple[str, ...]
    solvents: tuple[str, ...]
    intended: tuple[str, ...]          # stoichiometries the design intended in these wells
    stoichiometry: str                 # found (confirmed) or intended (unconfirmed)
    stoichiometry_found: str | None
    tier1: str                         # confirmed | unconfirmed | mismatch | conflict | free_form_suspected
    eligible: bool
    reason: str                        # why not shortlisted ("" when eligible)
    hygroscopicity: str | None
    plan_rank: int | None
    delta_pka: float | None
    evidence: tuple[Evidence, ...]
    rank: int | None = None            # position on the shortlist (1 = lead)
    role: str = "not_shortlisted"      # lead | backup | reserve | not_shortlisted
    placed_because: tuple[str, ...] = ()

    @property
    def title(self) -> str:
        label = f"form {self.form_label}" if self.form_label else "unlabelled form"
        return f"{self.counterion} {self.stoichiometry} {label}"

    def to_dict(self) -> dict[str, Any]:
        out = {}
        for f in fields(self):
            value = getattr(self, f.name)
            if f.name == "evidence":
                value = [e.to_dict() for e in value]
            elif isinstance(value, tuple):
                value = list(value)
            out[f.name] = value
        out["title"] = self.title
        return out


@dataclass(frozen=True)
class Selection:
    """The tiered evaluation of a screen and the selected lead and back-up."""

    outcome: str                       # lead_and_backup | lead_only | no_lead
    summary: str
    shortlist: tuple[FormGroup, ...]   # ranked; [0] is the lead
    not_shortlisted: tuple[FormGroup, ...]
    observations: tuple[Observation, ...]
    not_reported: tuple[str, ...]
    outcome_counts: tuple[dict, ...]   # per counterion: {counterion, wells, outcomes {outcome: [wells]}}
    open_questions: tuple[dict, ...]   # {topic, text, wells}
    next_steps: tuple[str, ...]
    cautions: tuple[str, ...]
    thresholds: Thresholds
    ranking_order: tuple[str, ...]
    dose_mg: float | None
    dose_source: str
    plan: dict
    screen: dict
    invented_data: bool
    provenance: dict

    @property
    def lead(self) -> FormGroup | None:
        return next((g for g in self.shortlist if g.role == "lead"), None)

    @property
    def backup(self) -> FormGroup | None:
        return next((g for g in self.shortlist if g.role == "backup"), None)

    def to_dict(self) -> dict[str, Any]:
        return {
            "outcome": self.outcome,
            "summary": self.summary,
            "invented_data": self.invented_data,
            "lead": self.lead.id if self.lead else None,
            "backup": self.backup.id if self.backup else None,
            "shortlist": [g.to_dict() for g in self.shortlist],
            "not_shortlisted": [g.to_dict() for g in self.not_shortlisted],
            "ranking_order": list(self.ranking_order),
            "dose_mg": self.dose_mg,
            "dose_source": self.dose_source,
            "thresholds": self.thresholds.to_dict(),
            "observations": [o.to_dict() for o in self.observations],
            "not_reported": list(self.not_reported),
            "outcome_counts": [dict(c) for c in self.outcome_counts],
            "open_questions": [dict(q) for q in self.open_questions],
            "next_steps": list(self.next_steps),
            "cautions": list(self.cautions),
            "plan": self.plan,
            "screen": self.screen,
            "provenance": self.provenance,
        }

    def _repr_html_(self) -> str:
        """Inline HTML decision record in Jupyter."""
        from ..reports import repr_html

        return repr_html(self)


# --------------------------------------------------------------------------- entry points
def load_design(design_dir: str | Path) -> dict[str, Any]:
    """Read ``DESIGN_DIR/design.json`` (or a design.json path) written by the screen step
    (see :func:`saltplan.select_design.load_design`: valid JSON, shape checked)."""
    from .design import load_design as _load

    return _load(design_dir)


def _without_timestamps(value):
    if isinstance(value, Mapping):
        return {k: _without_timestamps(v) for k, v in value.items() if k != "created"}
    if isinstance(value, (list, tuple)):
        return [_without_timestamps(v) for v in value]
    return value


def design_hash(design: Mapping) -> str:
    """sha256 of the design's canonical JSON (sorted keys), creation timestamps left out.

    The same design produced twice has the same hash, whenever it was made.
    """
    return sha256_text(json.dumps(_without_timestamps(design), sort_keys=True, ensure_ascii=False,
                                  separators=(",", ":")))


def evaluate_results(design: Any, results: Results | str | Path,
                     thresholds: str | Path | Mapping[str, Any] | None = None, *,
                     dose_mg: float | None = None) -> Selection:
    """Tiered evaluation of screen results against their design.

    Parameters
    ----------
    design
        ``ScreenDesign``, its ``to_dict()``, or a design folder / design.json path.
    results
        :class:`~saltplan.select_results.Results` or a results CSV path.
    thresholds
        None (package defaults), a YAML path or a mapping overriding some of them.
    dose_mg
        Highest single dose [mg] for the solubility criterion; default: the plan's dose.

    Returns
    -------
    Selection
    """
    if isinstance(design, (str, Path)):
        design = load_design(design)
    d = design_dict(design)
    if not isinstance(results, Results):
        results = read_results(results, d)
    th = load_thresholds(thresholds)
    plan = d.get("plan") or {}
    dose: float | None
    if dose_mg is not None:
        dose, dose_source = float(dose_mg), "user, given with the command"
        if not math.isfinite(dose) or dose <= 0:
            raise ParameterError(f"dose must be a finite number above 0 mg, got {dose_mg!r}",
                                 field="dose_mg")
    else:
        dose = (plan.get("inputs") or {}).get("dose_mg")
        dose_source = "user, plan input" if dose else "not given"
    candidates = {(c.get("counterion"), c.get("stoichiometry")): c for c in plan.get("candidates") or []}
    order = {w["well"]: i for i, w in enumerate(d["wells"])}

    groups = _groups(results.observations, candidates, th, dose, dose_source, order)
    eligible = sorted((g for g in groups if g.eligible), key=rank_key)
    others = sorted((g for g in groups if not g.eligible),
                    key=lambda g: (g.counterion, g.form_label or "", g.wells[0]))
    shortlist = assign_roles(eligible, bool(th["backup_other_counterion"]))
    lead = shortlist[0] if shortlist else None
    backup = next((g for g in shortlist if g.role == "backup"), None)
    outcome = "no_lead" if lead is None else ("lead_and_backup" if backup else "lead_only")
    summary = _summary(outcome, lead, backup, results, others)
    counts = _outcome_counts(results.observations)
    created = provenance(
        library_hash=(plan.get("provenance") or {}).get("library_hash"),
        plan_input_hash=(plan.get("provenance") or {}).get("input_hash"),
        design_hash=design_hash(d), results_file=Path(results.file).name if results.file else results.file,
        results_hash=results.sha256,
        thresholds_hash=th.hash)
    return Selection(
        outcome=outcome, summary=summary, shortlist=tuple(shortlist), not_shortlisted=tuple(others),
        observations=results.observations, not_reported=results.not_reported,
        outcome_counts=tuple(counts),
        open_questions=tuple(open_questions(shortlist[:2], d, results.observations)),
        next_steps=tuple(next_steps(outcome, others, results.observations, d)),
        cautions=tuple(cautions(d, results, shortlist)),
        thresholds=th, ranking_order=RANKING_ORDER, dose_mg=dose, dose_source=dose_source,
        plan=plan_summary(d), screen=screen_summary(d), invented_data=results.invented,
        provenance=created,
    )


# --------------------------------------------------------------------------- grouping
def _free_form_labels(observations) -> dict[str, list[str]]:
    labels: dict[str, list[str]] = {}
    for o in observations:
        if o.kind == "control" or not o.counterion:
            if o.outcome == "crystalline" and o.form_label:
                labels.setdefault(_key(o.form_label), []).append(o.well)
    return labels


def _key(label: str) -> str:
    return " ".join(label.lower().replace("_", " ").replace("-", " ").split())


def _groups(observations, candidates, th: Thresholds, dose, dose_src, order) -> list[FormGroup]:
    controls = _free_form_labels(observations)
    buckets: dict[tuple[str, str], list[Observation]] = {}
    for o in observations:
        if o.outcome != "crystalline" or o.kind == "control" or not o.counterion:
            continue
        label = _key(o.form_label) if o.form_label else f"?{o.well}"
        buckets.setdefault((o.counterion, label), []).append(o)
    out = []
    for (counterion, _), wells in sorted(buckets.items(), key=lambda kv: (kv[0][0], order[kv[1][0].well])):
        wells = sorted(wells, key=lambda o: order[o.well])
        out.append(_group(counterion, wells, controls, candidates, th, dose, dose_src))
    return out


def _ratio(text: str) -> float:
    ratio = parse_ratio(text)
    if ratio is None:  # reading the results already refused such a value
        raise ValueError(f"not an n:m ratio: {text!r}")
    n, m = ratio
    return m / n  # counterion per API


def _group(counterion, obs, controls, candidates, th: Thresholds, dose, dose_src) -> FormGroup:
    ids = tuple(o.well for o in obs)
    label = obs[0].form_label
    intended = tuple(dict.fromkeys(o.stoichiometry for o in obs if o.stoichiometry))
    solvents = tuple(dict.fromkeys(str(o.solvent) for o in obs if o.solvent))
    tol = float(th["stoichiometry_tolerance"])
    evidence: list[Evidence] = [Evidence(
        1, "crystalline", "pass",
        f"crystalline in {len(obs)} well(s): " + "; ".join(f"{o.well} ({o.solvent}, {o.mode})" for o in obs),
        ids)]
    found_obs = [o for o in obs if o.stoichiometry_found]
    found = None
    reason = ""
    tier1 = "unconfirmed"
    stoich = intended[0] if len(intended) == 1 else "/".join(intended) or "?"
    if found_obs:
        ratios = [_ratio(o.stoichiometry_found) for o in found_obs]
        fwells = tuple(o.well for o in found_obs)
        listing = ", ".join(f"{o.well} {o.stoichiometry_found}" for o in found_obs)
        if max(ratios) > min(ratios) * (1 + tol) + 1e-12:
            tier1, reason = "conflict", f"stoichiometry found differs between wells ({listing}); review"
            evidence.append(Evidence(1, "stoichiometry", "fail", reason, fwells, listing))
        else:
            found = found_obs[0].stoichiometry_found
            match = next((s for s in intended if abs(_ratio(found) / _ratio(s) - 1) <= tol + 1e-12), None)
            if match:
                tier1, stoich = "confirmed", match
                evidence.append(Evidence(
                    1, "stoichiometry", "pass",
                    f"stoichiometry found {listing} matches the intended {match} "
                    f"(within ±{tol:.0%})", fwells, found, threshold=match,
                    source=th.get("stoichiometry_tolerance").cite))
            else:
                tier1, stoich = "mismatch", found
                reason = (f"stoichiometry found {listing} is not the intended "
                          f"{'/'.join(intended)}: not the planned salt; review whether it is "
                          "worth pursuing")
                evidence.append(Evidence(1, "stoichiometry", "fail", reason, fwells, found,
                                         threshold="/".join(intended)))
    else:
        evidence.append(Evidence(
            1, "stoichiometry", "unconfirmed",
            f"stoichiometry not reported; intended {stoich} (confirm, e.g. by 1H NMR)", ids,
            provenance="design (intended)"))
    if label and (_key(label) in controls or any(_key(label).startswith(w) for w in _FREE_FORM_WORDS)):
        cwells = tuple(controls.get(_key(label), ()))
        tier1 = "free_form_suspected"
        reason = (f"pattern '{label}' is the free form's"
                  + (f" (control well(s) {', '.join(cwells)})" if cwells else "") + ": no salt shown")
        evidence.append(Evidence(1, "free_form_check", "fail", reason, ids + cwells, label))
    elif controls:
        cwells = tuple(w for ws in controls.values() for w in ws)
        evidence.append(Evidence(
            1, "free_form_check", "pass",
            f"pattern differs from the free-form control pattern(s) in {', '.join(cwells)}",
            ids + cwells, label))
    else:
        evidence.append(Evidence(
            1, "free_form_check", "not_assessed",
            "no crystalline control with a form label: the free form is not excluded by pattern",
            ids, label))
    if len(solvents) > 1 or len(obs) > 1:
        evidence.append(Evidence(1, "reproducibility", "info",
                                 f"seen in {len(obs)} wells from {len(solvents)} solvent(s): "
                                 f"{', '.join(solvents)}", ids))
    cand = candidates.get((counterion, stoich)) or _best_candidate(candidates, counterion, intended)
    tier2, hyg = _tier2(obs, th, dose, dose_src)
    evidence += tier2
    eligible = tier1 in ("confirmed", "unconfirmed")
    label_key = label if label else f"unlabelled-{ids[0]}"
    return FormGroup(
        id=f"{counterion}/{label_key}", counterion=counterion, form_label=label, wells=ids,
        solvents=solvents, intended=intended, stoichiometry=stoich, stoichiometry_found=found,
        tier1=tier1, eligible=eligible, reason=reason, hygroscopicity=hyg,
        plan_rank=(cand or {}).get("rank"), delta_pka=(cand or {}).get("delta_pka"),
        evidence=tuple(evidence))


def _best_candidate(candidates, counterion, intended):
    rows = [c for (ci, s), c in candidates.items() if ci == counterion and s in intended]
    rows.sort(key=lambda c: (c.get("rank") is None, c.get("rank") or 0))
    return rows[0] if rows else None


def _values(obs, attr):
    return [(getattr(o, attr), o.well) for o in obs if getattr(o, attr) is not None]


def _wells(*value_lists) -> tuple[str, ...]:
    return tuple(dict.fromkeys(w for values in value_lists for _, w in values))


def _fmt(values, unit) -> str:
    return ", ".join(f"{w} {v:g} {unit}" for v, w in values)


def _tier2(obs, th: Thresholds, dose, dose_src) -> tuple[list[Evidence], str | None]:
    ev: list[Evidence] = []
    ids = tuple(o.well for o in obs)
    # melting onset: lowest well
    melt = _values(obs, "melting_onset_c")
    t = th.get("melting_onset_min_c")
    if melt:
        low = min(melt)
        ok = low[0] >= t.value
        ev.append(Evidence(2, "melting_onset", "pass" if ok else "fail",
                           f"melting onset {low[0]:g} °C (lowest; {_fmt(melt, '°C')}) "
                           f"{'≥' if ok else '<'} {t.value:g} °C", tuple(w for _, w in melt),
                           low[0], "°C", t.value, source=t.cite))
    else:
        ev.append(Evidence(2, "melting_onset", "not_measured", "melting onset not measured", ids,
                           unit="°C", threshold=t.value, source=t.cite))
    # hygroscopicity: highest weight gain, deliquescence from the notes
    gain = _values(obs, "weight_gain_80rh_pct")
    deliq = tuple(o.well for o in obs if o.notes and "deliquesc" in o.notes.lower())
    t = th.get("hygroscopicity_max_class")
    hyg = None
    if gain or deliq:
        high = max(gain) if gain else None
        hyg = hygroscopicity_class(high[0] if high else None, bool(deliq))
        assert hyg is not None  # a weight gain or deliquescence was reported
        ok = HYGROSCOPICITY_CLASSES.index(hyg) <= HYGROSCOPICITY_CLASSES.index(t.value)
        detail = (f"weight gain {high[0]:g} % at 80 % RH (highest; {_fmt(gain, '%')})" if high else "")
        if deliq:
            detail = (detail + "; " if detail else "") + f"deliquescence noted in {', '.join(deliq)}"
        wells = tuple(dict.fromkeys([w for _, w in gain] + list(deliq)))
        ev.append(Evidence(2, "hygroscopicity", "pass" if ok else "fail",
                           f"{HYGROSCOPICITY_TEXT[hyg]}: {detail}; accepted up to "
                           f"{HYGROSCOPICITY_TEXT[t.value]}", wells, hyg, "%", t.value,
                           source=f"Ph. Eur. 5.11; accepted class: {t.cite}"))
    else:
        ev.append(Evidence(2, "hygroscopicity", "not_measured", "weight gain at 80 % RH not measured",
                           ids, threshold=t.value, source="Ph. Eur. 5.11"))
    # solubility against the dose in 250 mL
    sol = _values(obs, "solubility_mg_ml")
    t = th.get("dissolution_volume_ml")
    ph = _values(obs, "saturated_ph")
    ph_text = ("; saturated pH " + ", ".join(f"{w} {v:g}" for v, w in ph)) if ph else ""
    if not sol:
        ev.append(Evidence(2, "solubility", "not_measured", "aqueous solubility not measured", ids,
                           unit="mg/mL", source=t.cite))
    elif not dose:
        low = min(sol)
        ev.append(Evidence(2, "solubility", "not_assessed",
                           f"solubility {low[0]:g} mg/mL (lowest; {_fmt(sol, 'mg/mL')}){ph_text}; "
                           "no dose given: not assessed against a dose", _wells(sol, ph),
                           low[0], "mg/mL", source=t.cite))
    else:
        need = required_solubility_mg_ml(dose, t.value)
        low = min(sol)
        ok = low[0] >= need
        ev.append(Evidence(2, "solubility", "pass" if ok else "fail",
                           f"solubility {low[0]:g} mg/mL (lowest; {_fmt(sol, 'mg/mL')}){ph_text} "
                           f"{'≥' if ok else '<'} {need:.3g} mg/mL needed for {dose:g} mg in "
                           f"{t.value:g} mL", _wells(sol, ph),
                           low[0], "mg/mL", round(need, 4),
                           provenance=f"measured (results file); required = dose {dose:g} mg "
                                      f"({dose_src}) / {t.value:g} mL",
                           source=f"{t.cite}; measured in water, not over pH 1.2–6.8 at 37 °C"))
    # solvate / hydrate
    solv = _values(obs, "solvent_content_pct")
    t = th.get("solvent_content_max_pct")
    if solv:
        high = max(solv)
        ok = high[0] <= t.value
        ev.append(Evidence(2, "solvate", "pass" if ok else "concern",
                           (f"solvent/water content {high[0]:g} % w/w (highest; {_fmt(solv, '%')}) "
                            + (f"≤ {t.value:g} %: no solvate/hydrate indicated" if ok else
                               f"> {t.value:g} %: solvate/hydrate suspected")),
                           tuple(w for _, w in solv), high[0], "% w/w", t.value, source=t.cite))
    else:
        ev.append(Evidence(2, "solvate", "not_measured", "solvent/water content not measured", ids,
                           unit="% w/w", threshold=t.value, source=t.cite))
    return ev, hyg


def _summary(outcome, lead, backup, results: Results, others) -> str:
    n = len(results.observations)
    if outcome == "no_lead":
        crystalline = sum(o.outcome == "crystalline" and o.kind != "control" for o in results.observations)
        if crystalline:
            return (f"No lead: {crystalline} crystalline sample well(s) among {n} reported, but none "
                    f"passed tier 1 ({len(others)} form(s) set aside, see reasons).")
        return f"No lead: no crystalline salt form among {n} reported well(s)."
    text = f"Lead: {lead.title} (wells {', '.join(lead.wells)})"
    if backup:
        text += f"; back-up: {backup.title} (wells {', '.join(backup.wells)})"
    else:
        text += "; no back-up qualified"
    return text + "."


def _outcome_counts(observations) -> list[dict]:
    table: dict[str, dict[str, list[str]]] = {}
    for o in observations:
        name = o.counterion or "(control)"
        table.setdefault(name, {k: [] for k in OUTCOMES})[o.outcome].append(o.well)
    rows = []
    for name in sorted(table, key=lambda k: (k == "(control)", k)):
        outcomes = table[name]
        rows.append({"counterion": name, "wells": sum(len(v) for v in outcomes.values()),
                     "outcomes": {k: outcomes[k] for k in OUTCOMES}})
    return rows

