"""``saltplan plan``: the ranked counterion plan of one API."""
from __future__ import annotations

import click

from ._common import common_options, dumps, echo_json, max_atoms_option, structure_argument, table
from ._ledger import CommandLedger, ledger_options

_ROUTES = ("oral", "parenteral", "inhalation", "topical", "other")   # = saltplan.plan.ROUTES


def _parse_measured(values):
    if not values:
        return None
    try:
        from ..ionization import parse_measured
    except ImportError:  # estimator package incomplete: the batch reader knows the same syntax
        from ..batch.sources import parse_measured_text

        return parse_measured_text("; ".join(values))
    return parse_measured(list(values))


@click.command()
@structure_argument
@click.option("--name", help="Compound name.")
@click.option("--dose-mg", type=float, help="Daily dose as free form [mg/day].")
@click.option("--route", type=click.Choice(_ROUTES), default="oral", show_default=True,
              help="Route of administration.")
@click.option("--pka", "pkas", multiple=True, metavar="VALUE",
              help="Measured pKa: '9.1', 'base=9.1', 'acid=4.2', 'amine_tertiary=9.1' or "
                   "'12=9.1' (atom index). Repeatable.")
@click.option("--library", "libraries", multiple=True,
              type=click.Path(exists=True, dir_okay=False),
              help="Extra counterion library (YAML); adds or overrides entries. Repeatable.")
@click.option("--weights", type=click.Path(exists=True, dir_okay=False),
              help="Ranking configuration overriding the built-in weights (YAML).")
@click.option("--min-delta-pka", type=float, default=2.0, show_default=True,
              help="Minimum ΔpKa for a feasible salt.")
@click.option("--mp", "melting_point", type=float,
              help="Melting point of the free form [°C] (General Solubility Equation).")
@click.option("--s0", type=float, help="Intrinsic solubility of the free form [mg/mL].")
@click.option("--salt-solubility", type=float,
              help="Salt solubility [mg/mL as free form] for pHmax (default: assumed).")
@click.option("--top", type=click.IntRange(1, 10000), default=10, show_default=True,
              help="Rows of the ranked table.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False),
              help="Write plan.json (and the reports, when available) into this folder.")
@max_atoms_option
@ledger_options
@common_options
def plan(structure, name, dose_mg, route, pkas, libraries, weights, min_delta_pka,
         melting_point, s0, salt_solubility, top, out_dir, max_atoms, ledger_url, record,
         no_learn, author, as_json):
    """Rank counterions and stoichiometries for a salt of SMILES|FILE, with reasons.

    With a ledger (--ledger, --record or $SALTPLAN_LEDGER) the precedence term also
    learns from the ledger's screens on similar sites (--no-learn: published prior only);
    --record stores the plan there.
    """
    from ..plan.planner import plan_salts

    with CommandLedger(ledger_url, record, no_learn, author) as led:
        result = plan_salts(structure, name=name, dose_mg=dose_mg, route=route,
                            measured=_parse_measured(pkas), libraries=list(libraries) or None,
                            weights=weights, min_delta_pka=min_delta_pka,
                            melting_point_c=melting_point, intrinsic_solubility_mg_ml=s0,
                            salt_solubility_mg_ml=salt_solubility, max_heavy_atoms=max_atoms,
                            inhouse=led.inhouse)
        data = result.to_dict()
        written = _write(result, data, out_dir) if out_dir else []
        led.record(lambda ledger: ledger.record_plan(data))
    if as_json:
        echo_json(data)
    else:
        click.echo(render_text(data, top))
    for path in written:
        click.echo(f"wrote {path}", err=True)


def _write(result, data, out_dir):
    from .._io import write_text_atomic

    try:
        from ..reports import write_plan_report
    except ModuleNotFoundError as exc:
        if exc.name not in ("saltplan.reports",):
            raise
        write_plan_report = None
    from pathlib import Path

    written = []
    if write_plan_report is not None:
        written = [Path(p) for p in write_plan_report(result, out_dir)]
    if not any(p.name == "plan.json" for p in written):
        written.append(write_text_atomic(Path(out_dir) / "plan.json", dumps(data) + "\n"))
    return written


