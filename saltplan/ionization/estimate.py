"""The pKa estimator: find the ionizable sites of a parent and estimate each pKa.

Two stages, so that calibration (``scripts/fit_pka.py``) can re-evaluate quickly:

1. :func:`perceive` — match the catalogue, and for each site collect the parameter-free
   description: Hammett sigma terms (aromatic sites), Taft terms (aliphatic sites), the
   bond costs between sites, symmetry classes, notes.
2. :func:`evaluate` — apply the parameters (parent pKa, rho, sigma*, attenuation,
   interaction) and run the macroscopic sequence (:mod:`.interaction`).

:func:`ionizable_sites` runs both with the shipped parameters, applies measured values and
returns :class:`~saltplan.ionization.site.Site` objects.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass, field

from . import catalogue
from .catalogue import Group
from .graph import MolGraph
from .hammett import HammettTerm, hammett_terms
from .interaction import SOURCE as INTERACTION_SOURCE
from .interaction import Pair, sequence
from .site import PermanentCharge, Site, Step
from .taft import SOURCE as TAFT_SOURCE
from .taft import TaftTerm, atom_types, taft_terms, term_cost, term_value

#: sites outside this window are not returned (DEVELOPERS.md: base pKa < -2, acid pKa > 16)
BASE_MIN = -2.0
ACID_MAX = 16.0

_AMIDINE_LIKE = ("[NX3]-c:[nX2]", "[NX3]-c:c:c:[nX2;r6]")
_PERMANENT = (
    ("[N+;X4;H0;!$([N+]~[O-])]", "quaternary ammonium", "quaternary_ammonium", 1),
    ("[n+;X3;H0;!$([n+]-[O-])]", "N-substituted azinium / azolium", "azinium_permanent", 1),
    ("[P+;X4;H0]", "phosphonium", "phosphonium", 1),
    ("[S+;X3;H0;!$([S+]-[O-])]", "sulfonium", "sulfonium", 1),
)


@dataclass
class SiteRecord:
    atom: int
    group: Group
    center: int
    match: frozenset[int]
    hammett: list[HammettTerm] = field(default_factory=list)
    taft: list[TaftTerm] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    extra_uncertainty: float = 0.0
    sym: int = 0
    blocked: frozenset[int] = frozenset()


@dataclass
class Perception:
    records: list[SiteRecord]
    pairs: dict[tuple[int, int], Pair]
    types: list[str | None]


@functools.lru_cache(maxsize=1)
def _aux_patterns():
    from rdkit import Chem

    amidine_like = tuple(Chem.MolFromSmarts(s) for s in _AMIDINE_LIKE)
    permanent = tuple((Chem.MolFromSmarts(s), name, gid, q) for s, name, gid, q in _PERMANENT)
    return amidine_like, permanent


@functools.lru_cache(maxsize=1)
def _group_order() -> dict[str, int]:
    return {grp.id: i for i, grp in enumerate(catalogue.groups())}


def _matched_atoms(mol, pattern) -> set[int]:
    return {m[0] for m in mol.GetSubstructMatches(pattern)}


def perceive(mol) -> Perception:
    """Find sites in an RDKit molecule (a standardized parent) and describe them."""
    from rdkit import Chem

    params = catalogue.parameters()
    g = MolGraph.from_mol(mol)
    types = atom_types(g)
    amidine_like_pats, _ = _aux_patterns()
    amidine_like: set[int] | None = None
    claimed: set[int] = set()
    centers_once: set[tuple[str, int]] = set()
    records: list[SiteRecord] = []
    taft_cfg = catalogue.taft_table()
    present = set(g.z)
    for grp in catalogue.groups():
        if not grp.requires <= present:
            continue
        matches = [m for pat in grp.patterns
                   for m in mol.GetSubstructMatches(pat, uniquify=False, maxMatches=1000)]
        if not matches:
            continue
        for m in matches:
            atom = m[grp.site]
            if atom in claimed:
                continue
            center = m[grp.center] if grp.center is not None else atom
            if grp.one_per_center:
                if (grp.id, center) in centers_once:
                    continue
            if grp.exclude_amidine_like:
                if amidine_like is None:
                    amidine_like = set()
                    for p in amidine_like_pats:
                        amidine_like |= _matched_atoms(mol, p)
                if atom in amidine_like:
                    continue
            if grp.require_aryl and not any(
                    g.z[a] == 7 and any(g.arom[j] for j, _o, _ar in g.nbrs[a]) for a in m):
                continue
            if any(m[i] in claimed for i in grp.claims):
                continue
            claimed.add(atom)
            claimed.update(m[i] for i in grp.claims)
            centers_once.add((grp.id, center))
            match = frozenset(m)
            rec = SiteRecord(atom=atom, group=grp, center=center, match=match)
            if grp.model == "hammett":
                anchor = m[grp.anchor]
                rec.hammett, rec.notes = hammett_terms(g, anchor, match, grp.family or "weak")
                rec.extra_uncertainty = math.sqrt(sum(t.extra_uncertainty ** 2 for t in rec.hammett))
                if grp.taft_too:
                    # the aliphatic side of an N-alkyl aniline: the aryl ring is blocked
                    ring = next((r for r in g.rings if anchor in r), (anchor,))
                    blocked = frozenset(ring) | frozenset(a for a in match if a not in (center, anchor)
                                                          and g.z[a] != 6)
                    rec.taft = taft_terms(g, types, center, blocked, params["c_ar"],
                                          float(taft_cfg["max_cost"]), params["geminal"])
            elif grp.model == "taft":
                blocked = frozenset(a for a in match if g.z[a] not in (6, 1) and a != center)
                rec.taft = taft_terms(g, types, center, blocked, params["c_ar"],
                                      float(taft_cfg["max_cost"]), params["geminal"])
                rec.blocked = blocked
            records.append(rec)
    records.sort(key=lambda r: r.atom)
    pairs: dict[tuple[int, int], Pair] = {}
    if len(records) > 1:
        ranks = list(Chem.CanonicalRankAtoms(mol, breakTies=False))
        for r in records:
            r.sym = ranks[r.atom] * 1000 + _group_order()[r.group.id]
        max_cost = float(catalogue.interaction_table()["max_cost"])
        for i, ri in enumerate(records):
            if i + 1 == len(records):
                break
            cost, _hops, paths, _entry = g.shortest_costs(ri.center, frozenset(), params["c_ar"], max_cost)
            for j in range(i + 1, len(records)):
                rj = records[j]
                if rj.center == ri.center:
                    pairs[(i, j)] = Pair(0.0, 1, True)
                elif rj.center in cost:
                    pairs[(i, j)] = Pair(cost[rj.center], paths[rj.center], False)
    else:
        for i, r in enumerate(records):
            r.sym = i
    return Perception(records, pairs, types)


# --------------------------------------------------------------------------- evaluation
def intrinsic(rec: SiteRecord, params: dict[str, float], explain: bool = False):
    """Intrinsic pKa of one site (no charges elsewhere) and its steps."""
    grp = rec.group
    pka0 = params[f"pka0:{grp.id}"]
    steps: list[Step] = []
    fit_note = " (fitted)" if catalogue.is_fitted(f"pka0:{grp.id}") else ""
    if explain:
        steps.append(Step("parent", pka0, grp.name + fit_note, grp.source))
    value = pka0
    if grp.model == "hammett":
        rho = params[f"rho:{grp.id}"]
        for t in rec.hammett:
            d = -rho * t.sigma
            value += d
            if explain:
                steps.append(Step(t.label, d, f"-{rho:.2f} x {t.detail}", t.source))
    if grp.model == "taft" or grp.taft_too:
        rho = params[f"rho:{grp.id}"] if grp.model == "taft" else params[f"rhot:{grp.id}"]
        gamma = params["gamma"]
        small = 0.0
        for t in rec.taft:
            v = term_value(t, params, gamma)
            if v == 0.0:
                continue
            d = -rho * v
            value += d
            if not explain:
                continue
            if abs(d) < 0.05:
                small += d
                continue
            row = (catalogue.taft_table()["alpha" if t.alpha else "beta"]).get(t.type) or {}
            cost = term_cost(t, params)
            where = "alpha" if t.alpha else f"{cost:.3g} bonds"
            detail = (f"-{rho:.2f} x sigma* {v:+.2f}" if t.alpha else
                      f"-{rho:.2f} x {params.get('beta:' + t.type, 0):+.2f} x {gamma:.2f}^{cost - 2:.3g}"
                      + (f" x {t.paths} paths" if t.paths > 1 else "")
                      + (f" x {t.mult:.2f} geminal" if t.mult != 1.0 else "")
                      + (f" x {params['same_ring']:.2f} same ring" if t.ring and t.type != "C_sp3" else ""))
            steps.append(Step(f"{row.get('name', t.type)} at atom {t.atom} ({where})", d, detail,
                              TAFT_SOURCE))
        if explain and small != 0.0:
            steps.append(Step("further inductive contributions", small, "sum of terms < 0.05 each",
                              TAFT_SOURCE))
    if explain:
        for note in rec.notes:
            steps.append(Step("note", 0.0, note, "saltplan fallback rule"))
    return value, steps


def evaluate(perc: Perception, params: dict[str, float], explain: bool = False):
    """Macroscopic pKa of every perceived site: list of ``(pka, steps)``."""
    recs = perc.records
    if not recs:
        return []
    intr, steps = [], []
    for r in recs:
        v, s = intrinsic(r, params, explain)
        intr.append(v)
        steps.append(s)
    if len(recs) == 1:
        return [(intr[0], steps[0])]
    values, details = sequence(
        [r.group.kind for r in recs], intr, [params[f"sens:{r.group.id}"] for r in recs],
        perc.pairs, [r.group.same_center for r in recs], [r.sym for r in recs], params,
        explain=explain, atoms=[r.atom for r in recs])
    out = []
    for i in range(len(recs)):
        s = steps[i]
        if explain:
            s = s + [Step(label, v, det, INTERACTION_SOURCE) for label, v, det in details[i]]
        out.append((values[i], s))
    return out


# --------------------------------------------------------------------------- public API
def _parent(mol_or_smiles):
    from ..structure import read_structure

    return read_structure(mol_or_smiles)


def estimate_all(mol) -> list[Site]:
    """All perceived sites of an RDKit parent molecule, unfiltered, estimated."""
    params = catalogue.parameters()
    perc = perceive(mol)
    results = evaluate(perc, params, explain=True)
    unc = catalogue.class_uncertainty()
    fitted = catalogue.fitted_source()
    sites = []
    for rec, (pka, steps) in zip(perc.records, results, strict=True):
        grp = rec.group
        u = math.sqrt(unc[grp.id] ** 2 + rec.extra_uncertainty ** 2)
        shift = sum(s.value for s in steps if s.source == INTERACTION_SOURCE)
        if abs(shift) > 2.0:
            u = math.sqrt(u ** 2 + 0.3 ** 2)
        model = {"hammett": "Hammett", "taft": "Taft", "fixed": "class value"}[grp.model]
        source = f"estimated: {grp.name} ({model}); {grp.source}"
        if fitted:
            source += f"; parameters {fitted}"
        sites.append(Site(atom=rec.atom, kind=grp.kind, pka=float(pka), uncertainty=float(u),
                          group=grp.name, group_id=grp.id, steps=tuple(steps),
                          provenance="estimated", source=source))
    return sites


def in_window(site: Site) -> bool:
    return site.pka >= BASE_MIN if site.kind == "base" else site.pka <= ACID_MAX


def ionizable_sites(mol_or_smiles, measured=None, analogues: bool = True) -> list[Site]:
    """Ionizable sites of a structure with estimated (or measured) pKa values.

    Parameters
    ----------
    mol_or_smiles : str, rdkit.Chem.Mol or saltplan.structure.Parent
        Standardized first with :func:`saltplan.structure.read_structure`; atom indices
        refer to ``Parent.mol``.
    measured : mapping or sequence, optional
        Measured pKa values that replace estimates: ``{atom_index: pKa}``,
        ``{group_id: pKa}``, ``{"acid" | "base": pKa}`` (most acidic / most basic site), a
        sequence of floats (each replaces the estimated site closest to it), or a sequence
        of ``(selector, pKa)`` pairs as returned by :func:`parse_measured`.
    analogues : bool
        Apply the measured-analogue step (:mod:`.analogues`: nearest measured sites,
        correction, calibrated uncertainty, exact literature matches). ``False`` gives the
        estimator alone (used to test the LFER rules themselves).

    Returns
    -------
    list of Site
        Sorted by atom index. Sites too weak to matter (base pKa < -2, acid pKa > 16) are
        omitted; ``Site.salt_relevant`` tells which can form salts. No site -> ``[]``.

    Raises
    ------
    StructureError
        The structure cannot be read.
    ParameterError
        A measured value names an atom that is not a site, an unknown group, or a pKa
        outside -5 ... 20.

    Examples
    --------
    >>> [round(s.pka, 1) for s in ionizable_sites("CC(=O)O")]   # acetic acid, CRC 4.76
    [4.8]
    """
    from .measured import apply_measured

    parent = _parent(mol_or_smiles)
    sites = estimate_all(parent.mol)
    if analogues:
        from .analogues import apply_analogues

        sites = apply_analogues(parent.mol, sites, smiles=parent.smiles)
    if measured:
        sites = apply_measured(sites, measured)
    return [s for s in sites if in_window(s) or s.provenance == "measured"]


def permanent_charges(mol_or_smiles) -> list[PermanentCharge]:
    """Permanently charged atoms (quaternary ammonium and similar): no pKa, always charged."""
    parent = _parent(mol_or_smiles)
    _, patterns = _aux_patterns()
    out, seen = [], set()
    for pat, name, gid, q in patterns:
        for m in parent.mol.GetSubstructMatches(pat):
            if m[0] not in seen:
                seen.add(m[0])
                out.append(PermanentCharge(atom=m[0], charge=q, group=name, group_id=gid))
    return sorted(out, key=lambda p: p.atom)
