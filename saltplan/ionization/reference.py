"""Build-time helpers for the measured-site reference table (not used at run time).

``reference_rows(csv_path, params)`` reads ``measured_pka.csv`` (the literature compilation
in ``../shared/data/pka-train/``), standardizes every structure, estimates its sites with
``params`` (no analogue step), matches each measured value to the closest returned site of
the kind the source reports (``strongest acidic`` → acid, ``strongest basic`` → base) and
returns one row per matched value with the site's class, kind, environment fingerprint,
measured value, residual (measured − estimate), parent SMILES, InChIKey, scaffold group and
a source line. Used by ``scripts/build_pka_reference.py``, ``scripts/fit_analogues.py`` and
``benchmarks/pka_accuracy.py``.
"""
from __future__ import annotations

import csv
import random
from pathlib import Path

from .analogues import FINGERPRINT, site_fingerprints

KIND_OF = {"strongest acidic": "acid", "strongest basic": "base"}
#: rows whose residual exceeds this are kept out of the reference table: at that distance
#: the value almost always belongs to another site or equilibrium than the one matched
#: (second macroscopic pKa, zwitterion, recording error), as in the calibration
#: (calibrate.OUTLIER); they still count when *scored*.
MAX_RESIDUAL = 4.0


def usable(rows):
    """The rows that may serve as reference (|residual| <= MAX_RESIDUAL)."""
    return [r for r in rows if abs(r["residual"]) <= MAX_RESIDUAL]


def scaffold_group(mol, smiles: str = "") -> str:
    """The cross-validation group of the calibration (:func:`calibrate.scaffold_group`:
    Bemis–Murcko framework; acyclic molecules by their generic chain skeleton)."""
    from .calibrate import scaffold_group as group

    return group(mol)


def read_rows(path: str | Path):
    """``(line, row dict)`` of the compilation, line = physical line in the file (header 1)."""
    with open(path, newline="", encoding="utf-8") as fh:
        yield from enumerate(csv.DictReader(fh), start=2)


def source_line(line: int, row: dict) -> str:
    parts = [f"line {line}"]
    for key in ("method", "temperature_c", "value_type"):
        v = (row.get(key) or "").strip()
        if v:
            parts.append(f"{v} °C" if key == "temperature_c" else v)
    parts.append(f"{row.get('split_in_source', '').strip() or 'no'} split in source")
    return "; ".join(parts)


def reference_rows(path: str | Path, params=None, fingerprint: dict | None = None,
                   lo: float = -1.0, hi: float = 13.0, log=None):
    """Rows of matched measured sites (see module doc) and counts of what was skipped."""
    from rdkit import Chem

    from ..errors import SaltplanError
    from ..structure import rdkit_messages, read_structure
    from . import catalogue
    from .estimate import estimate_all, evaluate, perceive

    shipped = params is None
    params = params or catalogue.parameters()
    fpd = fingerprint or FINGERPRINT
    cache: dict[str, tuple] = {}
    rows, skipped = [], {"unreadable": 0, "outside range": 0, "no site of that kind": 0,
                         "kind not given": 0}
    for line, row in read_rows(path):
        kind = KIND_OF.get((row.get("reported_as") or "").strip())
        try:
            value = float(row["pka"])
        except (KeyError, TypeError, ValueError):
            skipped["unreadable"] += 1
            continue
        if kind is None:
            skipped["kind not given"] += 1
            continue
        if not lo <= value <= hi:
            skipped["outside range"] += 1
            continue
        smi = row.get("smiles") or ""
        if smi not in cache:
            try:
                parent = read_structure(smi)
            except SaltplanError:
                cache[smi] = None
            else:
                full = estimate_all(parent.mol)   # shipped parameters, uncertainty per site
                values = ([s.pka for s in full] if shipped else
                          [v for v, _steps in evaluate(perceive(parent.mol), params)])
                sites = []
                for s, pka in zip(full, values, strict=True):
                    if (s.kind == "base" and pka >= -2.0) or (s.kind == "acid" and pka <= 16.0):
                        sites.append((s.atom, s.kind, s.group_id, float(pka), s.uncertainty))
                with rdkit_messages():
                    key = Chem.MolToInchiKey(parent.mol) or ""
                cache[smi] = (parent, sites, key, scaffold_group(parent.mol, parent.smiles))
        got = cache[smi]
        if got is None:
            skipped["unreadable"] += 1
            continue
        parent, sites, key, scaf = got
        same = [s for s in sites if s[1] == kind]
        if not same:
            skipped["no site of that kind"] += 1
            continue
        atom, _k, gid, est, unc = min(same, key=lambda s: (abs(s[3] - value), s[0]))
        rows.append({"line": line, "smiles": parent.smiles, "mol": parent.mol, "atom": atom,
                     "group_id": gid, "kind": kind, "measured": value, "estimate": est,
                     "uncertainty": unc,
                     "residual": value - est, "inchikey": key, "scaffold": scaf,
                     "source": source_line(line, row),
                     "split": (row.get("split_in_source") or "").strip()})
        if log and len(rows) % 1000 == 0:
            log(f"  {len(rows)} rows")
    # fingerprints, one call per molecule
    by_mol: dict[int, list[dict]] = {}
    for r in rows:
        by_mol.setdefault(id(r["mol"]), []).append(r)
    for group in by_mol.values():
        fps = site_fingerprints(group[0]["mol"], [r["atom"] for r in group], fpd)
        for r, fp in zip(group, fps, strict=True):
            r["fp"] = fp
    return rows, skipped


