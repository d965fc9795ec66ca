"""Perceive what an aromatic substituent is from its first atoms.

:func:`describe` turns the substituent rooted at atom ``root`` (bonded to ring atom
``ring_atom``) into a key of the Hammett table (``data/hammett_hansch_leo_taft_1991.yaml``):
the element, hybridization and charge of the first atom, then what it carries (halogens,
carbonyls, sulfonyl oxygens, heteroatoms, aromatic rings). Any substituent gets a key: when
no specific entry applies, a fallback key for its first element is returned and flagged so
the estimate carries a larger uncertainty.
"""
from __future__ import annotations

from .graph import MolGraph

_HALOGEN = {9: "F", 17: "Cl", 35: "Br", 53: "I"}


def describe(g: MolGraph, root: int, ring_atom: int) -> tuple[str, bool]:
    """Return ``(key, is_fallback)`` for the substituent at ``root``.

    Parameters
    ----------
    g : MolGraph
    root : int
        First atom of the substituent.
    ring_atom : int
        The ring atom it is attached to (excluded from the description).
    """
    z = g.z[root]
    if z in _HALOGEN:
        return _HALOGEN[z], False
    # exocyclic double bond from the ring atom itself (pyridone C=O, quinonoid)
    for j, order, ar in g.nbrs[ring_atom]:
        if j == root and order == 2.0 and not ar:
            return ({8: "oxo", 16: "thioxo"}.get(z, "oxo"), z not in (8, 16))
    if z == 6:
        return _carbon(g, root, ring_atom)
    if z == 7:
        return _nitrogen(g, root, ring_atom)
    if z == 8:
        return _oxygen(g, root, ring_atom)
    if z == 16:
        return _sulfur(g, root, ring_atom)
    if z == 15:
        return "PO3", False
    if z == 14:
        return "SiR3", False
    if z == 5:
        return "B(OH)2", False
    return "fallback", True


def _others(g: MolGraph, i: int, exclude: int):
    return [(j, order, ar) for j, order, ar in g.nbrs[i] if j != exclude]


def _ring_heteroatoms(g: MolGraph, atom: int) -> tuple[bool, bool]:
    """(has aza N, has other heteroatom) in the aromatic rings containing ``atom``."""
    aza = other = False
    for k in g.atom_rings[atom]:
        ring = g.rings[k]
        if not all(g.arom[a] for a in ring):
            continue
        for a in ring:
            if g.z[a] == 7 and g.hs[a] == 0 and g.degree[a] == 2 and g.charge[a] == 0:
                aza = True
            elif g.z[a] != 6:
                other = True
    return aza, other


def _carbon(g: MolGraph, c: int, ring_atom: int) -> tuple[str, bool]:
    others = _others(g, c, ring_atom)
    if g.arom[c]:
        aza, other = _ring_heteroatoms(g, c)
        if aza:
            return "heteroaryl", False
        if other:
            return "heteroaryl_e_rich", False
        return "phenyl", False
    triple = [j for j, order, _ in others if order == 3.0]
    if triple:
        return ("CN", False) if g.z[triple[0]] == 7 else ("ethynyl", False)
    dbl = [(j, order) for j, order, ar in others if order == 2.0 and not ar]
    if dbl:
        d = dbl[0][0]
        rest = [(j, order, ar) for j, order, ar in others if j != d]
        if g.z[d] == 8:
            if not rest:
                return "CHO", False
            zs = [g.z[j] for j, _, _ in rest]
            if 8 in zs:
                o = rest[zs.index(8)][0]
                if g.charge[o] < 0:
                    return "COO-", False
                return ("COOH", False) if g.hs[o] else ("COOR", False)
            if 7 in zs:
                n = rest[zs.index(7)][0]
                return ("CONH2", False) if g.hs[n] == 2 else ("CONR", False)
            if any(g.arom[j] for j, _, _ in rest):
                return "COAr", False
            return "COR", False
        if g.z[d] == 7:
            return "CH=NR", False
        if g.z[d] == 6:
            for j, _order, _ar in g.nbrs[d]:
                if j == c:
                    continue
                if g.has_double_to(j, (8,)) or any(o == 3.0 for _, o, _ in g.nbrs[j]):
                    return "vinyl_acceptor", False
            return "vinyl", False
        return "fallback_C", True
    # sp3 carbon
    nf = sum(1 for j, _, _ in others if g.z[j] == 9)
    ncl = sum(1 for j, _, _ in others if g.z[j] == 17)
    if nf == 3:
        return "CF3", False
    if ncl == 3:
        return "CCl3", False
    if nf == 2:
        return "CHF2", False
    hetero = [j for j, _, _ in others if g.z[j] != 6]
    if hetero:
        h = hetero[0]
        if g.z[h] == 8:
            return ("CH2OH", False) if g.hs[h] else ("CH2OR", False)
        if g.z[h] == 7:
            return "CH2N", False
        if g.z[h] in (17, 35, 53, 9):
            return "CH2Cl", False
        return "CH2X", False
    carbons = [j for j, _, _ in others if g.z[j] == 6]
    for j in carbons:
        if any(o == 3.0 and g.z[k] == 7 for k, o, _ in g.nbrs[j]):
            return "CH2CN", False
        if g.arom[j]:
            return "CH2Ar", False
        if g.has_double_to(j, (8,)):
            return "CH2COR", False
    if not carbons:
        return "CH3", False
    if g.in_ring_bond(c, ring_atom):
        return "cycloalkyl", False
    if len(carbons) == 3:
        return "tBu", False
    return "alkyl", False


