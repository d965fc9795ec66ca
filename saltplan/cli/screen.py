"""``saltplan screen``: design the salt screen; ``saltplan solvents list``: the solvent library."""
from __future__ import annotations

import click

from ._common import common_options, echo_json, max_atoms_option, structure_argument, table
from ._ledger import CommandLedger, ledger_options

MODE_CHOICES = ("slurry", "cooling", "evaporation", "antisolvent")


def _parse_pka(values):
    """``--pka`` values, parsed as ``saltplan plan`` parses them (one syntax, one message)."""
    from .plan import _parse_measured

    return _parse_measured(values)


def _parse_budgets(values):
    out = {}
    for text in values or ():
        key, sep, value = text.partition("=")
        try:
            out[key.strip()] = float(value)
        except ValueError:
            raise click.BadParameter(f"'{text}' is not ID=MG (e.g. besylate=50)",
                                     param_hint="--counterion-budget") from None
        if not sep or not key.strip():
            raise click.BadParameter(f"'{text}' is not ID=MG", param_hint="--counterion-budget")
    return out or None


@click.command()
@structure_argument
@click.option("--api-budget-mg", type=float, required=True,
              help="API (free form) available for the whole screen, mg.")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), required=True,
              help="Folder for worksheet.csv, plate.csv, design.json, results-template.csv.")
@click.option("--top", type=click.IntRange(1, 50), default=None,
              help="Number of plan candidates to screen, best ranked first [default: 4].")
@click.option("--counterion", "counterions", multiple=True,
              help="Counterion id to screen (repeatable); replaces --top.")
@click.option("--scale", type=click.Choice(["plate", "vial"]), default="plate", show_default=True,
              help="96-well plate (tier 1, mg scale) or vials (confirmatory scale).")
@click.option("--solvent", "solvents", multiple=True,
              help="Solvent id to use first (repeatable); see `saltplan solvents list`.")
@click.option("--n-solvents", type=click.IntRange(1, 30), default=None,
              help="Number of solvents in total [default: 4, or as many as --solvent].")
@click.option("--mode", "modes", multiple=True, type=click.Choice(MODE_CHOICES),
              help="Crystallization mode (repeatable) [default: slurry, evaporation].")
@click.option("--api-mg", type=float, default=None,
              help="API per well or vial, mg [default: 5 plate, 50 vial].")
@click.option("--stock-molarity", type=float, default=None,
              help="Counterion stock concentration, mol/L [default: 0.5].")
@click.option("--excess", type=float, default=None,
              help="Relative counterion excess [default: 0.05, i.e. 1.05 eq for 1:1].")
@click.option("--liquid-dosing", type=click.Choice(["neat", "stock"]), default="neat",
              show_default=True, help="Dose liquid counterions neat by volume or from a stock.")
@click.option("--stock-solvent", default=None,
              help="Solvent id for all stocks (evaporated first) [default: each well's solvent].")
@click.option("--layout", type=click.Choice(["auto", "grid", "rows"]), default="auto",
              show_default=True, help="Plate map: grid (candidate rows) or row-major fill.")
@click.option("--no-controls", is_flag=True, help="Leave out the free-form control wells.")
@click.option("--include-risky", is_flag=True,
              help="Keep risky combinations (e.g. sulfonic acid + alcohol) with a flag.")
@click.option("--counterion-budget", "counterion_budgets", multiple=True, metavar="ID=MG",
              help="Available mass of a counterion, mg (repeatable).")
@click.option("--solvent-library", type=click.Path(exists=True, dir_okay=False), default=None,
              help="A solvent library file replacing the built-in one.")
@click.option("--name", help="Compound name.")
@click.option("--dose-mg", type=float, default=None, help="Daily dose, mg (for the plan).")
@click.option("--pka", "pkas", multiple=True,
              help="Measured pKa: 8.1, base=8.1, acid=4.2, ATOM=VALUE or GROUP=VALUE (repeatable).")
@click.option("--library", "libraries", multiple=True, type=click.Path(exists=True),
              help="Extra counterion library file (repeatable); adds or overrides by id.")