def scaffold_folds(rows, k: int = 5, seed: int = 20240501) -> list[int]:
    """Fold number per row, grouped by scaffold (deterministic; a scaffold is in one fold)."""
    groups = sorted({r["scaffold"] for r in rows})
    rng = random.Random(seed)
    rng.shuffle(groups)
    # largest groups first into the currently smallest fold (balanced, deterministic)
    size: dict[str, int] = {}
    for r in rows:
        size[r["scaffold"]] = size.get(r["scaffold"], 0) + 1
    order = sorted(groups, key=lambda g: -size[g])
    fold_of, load = {}, [0] * k
    for g in order:
        f = min(range(k), key=lambda i: (load[i], i))
        fold_of[g] = f
        load[f] += size[g]
    return [fold_of[r["scaffold"]] for r in rows]


# --------------------------------------------------------------------------- cross-validation
def cv_neighbours(rows, fold: list[int], depth: int = 12, k: int = 5):
    """Scaffold-grouped CV neighbours: for every row, the ``depth`` most similar rows of the
    same class and kind **from the other folds only** (a row's own scaffold group is
    therefore never among them). Returns ``(S, R)``, arrays ``(n, depth)`` of similarities
    (−1 = none) and residuals, highest similarity first."""
    import numpy as np

    from .analogues import ReferenceTable

    n = len(rows)
    S = np.full((n, depth), -1.0)
    R = np.zeros((n, depth))
    for f in sorted(set(fold)):
        table = ReferenceTable.from_rows(usable([r for r, ff in zip(rows, fold, strict=True) if ff != f]))
        for i, (r, ff) in enumerate(zip(rows, fold, strict=True)):
            if ff != f:
                continue
            hits = table.search(r["group_id"], r["kind"], r["fp"], depth)
            for j, (idx, sim) in enumerate(hits):
                S[i, j] = sim
                R[i, j] = table.residual[idx]
    return S, R


def kernel_correction(S, R, k: int, power: float, kappa: float, min_similarity: float,
                      clip: float):
    """Vectorised :meth:`analogues.Fit.correction` over CV neighbour arrays."""
    import numpy as np

    cols = np.arange(S.shape[1])[None, :] < k
    use = cols & (S > min_similarity)
    span = max(1.0 - min_similarity, 1e-9)
    W = np.where(use, np.clip((np.clip(S, 0.0, 1.0) - min_similarity) / span, 0.0, 1.0) ** power, 0.0)
    den = W.sum(axis=1)
    num = (W * np.clip(R, -clip, clip)).sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        c = np.where(den > 0, num / (kappa + den), 0.0)
    return c, den


# --------------------------------------------------------------------------- uncertainty factors
#: nearest-analogue similarity bins of the uncertainty factors
SIM_EDGES = (0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9)
#: share of absolute errors the 1-sigma band should hold (normal distribution: 68.3 %)
TARGET = 0.68
MIN_CLASS_FACTOR = 30   # classes (group/kind) with at least this many values get a factor


def q68(x):
    import numpy as np

    return float(np.quantile(x, TARGET)) if len(x) else 1.0


def fit_sigma(z, nearest, cls, edges=SIM_EDGES, rounds=3):
    """Similarity-bin factors (non-increasing in similarity) and class factors so that
    ``z / (f_sim * f_class)`` has its 68th percentile at 1, overall, per bin and per class."""
    import numpy as np

    z = np.asarray(z, float)
    bins = np.searchsorted(np.asarray(edges), nearest, side="right")
    nb = len(edges) + 1
    fsim = np.ones(nb)
    fcls: dict[str, float] = {}
    keys = sorted(set(cls))
    cls = np.asarray(cls)
    for _ in range(rounds):
        fc = np.array([fcls.get(c, 1.0) for c in cls])
        zz = z / fc
        overall = q68(zz)
        raw = np.array([q68(zz[bins == b]) if np.sum(bins == b) >= 30 else np.nan for b in range(nb)])
        # empty / thin bins take the neighbour's value; then non-increasing with similarity
        for b in range(nb):
            if np.isnan(raw[b]):
                raw[b] = raw[b - 1] if b and not np.isnan(raw[b - 1]) else overall
        for b in range(nb - 2, -1, -1):
            raw[b] = max(raw[b], raw[b + 1])
        fsim = raw
        zs = z / fsim[bins]
        fcls = {}
        for c in keys:
            m = cls == c
            if m.sum() >= MIN_CLASS_FACTOR:
                fcls[c] = q68(zs[m])
    return fsim, fcls
