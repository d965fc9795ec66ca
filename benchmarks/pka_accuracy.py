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


# --------------------------------------------------------------------------- analogue step
# (measured-analogue evidence, saltplan.ionization.analogues; kept apart from the rest)
TRAIN = ROOT.parent / "shared" / "data" / "pka-train" / "measured_pka.csv"


def analogue_cv(fold_params=None, k: int = 5):
    """Analogue-corrected figures, 5-fold CV grouped by scaffold on pka-train.

    Every measured value in -1 ... 13 is matched to its closest site of the right kind;
    for the values of fold f the reference table is built from the other folds only
    (``ReferenceTable.from_rows``), so a molecule's own scaffold group is never in it, and
    corrected with ``table.correct`` (shipped kernel and uncertainty factors).
    ``fold_params[f]``, when given, are the estimator parameters fitted without fold f
    (both the scored estimates and the table's residuals then come from them); otherwise the
    shipped parameters are used and the estimator part is not cross-validated."""
    import numpy as np

    from saltplan.ionization import analogues
    from saltplan.ionization.reference import reference_rows, scaffold_folds, usable

    if not TRAIN.is_file():
        print(f"\nanalogue step: {TRAIN} not found, skipped")
        return None
    fit = analogues.load_fit()
    base_rows, _skipped = reference_rows(TRAIN, None, analogues.FINGERPRINT)
    fold = scaffold_folds(base_rows, k)
    per_fold = [base_rows] * k
    if fold_params is not None:
        per_fold = [reference_rows(TRAIN, fold_params[f], analogues.FINGERPRINT)[0] for f in range(k)]
    before, after, sig, cls, splits = [], [], [], [], []
    for f in range(k):
        rows = per_fold[f]
        fold_of = {(r["line"]): ff for r, ff in zip(base_rows, fold, strict=True)}
        train = usable([r for r in rows if fold_of.get(r["line"], -1) != f])
        table = analogues.ReferenceTable.from_rows(train, {"fingerprint": analogues.FINGERPRINT})
        for r in rows:
            if fold_of.get(r["line"], -1) != f:
                continue
            pka, sigma, _ev = table.correct(r["group_id"], r["kind"], r["fp"], r["estimate"],
                                            r["uncertainty"], fit)
            before.append(r["estimate"] - r["measured"])
            after.append(pka - r["measured"])
            sig.append(sigma)
            cls.append(f"{r['group_id']}/{r['kind']}")
            splits.append(r["split"])
    b, a, sg = np.array(before), np.array(after), np.array(sig)
    where = ("estimator parameters fitted without each fold" if fold_params is not None else
             "shipped estimator parameters (estimator part not cross-validated)")
    print(f"\nanalogue step, pka-train, 5-fold CV grouped by scaffold ({where}); "
          f"{len(a)} matched values in -1 ... 13")

    def line(label, e, mask=None):
        e = e if mask is None else e[mask]
        print(f"  {label:34s} MAE {np.mean(np.abs(e)):.2f}  RMSE {np.sqrt(np.mean(e ** 2)):.2f}  "
              f"off by >2: {100 * np.mean(np.abs(e) > 2):4.1f} %  (n={len(e)})")

    line("estimator alone", b)
    line("with analogue correction", a)
    test = np.array([x == "test" for x in splits])
    if test.any():
        line("  source's test split, alone", b, test)
        line("  source's test split, corrected", a, test)
    inside = np.abs(a) <= sg
    import yaml

    nested = yaml.safe_load(analogues._data_path(analogues.FIT_FILE).read_text(encoding="utf-8"))
    nested = (nested.get("cv") or {}).get("coverage_nested")
    print(f"  within +-1 sigma: {100 * inside.mean():.1f} % overall (target 60-76 %; the sigma "
          f"factors were fitted on these CV errors; nested CV, factors fitted without the "
          f"scored fold: {100 * nested:.1f} %)" if nested is not None else
          f"  within +-1 sigma: {100 * inside.mean():.1f} % overall (target 60-76 %)")
    for c in sorted(set(cls)):
        m = np.array([x == c for x in cls])
        if m.sum() >= 50:
            flag = "" if 0.60 <= inside[m].mean() <= 0.76 else "  <- outside 60-76 %"
            print(f"    {c:34s} n={m.sum():4d}  MAE {np.mean(np.abs(b[m])):.2f} -> "
                  f"{np.mean(np.abs(a[m])):.2f}  within 1 sigma {100 * inside[m].mean():3.0f} %{flag}")
    return {"mae": float(np.mean(np.abs(a))), "rmse": float(np.sqrt(np.mean(a ** 2))),
            "coverage": float(inside.mean())}


def main(argv=None):
    ap = argparse.ArgumentParser(description="pKa estimator accuracy")
    ap.add_argument("--no-cv", action="store_true", help="skip the cross-validation (faster)")
    ap.add_argument("--worst", type=int, default=0, help="list the N worst residuals")
    args = ap.parse_args(argv)
    textbook()
    pka_dev(not args.no_cv, args.worst)
    analogue_cv()
    return 0


if __name__ == "__main__":
    sys.exit(main())
