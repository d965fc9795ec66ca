"""Accuracy of the pKa estimator.

Prints

1. the textbook-series MAE over the handbook compounds of ``tests/handbook_pka.py``
   (substituted phenols, benzoic acids, anilines, pyridines, aliphatic amines, carboxylic
   acids; values from the CRC Handbook / Perrin / Serjeant & Dempsey, from memory);
2. on ``../shared/data/pka-dev/literature_pka.csv`` (read at run time, when present): the
   MAE of the closest estimated site per measured value, the share of values off by more
   than 2 units, and the share of molecules with more estimated sites in pH 2-12 than their
   measured values + 1. The shipped parameters were fitted on this set, so the headline
   figures come from 5-fold cross-validation split by molecule (fit on four folds, score the
   fifth); priors-only and in-sample figures are printed for comparison.

    python benchmarks/pka_accuracy.py [--no-cv] [--worst N]
"""
from __future__ import annotations

import argparse
import statistics
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DATA = ROOT.parent / "shared" / "data" / "pka-dev" / "literature_pka.csv"


def textbook():
    sys.path.insert(0, str(ROOT / "tests"))
    from handbook_pka import HANDBOOK

    from saltplan.ionization.estimate import estimate_all
    from saltplan.structure import read_structure

    by_class: dict[str, list[float]] = {}
    errors = []
    for name, smiles, kind, value, _src in HANDBOOK:
        sites = [s for s in estimate_all(read_structure(smiles).mol) if s.kind == kind]
        est = (max if kind == "base" else min)(s.pka for s in sites) if sites else float("nan")
        err = est - value
        errors.append((abs(err), name, est, value))
        gid = sites[0].group_id if sites else "none"
        by_class.setdefault(gid, []).append(abs(err))
    mae = statistics.mean(e[0] for e in errors)
    print(f"textbook series: {len(errors)} compounds, MAE {mae:.2f} pKa units "
          f"(max {max(e[0] for e in errors):.2f})")
    for gid, errs in sorted(by_class.items(), key=lambda kv: -len(kv[1])):
        print(f"    {gid:28s} n={len(errs):3d}  MAE {statistics.mean(errs):.2f}")
    return mae


def pka_dev(cv: bool, worst: int):
    from saltplan.ionization import calibrate, catalogue

    if not DATA.is_file():
        print(f"pka-dev: {DATA} not found, skipped")
        return
    entries, failed = calibrate.prepare(calibrate.read_dataset(DATA))
    n_values = sum(len(e.measured) for e in entries)
    print(f"\npka-dev: {len(entries)} molecules, {n_values} measured values ({len(failed)} unreadable)")

    def show(label, m):
        print(f"  {label:34s} MAE {m['mae']:.2f}   off by >2: {100 * m['frac_off_2']:4.1f} %   "
              f"molecules with extra sites in pH 2-12: {100 * m['frac_mol_extra_sites']:4.1f} %")

    prior = catalogue.prior_parameters()
    show("published priors only", calibrate.metrics(entries, lambda e: prior))
    shipped = catalogue.parameters()
    fitted = bool(catalogue.fitted_table())
    show("shipped parameters (in-sample)" if fitted else "shipped parameters",
         calibrate.metrics(entries, lambda e: shipped))
    headline = None
    if cv and fitted:
        headline, _ = calibrate.cross_validate(entries, prior=prior)
        show("5-fold CV by molecule (headline)", headline)
    m = headline or calibrate.metrics(entries, lambda e: shipped)
    print("  per class (closest-site residuals):")
    for gid, (n, mae, rmse) in sorted(m["per_class"].items(), key=lambda kv: -kv[1][0]):
        print(f"    {gid:28s} n={n:3d}  MAE {mae:.2f}  RMSE {rmse:.2f}")
    if worst:
        rows = []
        for e in entries:
            sites = calibrate.predict(e, shipped)
            for v in e.measured:
                if not sites:
                    rows.append((99.0, v, "no site", e.smiles))
                    continue
                i = min(range(len(sites)), key=lambda k: abs(sites[k][0] - v))
                rows.append((sites[i][0] - v, v, sites[i][2], e.smiles))
        rows.sort(key=lambda r: -abs(r[0]))
        print(f"  worst {worst} (shipped parameters):")
        for err, v, gid, smi in rows[:worst]:
            print(f"    {err:+6.2f}  measured {v:5.2f}  {gid:24s} {smi}")


def main(argv=None):
    ap = argparse.ArgumentParser(description="pKa estimator accuracy")
    ap.add_argument("--no-cv", action="store_true", help="skip the cross-validation (faster)")
    ap.add_argument("--worst", type=int, default=0, help="list the N worst residuals")
    args = ap.parse_args(argv)
    textbook()
    pka_dev(not args.no_cv, args.worst)
    return 0


if __name__ == "__main__":
    sys.exit(main())