def _nitrogen(g: MolGraph, n: int, ring_atom: int) -> tuple[str, bool]:
    others = _others(g, n, ring_atom)
    if g.charge[n] > 0:
        if any(g.z[j] == 8 for j, _, _ in others):
            return "NO2", False
        if g.arom[n]:
            return "fallback_N", True
        return ("NH3+", False) if g.hs[n] else ("NR3+", False)
    if g.arom[n]:
        return "N_azole", False
    for j, order, ar in others:
        if order == 2.0 and not ar:
            if g.z[j] == 7:
                return ("N3", False) if g.charge[j] > 0 else ("N=NAr", False)
            if g.z[j] == 6:
                if any(g.z[k] == 7 and k != n for k, _, _ in g.nbrs[j]):
                    return "N_amidine", False
                return "N=C", False
            return "fallback_N", True
        if order == 3.0:
            return "fallback_N", True
    acyl = sulfonyl = aryl = amidine = False
    urea = False
    hetero = False
    for j, _order, _ar in others:
        zj = g.z[j]
        if zj == 6:
            if g.arom[j]:
                aryl = True
            elif g.has_double_to(j, (8, 16)):
                acyl = True
                if any(g.z[k] in (7, 8) and k != n and o == 1.0 for k, o, _ in g.nbrs[j]):
                    urea = urea or any(g.z[k] == 7 and k != n for k, _, _ in g.nbrs[j])
            elif g.has_double_to(j, (7,)):
                amidine = True
        elif zj == 16 and g.count_double_to(j, 8) >= 1:
            sulfonyl = True
        else:
            hetero = True
    h = g.hs[n]
    if acyl:
        if urea:
            return "NHCONR", False
        return ("NHCOR", False) if h else ("NRCOR", False)
    if sulfonyl:
        return ("NHSO2R", False) if h else ("NRSO2R", False)
    if amidine:
        return "N_amidine", False
    if hetero:
        return "fallback_N", True
    if aryl:
        return ("NHAr", False) if h else ("NR2", False)
    return {2: "NH2", 1: "NHR"}.get(h, "NR2"), False


def _oxygen(g: MolGraph, o: int, ring_atom: int) -> tuple[str, bool]:
    if g.charge[o] < 0:
        return "O-", False
    if g.hs[o]:
        return "OH", False
    others = _others(g, o, ring_atom)
    if not others:
        return "fallback_O", True
    j = others[0][0]
    if g.z[j] == 6:
        if g.arom[j]:
            return "OAr", False
        if g.has_double_to(j, (8, 16, 7)):
            return "OCOR", False
        nf = sum(1 for k, _, _ in g.nbrs[j] if g.z[k] == 9)
        if nf >= 3:
            return "OCF3", False
        if nf == 2:
            return "OCHF2", False
        if g.degree[j] == 1:
            return "OCH3", False
        return "OR", False
    if g.z[j] == 16:
        return "OSO2R", False
    return "fallback_O", True


def _sulfur(g: MolGraph, s: int, ring_atom: int) -> tuple[str, bool]:
    others = _others(g, s, ring_atom)
    n_oxo = g.count_double_to(s, 8)
    rest = [j for j, order, _ in others if not (order == 2.0 and g.z[j] == 8)]
    if n_oxo >= 2:
        for j in rest:
            if g.z[j] == 8:
                return ("SO3-", False) if g.charge[j] < 0 else ("SO2OR", False)
            if g.z[j] == 7:
                return "SO2NR2", False
            if g.z[j] == 6 and sum(1 for k, _, _ in g.nbrs[j] if g.z[k] == 9) >= 3:
                return "SO2CF3", False
        return "SO2R", False
    if n_oxo == 1:
        return "SOR", False
    if g.hs[s]:
        return "SH", False
    if not rest:
        return "fallback_S", True
    j = rest[0]
    if g.arom[j]:
        return "SAr", False
    if g.z[j] == 6 and sum(1 for k, _, _ in g.nbrs[j] if g.z[k] == 9) >= 3:
        return "SCF3", False
    if g.z[j] == 6:
        return "SR", False
    return "fallback_S", True
