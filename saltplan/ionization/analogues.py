"""Measured-analogue evidence for estimated pKa values.

For each estimated site, the most similar *measured* sites of the same group class and kind
are looked up in a reference table built from a literature compilation
(``scripts/build_pka_reference.py`` → ``data/measured_sites.npz`` + ``data/measured_sites.json``).
Similarity is the Tanimoto coefficient of a **site-rooted environment fingerprint**: the
circular (Morgan) environments of radius 0…``radius`` of every atom within ``depth`` bonds of
the site atom, each tagged with that atom's distance from the site, folded to ``bits`` bits.

* Up to three analogues are shown as steps (structure, measured value, the estimator's
  residual on it, similarity); they add nothing to the value (step value 0).
* A **correction** = similarity-weighted mean of the analogues' residuals, shrunk toward
  zero: ``c = Σ wᵢ rᵢ / (κ + Σ wᵢ)`` with ``wᵢ = ((sᵢ − s_min) / (1 − s_min))^p`` for the
  ``k`` nearest analogues (zero weight at and below ``s_min``). As similarity falls the
  weights vanish and ``c → 0``.
  ``k, p, κ, s_min`` were chosen in scaffold-grouped cross-validation
  (``scripts/fit_analogues.py`` → ``data/analogue_fit.yaml``, with provenance).
* The **uncertainty** is the estimator's own (class σ combined with its extra terms) times a
  factor of the nearest-analogue similarity and a per-class factor, both fitted in the same
  cross-validation so that 68 % of absolute errors fall within ±1σ. A site whose nearest
  analogue is below ``domain_similarity`` (or that has none) gets the note "outside the
  calibrated domain".
* An **exact match** (same InChIKey, same site) shows the compiled value with provenance
  ``"measured (literature compilation)"`` and its source line. A value the user supplies
  (``measured=``) is applied afterwards and still wins.

Nothing is loaded at import time; the table is read on first use. A missing or corrupt
table is a one-line :class:`~saltplan.errors.ParameterError` naming the file; there is no
fall-back to another method.

Reference data: measured aqueous pKa values compiled from the literature for DataWarrior,
as curated and released by K. Mansouri, N. F. Cariello, A. Korotcov et al., J. Cheminform.
2019, 11, 60 (``ATTRIBUTION``).
"""
from __future__ import annotations

import dataclasses
import functools
import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import ParameterError
from .site import Site, Step

TABLE_NPZ = "measured_sites.npz"
TABLE_JSON = "measured_sites.json"
FIT_FILE = "analogue_fit.yaml"
FORMAT = "saltplan measured-site table 1"

ATTRIBUTION = ("measured aqueous pKa values compiled from the literature for the free "
               "cheminformatics program DataWarrior, as curated and released by K. Mansouri, "
               "N. F. Cariello, A. Korotcov et al., \"Open-source QSAR models for pKa prediction "
               "using multiple machine learning approaches\", J. Cheminform. 2019, 11, 60")
SOURCE_SHORT = "literature compilation (Mansouri et al., J. Cheminform. 2019, 11, 60; DataWarrior)"
MEASURED_PROVENANCE = "measured (literature compilation)"
#: the source reports 93 % of a checked subset within ±0.3 of independent literature values
EXACT_UNCERTAINTY = 0.3
OUTSIDE_NOTE = "outside the calibrated domain"
#: default fingerprint definition (the table header records the one it was built with)
FINGERPRINT = {"radius": 2, "depth": 4, "bits": 2048}
SHOWN = 3


def _data_path(name: str) -> Path:
    return Path(__file__).resolve().parent / "data" / name


def _origin(name: str) -> str:
    return f"saltplan/ionization/data/{name}"


# --------------------------------------------------------------------------- fingerprints
@functools.lru_cache(maxsize=4)
def _generator(radius: int):
    from rdkit.Chem import rdFingerprintGenerator

    return rdFingerprintGenerator.GetMorganGenerator(radius=radius, fpSize=1 << 22)


