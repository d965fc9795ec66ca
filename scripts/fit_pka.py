"""Calibrate the pKa estimator against both shared measured sets.

Usage (from the repository root)::

    python scripts/fit_pka.py [--no-cv] [--dry-run] [--workers N]

Reads ../shared/data/pka-train/measured_pka.csv (values -1 ... 13) and
../shared/data/pka-dev/literature_pka.csv at run time (never copied), fits a modest set of
parameters by robust least squares with a ridge prior toward the published values
(saltplan/ionization/calibrate.py), runs a 5-fold cross-validation grouped by Bemis-Murcko
scaffold, derives the per-class 1-sigma uncertainty from the out-of-fold residuals, and
writes saltplan/ionization/data/fitted_pka.yaml (data sets, date, method, fitted values
next to their priors, residual statistics, class sigma with their provenance).
"""
from __future__ import annotations

import argparse
import datetime as dt
import math
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))
OUT = ROOT / "saltplan" / "ionization" / "data" / "fitted_pka.yaml"
#: classes with fewer CV values share one pooled sigma
MIN_CLASS = 30
#: target share of |error| within the printed 1 sigma (normal distribution: 68.3 %)
COVER = 0.683


def sigma_for(rows_u, cover=COVER):
    """Smallest sigma so that ``cover`` of |r| <= sqrt(sigma^2 + extra^2) (bisection)."""
    if not rows_u:
        return None
    lo, hi = 0.0, 10.0
    for _ in range(50):
        mid = (lo + hi) / 2
        inside = sum(1 for r, x in rows_u if abs(r) <= math.sqrt(mid * mid + x * x))
        if inside / len(rows_u) >= cover:
            hi = mid
        else:
            lo = mid
    return hi


def class_sigmas(entries, rows):
    """Per-class sigma from out-of-fold residual rows (with each site's extra uncertainty)."""
    extra = {}
    for e in entries:
        for rec in e.perc.records:
            extra[(e.smiles, rec.atom)] = rec.extra_uncertainty
    by_class: dict[str, list] = {}
    for r in rows:
        if r.residual is not None:
            by_class.setdefault(r.group_id, []).append((r.residual, extra.get((r.smiles, r.atom), 0.0)))
    pooled = [x for v in by_class.values() if len(v) < MIN_CLASS for x in v]
    pooled_sigma = sigma_for(pooled) or sigma_for([x for v in by_class.values() for x in v])
    out = {}
    for gid, v in sorted(by_class.items()):
        if len(v) >= MIN_CLASS:
            out[gid] = {"sigma": round(max(sigma_for(v), 0.2), 3), "n": len(v), "from": "class"}
        else:
            out[gid] = {"sigma": round(max(pooled_sigma, 0.2), 3), "n": len(v), "from": "pooled"}
    return out, round(pooled_sigma, 3)


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--no-cv", action="store_true", help="skip the cross-validation")
    ap.add_argument("--dry-run", action="store_true", help="do not write the YAML file")
    ap.add_argument("--iterations", type=int, default=12)
    ap.add_argument("--workers", type=int, default=2, help="processes for the CV folds")
    args = ap.parse_args(argv)

    import yaml

    from saltplan._io import write_text_atomic
    from saltplan.ionization import calibrate, catalogue

    entries, failed = calibrate.load_calibration_sets()
    if not entries:
        print("data sets not found under ../shared/data (pka-train, pka-dev)", file=sys.stderr)
        return 1
    prior = catalogue.prior_parameters()
    print(f"{len(entries)} molecules ({sum(len(e.measured) for e in entries)} values), "
          f"{len(failed)} unreadable")
    base = calibrate.metrics(entries, lambda e: prior)
    cv = sig = None
    pooled = None
    if not args.no_cv:
        rows, _fold, _fp = calibrate.cv_residuals(entries, prior=prior, iterations=args.iterations,
                                                  workers=args.workers)
        cv = calibrate.summarize(rows)
        sig, pooled = class_sigmas(entries, rows)
        print(f"grouped 5-fold CV: MAE {cv['mae']:.3f}  RMSE {cv['rmse']:.3f}  "
              f"off>2 {100 * cv['frac_off_2']:.1f} %  no site {100 * cv['frac_no_site']:.1f} %")
    params, keys, info = calibrate.fit(entries, prior=prior, iterations=args.iterations)
    fitm = calibrate.metrics(entries, lambda e: params)
    print(f"fit (in-sample): MAE {fitm['mae']:.3f}  RMSE {fitm['rmse']:.3f}")

    def rnd(x):
        return round(float(x), 4)

    def figs(m):
        return {"mae": rnd(m["mae"]), "rmse": rnd(m["rmse"]), "frac_off_2": rnd(m["frac_off_2"]),
                "frac_no_site": rnd(m["frac_no_site"])}

    doc = {
        "data_sets": [
            "../shared/data/pka-train/measured_pka.csv, values -1 ... 13 (DataWarrior literature "
            "compilation as curated by Mansouri, Cariello, Korotcov et al., J. Cheminform. 2019, "
            "11, 60; read at run time)",
            "../shared/data/pka-dev/literature_pka.csv (Baltruschat & Czodrowski 2020 literature "
            "set, CC BY 4.0; read at run time, not copied)",
        ],
        "date": dt.date.today().isoformat(),
        "method": "robust (Huber 1.0) Levenberg-Marquardt on closest-site residuals (site of the "
                  f"reported kind), ridge lambda {calibrate.LAMBDA} toward the published priors "
                  "(scripts/fit_pka.py)",
        "molecules": len(entries),
        "values": fitm["values"],
        "residuals": {
            "in_sample": figs(fitm),
            "cv5_scaffold": None if cv is None else figs(cv),
            "priors_only": figs(base),
        },
        "class_sigma_method": (
            "per class: the smallest sigma for which 68.3 % of the out-of-fold residuals of the "
            "scaffold-grouped 5-fold CV lie within sqrt(sigma^2 + extra^2) (extra = the site's "
            f"fallback-substituent uncertainty); classes with < {MIN_CLASS} CV values share the "
            f"pooled sigma of all such classes ({pooled})"),
        "class_sigma": sig,
        "priors": {k: rnd(prior[k]) for k in keys},
        "parameters": {k: rnd(params[k]) for k in keys},
    }
    header = ("# Fitted parameters of the pKa estimator (written by scripts/fit_pka.py; do not edit).\n"
              "# Each fitted value replaces the prior of the same key (groups.yaml, taft_sigma_star.yaml,\n"
              "# site_interaction.yaml); class_sigma is the per-class 1-sigma uncertainty (from the\n"
              "# scaffold-grouped cross-validation). Attribution of the calibration file: K. Mansouri,\n"
              "# N. F. Cariello, A. Korotcov et al., J. Cheminform. 2019, 11, 60 (DataWarrior compilation).\n")
    text = header + yaml.safe_dump(doc, sort_keys=False, allow_unicode=True, width=100)
    if args.dry_run:
        print(text)
    else:
        write_text_atomic(OUT, text)
        print(f"wrote {OUT.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
