"""The invented demo scenario ("Heron" programme) and the pipeline run over it.

``saltplan demo --out reports`` runs every step on the demo compounds: plan, report,
screen design, batch triage of the whole programme and, for the lead compound, the
decision record from an INVENTED screen-results file. Every plan, screen, the results and
the selection are recorded in a ledger in the output folder (``ledger.sqlite``), and one
outcomes query over it is written to ``ledger-outcomes.txt``. Everything here is invented
data for demonstration; none of it is a measurement.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._data import package_yaml

#: the compound whose screen gets invented results and a decision record
LEAD = "HRN-101"
#: the ledger of the demo (in the output folder) and its outcomes query
LEDGER_FILE = "ledger.sqlite"
OUTCOMES_FILE = "ledger-outcomes.txt"
DEMO_AUTHOR = "saltplan demo"


@dataclass(frozen=True)
class DemoCompound:
    code: str
    role: str
    smiles: str
    dose_mg: float
    api_budget_mg: float
    route: str = "oral"
    note: str = ""
    measured_pka: dict[str, float] = field(default_factory=dict)


def load_programme() -> list[DemoCompound]:
    data = package_yaml("demo", "programme.yaml")
    return [DemoCompound(**row) for row in data["compounds"]]


def programme_name() -> str:
    return package_yaml("demo", "programme.yaml")["programme"]


def run_demo(out_dir: str | Path) -> dict[str, Any]:
    """Run the whole pipeline over the demo programme; return a summary of what was written.

    Everything is written into a hidden staging folder beside ``out_dir`` first and moved
    into place only when every step succeeded, so a failure part-way leaves ``out_dir`` as
    it was (no half-written demo).
    """
    import shutil
    import tempfile

    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        from ..errors import OutputFileError
        raise OutputFileError("output path exists and is not a folder", file=str(out))
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
        stage = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".part", dir=out.parent))
    except OSError as exc:
        from ..errors import OutputFileError
        raise OutputFileError(f"cannot write output: {exc.strerror or exc}", file=str(out)) from None
    try:
        summary = _run_demo(stage)
        from .._io import published, uninterrupted

        moved = []
        with uninterrupted():  # a signal waits until the whole demo is in place
            for rel in sorted(Path(p).relative_to(stage) for p in summary["written"]):
                target = out / rel
                target.parent.mkdir(parents=True, exist_ok=True)
                (stage / rel).replace(target)
                published(target)
                moved.append(str(target))
        summary["written"] = moved
        return summary
    finally:
        shutil.rmtree(stage, ignore_errors=True)


def _run_demo(out: Path) -> dict[str, Any]:
    from ..plan.planner import plan_salts

    written: list[str] = []
    summary: dict[str, Any] = {"programme": programme_name(), "compounds": []}
    designs = {}
    plans = []
    for c in load_programme():
        plan = plan_salts(c.smiles, name=c.code, dose_mg=c.dose_mg, route=c.route,
                          measured=dict(c.measured_pka) or None)
        folder = out / c.code
        plans.append(plan)
        written += [str(p) for p in _write_plan(plan, folder)]
        entry = {"code": c.code, "role": c.role, "verdict": plan.verdict["code"],
                 "top": [f"{k['counterion']} {k['stoichiometry']}" for k in plan.to_dict()["candidates"][:3]
                         if k["feasible"]]}
        design = _design(plan, c)
        if design is not None:
            designs[c.code] = design
            written += [str(p) for p in _write_screen(design, folder / "screen")]
            written += [str(p) for p in _write_plan(plan, folder, screen=design)]
            entry["wells"] = len(design.wells)
        summary["compounds"].append(entry)

    written += _batch(out)
    selected = None
    if LEAD in designs:
        files, selected = _select(designs[LEAD], out / LEAD)
        written += files
    written += _record(out, plans, designs, selected)
    written.append(str(_write_environment(out)))
    summary["written"] = sorted(set(written))
    return summary


def rendering_versions() -> dict[str, str]:
    """Versions of the libraries whose output bytes end up in the reports (drawings, charts)."""
    from importlib.metadata import version

    from .._version import __version__

    out = {"saltplan": __version__}
    for dist in ("rdkit", "matplotlib", "jinja2"):
        try:
            out[dist] = version(dist)
        except Exception:  # pragma: no cover - all are dependencies
            out[dist] = "unknown"
    return out


def _write_environment(out: Path) -> Path:
    import json

    from .._io import write_text_atomic

    text = json.dumps({"note": "library versions the demo reports were rendered with",
                       "versions": rendering_versions()}, indent=2) + "\n"
    return write_text_atomic(out / "environment.json", text)


def _write_plan(plan, folder: Path, screen=None) -> list[Path]:
    try:
        from ..reports import write_plan_report
    except ImportError:  # reports not available: JSON only
        import json

        from .._io import write_text_atomic

        return [write_text_atomic(folder / "plan.json", json.dumps(plan.to_dict(), indent=2) + "\n")]
    return list(write_plan_report(plan, folder, screen=screen))


def _design(plan, c: DemoCompound):
    if plan.verdict["code"] != "salt_candidates":
        return None
    try:
        from ..screen.design import design_screen
    except ImportError:
        return None
    return design_screen(plan, api_budget_mg=c.api_budget_mg)


def _write_screen(design, folder: Path) -> list[Path]:
    from ..screen.output import write_screen

    return list(write_screen(design, folder))


def _batch(out: Path) -> list[str]:
    import pandas as pd

    from ..batch.run import run_batch

    rows = [{"id": c.code, "name": c.role, "smiles": c.smiles, "dose_mg": c.dose_mg}
            for c in load_programme()]
    run = run_batch(pd.DataFrame(rows), out / "portfolio.csv", summary=out / "portfolio-summary.html",
                    dose_column="dose_mg", id_column="id", name_column="name",
                    source_label="programme.yaml (the invented Heron programme)")
    return [str(p) for p in run.outputs]


def _select(design, folder: Path):
    """([written], (results, selection)) of the lead's invented screen results."""
    from .._io import write_text_atomic
    from ..reports.decision import write_decision_record
    from ..select.evaluate import evaluate_results
    from ..select.results import read_results
    from .results import make_demo_results

    results_path = write_text_atomic(folder / "screen" / "results-invented.csv", make_demo_results(design))
    results = read_results(results_path, design)
    selection = evaluate_results(design, results)
    files = [str(results_path)] + [str(p) for p in write_decision_record(selection, folder / "decision")]
    return files, (results, selection)