def site_fingerprints(mol, atoms, fingerprint: dict | None = None):
    """Site-rooted environment fingerprints, one packed ``uint64`` row per atom in ``atoms``.

    The bits are the Morgan environments (radius 0 … ``radius``, RDKit default invariants)
    of every atom within ``depth`` bonds of the site, each tagged with its distance from
    the site, so that a substituent two bonds away and one four bonds away differ.
    """
    import numpy as np
    from rdkit import Chem
    from rdkit.Chem import rdFingerprintGenerator

    fpd = fingerprint or FINGERPRINT
    radius, depth, nbits = int(fpd["radius"]), int(fpd["depth"]), int(fpd["bits"])
    words = nbits // 64
    out = np.zeros((len(atoms), words), dtype=np.uint64)
    if not len(atoms):
        return out
    ao = rdFingerprintGenerator.AdditionalOutput()
    ao.AllocateAtomToBits()
    _generator(radius).GetSparseCountFingerprint(mol, additionalOutput=ao,
                                                 customAtomInvariants=_invariants(mol))
    per_atom = ao.GetAtomToBits()
    owner = np.fromiter((a for a, bits in enumerate(per_atom) for _b in bits), np.int64)
    bits = np.fromiter((b for bits in per_atom for b in bits), np.int64, len(owner))
    mixed = (bits * 0x85EBCA77) & 0xFFFFFFFFFFFF
    dist = Chem.GetDistanceMatrix(mol)
    for row, site in enumerate(atoms):
        d = dist[site][owner]
        near = d <= depth
        tagged = (mixed[near] ^ (d[near].astype(np.int64) * 0x9E3779B1)) % nbits
        flags = np.zeros(nbits, dtype=bool)
        flags[tagged] = True
        out[row] = np.packbits(flags, bitorder="little").view(np.uint64)
    return out


def _invariants(mol) -> list[int]:
    """Atom invariants: element, heavy degree, attached H, charge, aromaticity and the
    smallest ring size (so a tropolone oxygen is not a phenol oxygen)."""
    ri = mol.GetRingInfo()
    out = []
    for atom in mol.GetAtoms():
        i = atom.GetIdx()
        ring = ri.MinAtomRingSize(i) if ri.NumAtomRings(i) else 0
        out.append(((((atom.GetAtomicNum() * 8 + atom.GetDegree()) * 5 + atom.GetTotalNumHs()) * 7
                     + atom.GetFormalCharge() + 3) * 2 + atom.GetIsAromatic()) * 16 + min(ring, 15))
    return out


def _popcount(a):
    import numpy as np

    if hasattr(np, "bitwise_count"):
        return np.bitwise_count(a).sum(axis=-1, dtype=np.int64)
    table = np.array([bin(i).count("1") for i in range(256)], dtype=np.uint8)  # numpy < 2
    return table[np.ascontiguousarray(a).view(np.uint8)].sum(axis=-1, dtype=np.int64)


# --------------------------------------------------------------------------- the table
@dataclass(frozen=True)
class Analogue:
    """One measured reference site returned by a search."""

    index: int
    similarity: float
    smiles: str
    atom: int
    measured: float
    residual: float
    source: str
    inchikey: str
    scaffold: str

    def step(self, rank: int) -> Step:
        return Step(f"measured analogue {rank}", 0.0,
                    f"{self.smiles} (atom {self.atom}): measured {self.measured:.2f}, estimator "
                    f"residual (measured - estimate) {self.residual:+.2f}, similarity "
                    f"{self.similarity:.2f}",
                    f"{SOURCE_SHORT}, measured_pka.csv {self.source}")


