"""Fit the measured-analogue kernel, shrinkage and uncertainty factors in grouped CV.

Reads ../shared/data/pka-train/measured_pka.csv, matches every value in -1 ... 13 to its
closest estimated site (the same rows as scripts/build_pka_reference.py), splits the rows
into 5 folds grouped by scaffold (Bemis-Murcko framework; a scaffold group is in exactly
one fold) and, for every row, finds its nearest measured sites of the same class and kind
in the *other* folds only. On these cross-validated neighbours it

1. grid-searches the correction ``c = sum(w r) / (kappa + sum w)``, ``w = s^p`` over the
   ``k`` nearest with ``s >= s_min`` (residuals clipped at ``clip``) for the lowest MAE;
2. fits the uncertainty: factors by nearest-analogue similarity (non-increasing with
   similarity) and per class (group/kind with >= 50 values), so that 68 % of absolute
   CV errors fall within the estimator's own 1-sigma times the two factors;
3. checks that calibration by nested CV (factors fitted on four folds' CV errors, coverage
   counted on the fifth).

Writes saltplan/ionization/data/analogue_fit.yaml (constants, provenance, CV figures).
Rebuild the reference table first after a refit of the estimator.

    python scripts/fit_analogues.py [--data PATH] [--dry-run]
"""
from __future__ import annotations

import argparse
import datetime as dt
import itertools
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "tests"))   # the textbook series, tests/handbook_pka.py
DATA = ROOT.parent / "shared" / "data" / "pka-train" / "measured_pka.csv"
OUT = ROOT / "saltplan" / "ionization" / "data" / "analogue_fit.yaml"

#: kernel grid (w = ((s - s_min) / (1 - s_min))^p, c = sum(w r) / (kappa + sum w)).
#: kappa >= 0.5 keeps the shrinkage real: smaller values win a little CV MAE only by
#: spreading a class-wide mean residual over dissimilar sites (class bias is the
#: calibration's job).
GRID = {"k": (3, 5, 8, 12), "power": (1, 2, 3), "kappa": (0.5, 1.0, 2.0, 4.0),
        "min_similarity": (0.0, 0.1, 0.2, 0.3, 0.4), "clip": (1.5, 2.0, 3.0)}
#: guard: with the correction applied, the textbook series (tests/handbook_pka.py) must
#: keep MAE <= this; kernels are ranked by CV MAE and the first that passes is taken
TEXTBOOK_GUARD = 0.18
SIM_EDGES = (0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9)
TARGET = 0.68
MIN_CLASS = 50          # classes checked for coverage
MIN_CLASS_FACTOR = 30   # classes that get a factor of their own


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


def textbook_mae(fit) -> float:
    """MAE over tests/handbook_pka.py with the analogue step of ``fit`` (shipped table)."""
    import numpy as np
    from handbook_pka import HANDBOOK

    from saltplan.ionization import analogues
    from saltplan.ionization.estimate import estimate_all
    from saltplan.structure import read_structure

    errors = []
    for _name, smiles, kind, value, _src in HANDBOOK:
        p = read_structure(smiles)
        sites = [s for s in analogues.apply_analogues(p.mol, estimate_all(p.mol), None, fit, p.smiles)
                 if s.kind == kind]
        if sites:
            errors.append(abs((max if kind == "base" else min)(s.pka for s in sites) - value))
    return float(np.mean(errors))


def coverage(err, sigma):
    import numpy as np

    return float(np.mean(np.abs(err) <= sigma)) if len(err) else float("nan")


