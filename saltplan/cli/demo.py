"""``saltplan demo``: run the whole pipeline on the invented demo programme."""
from __future__ import annotations

import click

from ._common import common_options, echo_json


@click.command()
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default="reports",
              show_default=True, help="Folder to write the demo reports into.")
@common_options
def demo(out_dir, as_json):
    """Run every step on the invented "Heron" programme and write the reports.

    The compounds, doses, budgets and screen results of the demo are invented for
    illustration; none of them is a measurement.
    """
    from ..demo import run_demo

    summary = run_demo(out_dir)
    if as_json:
        echo_json(summary)
        return
    click.echo(f"{summary['programme']}")
    for c in summary["compounds"]:
        top = ", ".join(c["top"]) or "no salt candidate"
        wells = f"; screen {c['wells']} wells" if "wells" in c else ""
        click.echo(f"  {c['code']:8s} {c['role']:34s} {c['verdict']:18s} {top}{wells}")
    click.echo(f"wrote {len(summary['written'])} files under {out_dir}/")
