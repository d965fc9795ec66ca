"""Least-squares calibration of the estimator's parameters against measured pKa values.

Used by ``scripts/fit_pka.py`` (writes ``data/fitted_pka_dev.yaml``) and by
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
from dataclasses import dataclass
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
    smiles: str
    perc: Perception
    measured: list[float]


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


def prepare(rows) -> tuple[list[Entry], list[str]]:
    """Standardize and perceive each molecule once; returns entries and failures."""
    from ..errors import SaltplanError
    from ..structure import read_structure

    failed: list[str] = []
    merged: dict[str, tuple[object, list[float]]] = {}
    for smi, values in rows:
        try:
            parent = read_structure(smi)
        except SaltplanError:
            failed.append(smi)
            continue
        # one molecule = one standardized parent (different drawings are merged)
        mol, vals = merged.setdefault(parent.smiles, (parent.mol, []))
        vals.extend(values)
    entries = [Entry(smi, perceive(mol), sorted(vals)) for smi, (mol, vals) in merged.items()]
    return entries, failed


def predict(entry: Entry, params) -> list[tuple[float, str, str]]:
    """``(pka, kind, group_id)`` of the sites that would be returned (window applied)."""
    out = []
    for rec, (pka, _steps) in zip(entry.perc.records, evaluate(entry.perc, params)):
        kind = rec.group.kind
        if (kind == "base" and pka >= BASE_MIN) or (kind == "acid" and pka <= ACID_MAX):
            out.append((pka, kind, rec.group.id))
    return out


def predict_all(entry: Entry, params) -> list[float]:
    """pKa of every perceived site (no window), in record order."""
    return [pka for pka, _steps in evaluate(entry.perc, params)]


def assign(entry: Entry, params) -> list[tuple[float, int | None, float | None]]:
    """For each measured value: (value, record index of the closest returned site, estimate).

    The index refers to ``entry.perc.records`` (not to the windowed list), so residuals stay
    continuous when a site crosses the reporting window during the fit."""
    values = predict_all(entry, params)
    shown = [i for i, rec in enumerate(entry.perc.records)
             if (rec.group.kind == "base" and values[i] >= BASE_MIN)
             or (rec.group.kind == "acid" and values[i] <= ACID_MAX)]
    res = []
    for v in entry.measured:
        if not shown:
            res.append((v, None, None))
            continue
        i = min(shown, key=lambda k: (abs(values[k] - v), k))
        res.append((v, i, values[i]))
    return res


# --------------------------------------------------------------------------- metrics
def metrics(entries: list[Entry], params_for) -> dict:
    """Benchmark metrics. ``params_for(entry)`` gives the parameters to use (CV folds)."""
    errors, per_class, extra_mols, no_site = [], {}, 0, 0
    for e in entries:
        p = params_for(e)
        sites = predict(e, p)
        n_window = sum(1 for s in sites if 2.0 <= s[0] <= 12.0)
        if n_window > len(e.measured) + 1:
            extra_mols += 1
        for v in e.measured:
            if not sites:
                no_site += 1
                errors.append(v if v < 7 else 14 - v)  # no site: count as a miss of ~the distance to neutral
                continue
            i = min(range(len(sites)), key=lambda k: (abs(sites[k][0] - v), k))
            err = sites[i][0] - v
            errors.append(abs(err))
            per_class.setdefault(sites[i][2], []).append(err)
    n = len(errors)
    return {
        "values": n,
        "molecules": len(entries),
        "mae": sum(errors) / n if n else float("nan"),
        "frac_off_2": sum(1 for x in errors if x > 2.0) / n if n else float("nan"),
        "frac_mol_extra_sites": extra_mols / len(entries) if entries else float("nan"),
        "values_without_site": no_site,
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


def _scale(key: str, prior: float) -> float:
    fam = _family(key)
    group = catalogue.group_index().get(key.partition(":")[2])
    if fam == "pka0" and group is not None:
        # a parent value is as firm as its class: well-established parents (phenol,
        # benzoic acid, pyridine) barely move, class values with a wide range move more
        return max(min(SCALES["pka0"], group.uncertainty), 0.15)
    if fam == "rhot":
        return max(SCALES["rho"] * abs(prior), 0.2)
    if fam == "rho":
        if group is not None and group.model == "hammett":
            return max(0.12 * abs(prior), 0.1)   # Hammett rho are well established
        return max(SCALES["rho"] * abs(prior), 0.2)
    if key in TIGHT:
        return TIGHT[key]
    if fam == "int":
        # the interaction priors come from textbook diamines / diacids / amino acids, which
        # determine them far better than single measured values of drugs do
        return max(SCALES["int"] * abs(prior), 0.05)
    return SCALES.get(fam, 0.5)


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
        for k, v in zip(keys, theta):
            p[k] = float(v)
        p["gamma"] = min(max(p["gamma"], 0.2), 0.8)
        p["c_ar"] = min(max(p["c_ar"], 0.2), 1.0)
        return p

    def entry_res(e, asg, p):
        values = predict_all(e, p)
        return [0.0 if i is None else values[i] - v for (v, i, _) in asg]

    def residuals(theta, assignment):
        p = params_of(theta)
        r = []
        for e, asg in zip(entries, assignment):
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
        for c, k in enumerate(keys):
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
    """Fold number per entry, split by molecule (deterministic)."""
    order = sorted(range(len(entries)), key=lambda i: entries[i].smiles)
    rng = random.Random(seed)
    rng.shuffle(order)
    out = [0] * len(entries)
    for pos, i in enumerate(order):
        out[i] = pos % k
    return out


def cross_validate(entries: list[Entry], k: int = 5, prior=None, iterations: int = 12):
    """5-fold CV by molecule: returns (metrics dict, per-fold parameter dicts)."""
    fold = folds(entries, k)
    fold_params = []
    for f in range(k):
        train = [e for e, ff in zip(entries, fold) if ff != f]
        p, _keys, _info = fit(train, prior=prior, iterations=iterations)
        fold_params.append(p)
    index = {id(e): ff for e, ff in zip(entries, fold)}
    return metrics(entries, lambda e: fold_params[index[id(e)]]), fold_params
