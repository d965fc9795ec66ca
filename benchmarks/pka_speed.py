"""Speed and memory of the pKa estimator, against what RDKit alone needs.

Prints, on one core (single process, single thread):

* molecules/s of ``ionizable_sites(smiles)`` (read + standardize + estimate);
* molecules/s of the estimator alone on already standardized parents;
* the floor measured in the same run over the same molecules: parse + standardize
  (``saltplan.structure.read_structure``) + a ~70-pattern SMARTS catalogue (the estimator's
  own compiled patterns, ``GetSubstructMatches`` on each), and the ratio full / floor;
* tracemalloc peak for the same N molecules processed 1, 10 and 20 times (memory should stay
  flat; a small rise that saturates is RDKit / interpreter caches, not accumulation).

Molecules: the distinct SMILES of ../shared/data/pka-dev/literature_pka.csv when present,
else the handbook series of tests/handbook_pka.py.

    python benchmarks/pka_speed.py [--repeat 3]
"""
from __future__ import annotations

import argparse
import csv
import sys
import time
import tracemalloc
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DATA = ROOT.parent / "shared" / "data" / "pka-dev" / "literature_pka.csv"


def molecules() -> tuple[list[str], str]:
    if DATA.is_file():
        with open(DATA, newline="", encoding="utf-8") as fh:
            smis = sorted({row["smiles"] for row in csv.DictReader(fh)})
        return smis, "pka-dev distinct SMILES"
    sys.path.insert(0, str(ROOT / "tests"))
    from handbook_pka import HANDBOOK

    return [row[1] for row in HANDBOOK], "handbook series"


def best_of(fn, repeat):
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def main(argv=None):
    ap = argparse.ArgumentParser(description="pKa estimator speed")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)

    from saltplan.ionization import catalogue, ionizable_sites
    from saltplan.ionization.estimate import estimate_all
    from saltplan.structure import read_structure

    smis, what = molecules()
    n = len(smis)
    patterns = [pat for g in catalogue.groups() for pat in g.patterns]
    ionizable_sites(smis[0])  # load tables, compile SMARTS (not timed)
    parents = [read_structure(s) for s in smis]

    def full():
        for s in smis:
            ionizable_sites(s)

    def without_analogues():
        for s in smis:
            ionizable_sites(s, analogues=False)

    def estimator():
        for p in parents:
            estimate_all(p.mol)

    def floor():
        for s in smis:
            mol = read_structure(s).mol
            for pat in patterns:
                mol.GetSubstructMatches(pat)

    def standardize_only():
        for s in smis:
            read_structure(s)

    t_full = best_of(full, args.repeat)
    t_plain = best_of(without_analogues, args.repeat)
    t_est = best_of(estimator, args.repeat)
    t_floor = best_of(floor, args.repeat)
    t_std = best_of(standardize_only, args.repeat)
    print(f"molecules: {n} ({what}), best of {args.repeat}, one core")
    print(f"  ionizable_sites(SMILES)          {n / t_full:8.0f} mol/s   (with the analogue step)")
    print(f"    without the analogue step      {n / t_plain:8.0f} mol/s")
    print(f"  estimator on parents             {n / t_est:8.0f} mol/s")
    print(f"  floor: read_structure + {len(patterns)} SMARTS {n / t_floor:8.0f} mol/s")
    print(f"    of which read_structure        {n / t_std:8.0f} mol/s")
    print(f"  ratio full / floor               {t_full / t_floor:8.2f}")
    print(f"  ratio estimator / SMARTS part    {t_est / max(t_floor - t_std, 1e-9):8.2f}")

    # the same N molecules once and ten times over: a flat peak means nothing accumulates
    peaks = []
    base = smis[: min(n, 200)]
    for reps in (1, 10, 20):
        batch = base * reps
        count = len(batch)
        tracemalloc.start()
        for s in batch:
            ionizable_sites(s)
        _cur, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        peaks.append(peak)
        print(f"  tracemalloc peak, {count:5d} molecules  {peak / 1024:8.0f} KiB")
    print(f"  peak ratio 10N / N               {peaks[1] / peaks[0]:8.2f}   (20N / 10N {peaks[2] / peaks[1]:.2f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
