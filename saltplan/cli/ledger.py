"""``saltplan ledger``: record, look up, exchange and check the shared record.

``record plan|screen|results|selection|decision`` add a step's output; ``history``,
``show`` and ``outcomes`` read; ``export``/``import`` exchange JSON Lines (two sites merge
without duplicates); ``verify`` recomputes every checksum. Every subcommand takes
``--ledger URL|FILE`` (default ``$SALTPLAN_LEDGER``, else the per-user file).
"""
from __future__ import annotations

import json
from pathlib import Path

import click

from ._common import common_options, echo_json, table
from ._ledger import author_option, ledger_url_option, open_cli_ledger, say_recorded


@click.group()
def ledger():
    """The shared record of plans, screens, results and decisions (SQLite or PostgreSQL)."""


@ledger.group()
def record():
    """Record a plan, screen design, results file, selection or decision."""


def _read_json(path: str, what: str, keys: tuple[str, ...], hint: str) -> dict:
    from ..errors import InputFileError

    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError) as exc:
        raise InputFileError(f"cannot read it ({exc.__class__.__name__}); {hint}",
                             file=path) from None
    except ValueError as exc:
        raise InputFileError(f"not JSON ({exc}); {hint}", file=path) from None
    if not isinstance(data, dict) or any(k not in data for k in keys):
        raise InputFileError(f"not a {what} (needs the fields {', '.join(keys)}); {hint}",
                             file=path)
    return data


def _done(ref, led, as_json) -> None:
    if as_json:
        echo_json(dict(ref.to_dict(), ledger=led.where))
    else:
        say_recorded(ref, led.where, err=False)


_JSON_IN = click.Path(exists=True, dir_okay=False)


@record.command("plan")
@click.argument("plan_json", metavar="PLAN.json", type=_JSON_IN)
@click.option("--programme", help="Programme [default: letters before the first '-' of the "
                                  "compound name, e.g. HRN].")
@click.option("--replaces", metavar="UID", help="Uid of the plan record this one revises.")
@author_option
@ledger_url_option
@common_options
def record_plan(plan_json, programme, replaces, author, ledger_url, as_json):
    """Record a plan (plan.json written by `saltplan plan --out`) and its compound."""
    data = _read_json(plan_json, "saltplan plan", ("parent", "candidates", "provenance"),
                      "give the plan.json that `saltplan plan --out` writes")
    with open_cli_ledger(ledger_url, author=author) as led:
        _done(led.record_plan(data, programme=programme, replaces=replaces), led, as_json)


def _design_file(path: str) -> str:
    p = Path(path)
    return str(p / "design.json") if p.is_dir() else str(p)


@record.command("screen")
@click.argument("design", metavar="DESIGN_DIR|design.json",
                type=click.Path(exists=True, dir_okay=True))
@click.option("--programme", help="Programme [default: from the compound name].")
@click.option("--replaces", metavar="UID", help="Uid of the screen record this one revises.")
@author_option
@ledger_url_option
@common_options
def record_screen(design, programme, replaces, author, ledger_url, as_json):
    """Record a screen design (the folder `saltplan screen --out` wrote, or its
    design.json) together with its plan."""
    path = _design_file(design)
    data = _read_json(path, "screen design", ("plan", "wells"),
                      "give the folder or design.json that `saltplan screen --out` writes")
    with open_cli_ledger(ledger_url, author=author) as led:
        _done(led.record_screen(data, programme=programme, replaces=replaces), led, as_json)


@record.command("results")
@click.argument("design_dir", metavar="DESIGN_DIR", type=click.Path(exists=True))
@click.argument("results", metavar="RESULTS.csv", type=_JSON_IN)
@click.option("--programme", help="Programme [default: from the compound name].")
@click.option("--replaces", metavar="UID",
              help="Uid of the results record this file revises (a corrected file).")
@author_option
@ledger_url_option
@common_options
def record_results(design_dir, results, programme, replaces, author, ledger_url, as_json):
    """Record a results file (checked against its design, as `saltplan select` checks it)
    with one observation per well; the design and plan are recorded too."""
    from ..select.evaluate import load_design
    from ..select.results import read_results

    design = load_design(design_dir)
    parsed = read_results(results, design)
    with open_cli_ledger(ledger_url, author=author) as led:
        ref = led.record_results(parsed, design=design, programme=programme,
                                 replaces=replaces)
        _done(ref, led, as_json)


@record.command("selection")
@click.argument("selection_json", metavar="SELECTION.json|DIR",
                type=click.Path(exists=True, dir_okay=True))
@click.option("--results-uid", metavar="UID",
              help="The results record it was made from [default: the newest record of "
                   "the results file the selection names].")
@click.option("--replaces", metavar="UID", help="Uid of the selection record this revises.")
@author_option
@ledger_url_option
@common_options
def record_selection(selection_json, results_uid, replaces, author, ledger_url, as_json):
    """Record a selection (selection.json written by `saltplan select --out`, or that
    folder); its results file must be recorded first."""
    p = Path(selection_json)
    path = str(p / "selection.json") if p.is_dir() else str(p)
    data = _read_json(path, "saltplan selection", ("outcome", "provenance"),
                      "give the selection.json that `saltplan select --out` writes")
    with open_cli_ledger(ledger_url, author=author) as led:
        _done(led.record_selection(data, results_uid=results_uid, replaces=replaces),
              led, as_json)