def _record(out: Path, plans, designs, selected) -> list[str]:
    """Record the programme in ``out/ledger.sqlite`` (a fresh ledger) and write one
    outcomes query over it: the lead's counterion on its kind of site."""
    from .._io import write_text_atomic
    from ..ledger import open_ledger
    from ..plan.inhouse import PKA_WINDOW

    path = out / LEDGER_FILE
    if path.exists():        # never append to an older demo ledger: the file is rebuilt
        path.unlink()
    with open_ledger(path, author=DEMO_AUTHOR) as led:
        screens = {}
        for plan in plans:
            if plan.name in designs:
                screens[plan.name] = led.record_screen(designs[plan.name]).uid
            else:
                led.record_plan(plan)
        query = None
        if selected is not None:
            results, selection = selected
            # the file as the output folder names it, not the staging folder's path
            body = dict(results.to_dict(), file=f"{LEAD}/screen/results-invented.csv")
            res = led.record_results(body, screen_uid=screens[LEAD])
            led.record_selection(selection, results_uid=res.uid)
            lead = selection.lead
            counterion = lead.id.split("/")[0] if lead is not None else "hydrochloride"
            plan = designs[LEAD].plan
            cand = next(c for c in plan["candidates"] if c["counterion"] == counterion)
            site = min(cand["transfers"], key=lambda t: t["delta_pka"])
            where = next(s for s in plan["sites"] if s["atom"] == site["api_atom"]
                         and s["kind"] == site["api_kind"])
            lo, hi = round(where["pka"] - PKA_WINDOW, 1), round(where["pka"] + PKA_WINDOW, 1)
            query = (f"saltplan ledger outcomes {counterion} --site-class "
                     f"{where['group_id']} --pka {lo:g}:{hi:g} --ledger {LEDGER_FILE}",
                     led.outcomes(counterion, where["group_id"], lo, hi))
    written = [str(path)]
    if query is not None:
        text = (f"$ {query[0]}\n{query[1].render()}\n"
                "(the demo's screen results are INVENTED; not measurements)\n")
        written.append(str(write_text_atomic(out / OUTCOMES_FILE, text)))
    return written
