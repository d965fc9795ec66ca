"""A light, read-only view of a molecule's graph for the estimators.

Reading atom properties through RDKit's Python API is slow when repeated per site, so the
properties the estimators need are read once per molecule into plain lists.
"""
from __future__ import annotations

import heapq
from dataclasses import dataclass


@dataclass
class MolGraph:
    mol: object
    n: int
    z: list[int]                 # atomic number
    arom: list[bool]
    hs: list[int]                # total H count
    charge: list[int]
    degree: list[int]            # heavy-atom degree
    nbrs: list[list[tuple[int, float, bool]]]   # (neighbour, bond order, aromatic bond)
    rings: list[tuple[int, ...]]                # SSSR atom rings
    atom_rings: list[list[int]]                 # ring indices per atom
    ring_bonds: set[tuple[int, int]]
    last_aromatic: dict | None = None
    last_pred: dict | None = None

    @classmethod
    def from_mol(cls, mol) -> MolGraph:
        n = mol.GetNumAtoms()
        z, arom, hs, charge, degree = [], [], [], [], []
        for idx in range(n):
            a = mol.GetAtomWithIdx(idx)
            z.append(a.GetAtomicNum())
            arom.append(a.GetIsAromatic())
            hs.append(a.GetTotalNumHs())
            charge.append(a.GetFormalCharge())
            degree.append(a.GetDegree())
        nbrs: list[list[tuple[int, float, bool]]] = [[] for _ in range(n)]
        for bidx in range(mol.GetNumBonds()):
            b = mol.GetBondWithIdx(bidx)
            i, j = b.GetBeginAtomIdx(), b.GetEndAtomIdx()
            order = b.GetBondTypeAsDouble()
            ar = b.GetIsAromatic()
            nbrs[i].append((j, order, ar))
            nbrs[j].append((i, order, ar))
        ri = mol.GetRingInfo()
        rings = [tuple(r) for r in ri.AtomRings()]
        atom_rings: list[list[int]] = [[] for _ in range(n)]
        ring_bonds = set()
        for k, r in enumerate(rings):
            for idx, a in enumerate(r):
                atom_rings[a].append(k)
                b = r[(idx + 1) % len(r)]
                ring_bonds.add((min(a, b), max(a, b)))
        return cls(mol, n, z, arom, hs, charge, degree, nbrs, rings, atom_rings, ring_bonds)

    # ------------------------------------------------------------------ helpers
    def in_ring_bond(self, i: int, j: int) -> bool:
        return (min(i, j), max(i, j)) in self.ring_bonds

    def double_partner(self, i: int, element: int | None = None) -> int | None:
        for j, order, ar in self.nbrs[i]:
            if order == 2.0 and not ar and (element is None or self.z[j] == element):
                return j
        return None

    def has_double_to(self, i: int, elements: tuple[int, ...]) -> bool:
        return any(order == 2.0 and not ar and self.z[j] in elements for j, order, ar in self.nbrs[i])

    def count_double_to(self, i: int, element: int) -> int:
        return sum(1 for j, order, ar in self.nbrs[i] if order == 2.0 and not ar and self.z[j] == element)

    def is_sp3_carbon(self, i: int) -> bool:
        return (self.z[i] == 6 and not self.arom[i]
                and all(order == 1.0 for _j, order, _ar in self.nbrs[i]))

    def shortest_costs(self, start: int, blocked: frozenset[int] = frozenset(),
                       aromatic_cost: float = 0.5, max_cost: float = 12.0):
        """Best-path bond cost from ``start`` to every reachable atom, with path counts.

        Returns ``(cost, hops, paths, entry)`` dicts: ``cost`` weighs aromatic bonds by
        ``aromatic_cost``; ``paths`` counts equally cheap paths (capped at 2); ``entry`` is
        True for an aromatic atom reached from a non-aromatic one (first atom of a ring).
        Atoms in ``blocked`` are neither visited nor crossed. The number of aromatic bonds
        on each best path is left in ``self.last_aromatic``, each atom's predecessor on it in
        ``self.last_pred``.
        """
        cost = {start: 0.0}
        hops = {start: 0}
        paths = {start: 1}
        entry = {start: False}
        self.last_aromatic = arom_bonds = {start: 0}
        self.last_pred = pred = {start: -1}
        heap = [(0.0, 0, start)]
        done = set()
        eps = 1e-9
        while heap:
            c, h, i = heapq.heappop(heap)
            if i in done:
                continue
            done.add(i)
            for j, _order, ar in self.nbrs[i]:
                if j in blocked or j in done:
                    continue
                cj = c + (aromatic_cost if ar else 1.0)
                if cj > max_cost:
                    continue
                old = cost.get(j)
                if old is None or cj < old - eps:
                    cost[j] = cj
                    hops[j] = h + 1
                    paths[j] = paths[i]
                    arom_bonds[j] = arom_bonds[i] + (1 if ar else 0)
                    pred[j] = i
                    entry[j] = self.arom[j] and not ar
                    heapq.heappush(heap, (cj, h + 1, j))
                elif abs(cj - old) <= eps:
                    paths[j] = min(2, paths[j] + paths[i])
        return cost, hops, paths, entry
