"""``saltplan parent``: show the standardized parent of a supplied structure."""
from __future__ import annotations

import click

from ._common import common_options, echo_json, max_atoms_option, structure_argument


@click.command()
@structure_argument
@click.option("--name", help="Compound name.")
@max_atoms_option
@common_options
def parent(structure, name, max_atoms, as_json):
    """Standardize a structure to its parent (free form) and say what was stripped."""
    from ..structure import read_structure

    p = read_structure(structure, name=name, max_heavy_atoms=max_atoms)
    if as_json:
        echo_json(p.to_dict())
        return
    click.echo(f"parent      {p.smiles}")
    if p.name:
        click.echo(f"name        {p.name}")
    click.echo(f"formula     {p.formula}  (MW {p.mw:.2f} g/mol, RDKit)")
    click.echo(f"supplied as {p.supplied_as or 'free form'}")
    for note in p.notes:
        click.echo(f"note        {note}")