@max_atoms_option
@ledger_options
@common_options
def screen(structure, api_budget_mg, out_dir, top, counterions, scale, solvents, n_solvents,
           modes, api_mg, stock_molarity, excess, liquid_dosing, stock_solvent, layout,
           no_controls, include_risky, counterion_budgets, solvent_library, name, dose_mg,
           pkas, libraries, max_atoms, ledger_url, record, no_learn, author, as_json):
    """Design the salt screen of a structure and write its files to --out.

    Counterions come from the plan (top N or --counterion), solvents are chosen to span
    polarity and hydrogen bonding (ICH Q3C class 1 never, class 3 preferred), with free-form
    controls. Risky combinations are dropped and listed unless --include-risky. Over budget
    or over 96 wells is an error that says what to cut. With a ledger the plan's ranking
    learns from it (--no-learn: not); --record stores the design and its plan there.
    """
    with CommandLedger(ledger_url, record, no_learn, author) as led:
        design, written = _design(led, structure, api_budget_mg, out_dir, top, counterions,
                                  scale, solvents, n_solvents, modes, api_mg, stock_molarity,
                                  excess, liquid_dosing, stock_solvent, layout, no_controls,
                                  include_risky, counterion_budgets, solvent_library, name,
                                  dose_mg, pkas, libraries, max_atoms)
        led.record(lambda ledger: ledger.record_screen(design))
    _show(design, written, as_json)


def _design(led, structure, api_budget_mg, out_dir, top, counterions, scale, solvents,
            n_solvents, modes, api_mg, stock_molarity, excess, liquid_dosing, stock_solvent,
            layout, no_controls, include_risky, counterion_budgets, solvent_library, name,
            dose_mg, pkas, libraries, max_atoms):
    from ..screen.output import screen_structure

    return screen_structure(
        structure, api_budget_mg, out_dir=out_dir, name=name, dose_mg=dose_mg,
        measured=_parse_pka(pkas), libraries=libraries or None, max_heavy_atoms=max_atoms,
        solvent_library=solvent_library, top=top, counterions=list(counterions) or None,
        solvents=list(solvents) or None, n_solvents=n_solvents, modes=list(modes) or None,
        scale=scale, api_mg_per_well=api_mg, stock_molarity=stock_molarity, excess=excess,
        include_risky=include_risky, controls=not no_controls, liquid_dosing=liquid_dosing,
        stock_solvent=stock_solvent, counterion_budget_mg=_parse_budgets(counterion_budgets),
        layout=layout, inhouse=led.inhouse)


def _show(design, written, as_json):
    if as_json:
        echo_json(design.to_dict())
        return
    t = design.totals
    click.echo(f"wells       {t['wells']} ({t['samples']} samples, {t['controls']} controls), "
               f"{design.layout['format']}")
    click.echo(f"API         {t['api_mg']:g} mg of {design.budget['api_budget_mg']:g} mg budget "
               f"({design.budget['api_left_mg']:g} mg left)")
    for s in design.solvents:
        klass = "not in Q3C" if s["ich_class"] is None else f"class {s['ich_class']}"
        click.echo(f"solvent     {s['id']} ({klass}): {s['reason']}")
    rules: dict[str, int] = {}
    for d in design.dropped:
        rules[d["rule"]] = rules.get(d["rule"], 0) + 1
    for rule, count in rules.items():
        click.echo(f"dropped     {count} × {rule}")
    for code, text in design.flag_legend.items():
        click.echo(f"flag        {code}: {text}")
    for path in written:
        click.echo(f"wrote       {path}")


@click.group()
def solvents():
    """The solvent library (ICH Q3C class, properties)."""


@solvents.command("list")
@click.option("--library", "path", type=click.Path(exists=True, dir_okay=False), default=None,
              help="A solvent library file instead of the built-in one.")
@common_options
def list_solvents(path, as_json):
    """List the solvents with ICH Q3C(R8) class and limit, bp, ε and Kamlet–Taft α, β."""
    from ..library.solvents import load_solvents

    lib = load_solvents(path)
    if as_json:
        echo_json(lib.to_dict())
        return
    rows = []
    for s in lib:
        limit = "" if s.ich_limit_ppm is None else f"{s.ich_limit_ppm:g}"
        rows.append([s.id, "-" if s.ich_class is None else s.ich_class, limit, f"{s.bp_c:g}",
                     f"{s.density_g_ml:g}", f"{s.dielectric:g}", f"{s.kt_alpha:.2f}",
                     f"{s.kt_beta:.2f}", s.water_miscibility, "yes" if s.is_alcohol else "",
                     "yes" if s.default_pool else "no"])
    click.echo(table(rows, ["id", "ICH", "ppm", "bp °C", "g/mL", "ε", "α", "β", "water",
                            "alcohol", "pool"]))
    click.echo(f"{len(lib)} solvents from {lib.source}. ICH Q3C(R8) values from memory, "
               "checked against open copies; defer to the guideline.")
