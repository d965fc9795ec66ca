"""What ``saltplan sites`` shows: the parent, its sites and an optional SVG drawing."""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from .site import PermanentCharge, Site

#: highlight colours (RGB 0-1) of the drawing: estimated vs measured sites
COLOUR_ESTIMATED = (0.80, 0.88, 1.00)
COLOUR_MEASURED = (0.80, 0.95, 0.80)


@dataclass(frozen=True)
class SitesReport:
    smiles: str
    sites: tuple[Site, ...]
    permanent_charges: tuple[PermanentCharge, ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"smiles": self.smiles, "sites": [s.to_dict() for s in self.sites],
                "permanent_charges": [p.to_dict() for p in self.permanent_charges]}


def sites_report(structure, measured_options=(), measured=None, max_atoms: int = 150,
                 svg_path=None) -> SitesReport:
    """Read ``structure``, estimate its sites, apply measured values, optionally draw it.

    Parameters
    ----------
    structure : str, Mol or Parent
    measured_options : sequence of str
        ``--pka`` texts (see :func:`saltplan.ionization.parse_measured`).
    measured : optional
        Measured values in any form :func:`ionizable_sites` accepts (added to the options).
    max_atoms : int
        Heavy-atom limit for :func:`saltplan.structure.read_structure`.
    svg_path : path, optional
        Write the drawing there (atomically).
    """
    from ..structure import read_structure
    from .estimate import ionizable_sites, permanent_charges
    from .measured import parse_measured

    parent = read_structure(structure, max_heavy_atoms=max_atoms)
    values = parse_measured(measured_options)
    if measured:
        if isinstance(measured, dict):
            values += list(measured.items())
        else:
            values += [m if isinstance(m, (tuple, list)) else (None, m) for m in measured]
    sites = ionizable_sites(parent, measured=values or None)
    perm = permanent_charges(parent)
    report = SitesReport(parent.smiles, tuple(sites), tuple(perm))
    if svg_path:
        from .._io import write_text_atomic

        write_text_atomic(svg_path, draw_sites_svg(parent.mol, sites, perm))
    return report


def draw_sites_svg(mol, sites, permanent=(), width: int = 520, height: int = 400) -> str:
    """SVG of the molecule with each site's pKa beside its atom.

    Estimated sites read ``~9.1 (b)`` and are shaded blue; measured sites read
    ``9.10 (b, meas.)`` and are shaded green; ``a``/``b`` = acid/base.
    """
    from rdkit import Chem
    from rdkit.Chem.Draw import rdMolDraw2D

    m = Chem.Mol(mol)
    colours: dict[int, tuple[float, float, float]] = {}
    for s in sites:
        k = "a" if s.kind == "acid" else "b"
        if s.provenance == "measured":
            note = f"{s.pka:.2f} ({k}, meas.)"
            colours[s.atom] = COLOUR_MEASURED
        else:
            note = f"~{s.pka:.1f} ({k})"
            colours[s.atom] = COLOUR_ESTIMATED
        m.GetAtomWithIdx(s.atom).SetProp("atomNote", note)
    for p in permanent:
        m.GetAtomWithIdx(p.atom).SetProp("atomNote", f"{p.charge:+d} permanent")
    drawer = rdMolDraw2D.MolDraw2DSVG(width, height)
    opts = drawer.drawOptions()
    opts.annotationFontScale = 0.8
    rdMolDraw2D.PrepareAndDrawMolecule(drawer, m, highlightAtoms=list(colours),
                                       highlightAtomColors=colours, highlightBonds=[])
    drawer.FinishDrawing()
    return drawer.GetDrawingText()
