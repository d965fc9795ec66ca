"""Structure drawing (SVG) with each ionizable site labelled by its pKa.

Drawn with RDKit's ``rdMolDraw2D`` (text as paths, so it renders the same everywhere);
coordinates from ``rdDepictor.Compute2DCoords``, which is deterministic for a given
SMILES. Atom indices are those of ``Parent.smiles`` re-parsed (DEVELOPERS.md contract).

Labels: measured values read ``"pKa 9.1 (meas.)"``; user-supplied ``"pKa 9.1 (user)"``;
estimates ``"~9.1 est."``. Base sites are highlighted sky blue, acid sites orange
(Okabe–Ito colours), and the label text says which number is which, so colour is not the
only cue.
"""
from __future__ import annotations

import re
from html import escape
from typing import Sequence

from ..errors import StructureError
from .charts import cached

BASE_COLOUR = (0.337, 0.706, 0.914)   # Okabe–Ito sky blue #56B4E9
ACID_COLOUR = (0.902, 0.624, 0.0)     # Okabe–Ito orange #E69F00


def site_label(site: dict) -> str:
    """The short pKa label printed beside a site's atom."""
    pka = float(site["pka"])
    provenance = site["provenance"]
    if provenance == "measured":
        return f"pKa {pka:.1f} (meas.)"
    if provenance == "user":
        return f"pKa {pka:.1f} (user)"
    return f"~{pka:.1f} est."


def structure_png(smiles: str, sites: Sequence[dict], width: int = 1040,
                  height: int = 680) -> bytes:
    """PNG bytes of the same labelled drawing (for the Word report, which cannot hold SVG)."""
    return _draw(smiles, sites, width, height, png=True)


@cached
def structure_svg(smiles: str, sites: Sequence[dict], width: int = 520,
                  height: int = 340) -> str:
    """Inline-ready SVG of ``smiles`` with the sites labelled.

    Parameters
    ----------
    smiles : str
        Canonical SMILES of the parent (free form).
    sites : sequence of dict
        Site dicts (``atom``, ``kind``, ``pka``, ``provenance``).
    width, height : int
        Canvas size [px].
    """
    return _draw(smiles, sites, width, height, png=False)


def _draw(smiles: str, sites: Sequence[dict], width: int, height: int, png: bool):
    from rdkit import Chem
    from rdkit.Chem import rdDepictor
    from rdkit.Chem.Draw import rdMolDraw2D

    from ..structure import rdkit_messages

    with rdkit_messages():
        mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        raise StructureError("report drawing: parent SMILES could not be parsed",
                             entry=smiles)
    rdDepictor.Compute2DCoords(mol)
    height = _fit_height(mol, width, height)
    notes: dict[int, list[str]] = {}
    colours: dict[int, tuple[float, float, float]] = {}
    for site in sites:
        atom = int(site["atom"])
        if not 0 <= atom < mol.GetNumAtoms():
            raise StructureError(f"report drawing: site atom {atom} is not in the parent "
                                 f"({mol.GetNumAtoms()} atoms)", entry=smiles, field="atom")
        notes.setdefault(atom, []).append(site_label(site))
        colours[atom] = BASE_COLOUR if site["kind"] == "base" else ACID_COLOUR
    drawer = (rdMolDraw2D.MolDraw2DCairo if png else rdMolDraw2D.MolDraw2DSVG)(width, height)
    opts = drawer.drawOptions()
    opts.padding = 0.2
    opts.clearBackground = True
    opts.fillHighlights = True
    atoms = sorted(colours)
    drawer.DrawMolecule(mol, highlightAtoms=atoms, highlightAtomColors=colours,
                        highlightBonds=[], highlightAtomRadii={a: 0.45 for a in atoms})
    _draw_labels(drawer, mol, notes, colours)
    drawer.FinishDrawing()
    if png:
        return drawer.GetDrawingText()
    return _inline(drawer.GetDrawingText(), "labelled structure of the parent with site pKa")


def _inline(svg: str, label: str) -> str:
    svg = svg[svg.find("<svg"):]
    svg = re.sub(r"<!--.*?-->", "", svg, flags=re.S)
    svg = svg.replace("<svg ", f'<svg role="img" aria-label="{escape(label, quote=True)}" '
                      f'class="sp-structure" ', 1)
    svg = re.sub(r">\s+<", ">\n<", svg).strip()
    return svg + "\n"


def _draw_labels(drawer, mol, notes, colours) -> None:
    """Write each site's label beside its atom, pushed away from the molecule's centre."""
    from rdkit.Geometry import Point2D

    pts = [drawer.GetDrawCoords(i) for i in range(mol.GetNumAtoms())]
    cx = sum(p.x for p in pts) / len(pts)
    cy = sum(p.y for p in pts) / len(pts)
    drawer.SetFontSize(12)
    for atom in sorted(notes):
        p = pts[atom]
        dx, dy = p.x - cx, p.y - cy
        norm = (dx * dx + dy * dy) ** 0.5 or 1.0
        # neighbours' mean direction: put the label on the side away from the bonds
        nb = [pts[n.GetIdx()] for n in mol.GetAtomWithIdx(atom).GetNeighbors()]
        if nb:
            bx = p.x - sum(q.x for q in nb) / len(nb)
            by = p.y - sum(q.y for q in nb) / len(nb)
            bnorm = (bx * bx + by * by) ** 0.5
            if bnorm > 1e-6:
                dx, dy, norm = bx, by, bnorm
        ux, uy = dx / norm, dy / norm
        text = "; ".join(notes[atom])
        gap = 26 if mol.GetAtomWithIdx(atom).GetSymbol() != "C" else 14
        if ux > 0.35:
            align, x, y = 1, p.x + gap, p.y + uy * 12
        elif ux < -0.35:
            align, x, y = 2, p.x - gap, p.y + uy * 12
        else:
            align, x, y = 0, p.x, p.y + (22 if uy >= 0 else -22)
        drawer.SetColour((0.0, 0.0, 0.0))
        drawer.DrawString(text, Point2D(x, y), align, rawCoords=True)


def _fit_height(mol, width: int, max_height: int) -> int:
    """Canvas height [px] following the drawing's aspect ratio, within 220..max_height."""
    conf = mol.GetConformer()
    xs = [conf.GetAtomPosition(i).x for i in range(mol.GetNumAtoms())]
    ys = [conf.GetAtomPosition(i).y for i in range(mol.GetNumAtoms())]
    span_x = max(xs) - min(xs) + 2.0
    span_y = max(ys) - min(ys) + 2.0
    return int(max(220, min(max_height, round(width * span_y / span_x / 10) * 10)))