class ReferenceTable:
    """Measured sites with their environment fingerprints, searchable by class and kind.

    Build one with :meth:`load` (the shipped table) or :meth:`from_rows` (e.g. from the fit
    folds of a cross-validation, so that a scored molecule's own scaffold group is absent).
    """

    def __init__(self, fps, measured, residual, class_keys, cls, atom, smiles, inchikey,
                 scaffold, source, header: dict | None = None):
        import numpy as np

        order = np.lexsort((np.arange(len(cls)), np.asarray(cls)))
        self.fps = np.ascontiguousarray(np.asarray(fps, dtype=np.uint64)[order])
        self.measured = np.asarray(measured, dtype=np.float64)[order]
        self.residual = np.asarray(residual, dtype=np.float64)[order]
        self.cls = np.asarray(cls, dtype=np.int64)[order]
        self.atom = np.asarray(atom, dtype=np.int64)[order]
        self.smiles = [smiles[i] for i in order]
        self.inchikey = [inchikey[i] for i in order]
        self.scaffold = [scaffold[i] for i in order]
        self.source = [source[i] for i in order]
        self.class_keys = [tuple(k) for k in class_keys]
        self.header = dict(header or {})
        self.fingerprint = dict(self.header.get("fingerprint") or FINGERPRINT)
        self.pop = _popcount(self.fps)
        self.blocks: dict[tuple[str, str], tuple[int, int]] = {}
        starts = np.searchsorted(self.cls, np.arange(len(self.class_keys) + 1))
        for i, key in enumerate(self.class_keys):
            if starts[i + 1] > starts[i]:
                self.blocks[key] = (int(starts[i]), int(starts[i + 1]))

    def __len__(self) -> int:
        return len(self.measured)

    # ------------------------------------------------------------------ construction
    @classmethod
    def from_rows(cls, rows, header: dict | None = None) -> ReferenceTable:
        """A table from row mappings with keys ``fp`` (packed uint64 row), ``group_id``,
        ``kind``, ``measured``, ``residual`` (measured − estimate), ``atom``, ``smiles``,
        ``inchikey``, ``scaffold``, ``source``."""
        import numpy as np

        rows = list(rows)
        keys: dict[tuple[str, str], int] = {}
        for r in sorted(rows, key=lambda r: (r["group_id"], r["kind"])):
            keys.setdefault((r["group_id"], r["kind"]), len(keys))
        fpd = (header or {}).get("fingerprint") or FINGERPRINT
        words = int(fpd["bits"]) // 64
        fps = (np.stack([np.asarray(r["fp"], dtype=np.uint64) for r in rows]) if rows
               else np.zeros((0, words), dtype=np.uint64))
        return cls(fps, [r["measured"] for r in rows], [r["residual"] for r in rows], list(keys),
                   [keys[(r["group_id"], r["kind"])] for r in rows], [r["atom"] for r in rows],
                   [r["smiles"] for r in rows], [r.get("inchikey", "") for r in rows],
                   [r.get("scaffold", "") for r in rows], [r.get("source", "") for r in rows],
                   header=header)

    @classmethod
    def load(cls, npz_path: Path | None = None, json_path: Path | None = None) -> ReferenceTable:
        """Read the shipped table; any problem is a one-line ParameterError naming the file."""
        import numpy as np

        npz_path = Path(npz_path or _data_path(TABLE_NPZ))
        json_path = Path(json_path or _data_path(TABLE_JSON))
        for p in (json_path, npz_path):
            if not p.is_file():
                raise ParameterError("measured-site reference table is missing (rebuild it with "
                                     "scripts/build_pka_reference.py)", file=str(p))
        try:
            text = json.loads(json_path.read_text(encoding="utf-8"))
            header = text["header"]
            if header.get("format") != FORMAT:
                raise ValueError(f"format is not '{FORMAT}'")
            cols = {k: text[k] for k in ("class_keys", "smiles", "inchikey", "scaffold", "source")}
        except (OSError, ValueError, KeyError, TypeError, AttributeError) as exc:
            raise ParameterError(f"measured-site reference table is corrupt ({_why(exc)})",
                                 file=str(json_path)) from None
        try:
            with np.load(npz_path, allow_pickle=False) as z:
                arrays = {k: z[k] for k in ("fps", "measured", "residual", "cls", "atom")}
        except Exception as exc:  # numpy / zipfile raise many types on a damaged file
            raise ParameterError(f"measured-site reference table is corrupt ({_why(exc)})",
                                 file=str(npz_path)) from None
        n = len(arrays["measured"])
        words = int(header.get("fingerprint", FINGERPRINT)["bits"]) // 64
        problems = []
        if arrays["fps"].dtype != np.uint64 or arrays["fps"].shape != (n, words):
            problems.append("fingerprint array has the wrong shape or type")
        if any(len(arrays[k]) != n for k in ("residual", "cls", "atom")) or \
                any(len(cols[k]) != n for k in ("smiles", "inchikey", "scaffold", "source")):
            problems.append("columns differ in length")
        if header.get("rows") != n:
            problems.append(f"header says {header.get('rows')} rows, arrays hold {n}")
        if n and (arrays["cls"].min() < 0 or arrays["cls"].max() >= len(cols["class_keys"])):
            problems.append("class index out of range")
        if not (np.all(np.isfinite(arrays["measured"])) and np.all(np.isfinite(arrays["residual"]))):
            problems.append("non-finite values")
        if problems:
            raise ParameterError(f"measured-site reference table is corrupt ({problems[0]})",
                                 file=str(npz_path))
        return cls(arrays["fps"], arrays["measured"], arrays["residual"], cols["class_keys"],
                   arrays["cls"], arrays["atom"], cols["smiles"], cols["inchikey"],
                   cols["scaffold"], cols["source"], header=header)

    # ------------------------------------------------------------------ search
    def search(self, group_id: str, kind: str, fp, k: int, exclude_scaffold: str | None = None):
        """The ``k`` most similar rows of the class: list of ``(index, similarity)``,
        highest similarity first (ties: lower row index first)."""
        import numpy as np

        block = self.blocks.get((group_id, kind))
        if block is None:
            return []
        lo, hi = block
        inter = _popcount(self.fps[lo:hi] & fp)
        union = self.pop[lo:hi] + int(_popcount(fp)) - inter
        sim = inter / np.maximum(union, 1)
        if exclude_scaffold is not None:
            mask = np.fromiter((s == exclude_scaffold for s in self.scaffold[lo:hi]), bool, hi - lo)
            sim = np.where(mask, -1.0, sim)
        kk = min(k, hi - lo)
        if kk <= 0:
            return []
        part = np.argpartition(-sim, kk - 1)[:kk] if kk < hi - lo else np.arange(hi - lo)
        vals = sim[part].tolist()
        pairs = sorted(zip(vals, part.tolist(), strict=True), key=lambda t: (-t[0], t[1]))
        return [(lo + i, v) for v, i in pairs if v >= 0.0]

    def analogue(self, index: int, similarity: float) -> Analogue:
        return Analogue(index, similarity, self.smiles[index], int(self.atom[index]),
                        float(self.measured[index]), float(self.residual[index]),
                        self.source[index], self.inchikey[index], self.scaffold[index])

    def evidence(self, group_id: str, kind: str, fp, fit: Fit, exclude_scaffold=None) -> Evidence:
        hits = self.search(group_id, kind, fp, max(fit.k, SHOWN), exclude_scaffold)
        used = hits[:fit.k]
        corr, weight = fit.correction([s for _i, s in used],
                                      [float(self.residual[i]) for i, _s in used])
        shown = [self.analogue(i, s) for n, (i, s) in enumerate(hits) if n < SHOWN or s >= 1.0]
        return Evidence(shown, corr, weight, hits[0][1] if hits else 0.0,
                        sum(1 for _i, s in used if s > fit.min_similarity))

    def correct(self, group_id: str, kind: str, fp, estimate: float, uncertainty: float,
                fit: Fit | None = None, exclude_scaffold=None) -> tuple[float, float, Evidence]:
        """Corrected estimate and uncertainty of one site: ``(pka, sigma, evidence)``.

        ``uncertainty`` is the estimator's own 1σ before the analogue step (it is rescaled by
        the fitted similarity and class factors)."""
        fit = fit or load_fit()
        ev = self.evidence(group_id, kind, fp, fit, exclude_scaffold)
        return estimate + ev.correction, fit.sigma(uncertainty, ev.nearest, group_id, kind), ev


