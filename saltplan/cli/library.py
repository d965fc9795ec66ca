"""``saltplan library``: list, show and check the counterion library."""
from __future__ import annotations

import click

from ._common import common_options, echo_json, table


def library_option(func):
    """``--library PATH`` (repeatable): user libraries merged over the built-in one."""
    return click.option(
        "--library", "libraries", multiple=True, metavar="PATH",
        type=click.Path(exists=True, dir_okay=True, readable=True),
        help="In-house counterion YAML file (or folder of them) that adds or overrides "
             "entries; repeatable, later files win.")(func)


@click.group()
def library():
    """Browse and check the counterion library (built-in plus --library files)."""


def _pka_text(values) -> str:
    return ", ".join(f"{v:.2f}" for v in values)


@library.command("list")
@click.option("--role", type=click.Choice(["acid", "base"]),
              help="Only acids (for basic drugs) or bases (for acidic drugs).")
@library_option
@common_options
def list_(role, libraries, as_json):
    """List the counterions, ordered by id."""
    from ..library.counterions import load_counterions

    lib = load_counterions(libraries)
    entries = lib.by_role(role) if role else tuple(lib)
    if as_json:
        echo_json([c.to_dict() for c in entries])
        return
    rows = [[c.id, c.role, _pka_text(c.pka), f"{c.pka_for_salt:.2f}", f"{c.mw:.2f}",
             str(c.tier), c.form.replace("_", " "), ",".join(c.flags) or "-"]
            for c in entries]
    click.echo(table(rows, ["id", "role", "pKa (aqueous)", "pKa for ΔpKa", "MW g/mol",
                            "tier", "form", "flags"]))
    click.echo(f"\n{len(entries)} counterions; library {lib.hash[:19]}…; "
               "pKa values are literature values (see `saltplan library show ID`); "
               "MW computed by RDKit from the SMILES.")


@library.command("show")
@click.argument("counterion_id", metavar="ID")
@library_option
@common_options
def show(counterion_id, libraries, as_json):
    """Show every field of one counterion, with sources."""
    from ..library.counterions import load_counterions

    c = load_counterions(libraries).get(counterion_id)
    if as_json:
        echo_json(c.to_dict())
        return
    lines = [
        ("id", c.id), ("name", c.name), ("family", c.family), ("smiles", c.smiles),
        ("formula", f"{c.formula}  (MW {c.mw:.2f} g/mol, RDKit; ion in salt "
                    f"{c.ion_mw:.2f} g/mol, charge {c.charge:+d})"),
        ("role", f"{c.role} (salts of {'basic' if c.role == 'acid' else 'acidic'} drugs)"),
    ]
    for value, source in zip(c.pka, c.pka_sources, strict=True):
        lines.append(("pKa", f"{value:.2f}  [literature: {source}]"))
    note = f"  ({c.pka_note})" if c.pka_note else ""
    lines.append(("pKa for ΔpKa", f"{c.pka_for_salt:.2f}{note}"))
    lines.append(("protons", f"{c.n_protons} ({'given' if c.role == 'acid' else 'accepted'})"))
    form = c.form.replace("_", " ")
    if c.solution_w_w is not None:
        form += f", {c.solution_w_w:g} % w/w"
    if c.density_g_ml is not None:
        form += f", {c.density_g_ml:g} g/mL [{c.density_source}]"
    lines += [("form", form), ("tier", f"{c.tier}  [{c.tier_source}]"),
              ("stoichiometry", ", ".join(c.stoichiometries) + "  (API:counterion)"),
              ("hygroscopicity", f"{c.hygroscopicity}  [{c.hygroscopicity_source}]"),
              ("flags", ", ".join(c.flags) or "-")]
    lines += [("liability", text) for text in c.liabilities]
    if c.exposure_note:
        lines.append(("exposure", c.exposure_note))
    if c.notes:
        lines.append(("note", c.notes))
    lines += [("reference", ref) for ref in c.references]
    lines.append(("source", c.source))
    width = max(len(k) for k, _ in lines)
    for key, value in lines:
        click.echo(f"{key.ljust(width)}  {value}")


@library.command("check")
@click.argument("paths", nargs=-1, metavar="[PATH...]",
                type=click.Path(exists=True, dir_okay=True, readable=True))
@library_option
@common_options
def check(paths, libraries, as_json):
    """Validate library files (default: the built-in library) merged over the built-in one.

    Exits 1 with a one-line message naming file, entry and field of the first problem.
    """
    from ..library.counterions import check_counterions

    report = check_counterions(tuple(libraries) + tuple(paths))
    if as_json:
        echo_json(report.to_dict())
        return
    click.echo(f"ok: {report.entries} counterions ({report.acids} acids, {report.bases} "
               f"bases) from {len(report.files)} files")
    for override in report.overrides:
        click.echo(f"override: {override.id} from {override.by} replaces {override.replaced}")
    click.echo(f"hash: {report.hash}")
