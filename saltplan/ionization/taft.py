"""Aliphatic (inductive) terms: Taft sigma* with attenuation through intervening bonds.

.. math:: pK_a = pK_a^0 - \\rho^* \\Big(\\sum_{\\alpha} \\sigma^*_\\alpha(X)
          + \\sum_{X} \\sigma^*(CH_2X)\\, \\gamma^{c_X - 2}\\, n_X\\Big)

Every atom of the molecule gets a type once (:func:`atom_types`); for a site, a best-path
search from its centre atom gives each atom's bond cost ``c_X`` (aromatic bonds cost less:
induction passes through aromatic rings well) and the number ``n_X`` of equally short paths
(at most 2, so the two arms of a ring both count: morpholine's oxygen is beta to N twice).
An atom in the same ring as the centre counts ``same_ring`` times more: in a ring the C-X
dipoles are held in a fixed orientation towards the site, so a field effect adds to the
through-bond induction (morpholine 8.36 vs piperidine 11.12 is a drop of 2 x 1.38, larger
than the 1.2 of an open-chain beta-oxygen; estimated from these parents).
Atoms bonded to the centre use the alpha table, atoms further away the beta table
(``sigma*(CH2X)``) attenuated by ``gamma`` per extra bond. Halogens on one carbon saturate.

References
----------
1. R. W. Taft, in Steric Effects in Organic Chemistry, Wiley 1956, ch. 13.
2. D. D. Perrin, B. Dempsey, E. P. Serjeant, pKa Prediction for Organic Acids and Bases,
   Chapman & Hall, 1981 (aliphatic amines, acids, alcohols; attenuation about 0.4-0.5 per
   bond, common practice).
"""
from __future__ import annotations

from dataclasses import dataclass

from .graph import MolGraph

SOURCE = "Taft sigma* (taft_sigma_star.yaml)"
_HAL = {9: "F", 17: "Cl", 35: "Br", 53: "I"}
_GROUP_HEADS = frozenset({"C_acid", "C_acid_ester", "C_amide", "S_sulfonyl", "S_sulfinyl"})


@dataclass(frozen=True)
class TaftTerm:
    atom: int
    type: str
    alpha: bool
    n_al: int            # aliphatic bonds on the best path
    n_ar: int            # aromatic bonds on the best path
    paths: int
    mult: float          # geminal saturation factor
    ring: bool = False   # shares a ring with the centre (held orientation, see same_ring)


def atom_types(g: MolGraph) -> list[str | None]:
    """Inductive type of each atom (None: contributes nothing by itself)."""
    out: list[str | None] = []
    for i in range(g.n):
        out.append(_type(g, i))
    return out


def _type(g: MolGraph, i: int) -> str | None:
    z = g.z[i]
    if z in _HAL:
        return _HAL[z]
    if z == 6:
        if g.arom[i]:
            return "C_ar"
        orders = [o for _j, o, _a in g.nbrs[i]]
        if 3.0 in orders:
            for j, o, _a in g.nbrs[i]:
                if o == 3.0:
                    return "C_nitrile" if g.z[j] == 7 else "C_alkyne"
        if 2.0 in orders:
            for j, o, a in g.nbrs[i]:
                if o == 2.0 and not a:
                    if g.z[j] in (8, 16):
                        het = [(g.z[k], g.hs[k]) for k, ok, _ in g.nbrs[i] if k != j and ok == 1.0]
                        if any(zk == 7 for zk, _h in het):
                            return "C_amide"
                        if any(zk == 8 and h for zk, h in het):
                            return "C_acid"
                        if any(zk == 8 for zk, _h in het):
                            return "C_acid_ester"
                        return "C_ketone"
                    if g.z[j] == 7:
                        return "C_imine"
            return "C_vinyl"
        return "C_sp3"
    if z == 7:
        if g.charge[i] > 0:
            if any(g.z[j] == 8 for j, _o, _a in g.nbrs[i]):
                return "N_nitro"
            return "N_plus"
        if g.arom[i]:
            return "n_pyrrole" if (g.hs[i] or g.degree[i] == 3) else "n_pyr"
        kinds = set()
        for j, o, a in g.nbrs[i]:
            if o == 3.0:
                return None  # nitrile N: counted with its carbon
            if o == 2.0 and not a:
                return "N_imine"
            if g.z[j] == 6:
                if g.arom[j]:
                    kinds.add("aryl")
                elif g.has_double_to(j, (8, 16)):
                    kinds.add("amide")
                elif g.has_double_to(j, (7,)):
                    kinds.add("imine")
            elif g.z[j] == 16 and g.count_double_to(j, 8):
                kinds.add("sulfonyl")
        if "sulfonyl" in kinds:
            return "N_sulfonamide"
        if "amide" in kinds:
            return "N_amide"
        if "imine" in kinds:
            return "N_imine"
        if "aryl" in kinds:
            return "N_aryl"
        return "N_amine"
    if z == 8:
        if g.arom[i]:
            return "o_ar"
        if g.charge[i] < 0 or any(o == 2.0 for _j, o, _a in g.nbrs[i]):
            return None
        if g.hs[i]:
            return "O_hydroxyl"
        for j, _o, _a in g.nbrs[i]:
            if g.arom[j] or (g.z[j] == 6 and g.has_double_to(j, (8, 16, 7))) or g.z[j] in (15, 16):
                return "O_ester_aryl"
        return "O_ether"
    if z == 16:
        if g.arom[i]:
            return "s_ar"
        n_oxo = g.count_double_to(i, 8)
        if n_oxo >= 2:
            return "S_sulfonyl"
        if n_oxo == 1:
            return "S_sulfinyl"
        if any(o == 2.0 for _j, o, _a in g.nbrs[i]):
            return None
        return "S_thioether"
    if z == 15:
        return "P"
    if z == 1:
        return None
    return "other"