def _why(exc: BaseException) -> str:
    return " ".join(str(exc).split())[:120] or type(exc).__name__


@dataclass
class Evidence:
    analogues: list[Analogue]   # the shown ones (and any identical environments)
    correction: float
    weight: float
    nearest: float
    used: int = 0


# --------------------------------------------------------------------------- fitted constants
@dataclass(frozen=True)
class Fit:
    """Kernel, shrinkage and uncertainty constants (``data/analogue_fit.yaml``)."""

    k: int = 5
    power: float = 4.0
    kappa: float = 1.0
    min_similarity: float = 0.3
    domain_similarity: float = 0.35
    clip: float = 4.0
    sim_edges: tuple[float, ...] = ()
    sim_factors: tuple[float, ...] = (1.0,)
    class_factors: dict = dataclasses.field(default_factory=dict)
    source: str = ""

    def correction(self, sims, residuals) -> tuple[float, float]:
        """``(correction, total weight)``: ``Σ w r / (κ + Σ w)`` with
        ``w = ((s − s_min) / (1 − s_min))^p`` (zero at and below ``s_min``), residuals
        clipped at ``±clip``."""
        num = den = 0.0
        span = max(1.0 - self.min_similarity, 1e-9)
        for s, r in zip(sims, residuals, strict=True):
            if s <= self.min_similarity:
                continue
            w = ((min(s, 1.0) - self.min_similarity) / span) ** self.power
            num += w * max(-self.clip, min(self.clip, r))
            den += w
        if den == 0.0:
            return 0.0, 0.0
        return num / (self.kappa + den), den

    def sim_factor(self, nearest: float) -> float:
        i = 0
        while i < len(self.sim_edges) and nearest >= self.sim_edges[i]:
            i += 1
        return self.sim_factors[min(i, len(self.sim_factors) - 1)]

    def sigma(self, base: float, nearest: float, group_id: str, kind: str) -> float:
        return base * self.sim_factor(nearest) * float(self.class_factors.get(f"{group_id}/{kind}", 1.0))

    def to_dict(self) -> dict[str, Any]:
        d = dataclasses.asdict(self)
        d["sim_edges"] = list(self.sim_edges)
        d["sim_factors"] = list(self.sim_factors)
        return d