@record.command("decision")
@click.argument("selection_uid", metavar="SELECTION_UID")
@click.option("--chosen", required=True, metavar="FORM",
              help="The form chosen, e.g. 'mesylate/A'.")
@click.option("--rationale", required=True, help="Why, in words (the decision record).")
@click.option("--replaces", metavar="UID", help="Uid of the decision this one revises.")
@author_option
@ledger_url_option
@common_options
def record_decision(selection_uid, chosen, rationale, replaces, author, ledger_url, as_json):
    """Record the decision taken on a recorded selection."""
    with open_cli_ledger(ledger_url, author=author) as led:
        _done(led.record_decision(selection_uid, chosen=chosen, rationale=rationale,
                                  replaces=replaces), led, as_json)


# --------------------------------------------------------------------------- reading
@ledger.command("history")
@click.argument("compound", metavar="NAME|INCHIKEY|UID")
@ledger_url_option
@common_options
def history(compound, ledger_url, as_json):
    """Everything recorded for a compound, oldest first."""
    with open_cli_ledger(ledger_url, create=False) as led:
        hist = led.history(compound)
    if as_json:
        echo_json(hist)
        return
    c = hist["compound"]
    click.echo(f"compound    {c['name'] or '(unnamed)'}  programme {c['programme']}")
    click.echo(f"inchikey    {c['inchikey']}")
    click.echo(f"parent      {c['parent_smiles']}")
    if c.get("supplied_form"):
        click.echo(f"supplied as {c['supplied_form']}")
    rows = [[r["created"], r["kind"], r["uid"], r["revision"],
             "" if r["current"] else "replaced", r["author"], r["summary"]]
            for r in hist["records"]]
    click.echo("")
    click.echo(table(rows, ["created (UTC)", "kind", "uid", "rev", "status", "author",
                            "summary"]))


@ledger.command("show")
@click.argument("uid", metavar="UID")
@ledger_url_option
def show(uid, ledger_url):
    """One record (envelope and full JSON body) by its uid."""
    with open_cli_ledger(ledger_url, create=False) as led:
        echo_json(led.show(uid))


def _pka_range(text: str | None):
    if not text:
        return None, None
    lo, sep, hi = text.partition(":")
    try:
        low = float(lo) if lo.strip() else None
        high = float(hi) if hi.strip() else None
    except ValueError:
        low = high = None
        sep = ""
    if not sep or (low is not None and high is not None and low > high):
        raise click.BadParameter(f"'{text}' is not LOW:HIGH (e.g. 7.5:10.5, or 8: for "
                                 "8 and above)", param_hint="--pka")
    return low, high


@ledger.command("outcomes")
@click.argument("counterion", metavar="COUNTERION")
@click.option("--site-class", metavar="GROUP_ID",
              help="Catalogue class of the API site, e.g. amine_tertiary [default: any].")
@click.option("--pka", "pka_range", metavar="LOW:HIGH",
              help="pKa range of the API site, e.g. 7.5:10.5 [default: any].")
@ledger_url_option
@common_options
def outcomes(counterion, site_class, pka_range, ledger_url, as_json):
    """How many recorded screens tried COUNTERION on such a site, and how many gave a
    crystalline salt of the intended stoichiometry, per programme."""
    low, high = _pka_range(pka_range)
    with open_cli_ledger(ledger_url, create=False) as led:
        result = led.outcomes(counterion, site_class, low, high)
    if as_json:
        echo_json(result.to_dict())
        return
    click.echo(result.render())


# --------------------------------------------------------------------------- exchange
@ledger.command("export")
@click.argument("out", metavar="OUT.jsonl", type=click.Path(dir_okay=False))
@ledger_url_option
def export(out, ledger_url):
    """Write the whole ledger as JSON Lines (the exchange format of `import`)."""
    with open_cli_ledger(ledger_url, create=False) as led:
        n = led.export_jsonl(out)
        click.echo(f"wrote {out} ({n} records from {led.where})")


@ledger.command("import")
@click.argument("source", metavar="IN.jsonl", type=_JSON_IN)
@ledger_url_option
@common_options
def import_(source, ledger_url, as_json):
    """Merge an export into the ledger: records already present are skipped, a damaged
    line refuses the whole file."""
    with open_cli_ledger(ledger_url) as led:
        counts = led.import_jsonl(source)
        where = led.where
    if as_json:
        echo_json(dict(counts, ledger=where))
    else:
        click.echo(f"imported {source}: {counts['added']} added, {counts['skipped']} "
                   f"already present, into {where}")


@ledger.command("verify")
@ledger_url_option
@common_options
def verify(ledger_url, as_json):
    """Recompute every record's checksum; exit 1 when any differs."""
    with open_cli_ledger(ledger_url, create=False) as led:
        report = led.verify()
        where = led.where
    if as_json:
        echo_json(dict(report.to_dict(), ledger=where))
    elif report.ok:
        click.echo(f"ok: {report.checked} records in {where}, every checksum matches")
    else:
        for m in report.mismatches:
            click.echo(f"mismatch  {m.table} {m.uid}: stored {m.stored[:19]}…, "
                       f"content gives {m.computed[:19]}…")
        click.echo(f"{len(report.mismatches)} of {report.checked} records in {where} do not "
                   "match their checksum (edited outside saltplan or damaged); restore them "
                   "from a backup or an export", err=True)
    if not report.ok:
        click.get_current_context().exit(1)
