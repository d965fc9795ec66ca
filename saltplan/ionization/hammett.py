"""Hammett terms for a site on (or attached to) an aromatic ring.

.. math:: pK_a = pK_a^0 - \\rho \\sum \\sigma

The ring that carries the site (the anchor atom's smallest aromatic ring) is walked once:
each other ring atom has a position (6-ring: ortho / meta / para; 5-ring: adjacent /
remote). Ring heteroatoms count as substituents (aza replacement constants), exocyclic
substituents are perceived by :func:`saltplan.ionization.substituents.describe`, a fused
aromatic ring counts as one "benzo" term plus what it contains, and substituents on a fused
ring count with an attenuated sigma_m. Ortho substituents use
``sigma_o = a F + b R + c`` (field / resonance split of the table's sigma_m and sigma_p,
family coefficients in ``data/hammett_rules.yaml``).

References
----------
1. D. D. Perrin, B. Dempsey, E. P. Serjeant, pKa Prediction for Organic Acids and Bases,
   Chapman & Hall, 1981.
2. C. Hansch, A. Leo, R. W. Taft, Chem. Rev. 1991, 91, 165-195.
"""
from __future__ import annotations

from dataclasses import dataclass

from .catalogue import hammett_rules, hammett_table
from .graph import MolGraph
from .substituents import describe

TABLE_SOURCE = "Hansch, Leo, Taft 1991 (hammett_hansch_leo_taft_1991.yaml)"
RULE_SOURCE = "Perrin, Dempsey, Serjeant 1981 rules (hammett_rules.yaml)"
_POS6 = {1: "ortho", 2: "meta", 3: "para"}
_POS5 = {1: "adjacent", 2: "remote"}


@dataclass(frozen=True)
class HammettTerm:
    label: str
    sigma: float
    detail: str
    source: str
    extra_uncertainty: float = 0.0


def _ring_for(g: MolGraph, anchor: int) -> tuple[int, ...] | None:
    best = None
    for k in g.atom_rings[anchor]:
        ring = g.rings[k]
        if not all(g.arom[a] for a in ring):
            continue
        key = (0 if len(ring) == 6 else 1 if len(ring) == 5 else 2, len(ring), k)
        if best is None or key < best[0]:
            best = (key, ring)
    return None if best is None else best[1]


def _ring_atom_type(g: MolGraph, a: int) -> str | None:
    z = g.z[a]
    if z == 6:
        return None
    if z == 7:
        if g.charge[a] > 0:
            return "azonia"
        if g.hs[a] or g.degree[a] == 3:
            return "aza_h"
        return "aza"
    if z == 8:
        return "oxa"
    if z == 16:
        return "thia"
    return "aza_h"


def _para_sigma(row: dict, column: str) -> tuple[float, str]:
    p = float(row["p"])
    if column == "p_minus":
        if "p_minus" in row:
            return float(row["p_minus"]), "sigma_p-"
        return p, "sigma_p"
    if column == "p_minus_n":
        if p < 0 and "p_n" in row:
            return float(row["p_n"]), "sigma_p(n)"
        if "p_minus" in row and p > 0:
            return float(row["p_minus"]), "sigma_p-"
        return p, "sigma_p"
    if column == "p_azinium":
        if p > 0:
            m = float(row["m"])
            return (m, "sigma_m (para acceptor on azinium)") if m < p else (p, "sigma_p")
        return p, "sigma_p"
    return p, "sigma_p"


def _ortho_sigma(row: dict, column: str, coef: dict) -> float:
    m = float(row["m"])
    p_col, _ = _para_sigma(row, column)
    f = 1.369 * m - 0.373 * float(row["p"]) - 0.009
    r = p_col - 0.921 * f
    return coef["a"] * f + coef["b"] * r + coef["c"]