def fit_from_dict(d: dict, source: str = "") -> Fit:
    return Fit(k=int(d["k"]), power=float(d["power"]), kappa=float(d["kappa"]),
               min_similarity=float(d["min_similarity"]),
               domain_similarity=float(d["domain_similarity"]), clip=float(d.get("clip", 4.0)),
               sim_edges=tuple(float(x) for x in d.get("sim_edges") or ()),
               sim_factors=tuple(float(x) for x in d.get("sim_factors") or (1.0,)),
               class_factors={str(k): float(v) for k, v in (d.get("class_factors") or {}).items()},
               source=source or str(d.get("source", "")))


@functools.lru_cache(maxsize=1)
def load_fit() -> Fit:
    import yaml

    path = _data_path(FIT_FILE)
    if not path.is_file():
        raise ParameterError("fitted analogue constants are missing (run scripts/fit_analogues.py)",
                             file=str(path))
    try:
        data = yaml.safe_load(path.read_text(encoding="utf-8"))
        fit = fit_from_dict(data["fit"], source=data.get("source", ""))
        if len(fit.sim_factors) != len(fit.sim_edges) + 1 or fit.k < 1 or fit.kappa < 0:
            raise ValueError("inconsistent constants")
    except (OSError, ValueError, KeyError, TypeError, AttributeError, yaml.YAMLError) as exc:
        raise ParameterError(f"fitted analogue constants are corrupt ({_why(exc)})",
                             file=str(path)) from None
    return fit


@functools.lru_cache(maxsize=1)
def shipped_table() -> ReferenceTable:
    """The shipped reference table (read once, on first use)."""
    return ReferenceTable.load()


