"""``saltplan select``: evaluate screen results and write the decision record."""
from __future__ import annotations

import click

from ._common import common_options, echo_json, table
from ._ledger import CommandLedger, ledger_options


def ledger_options_no_learn(func):
    return ledger_options(func, learn=False)


def _record(design_dir, results, selection, ledger_url, author) -> None:
    from ..select.evaluate import load_design
    from ..select.results import read_results

    design = load_design(design_dir)
    parsed = read_results(results, design)
    with CommandLedger(ledger_url, True, True, author) as led:
        res = led.record(lambda ledger: ledger.record_results(parsed, design=design))
        led.record(lambda ledger: ledger.record_selection(selection, results_uid=res.uid))


@click.command()
@click.argument("design_dir", type=click.Path(exists=True, file_okay=True, dir_okay=True))
@click.argument("results", metavar="RESULTS.csv", type=click.Path(exists=True, dir_okay=False))
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False),
              help="Folder for decision.html, decision.md and selection.json.")
@click.option("--thresholds", "thresholds", type=click.Path(exists=True, dir_okay=False),
              help="YAML file overriding some evaluation thresholds (see "
                   "saltplan/data/selection_thresholds.yaml).")
@click.option("--dose-mg", type=click.FloatRange(min=0, min_open=True),
              help="Highest single dose [mg] for the solubility criterion (default: the plan's).")
@ledger_options_no_learn
@common_options
def select(design_dir, results, out_dir, thresholds, dose_mg, ledger_url, record, author,
           as_json):
    """Evaluate screen RESULTS.csv against the design in DESIGN_DIR and pick a lead form.

    Tier 1 crystalline hits with the intended stoichiometry; tier 2 melting onset,
    Ph. Eur. 5.11 hygroscopicity class, solubility against the dose in 250 mL (ICH M9),
    solvate/hydrate status; tier 3 open questions. Writes the decision record (HTML,
    Markdown, JSON) to --out; nothing is written when the input is refused. --record
    stores the results file (with its design and plan) and the selection in the ledger.
    """
    from ..reports.decision import select_and_record

    selection, written = select_and_record(design_dir, results, out_dir, thresholds, dose_mg)
    if record:
        _record(design_dir, results, selection, ledger_url, author)
    if as_json:
        echo_json(selection.to_dict())
        return
    if selection.invented_data:
        click.echo("INVENTED DATA: the results file is marked as invented; not measurements.")
    click.echo(selection.summary)
    rows = [[g.rank, g.role, g.title, g.tier1, ", ".join(g.wells)] for g in selection.shortlist]
    if rows:
        click.echo(table(rows, ["#", "role", "form", "tier 1", "wells"]))
    for g in selection.not_shortlisted:
        click.echo(f"not shortlisted  {g.title} ({', '.join(g.wells)}): {g.reason}")
    if selection.not_reported:
        click.echo(f"not reported     {', '.join(selection.not_reported)}")
    for path in written:
        click.echo(f"wrote            {path}")
