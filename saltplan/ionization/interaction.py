"""Macroscopic pKa values of a multiprotic molecule from its sites' intrinsic values.

Sequential model (after Perrin, Dempsey, Serjeant 1981, ch. 5): start from the fully
protonated molecule (bases +1, acids neutral). Repeatedly, every remaining site gets an
effective pKa = intrinsic value + the electrostatic shift from the charges present now;
the site with the lowest effective value loses its proton first (its value is recorded),
its charge changes (base +1 -> 0, acid 0 -> -1), and the others are re-evaluated.

* A positive charge nearby lowers a site's pKa (piperazine's second N: 9.7 -> 5.4; a
  zwitterion's carboxylic acid next to an ammonium), a negative charge raises it (a
  diacid's second pKa; the ammonium of an amino acid after the carboxylate has formed).
* The shift is ``-s_i * k * q_j * W(c_ij) * (1 + b (n_ij - 1))`` with
  ``W(c) = w0 * gq^(c - 3) + w1 / c``: a through-bond term that decays per bond plus a slow
  electrostatic tail; ``c`` is the bond cost between the two centres, ``n`` the number of
  equally short paths (two in piperazine), ``s_i`` the site's sensitivity (acids about half
  of amines, like their Taft rho*) and ``k`` a factor per pair type (base next to a cation,
  base next to an anion, acid next to a cation, acid next to an anion): the intrinsic values
  keep the inductive effect of the neighbour's neutral form, so e.g. an amine next to a
  carboxylate is raised less than the bare electrostatics suggest (glycine 9.6).
* Two ionizations on the same centre (phosphonic acids) use the group's ``same_center``
  shift instead.
* Symmetry-equivalent sites get the statistical term ``log10(j / (k - j + 1))`` for the j-th
  of k equivalent sites to lose its proton (two equivalent sites: -0.30 then +0.30).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

SOURCE = "site interaction (site_interaction.yaml)"


@dataclass
class Pair:
    cost: float
    paths: int
    same_center: bool


def pair_weight(pair: Pair, params: dict[str, float]) -> float:
    c = max(pair.cost, 1.0)
    w = params["int:w0"] * params["int:gq"] ** (c - 3.0) + params["int:w1"] / c
    return w * (1.0 + params["int:paths_bonus"] * (pair.paths - 1))


def sequence(kinds: list[str], intrinsic: list[float], sens: list[float],
             pairs: dict[tuple[int, int], Pair], same_shift: list[float | None],
             sym: list[int], params: dict[str, float], explain: bool = False,
             atoms: list[int] | None = None):
    """Return ``(values, details)``: macroscopic pKa per site and, if ``explain``, a list of
    ``(label, value, detail)`` per site describing the shifts."""
    n = len(kinds)
    q = [1 if k == "base" else 0 for k in kinds]
    remaining = list(range(n))
    values = [0.0] * n
    details: list[list[tuple[str, float, str]]] = [[] for _ in range(n)]
    sym_size: dict[int, int] = {}
    for s in sym:
        sym_size[s] = sym_size.get(s, 0) + 1
    sym_done: dict[int, int] = {}
    kmult = {("base", True): params["int:k_base_cation"], ("base", False): params["int:k_base_anion"],
             ("acid", True): params["int:k_acid_cation"], ("acid", False): params["int:k_acid_anion"]}
    weights: dict[tuple[int, int], float] = {}
    for key, pair in pairs.items():
        if not pair.same_center:
            weights[key] = pair_weight(pair, params)
    while remaining:
        best = None
        for i in remaining:
            shift = 0.0
            for j in range(n):
                if j == i or q[j] == 0:
                    continue
                key = (min(i, j), max(i, j))
                pair = pairs.get(key)
                if pair is None:
                    continue
                if pair.same_center:
                    shift += -q[j] * (same_shift[i] or 0.0)
                else:
                    shift += -sens[i] * q[j] * weights[key] * kmult[(kinds[i], q[j] > 0)]
            k = sym_size[sym[i]]
            jth = sym_done.get(sym[i], 0) + 1
            stat = math.log10(jth / (k - jth + 1)) if k > 1 else 0.0
            eff = intrinsic[i] + shift + stat
            cand = (eff, i)
            if best is None or cand < best[0]:
                best = (cand, shift, stat)
        (eff, i), shift, stat = best
        values[i] = eff
        small = 0.0
        if explain:
            for j in range(n):
                if j == i or q[j] == 0:
                    continue
                key = (min(i, j), max(i, j))
                pair = pairs.get(key)
                if pair is None:
                    continue
                if pair.same_center:
                    v = -q[j] * (same_shift[i] or 0.0)
                    det = "second ionization on the same centre"
                else:
                    v = -sens[i] * q[j] * weights[key] * kmult[(kinds[i], q[j] > 0)]
                    det = (f"charge {q[j]:+d} at {pair.cost:g} bonds"
                           f"{' (2 paths)' if pair.paths > 1 else ''}, sensitivity {sens[i]:.2f}")
                if abs(v) >= 0.005:
                    details[i].append((f"charge at atom {atoms[j] if atoms else j}", v, det))
                else:
                    small += v
            if small != 0.0:
                details[i].append(("further distant charges", small, "sum of shifts < 0.005 each"))
            if stat:
                details[i].append(("statistical factor", stat,
                                   f"{jth} of {k} equivalent sites: log10({jth}/{k - jth + 1})"))
        sym_done[sym[i]] = sym_done.get(sym[i], 0) + 1
        q[i] = 0 if kinds[i] == "base" else -1
        remaining.remove(i)
    return values, details