def main(argv=None) -> int:
    import numpy as np
    import yaml

    from saltplan.ionization import analogues, catalogue
    from saltplan.ionization.reference import cv_neighbours, kernel_correction, reference_rows, scaffold_folds

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", type=Path, default=DATA)
    ap.add_argument("--out", type=Path, default=OUT)
    ap.add_argument("--dry-run", action="store_true", help="print, do not write")
    args = ap.parse_args(argv)
    rows, skipped = reference_rows(args.data, None, analogues.FINGERPRINT)
    fold = scaffold_folds(rows)
    depth = max(GRID["k"])
    S, R = cv_neighbours(rows, fold, depth)
    res = np.array([r["residual"] for r in rows])
    u0 = np.array([r["uncertainty"] for r in rows])
    cls = [f"{r['group_id']}/{r['kind']}" for r in rows]
    n = len(rows)
    print(f"{n} matched values, {len(set(r['scaffold'] for r in rows))} scaffold groups, "
          f"skipped {skipped}")
    print(f"estimator alone (CV rows): MAE {np.mean(np.abs(res)):.3f}  RMSE {np.sqrt(np.mean(res ** 2)):.3f}")

    ranked = []
    for k, p, kap, smin, clip in itertools.product(*GRID.values()):
        c, _w = kernel_correction(S, R, k, p, kap, smin, clip)
        e = res - c
        ranked.append((float(np.mean(np.abs(e))), float(np.sqrt(np.mean(e ** 2))),
                       dict(k=k, power=float(p), kappa=kap, min_similarity=smin, clip=clip)))
    ranked.sort(key=lambda t: (t[0], sorted(t[2].items())))
    best, textbook = None, None
    for cand in ranked[:200]:
        textbook = textbook_mae(analogues.Fit(**cand[2]))
        if textbook <= TEXTBOOK_GUARD:
            best = cand
            break
    if best is None:
        print("no kernel keeps the textbook series within the guard", file=sys.stderr)
        return 1
    print(f"textbook series MAE with this kernel: {textbook:.3f} (guard {TEXTBOOK_GUARD})")
    mae, rmse, kern = best
    print(f"best kernel {kern}: CV MAE {mae:.3f}  RMSE {rmse:.3f}")
    c, _w = kernel_correction(S, R, **kern)
    err = res - c
    nearest = np.where(S[:, 0] >= 0, S[:, 0], 0.0)
    z = np.abs(err) / u0
    fsim, fcls = fit_sigma(z, nearest, cls)
    sigma = u0 * fsim[np.searchsorted(np.asarray(SIM_EDGES), nearest, side="right")] * \
        np.array([fcls.get(x, 1.0) for x in cls])
    print(f"similarity factors {np.round(fsim, 2).tolist()} at edges {SIM_EDGES}")
    inside = np.abs(err) <= sigma
    print(f"coverage within 1 sigma (CV errors, shipped factors): {100 * inside.mean():.1f} %")
    # nested: factors from four folds' CV errors, coverage on the fifth
    nested = np.zeros(n, bool)
    for f in sorted(set(fold)):
        tr = np.array([ff != f for ff in fold])
        fs, fc = fit_sigma(z[tr], nearest[tr], [x for x, t in zip(cls, tr, strict=False) if t])
        te = ~tr
        sg = u0[te] * fs[np.searchsorted(np.asarray(SIM_EDGES), nearest[te], side="right")] * \
            np.array([fc.get(x, 1.0) for x, t in zip(cls, te, strict=False) if t])
        nested[te] = np.abs(err[te]) <= sg
    print(f"coverage within 1 sigma (nested CV): {100 * nested.mean():.1f} %")
    per_class = {}
    for x in sorted(set(cls)):
        m = np.array([y == x for y in cls])
        if m.sum() >= MIN_CLASS:
            per_class[x] = {"n": int(m.sum()), "coverage": round(float(inside[m].mean()), 3),
                            "coverage_nested": round(float(nested[m].mean()), 3),
                            "mae_before": round(float(np.mean(np.abs(res[m]))), 3),
                            "mae_after": round(float(np.mean(np.abs(err[m]))), 3)}
            print(f"  {x:34s} n={m.sum():4d} MAE {np.mean(np.abs(res[m])):.2f} -> "
                  f"{np.mean(np.abs(err[m])):.2f}  coverage {100 * inside[m].mean():.0f} % "
                  f"(nested {100 * nested[m].mean():.0f} %)")
    # outside the calibrated domain: nearest analogue below the similarity where the
    # widened sigma reaches twice the sigma of well-covered sites (highest bin)
    edges = (0.0,) + SIM_EDGES
    domain = next((edges[b + 1] for b in range(len(fsim) - 1, -1, -1)
                   if fsim[b] >= 2.0 * fsim[-1] and b + 1 < len(edges)), SIM_EDGES[0])
    print(f"outside the calibrated domain below similarity {domain}")
    bymax = {}
    for b in range(len(SIM_EDGES) + 1):
        m = np.searchsorted(np.asarray(SIM_EDGES), nearest, side="right") == b
        if m.any():
            bymax[f"{edges[b]:.1f}"] = {"n": int(m.sum()), "mae": round(float(np.mean(np.abs(err[m]))), 3)}
    doc = {
        "source": (f"fitted by scripts/fit_analogues.py on {dt.date.today().isoformat()}: 5-fold "
                   "CV grouped by Bemis-Murcko scaffold over the measured-site table of "
                   f"../shared/data/pka-train/measured_pka.csv ({analogues.SOURCE_SHORT}); "
                   f"estimator parameters {catalogue.fitted_source() or 'published priors'}"),
        "attribution": analogues.ATTRIBUTION,
        "fit": dict(kern, domain_similarity=float(domain), sim_edges=list(SIM_EDGES),
                    sim_factors=[round(float(x), 4) for x in fsim],
                    class_factors={k2: round(float(v), 4) for k2, v in sorted(fcls.items())}),
        "grid": {k2: list(v) for k2, v in GRID.items()},
        "selection": f"lowest CV MAE over the grid whose textbook-series MAE (tests/handbook_pka.py, "
                     f"correction applied) is <= {TEXTBOOK_GUARD}; that was {textbook:.3f}",
        "cv": {"values": n, "mae_before": round(float(np.mean(np.abs(res))), 4),
               "rmse_before": round(float(np.sqrt(np.mean(res ** 2))), 4),
               "mae_after": round(mae, 4), "rmse_after": round(rmse, 4),
               "coverage": round(float(inside.mean()), 4),
               "coverage_nested": round(float(nested.mean()), 4),
               "per_class": per_class, "by_nearest_similarity": bymax},
    }
    text = ("# Measured-analogue constants: correction kernel, shrinkage, uncertainty factors.\n"
            "# Written by scripts/fit_analogues.py -- do not edit by hand; refit after rebuilding\n"
            "# measured_sites.* (which must follow every refit of the estimator).\n"
            + yaml.safe_dump(doc, sort_keys=False, allow_unicode=True, width=100))
    if args.dry_run:
        print(text)
    else:
        args.out.write_text(text, encoding="utf-8")
        print(f"wrote {args.out}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
