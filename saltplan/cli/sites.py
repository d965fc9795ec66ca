"""``saltplan sites``: ionizable groups of a structure with estimated (or measured) pKa."""
from __future__ import annotations

import click

from ._common import common_options, echo_json, max_atoms_option, structure_argument, table


@click.command()
@structure_argument
@click.option("--pka", "pka", multiple=True, metavar="[SITE=]VALUE",
              help="Measured pKa replacing an estimate: '9.1' (nearest site), '12=9.1' (atom 12), "
                   "'base=9.1', 'acid=4.2', 'amine_tertiary=9.1' (group id). Repeatable.")
@click.option("--svg", "svg_path", type=click.Path(dir_okay=False, writable=True),
              help="Also draw the molecule with each site's pKa beside its atom (SVG file).")
@click.option("--steps", "show_steps", is_flag=True, help="Show how each pKa was built.")
@max_atoms_option
@common_options
def sites(structure, pka, svg_path, show_steps, max_atoms, as_json):
    """List the acidic and basic sites of a structure with their pKa.

    Estimates come from Hammett / Taft linear free-energy relationships with published
    constants (calibrated where stated); each value shows its uncertainty and provenance.
    Estimates are planning aids: confirm by potentiometric or UV titration.
    """
    from ..ionization.report import sites_report

    rep = sites_report(structure, measured_options=list(pka), max_atoms=max_atoms,
                       svg_path=svg_path)
    if as_json:
        echo_json(rep.to_dict())
        return
    click.echo(f"structure  {rep.smiles}")
    if not rep.sites:
        click.echo("no ionizable site in the pKa range that matters (base pKa >= -2, acid pKa <= 16)")
    else:
        rows = []
        for s in rep.sites:
            rows.append([s.atom, s.kind, f"{s.pka:.2f}", f"±{s.uncertainty:.1f}",
                         "yes" if s.salt_relevant else "no", s.provenance, s.group])
        click.echo(table(rows, ["atom", "kind", "pKa", "unc.", "salt-forming", "provenance", "group"]))
        if show_steps:
            for s in rep.sites:
                click.echo(f"\natom {s.atom} ({s.group}): pKa {s.pka:.2f}")
                for st in s.steps:
                    click.echo(f"  {st.value:+7.2f}  {st.label}  [{st.detail}]  {st.source}")
    for pc in rep.permanent_charges:
        click.echo(f"permanent charge {pc.charge:+d} at atom {pc.atom} ({pc.group}): no pKa")
    if svg_path:
        click.echo(f"drawing    {svg_path}")
