"""``saltplan batch``: plan many candidates from a CSV or SDF into one table."""
from __future__ import annotations

import sys

import click

from ._common import common_options, echo_json
from ._ledger import CommandLedger, ledger_options


class _Progress:
    """click's progress bar on stderr, grown as the row estimate is passed."""

    def __init__(self):
        self.bar = None
        self.done = 0

    def __call__(self, done, total):
        if self.bar is None:
            self.bar = click.progressbar(length=max(total or done, done), label="rows",
                                         file=sys.stderr, show_pos=True)
            self.bar.__enter__()
        if self.bar.length is not None and done > self.bar.length:
            self.bar.length = done
        self.bar.update(done - self.done)
        self.done = done

    def close(self):
        if self.bar is not None:
            self.bar.length = self.done  # the estimate counted lines; show the true end
            self.bar.render_progress()
            self.bar.__exit__(None, None, None)


@click.command()
@click.argument("file", type=click.Path(dir_okay=False))
@click.option("--out", "out", required=True, type=click.Path(dir_okay=False),
              help="Output table; format from the extension: .csv, .xlsx, .json (one array) "
                   "or .jsonl (JSON Lines).")
@click.option("--summary", "summary", type=click.Path(dir_okay=False),
              help="Also write an HTML summary (verdicts, pKa histograms, counterions).")
@click.option("--smiles-column", default="smiles", show_default=True,
              help="CSV column with the SMILES.")
@click.option("--id-column", help="Column with an identifier [default: 'id' if present].")
@click.option("--name-column", help="Column with a name [default: 'name' if present].")
@click.option("--dose-column", help="Column with the daily dose in mg [default: 'dose_mg' if present].")
@click.option("--pka-column", "pka_columns", multiple=True,
              help="Column(s) with measured pKa, e.g. '9.1; 4.2' or 'base=9.1' "
                   "[default: 'pka' if present]. Repeat for several.")
@click.option("--jobs", type=click.IntRange(1, 1024), default=1, show_default=True,
              help="Local worker processes.")
@click.option("--engine", type=click.Choice(["local", "dask"]), default="local",
              show_default=True, help="Where to run: this machine, or a Dask cluster.")
@click.option("--scheduler", metavar="ADDRESS",
              help="Dask scheduler address for --engine dask, e.g. tcp://scheduler-host:8786.")
@click.option("--chunk-size", type=click.IntRange(1, 100000), default=200, show_default=True,
              help="Rows per unit of work.")
@click.option("--library", "libraries", multiple=True, type=click.Path(),
              help="Extra counterion library file (repeatable).")
@click.option("--top", type=click.IntRange(0, 50), default=3, show_default=True,
              help="Feasible counterions listed per row.")
@click.option("--checkpoint", "checkpoint", type=click.Path(file_okay=False),
              help="Folder keeping finished chunks: after an interruption the same command "
                   "goes on where it stopped (same output bytes). Emptied when the run "
                   "completes.")
@click.option("--quiet", is_flag=True, help="No progress bar.")
@ledger_options
@common_options
def batch(file, out, summary, smiles_column, id_column, name_column, dose_column, pka_columns,
          jobs, engine, scheduler, chunk_size, libraries, top, checkpoint, quiet, ledger_url, record,
          no_learn, author, as_json):
    """Plan salts for every row of FILE (CSV with a SMILES column, or SDF).

    Writes one output row per input row, in input order; a row that cannot be planned
    keeps its place with the reason in the `error` column and the run goes on. A later
    row repeating an earlier id is planned and flagged in `duplicate_of`. Outputs are
    written only when the run completes (no partial files).

    Exit status: 0 if every row was planned, 1 if any row failed (or the input could not
    be read), 2 for a usage error. A one-line count goes to stderr.

    With a ledger (--ledger, --record or $SALTPLAN_LEDGER) the rankings learn from its
    screens (--no-learn: not); --record stores every planned row's plan there, one
    transaction each, as the rows arrive.

    With --checkpoint DIR every finished chunk is kept in DIR; if the run is stopped
    (Ctrl-C, SIGTERM, even SIGKILL), the same command again reads those chunks back and
    plans only the rest. A checkpoint made for another input or other options is refused.
    """
    from ..batch.run import run_batch

    progress = None
    if not quiet and sys.stderr.isatty():
        progress = _Progress()
    try:
        with CommandLedger(ledger_url, record, no_learn, author) as led:
            extra = ({"ledger": led.led, "learn": not no_learn} if record
                     else {"inhouse": led.inhouse} if led.inhouse is not None else {})
            result = run_batch(file, out, summary=summary, smiles_column=smiles_column,
                               id_column=id_column, name_column=name_column,
                               dose_column=dose_column, pka_columns=pka_columns or None,
                               jobs=jobs, engine=engine, scheduler=scheduler,
                               chunk_size=chunk_size, libraries=list(libraries) or None,
                               top=top, progress=progress, checkpoint=checkpoint,
                               **extra)
            where = led.led.where if led.led is not None else None
    finally:
        if progress is not None:
            progress.close()
    if as_json:
        echo_json(result.to_dict())
    else:
        for path in result.outputs:
            click.echo(f"wrote {path}")
    line = f"{result.rows} rows, {result.failed} failed (see column error)"
    if result.duplicates:
        line += f", {result.duplicates} repeated ids (see column duplicate_of)"
    if result.resumed:
        line += f", {result.resumed} read back from the checkpoint"
    if result.recorded is not None:
        line += f", {result.recorded} plans recorded in {where}"
    click.echo(line, err=True)
    if result.failed:
        click.get_current_context().exit(1)