def _f(value, digits=2):
    return "n/a" if value is None else f"{value:.{digits}f}"


def render_text(d: dict, top: int = 10) -> str:
    """The terminal view of a plan dict: header, sites, ranked table, verdict, cautions."""
    lines = []
    parent = d["parent"]
    title = d.get("name") or "unnamed compound"
    lines.append(f"salt plan   {title}")
    lines.append(f"parent      {parent['smiles']}  ({parent['formula']}, MW {parent['mw']:.2f} g/mol)")
    if parent.get("supplied_as"):
        lines.append(f"supplied as {parent['supplied_as']}")
    inputs = d["inputs"]
    dose = inputs.get("dose_mg")
    lines.append(f"dose        {f'{dose:g} mg/day (user)' if dose is not None else 'not given'}"
                 f"; route {inputs['route']}")
    lines.append("")
    if d["sites"]:
        rows = [[s["atom"], s["kind"], _f(s["pka"]),
                 _f(s.get("uncertainty"), 1) if s.get("uncertainty") is not None else "",
                 s.get("group", ""), s.get("provenance", "")] for s in d["sites"]]
        lines.append(table(rows, ["atom", "kind", "pKa", "±", "group", "provenance"]))
    else:
        lines.append("no ionizable site")
    sol = d.get("solubility")
    if sol:
        lines.append("")
        lines.append(f"S0 {sol['s0_mg_ml']:.3g} mg/mL ({sol['s0_method']}, {sol['s0_provenance']}); "
                     f"salt solubility {sol['salt_solubility_mg_ml']:g} mg/mL "
                     f"({sol['salt_solubility_basis']}) for pHmax")
    lines.append("")
    cands = d["candidates"]
    if cands:
        rows = []
        for c in cands[:top]:
            key = [cv["code"] for cv in c["caveats"] if cv["severity"] in ("warning", "serious")]
            rows.append([c["rank"], c["counterion"], c["stoichiometry"], _f(c["delta_pka"], 1),
                         c["category"].replace("_", " "), _f(c["probability"]),
                         _f(c["drug_content"], 1), _f(c["score"]), ", ".join(key)])
        lines.append(table(rows, ["rank", "counterion", "API:CI", "ΔpKa", "category",
                                  "P(transfer)", "drug %", "score", "key caveats"]))
        lines.append(f"({min(top, len(cands))} of {len(cands)} feasible shown; "
                     f"{len(d['excluded'])} excluded below ΔpKa {inputs['min_delta_pka']:g})")
        for c in cands[:top]:
            if c.get("precedence_basis"):
                lines.append(f"#{c['rank']} {c['counterion']} {c['stoichiometry']} precedence "
                             f"{c['breakdown']['precedence']:.3f}: {c['precedence_basis']}")
        if (d.get("settings") or {}).get("inhouse_prior"):
            lines.append(f"precedence learns from the ledger "
                         f"{d['settings']['inhouse_prior']['ledger']}")
    else:
        lines.append(f"no feasible candidate ({len(d['excluded'])} excluded below ΔpKa "
                     f"{inputs['min_delta_pka']:g})")
    for cv in d.get("caveats") or []:
        lines.append(f"API caveat ({cv['severity']}): {cv['text']}")
    lines.append("")
    v = d["verdict"]
    lines.append(f"verdict     {v['code']}: {v['text']}")
    for alt in v.get("alternatives") or []:
        lines.append(f"  - {alt}")
    lines.append("")
    for caution in d["cautions"]:
        lines.append(f"caution     {caution}")
    lines.append(f"provenance  saltplan {d['provenance']['version']}, library "
                 f"{d['provenance']['library_hash'][:19]}, weights "
                 f"{d['provenance'].get('weights_hash', '')[:19]}")
    return "\n".join(lines)
