"""Least-squares calibration of the estimator's parameters against measured pKa values.

Used by ``scripts/fit_pka.py`` (writes ``data/fitted_pka.yaml``) and by
``benchmarks/pka_accuracy.py`` (5-fold cross-validation split by molecule).

Method: robust (Huber) Levenberg-Marquardt on the residuals "closest estimated site minus
measured value", plus a ridge term per parameter pulling it toward its published (prior)
value: ``sqrt(lam) * (theta - prior) / scale``. Only a modest set is fitted: parent values
and rho of classes with enough data, the sigma* of inductive atom types, the attenuation
gamma, and the interaction factors. Numbers only use numpy.
"""
from __future__ import annotations

import csv
import math
import random
from dataclasses import dataclass, field
from pathlib import Path

from . import catalogue
from .estimate import ACID_MAX, BASE_MIN, Perception, evaluate, perceive

#: ridge strength and prior scales by parameter family
LAMBDA = 2.0
SCALES = {"pka0": 0.7, "rho": 0.35, "beta": 0.35, "alpha": 0.5, "gamma": 0.08, "int": 0.1,
          "same_ring": 0.1, "c_ar": 0.1}
#: parameters whose prior was set from textbook parents (kept close) or is a pure guess (free)
TIGHT = {"beta:C_acid": 0.15, "int:k_base_anion": 0.15}
HUBER = 1.0
OUTLIER = 4.0          # residuals beyond this are treated as unassignable (weight ~0)


@dataclass
class Entry:
    """One standardized molecule with its measured values (parallel lists, sorted by value).

    ``kinds[i]`` is ``"acid"``, ``"base"`` or ``None`` (any kind: the development set does
    not say); ``origins[i]`` is the data set (``"train"`` = pka-train compilation, ``"dev"``
    = pka-dev literature set); ``splits[i]`` the source's own split (``"train"`` /
    ``"test"``; ``"dev"`` for the development set). ``scaffold`` is the CV group id
    (:func:`scaffold_group`)."""

    smiles: str
    perc: Perception
    measured: list[float]
    kinds: list[str | None] = field(default_factory=list)
    origins: list[str] = field(default_factory=list)
    splits: list[str] = field(default_factory=list)
    scaffold: str = ""
    mol: object = None       # the standardized parent the records' atom indices refer to

    def __post_init__(self):
        n = len(self.measured)
        if not self.kinds:
            self.kinds = [None] * n
        if not self.origins:
            self.origins = ["dev"] * n
        if not self.splits:
            self.splits = ["dev"] * n

    def subset(self, keep) -> Entry | None:
        """The same molecule with only the values for which ``keep(i)`` is true (or None)."""
        idx = [i for i in range(len(self.measured)) if keep(i)]
        if not idx:
            return None
        return Entry(self.smiles, self.perc, [self.measured[i] for i in idx],
                     [self.kinds[i] for i in idx], [self.origins[i] for i in idx],
                     [self.splits[i] for i in idx], self.scaffold, self.mol)


#: "reported_as" of the pka-train compilation -> site kind
_REPORTED = {"strongest acidic": "acid", "strongest basic": "base"}
#: values of the calibration file used for fitting and scoring (issue 13: -1 ... 13)
TRAIN_RANGE = (-1.0, 13.0)


def read_dataset(path: str | Path) -> list[tuple[str, list[float]]]:
    """Rows ``smiles, pka, ...`` grouped by SMILES (first-seen order)."""
    groups: dict[str, list[float]] = {}
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            try:
                v = float(row["pka"])
            except (KeyError, ValueError):
                continue
            groups.setdefault(row["smiles"], []).append(v)
    return list(groups.items())


