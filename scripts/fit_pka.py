"""Calibrate the pKa estimator against ../shared/data/pka-dev/literature_pka.csv.

Usage (from the repository root)::

    python scripts/fit_pka.py [--data PATH] [--no-cv] [--dry-run]

Reads the measured values at run time (the data set is never copied into the repository),
fits a modest set of parameters by robust least squares with a ridge prior toward the
published values (saltplan/ionization/calibrate.py), reports 5-fold cross-validation by
molecule, and writes saltplan/ionization/data/fitted_pka_dev.yaml with the data set, date,
fitted values next to their priors, and the residual statistics.
"""
from __future__ import annotations

import argparse
import datetime as dt
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DEFAULT_DATA = ROOT.parent / "shared" / "data" / "pka-dev" / "literature_pka.csv"
OUT = ROOT / "saltplan" / "ionization" / "data" / "fitted_pka_dev.yaml"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", type=Path, default=DEFAULT_DATA)
    ap.add_argument("--no-cv", action="store_true", help="skip the 5-fold cross-validation")
    ap.add_argument("--dry-run", action="store_true", help="do not write the YAML file")
    ap.add_argument("--iterations", type=int, default=12)
    args = ap.parse_args(argv)
    if not args.data.is_file():
        print(f"data set not found: {args.data}", file=sys.stderr)
        return 1

    import yaml

    from saltplan._io import write_text_atomic
    from saltplan.ionization import calibrate, catalogue

    rows = calibrate.read_dataset(args.data)
    entries, failed = calibrate.prepare(rows)
    prior = catalogue.prior_parameters()
    print(f"{len(entries)} molecules ({sum(len(e.measured) for e in entries)} values), "
          f"{len(failed)} unreadable")
    base = calibrate.metrics(entries, lambda e: prior)
    print(f"priors only:   MAE {base['mae']:.3f}  off>2 {100 * base['frac_off_2']:.1f} %  "
          f"extra-site molecules {100 * base['frac_mol_extra_sites']:.1f} %")
    cv = None
    if not args.no_cv:
        cv, _ = calibrate.cross_validate(entries, prior=prior, iterations=args.iterations)
        print(f"5-fold CV:     MAE {cv['mae']:.3f}  off>2 {100 * cv['frac_off_2']:.1f} %  "
              f"extra-site molecules {100 * cv['frac_mol_extra_sites']:.1f} %")
    params, keys, info = calibrate.fit(entries, prior=prior, iterations=args.iterations)
    fitm = calibrate.metrics(entries, lambda e: params)
    print(f"fit (in-sample): MAE {fitm['mae']:.3f}  off>2 {100 * fitm['frac_off_2']:.1f} %")
    stats = cv or fitm
    class_rmse = {k: round(v[2], 2) for k, v in stats["per_class"].items() if v[0] >= 5}

    def rnd(x):
        return round(float(x), 4)

    doc = {
        "data_set": "../shared/data/pka-dev/literature_pka.csv (Baltruschat & Czodrowski 2020 "
                    "literature set, CC BY 4.0; read at run time, not copied)",
        "date": dt.date.today().isoformat(),
        "method": "robust (Huber 1.0) Levenberg-Marquardt on closest-site residuals, ridge "
                  f"lambda {calibrate.LAMBDA} toward the published priors (scripts/fit_pka.py)",
        "molecules": len(entries),
        "values": fitm["values"],
        "residuals": {
            "in_sample": {"mae": rnd(fitm["mae"]), "frac_off_2": rnd(fitm["frac_off_2"]),
                          "frac_mol_extra_sites": rnd(fitm["frac_mol_extra_sites"])},
            "cv5": (None if cv is None else
                    {"mae": rnd(cv["mae"]), "frac_off_2": rnd(cv["frac_off_2"]),
                     "frac_mol_extra_sites": rnd(cv["frac_mol_extra_sites"])}),
            "priors_only": {"mae": rnd(base["mae"]), "frac_off_2": rnd(base["frac_off_2"])},
        },
        "class_rmse": class_rmse,
        "priors": {k: rnd(prior[k]) for k in keys},
        "parameters": {k: rnd(params[k]) for k in keys},
    }
    header = ("# Fitted parameters of the pKa estimator (written by scripts/fit_pka.py; do not edit).\n"
              "# Each fitted value replaces the prior of the same key (groups.yaml, taft_sigma_star.yaml,\n"
              "# site_interaction.yaml); class_rmse gives the per-class uncertainty (cross-validated).\n")
    text = header + yaml.safe_dump(doc, sort_keys=False, allow_unicode=True, width=100)
    if args.dry_run:
        print(text)
    else:
        write_text_atomic(OUT, text)
        print(f"wrote {OUT.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