def taft_terms(g: MolGraph, types: list[str | None], center: int, blocked: frozenset[int],
               aromatic_cost: float, max_cost: float, geminal: float) -> list[TaftTerm]:
    """Inductive terms seen from ``center`` (parameter-free part; weights applied later)."""
    cost, hops, paths, entry = g.shortest_costs(center, blocked, aromatic_cost, max_cost)
    n_arom = g.last_aromatic
    pred = g.last_pred
    terms: list[TaftTerm] = []
    gem_count: dict[int, int] = {}
    center_rings = set(g.atom_rings[center])
    for a in sorted(cost):
        if a == center:
            continue
        t = types[a]
        if t is None:
            continue
        # the O / N of a carboxy, ester, amide or sulfonyl group reached through its C or S
        # belongs to that group's sigma* (CH2CO2Et, CH2CONH2, CH2SO2R): not counted again
        if g.z[a] in (7, 8) and types[pred[a]] in _GROUP_HEADS:
            continue
        if t == "C_ar":
            if not entry.get(a):
                continue
            t = "C_ar_entry"
        mult = 1.0
        if t in ("F", "Cl", "Br", "I"):
            carbon = next((j for j, _o, _ar in g.nbrs[a]), None)
            if carbon is not None:
                k = gem_count.get(carbon, 0)
                gem_count[carbon] = k + 1
                mult = geminal ** k
        ring = bool(center_rings) and hops[a] >= 2 and bool(center_rings & set(g.atom_rings[a]))
        terms.append(TaftTerm(a, t, hops[a] == 1, hops[a] - n_arom[a], n_arom[a], paths[a], mult, ring))
    return terms


def taft_sum(terms: list[TaftTerm], params: dict[str, float]) -> float:
    """S = sum of sigma* contributions (see module docstring)."""
    gamma = params["gamma"]
    total = 0.0
    for t in terms:
        total += term_value(t, params, gamma)
    return total


def term_cost(t: TaftTerm, params: dict[str, float]) -> float:
    """Bond cost of the term: aliphatic bonds + c_ar x aromatic bonds."""
    return t.n_al + params["c_ar"] * t.n_ar


def term_value(t: TaftTerm, params: dict[str, float], gamma: float | None = None) -> float:
    if gamma is None:
        gamma = params["gamma"]
    if t.alpha:
        v = params.get(f"alpha:{t.type}")
        if v is None:
            return 0.0
        return v * t.mult
    cost = term_cost(t, params)
    if t.type == "C_sp3" and cost > 2.0 + 1e-9:
        return 0.0
    v = params.get(f"beta:{t.type}")
    if v is None:
        v = params.get("beta:other", 0.0)
    v = v * (gamma ** (cost - 2.0)) * t.paths * t.mult
    if t.ring and t.type != "C_sp3":   # a field effect needs a polar group (no alkyl C)
        v *= params["same_ring"]
    return v