def hammett_terms(g: MolGraph, anchor: int, match: frozenset[int], family: str,
                  skip_atoms: frozenset[int] = frozenset()) -> tuple[list[HammettTerm], list[str]]:
    """Sigma terms for the ring carrying ``anchor``.

    Parameters
    ----------
    g : MolGraph
    anchor : int
        Ring atom bearing the site (or the ring site atom itself).
    match : frozenset of int
        Atoms of the group's SMARTS match: part of the parent, not substituents.
    family : str
        Reaction family (``phenoxide``, ``anilinium``, ``benzoic``, ``azinium``, ...).

    Returns
    -------
    terms, notes
    """
    rules = hammett_rules()
    fam = rules["families"].get(family) or rules["families"]["weak"]
    table = hammett_table()
    column = fam["para"]
    notes: list[str] = []
    terms: list[HammettTerm] = []
    ring = _ring_for(g, anchor)
    if ring is None:
        notes.append("site not on an aromatic ring: parent value only")
        return terms, notes
    size = len(ring)
    i0 = ring.index(anchor)
    ring_set = set(ring)
    pos: dict[int, int] = {}
    for idx, a in enumerate(ring):
        d = abs(idx - i0)
        pos[a] = min(d, size - d)
    names = _POS6 if size == 6 else _POS5 if size == 5 else {}
    if size not in (5, 6):
        notes.append(f"{size}-membered aromatic ring: positions approximated")
    ring_rows = rules["ring_atoms"]
    fused_done: set[int] = set()
    for a in ring:
        if a == anchor:
            continue
        p = pos[a]
        pname = names.get(p, "para" if size > 6 else "remote")
        # ring heteroatom of the site ring
        if a not in match:
            rtype = _ring_atom_type(g, a)
            if rtype is not None:
                row = ring_rows[rtype]
                key = pname
                if pname == "para" and column in ("p_minus", "p_minus_n") and "para_minus" in row:
                    key = "para_minus"
                sigma = float(row.get(key, row.get("meta", 0.5)))
                terms.append(HammettTerm(f"{pname} {row['name']}", sigma,
                                         f"sigma {sigma:+.2f}", RULE_SOURCE, 0.1))
        for x, _order, ar in g.nbrs[a]:
            if x in ring_set or x in skip_atoms:
                continue
            if ar:
                for k in g.atom_rings[a]:
                    if k in fused_done or x not in g.rings[k]:
                        continue
                    fused_done.add(k)
                    terms.extend(_fused_term(g, k, ring_set, pos, size, match, fam, table, notes))
                continue
            if x in match:
                continue
            key, fallback = describe(g, x, a)
            row = table.get(key) or table["fallback"]
            # a substituent on a pyrrole-type ring N (N-alkyl azoles) acts at half strength:
            # 1-methylimidazole 7.06 vs imidazole 6.99 (Perrin 1965, from memory)
            n_sub = 0.5 if (g.z[a] == 7 and g.degree[a] == 3 and g.arom[a]) else 1.0
            if p == 1:
                sigma = _ortho_sigma(row, column, fam["ortho"])
                how = "sigma_o = a F + b R + c"
                hb = (fam.get("ortho_hbond") or {}).get(key)
                if hb:
                    sigma += float(hb)
                    how += f" + H-bond {hb}"
                extra = 0.15
            elif (size == 6 and p == 3) or (size > 6 and p >= 3):
                sigma, how = _para_sigma(row, column)
                extra = 0.0
            else:
                sigma, how = float(row["m"]), "sigma_m"
                extra = 0.0
            if fallback:
                extra += 0.3
                notes.append(f"substituent at atom {x} not in the sigma table: {row['name']}")
            if n_sub != 1.0:
                sigma *= n_sub
                how += f" x {n_sub} (on ring N)"
            terms.append(HammettTerm(f"{pname} {row['name']}", sigma,
                                     f"{how} {sigma:+.2f}", TABLE_SOURCE, extra))
    return terms, notes


def _fused_term(g: MolGraph, k: int, ring_set: set[int], pos: dict[int, int], size: int,
                match: frozenset[int], fam: dict, table: dict, notes: list[str]) -> list[HammettTerm]:
    rules = hammett_rules()
    fring = g.rings[k]
    shared = [a for a in fring if a in ring_set]
    outside = [a for a in fring if a not in ring_set]
    out: list[HammettTerm] = []
    if outside and all(a in match for a in outside):
        # the fused ring is part of the parent class (quinoline, benzimidazole ...): only
        # substituents on it count
        out.extend(_remote_terms(g, fring, ring_set, outside, match, table))
        return out
    ppos = sorted(pos[a] for a in shared) or [2]
    benzo = fam.get("benzo") or [0.1, 0.05]
    sigma = float(benzo[0] if ppos[0] <= 1 else benzo[1])
    content = rules["fused"]["content"]
    extra = 0.0
    parts = []
    scale = float(content.get("five_ring_factor", 1.0)) if len(fring) == 5 else 1.0
    for a in outside:
        rtype = _ring_atom_type(g, a)
        if rtype in content:
            sigma += scale * float(content[rtype])
            parts.append(rtype)
        if g.z[a] == 6 and g.has_double_to(a, (8,)):
            sigma += scale * float(content["oxo"])
            parts.append("oxo")
    if parts:
        extra = float(content["extra_uncertainty"])
        notes.append("fused heteroaromatic ring estimated from its contents (" + ", ".join(parts) + ")")
    out.append(HammettTerm("fused ring" + (f" ({', '.join(parts)})" if parts else " (benzo)"),
                           sigma, f"sigma {sigma:+.2f}", RULE_SOURCE, extra))
    out.extend(_remote_terms(g, fring, ring_set, outside, match, table))
    return out


def _remote_terms(g: MolGraph, fring, ring_set, outside, match, table) -> list[HammettTerm]:
    """Substituents on a fused ring: attenuated sigma_m (``remote_factor``)."""
    factor = float(hammett_rules()["remote_factor"])
    fset = set(fring)
    out: list[HammettTerm] = []
    for a in outside:
        for x, _order, ar in g.nbrs[a]:
            if x in fset or x in ring_set or x in match or ar:
                continue
            key, fallback = describe(g, x, a)
            if key in ("oxo", "thioxo"):
                continue
            row = table.get(key) or table["fallback"]
            s = float(row["m"]) * factor
            out.append(HammettTerm(f"fused-ring {row['name']}", s,
                                   f"{factor} x sigma_m {float(row['m']):+.2f}", TABLE_SOURCE,
                                   0.1 + (0.2 if fallback else 0.0)))
    return out