def read_values(path: str | Path, origin: str, value_range: tuple[float, float] | None = None):
    """Rows grouped by SMILES as ``(smiles, [(value, kind, origin, split), ...])``.

    ``kind`` comes from the ``reported_as`` column when there is one (pka-train), else
    None; ``split`` from ``split_in_source`` (else ``origin``). Values outside
    ``value_range`` are skipped."""
    groups: dict[str, list[tuple]] = {}
    with open(path, newline="", encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            try:
                v = float(row["pka"])
            except (KeyError, ValueError):
                continue
            if value_range and not (value_range[0] <= v <= value_range[1]):
                continue
            kind = _REPORTED.get((row.get("reported_as") or "").strip())
            split = (row.get("split_in_source") or origin).strip()
            groups.setdefault(row["smiles"], []).append((v, kind, origin, split))
    return list(groups.items())


def scaffold_group(mol) -> str:
    """Cross-validation group of a molecule: its Bemis-Murcko framework.

    Ring systems with their linkers (RDKit ``MurckoScaffold``), canonical SMILES, so that
    every molecule sharing a framework lands in the same fold. Acyclic molecules have no
    framework; they are grouped by their generic skeleton (all heavy atoms as carbon, all
    bonds single: butanoic acid, butylamine and butanol share "CCCC(C)" ... ), which keeps
    homologous variants of one chain shape together."""
    from rdkit import Chem
    from rdkit.Chem.Scaffolds import MurckoScaffold

    if mol.GetRingInfo().NumRings():
        core = MurckoScaffold.GetScaffoldForMol(mol)
        return "ring:" + Chem.MolToSmiles(core)
    generic = MurckoScaffold.MakeScaffoldGeneric(Chem.RWMol(mol))
    return "chain:" + Chem.MolToSmiles(generic)


def prepare(rows) -> tuple[list[Entry], list[str]]:
    """Standardize and perceive each molecule once; returns entries and failures.

    ``rows``: ``(smiles, values)`` where each value is a float or a
    ``(value, kind, origin, split)`` tuple (:func:`read_values`). Different drawings of one
    standardized parent (also across data sets) are merged into one entry."""
    from ..errors import SaltplanError
    from ..structure import read_structure

    failed: list[str] = []
    merged: dict[str, tuple[object, list[tuple]]] = {}
    for smi, values in rows:
        try:
            parent = read_structure(smi)
        except SaltplanError:
            failed.append(smi)
            continue
        mol, vals = merged.setdefault(parent.smiles, (parent.mol, []))
        for v in values:
            vals.append(v if isinstance(v, tuple) else (float(v), None, "dev", "dev"))
    entries = []
    for smi, (mol, vals) in merged.items():
        vals.sort(key=lambda t: (t[0], t[1] or "", t[2], t[3]))
        entries.append(Entry(smi, perceive(mol), [t[0] for t in vals], [t[1] for t in vals],
                             [t[2] for t in vals], [t[3] for t in vals], scaffold_group(mol),
                             mol))
    return entries, failed


def load_calibration_sets(train_path=None, dev_path=None, train_range=TRAIN_RANGE):
    """Entries of both shared data sets together (pka-train values in ``train_range``)."""
    root = Path(__file__).resolve().parents[2].parent / "shared" / "data"
    train_path = Path(train_path or root / "pka-train" / "measured_pka.csv")
    dev_path = Path(dev_path or root / "pka-dev" / "literature_pka.csv")
    rows = []
    if train_path.is_file():
        rows += read_values(train_path, "train", train_range)
    if dev_path.is_file():
        rows += read_values(dev_path, "dev")
    return prepare(rows)


def predict(entry: Entry, params) -> list[tuple[float, str, str]]:
    """``(pka, kind, group_id)`` of the sites that would be returned (window applied)."""
    out = []
    for rec, (pka, _steps) in zip(entry.perc.records, evaluate(entry.perc, params), strict=True):
        kind = rec.group.kind
        if (kind == "base" and pka >= BASE_MIN) or (kind == "acid" and pka <= ACID_MAX):
            out.append((pka, kind, rec.group.id))
    return out


def predict_all(entry: Entry, params) -> list[float]:
    """pKa of every perceived site (no window), in record order."""
    return [pka for pka, _steps in evaluate(entry.perc, params)]


def _shown(entry: Entry, values) -> list[int]:
    return [i for i, rec in enumerate(entry.perc.records)
            if (rec.group.kind == "base" and values[i] >= BASE_MIN)
            or (rec.group.kind == "acid" and values[i] <= ACID_MAX)]


def _closest(entry: Entry, values, shown, v, kind):
    cand = [i for i in shown if kind is None or entry.perc.records[i].group.kind == kind]
    if not cand:
        return None
    return min(cand, key=lambda k: (abs(values[k] - v), k))


def assign(entry: Entry, params) -> list[tuple[float, int | None, float | None]]:
    """For each measured value: (value, record index of the closest returned site of the
    right kind, estimate); ``(value, None, None)`` when the molecule has no such site.

    The index refers to ``entry.perc.records`` (not to the windowed list), so residuals stay
    continuous when a site crosses the reporting window during the fit."""
    values = predict_all(entry, params)
    shown = _shown(entry, values)
    res = []
    for v, kind in zip(entry.measured, entry.kinds, strict=True):
        i = _closest(entry, values, shown, v, kind)
        res.append((v, None, None) if i is None else (v, i, values[i]))
    return res


@dataclass(frozen=True)
class SiteResidual:
    """One measured value scored against the estimator (:func:`site_residuals`)."""

    smiles: str              # standardized parent (Entry.smiles)
    atom: int | None         # site atom in the parent (None: no site of the right kind)
    group_id: str | None     # catalogue group of that site
    kind: str | None         # kind of the measured value ("acid" / "base"; None = any)
    measured: float
    estimated: float | None  # macroscopic estimate of that site with ``params``
    scaffold: str            # CV group (Bemis-Murcko framework, :func:`scaffold_group`)
    origin: str = "dev"      # data set: "train" (pka-train) or "dev" (pka-dev)
    split: str = "dev"       # the source's own split: "train" / "test" ("dev" for pka-dev)

    @property
    def residual(self) -> float | None:
        return None if self.estimated is None else self.estimated - self.measured


def site_residuals(entries: list[Entry], params) -> list[SiteResidual]:
    """Per measured value: molecule, matched site, group, kind, measured, estimated, scaffold.

    ``params`` is a parameter dict (e.g. ``catalogue.parameters()`` or a CV fold's fit) or a
    callable ``params(entry) -> dict`` (so a cross-validation can score each entry with the
    parameters of the folds that did not see it). Each value is matched to the closest
    returned site of the right kind (any kind for values without one), exactly as the fit
    and the benchmark do. Values whose molecule has no site of that kind come back with
    ``atom``, ``group_id`` and ``estimated`` set to None. Deterministic order: entries in
    the given order, values in ascending order within an entry."""
    out = []
    for e in entries:
        p = params(e) if callable(params) else params
        for (v, i, est), kind, origin, split in zip(assign(e, p), e.kinds, e.origins, e.splits, strict=True):
            rec = e.perc.records[i] if i is not None else None
            out.append(SiteResidual(e.smiles, rec.atom if rec else None,
                                    rec.group.id if rec else None, kind, v,
                                    None if est is None else float(est), e.scaffold,
                                    origin, split))
    return out


# --------------------------------------------------------------------------- metrics
def metrics(entries: list[Entry], params_for) -> dict:
    """Benchmark metrics. ``params_for(entry)`` gives the parameters to use (CV folds).

    ``mae``, ``rmse`` and ``frac_off_2`` are over the values that have a site of the right
    kind; ``frac_no_site`` is the share of values without one (counted apart, not hidden
    in the MAE). ``per_class``: ``group_id -> (n, MAE, RMSE)`` of the matched values."""
    extra_mols = 0
    for e in entries:
        sites = predict(e, params_for(e))
        if sum(1 for s in sites if 2.0 <= s[0] <= 12.0) > len(e.measured) + 1:
            extra_mols += 1
    return summarize(site_residuals(entries, params_for), extra_mols, len(entries))


def summarize(rows: list[SiteResidual], extra_mols: int = 0, molecules: int | None = None) -> dict:
    """MAE / RMSE / off-by-2 / no-site share / per-class figures of residual rows."""
    errs = [r.residual for r in rows if r.residual is not None]
    per_class: dict[str, list[float]] = {}
    for r in rows:
        if r.residual is not None:
            per_class.setdefault(r.group_id, []).append(r.residual)
    n, total = len(errs), len(rows)
    nan = float("nan")
    return {
        "values": total,
        "molecules": molecules if molecules is not None else len({r.smiles for r in rows}),
        "mae": sum(abs(x) for x in errs) / n if n else nan,
        "rmse": math.sqrt(sum(x * x for x in errs) / n) if n else nan,
        "frac_off_2": sum(1 for x in errs if abs(x) > 2.0) / n if n else nan,
        "values_without_site": total - n,
        "frac_no_site": (total - n) / total if total else nan,
        "frac_mol_extra_sites": extra_mols / molecules if molecules else nan,
        "per_class": {k: (len(v), sum(abs(x) for x in v) / len(v),
                          math.sqrt(sum(x * x for x in v) / len(v)))
                      for k, v in sorted(per_class.items())},
    }


# --------------------------------------------------------------------------- fitting
def _family(key: str) -> str:
    return key.split(":", 1)[0]


def choose_parameters(entries: list[Entry], prior: dict[str, float]) -> list[str]:
    """Parameters with enough data behind them (deterministic order)."""
    counts: dict[str, int] = {}
    for e in entries:
        for a in assign(e, prior):
            if a[1] is None or abs(a[2] - a[0]) > OUTLIER:
                continue
        for rec in e.perc.records:
            g = rec.group
            counts[f"pka0:{g.id}"] = counts.get(f"pka0:{g.id}", 0) + 1
            if g.model in ("hammett", "taft"):
                counts[f"rho:{g.id}"] = counts.get(f"rho:{g.id}", 0) + 1
            if g.taft_too:
                counts[f"rhot:{g.id}"] = counts.get(f"rhot:{g.id}", 0) + 1
            for t in rec.taft:
                fam = "alpha" if t.alpha else "beta"
                k = f"{fam}:{t.type}"
                if k in prior:
                    counts[k] = counts.get(k, 0) + 1
    keys = []
    for k, c in sorted(counts.items()):
        fam = _family(k)
        need = {"pka0": 6, "rho": 25, "rhot": 15, "beta": 12, "alpha": 8}.get(fam, 10)
        if c >= need:
            keys.append(k)
    keys += ["gamma", "c_ar", "same_ring", "int:w0", "int:k_base_cation", "int:k_base_anion", "int:k_acid_cation",
             "int:k_acid_anion"]
    return keys


#: classes whose parent value is the measured value of the unsubstituted parent compound
#: (handbook anchors: phenol 9.99, benzoic acid 4.20, pyridine 5.23 ...): with thousands of
#: substituted and fused molecules in the calibration data, a loose prior would let them drag
#: the parent to absorb what the substituent model misses, so these parents stay firm
ANCHORED = {"phenol", "carboxylic_aromatic", "carboxylic_aliphatic", "pyridine", "imidazole",
            "benzimidazole", "quinoline", "isoquinoline", "aniline_primary", "aniline_secondary",
            "aniline_tertiary", "amine_primary", "amine_secondary", "amine_tertiary",
            "thiophenol", "thiol", "alcohol", "aminopyridine_2", "aminopyridine_4", "pyrazole",
            "thiazole", "tetrazole", "guanidine", "amidine", "aminoquinoline_4",
            # coverage classes whose parent is likewise a named parent compound's measured
            # value (acetone oxime 12.4, nitroethane 8.6, thioacetamide, imidazole N-H 14.5,
            # pyrazole N-H, thiouracil N-H, N,N-diethylhydroxylamine, tetronic acid,
            # methylnitramine; sources in groups.yaml)
            "oxime", "nitroalkane_ch", "thioamide_nh", "imidazole_nh", "pyrazole_nh",
            "aromatic_thione_nh", "hydroxylamine", "dione_13_ring5", "nitramine_nh"}
ANCHOR_SCALE = 0.04
#: Hammett reaction constants: relative prior scale (well established from textbook series)
HAMMETT_RHO_SCALE = 0.06


def _scale(key: str, prior: float) -> float:
    fam = _family(key)
    group = catalogue.group_index().get(key.partition(":")[2])
    if fam == "pka0" and group is not None and group.id in ANCHORED:
        return ANCHOR_SCALE
    if fam in ("rho", "rhot") and group is not None and group.id in ANCHORED and group.model == "taft":
        return max(0.04 * abs(prior), 0.05)
    if fam == "pka0" and group is not None:
        # a parent value is as firm as its class: well-established parents (phenol,
        # benzoic acid, pyridine) barely move, class values with a wide range move more
        return max(min(SCALES["pka0"], group.uncertainty), 0.15)
    if fam == "rhot":
        return max(SCALES["rho"] * abs(prior), 0.2)
    if fam == "rho":
        if group is not None and group.model == "hammett" and group.id in ANCHORED:
            return max(0.03 * abs(prior), 0.05)   # textbook series define these
        if group is not None and group.model == "hammett":
            return max(HAMMETT_RHO_SCALE * abs(prior), 0.08)   # well established
        return max(SCALES["rho"] * abs(prior), 0.2)
    if key in TIGHT:
        return TIGHT[key]
    if fam == "int":
        # the interaction priors come from textbook diamines / diacids / amino acids, which
        # determine them far better than single measured values of drugs do
        return max(SCALES["int"] * abs(prior), 0.05)
    return SCALES.get(fam, 0.5)


def _same_kind(entry: Entry, kind: str | None) -> list[int]:
    recs = entry.perc.records
    return [j for j, r in enumerate(recs) if kind is None or r.group.kind == kind]


def fit(entries: list[Entry], prior: dict[str, float] | None = None, keys: list[str] | None = None,
        iterations: int = 12, lam: float = LAMBDA, log=None):
    """Fit; returns ``(params, keys, info)``. ``log(text)`` receives progress lines."""
    import numpy as np

    prior = dict(prior or catalogue.prior_parameters())
    keys = keys or choose_parameters(entries, prior)
    theta0 = np.array([prior[k] for k in keys])
    scales = np.array([_scale(k, prior[k]) for k in keys])
    # which entries depend on which parameter (speeds up the Jacobian)
    deps: list[list[int]] = []
    for k in keys:
        fam, _, name = k.partition(":")
        idx = []
        for n, e in enumerate(entries):
            if fam in ("pka0", "rho", "rhot"):
                hit = any(r.group.id == name for r in e.perc.records)
            elif fam in ("beta", "alpha"):
                hit = any((("alpha" if t.alpha else "beta") + ":" + t.type) == k
                          for r in e.perc.records for t in r.taft)
            elif fam in ("gamma", "same_ring", "c_ar"):
                hit = any(r.taft for r in e.perc.records)
            else:
                hit = len(e.perc.records) > 1
            if hit:
                idx.append(n)
        deps.append(idx)

    def params_of(theta):
        p = dict(prior)
        for k, v in zip(keys, theta, strict=True):
            p[k] = float(v)
        p["gamma"] = min(max(p["gamma"], 0.2), 0.8)
        p["c_ar"] = min(max(p["c_ar"], 0.2), 1.0)
        return p

    def entry_res(e, asg, p):
        values = predict_all(e, p)
        # the macroscopic sequence hands values to sites in order, so two sites of one kind
        # swap values when their order flips (and symmetry-equivalent sites on rounding):
        # score the closest site of the right kind, which is continuous in the parameters
        out = []
        for (v, i, _), kind in zip(asg, e.kinds, strict=True):
            if i is None:
                out.append(0.0)
                continue
            cands = _same_kind(e, kind)
            out.append(min((values[j] - v for j in cands), key=abs))
        return out

    def residuals(theta, assignment):
        p = params_of(theta)
        r = []
        for e, asg in zip(entries, assignment, strict=True):
            r.extend(entry_res(e, asg, p))
        return np.array(r)

    theta = theta0.copy()
    mu = 1.0
    info = {"iterations": 0}
    for it in range(iterations):
        p = params_of(theta)
        assignment = [assign(e, p) for e in entries]
        offsets, pos = [], 0
        for asg in assignment:
            offsets.append(pos)
            pos += len(asg)
        r = residuals(theta, assignment)
        w = np.where(np.abs(r) <= HUBER, 1.0, HUBER / np.maximum(np.abs(r), 1e-9))
        w = np.where(np.abs(r) > OUTLIER, 0.01, w)
        J = np.zeros((len(r), len(keys)))
        for c in range(len(keys)):
            h = 1e-3 * scales[c]
            th = theta.copy()
            th[c] += h
            ph = params_of(th)
            for n in deps[c]:
                e = entries[n]
                rr = entry_res(e, assignment[n], ph)
                o = offsets[n]
                for m, val in enumerate(rr):
                    J[o + m, c] = (val - r[o + m]) / h
        ridge_r = math.sqrt(lam) * (theta - theta0) / scales
        ridge_J = np.diag(math.sqrt(lam) / scales)
        A = J.T @ (w[:, None] * J) + ridge_J.T @ ridge_J
        g = J.T @ (w * r) + ridge_J.T @ ridge_r
        cost0 = float(np.sum(w * r * r) + np.sum(ridge_r ** 2))
        improved = False
        if log:
            log(f"iteration {it}: cost {cost0:.2f}, mu {mu:.3g}, |g| {float(np.linalg.norm(g)):.3g}")
        for _ in range(6):
            step = -np.linalg.solve(A + mu * np.diag(np.diag(A) + 1e-9), g)
            th_new = theta + step
            r_new = residuals(th_new, assignment)
            ridge_new = math.sqrt(lam) * (th_new - theta0) / scales
            cost1 = float(np.sum(w * r_new * r_new) + np.sum(ridge_new ** 2))
            if log:
                log(f"    trial cost {cost1:.2f}, max step {float(np.max(np.abs(step / scales))):.3g}")
            if cost1 < cost0:
                theta, mu, improved = th_new, max(mu / 3, 1e-4), True
                break
            mu *= 4
        info["iterations"] = it + 1
        info["cost"] = cost0
        if not improved or float(np.max(np.abs(step / scales))) < 1e-3:
            break
    return params_of(theta), keys, info


def folds(entries: list[Entry], k: int = 5, seed: int = 20240501) -> list[int]:
    """Fold number per entry, grouped by scaffold (deterministic).

    All entries of one scaffold group (:func:`scaffold_group`) share a fold, so a ring
    framework is never in both the fitting and the scoring folds. Groups are dealt largest
    first to the fold with the fewest values (ties: seeded shuffle), which keeps the folds
    balanced although a few frameworks (benzene, pyridine) are large."""
    size: dict[str, int] = {}
    for e in entries:
        size[e.scaffold] = size.get(e.scaffold, 0) + len(e.measured)
    names = sorted(size)
    rng = random.Random(seed)
    rng.shuffle(names)
    names.sort(key=lambda n: -size[n])      # stable: shuffled order breaks ties
    load = [0] * k
    where: dict[str, int] = {}
    for n in names:
        f = min(range(k), key=lambda i: (load[i], i))
        where[n] = f
        load[f] += size[n]
    return [where[e.scaffold] for e in entries]


_CV_STATE: dict = {}


def _fit_fold(f: int):
    st = _CV_STATE
    train = [e for e, ff in zip(st["entries"], st["fold"], strict=True) if ff != f]
    p, _keys, _info = fit(train, prior=st["prior"], iterations=st["iterations"])
    return p


def cross_validate(entries: list[Entry], k: int = 5, prior=None, iterations: int = 12,
                   workers: int = 1):
    """k-fold CV grouped by scaffold: returns (metrics dict, per-fold parameter dicts).

    Perception is done once per molecule (the entries carry it); each fold only redoes the
    least squares. ``workers`` > 1 fits the folds in that many forked processes."""
    fold = folds(entries, k)
    fold_params = cv_parameters(entries, fold, k, prior, iterations, workers)
    index = {id(e): ff for e, ff in zip(entries, fold, strict=True)}
    return metrics(entries, lambda e: fold_params[index[id(e)]]), fold_params


def cv_parameters(entries, fold, k=5, prior=None, iterations=12, workers=1) -> list[dict]:
    """Parameters fitted without each fold (``result[f]`` never saw fold ``f``)."""
    _CV_STATE.update(entries=entries, fold=fold, prior=prior, iterations=iterations)
    try:
        if workers > 1:
            import multiprocessing as mp

            with mp.get_context("fork").Pool(workers) as pool:
                return pool.map(_fit_fold, range(k))
        return [_fit_fold(f) for f in range(k)]
    finally:
        _CV_STATE.clear()


def cv_residuals(entries: list[Entry], k: int = 5, prior=None, iterations: int = 12,
                 workers: int = 1) -> tuple[list[SiteResidual], list[int], list[dict]]:
    """Out-of-fold :func:`site_residuals` of every value (grouped CV), folds, fold params."""
    fold = folds(entries, k)
    fold_params = cv_parameters(entries, fold, k, prior, iterations, workers)
    index = {id(e): ff for e, ff in zip(entries, fold, strict=True)}
    return site_residuals(entries, lambda e: fold_params[index[id(e)]]), fold, fold_params