# --------------------------------------------------------------------------- applying
def _inchikey(mol) -> str:
    from rdkit import Chem

    from ..structure import rdkit_messages

    with rdkit_messages():
        try:
            return Chem.MolToInchiKey(mol) or ""
        except Exception:  # InChI cannot represent everything; no key = no exact match
            return ""


def _letters(smiles: str) -> str:
    """The atom letters of a SMILES, sorted (equal for two drawings of one structure)."""
    return "".join(sorted(c for c in smiles if c.isalpha()))


def apply_analogues(mol, sites: list[Site], table: ReferenceTable | None = None,
                    fit: Fit | None = None, smiles: str | None = None) -> list[Site]:
    """Add measured-analogue steps, the correction and the calibrated uncertainty to each
    estimated site of ``mol`` (the standardized parent the sites were estimated on;
    ``smiles`` = its canonical SMILES, when known, saves an InChIKey for exact matches)."""
    if not sites:
        return sites
    table = table if table is not None else shipped_table()
    fit = fit or load_fit()
    fps = site_fingerprints(mol, [s.atom for s in sites], table.fingerprint)
    key: list[str] = []   # InChIKey, computed only when an identical environment is found
    out = []
    for s, fp in zip(sites, fps, strict=True):
        if s.provenance != "estimated":
            out.append(s)
            continue
        ev = table.evidence(s.group_id, s.kind, fp, fit)
        exact = None
        for a in ev.analogues:
            if a.similarity < 1.0:
                break
            if smiles is not None:
                if a.smiles == smiles:
                    exact = a
                    break
                if _letters(a.smiles) != _letters(smiles):
                    continue   # other atoms: not the same structure, no InChIKey needed
            if not key:
                key.append(_inchikey(mol))
            if key[0] and a.inchikey == key[0]:
                exact = a
                break
        steps = list(s.steps)
        shown = [a for a in ev.analogues if a is not exact][:SHOWN]
        if exact is not None:
            steps += [a.step(i + 1) for i, a in enumerate(shown)]
            steps.append(Step("measured (literature compilation)", exact.measured - s.pka,
                              f"same structure and site in the compilation: measured "
                              f"{exact.measured:.2f}; estimate was {s.pka:.2f} (residual "
                              f"{exact.residual:+.2f})",
                              f"{SOURCE_SHORT}, measured_pka.csv {exact.source}"))
            out.append(dataclasses.replace(
                s, pka=exact.measured, uncertainty=EXACT_UNCERTAINTY, steps=tuple(steps),
                provenance=MEASURED_PROVENANCE,
                source=f"{MEASURED_PROVENANCE}: {SOURCE_SHORT}, measured_pka.csv {exact.source}"))
            continue
        steps += [a.step(i + 1) for i, a in enumerate(shown)]
        sigma = fit.sigma(s.uncertainty, ev.nearest, s.group_id, s.kind)
        used = ev.used
        if ev.weight > 0.0:
            steps.append(Step("measured-analogue correction", ev.correction,
                              f"sum(w x residual) / ({fit.kappa:.2f} + sum w), w = ((similarity - "
                              f"{fit.min_similarity:.2f}) / {1 - fit.min_similarity:.2f})^"
                              f"{fit.power:g} over {used} analogue(s); sum w {ev.weight:.2f}",
                              f"saltplan analogue fit ({_origin(FIT_FILE)}); residuals from the "
                              f"{SOURCE_SHORT}"))
        if ev.nearest < fit.domain_similarity:
            where = (f"nearest measured analogue of this class has similarity {ev.nearest:.2f}"
                     if ev.analogues else "no measured analogue of this class in the reference table")
            steps.append(Step("note", 0.0, f"{OUTSIDE_NOTE}: {where} (< {fit.domain_similarity:.2f}); "
                              f"uncertainty widened to ±{sigma:.1f}", "saltplan analogue fit"))
        source = s.source
        if ev.weight > 0.0:
            source += f"; corrected by {used} measured analogue(s) ({SOURCE_SHORT})"
        out.append(dataclasses.replace(s, pka=s.pka + ev.correction, uncertainty=sigma,
                                       steps=tuple(steps), source=source))
    return out
