"""Batch throughput and memory: molecules per second per core, and peak memory vs rows.

Prints, for 5,000 drug-like molecules (the SMILES of
``../shared/data/pka-dev/literature_pka.csv`` repeated to 5,000 rows when that file is
present, else the package's invented demo structures repeated):

* the floor: RDKit parse + :func:`saltplan.structure.read_structure` standardization + a
  catalogue of 70 SMARTS matched once each, on one core, in this process;
* the batch (:func:`saltplan.evaluate_many` with :func:`saltplan.plan_salts`) with
  ``jobs=1`` and ``jobs=N`` (all cores), as molecules per second per core and as the ratio
  of its time per molecule to the floor's;
* the batch machinery alone (the floor as the evaluator): its overhead over the floor;
* peak memory (maximum resident set size of a fresh subprocess running the streamed CLI
  path, CSV in -> CSV + HTML summary out) for 5,000 and 50,000 rows: it should stay
  roughly flat, since rows are read, evaluated and written chunk by chunk.

Run from the repository root::

    python benchmarks/batch_throughput.py [--rows 5000] [--memory-rows 5000 50000]
                                          [--memory-evaluator plan|floor] [--jobs N]
                                          [--memory-jobs N] [--rounds N] [--json]

The memory runs use the real planner by default; ``--memory-evaluator floor`` measures the
streaming machinery alone (much faster for 50,000 rows). Figures go to stdout.
"""
from __future__ import annotations

import argparse
import csv
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SHARED = ROOT.parent / "shared" / "data" / "pka-dev" / "literature_pka.csv"

#: 70 functional-group SMARTS (our own catalogue for the floor; typical acid/base and
#: liability groups a salt planner has to look for at least once per molecule)
FLOOR_SMARTS = [
    "[CX3](=O)[OX2H1]", "[CX3](=O)[O-]", "c[OX2H1]", "[SX4](=O)(=O)[OX2H1]",
    "[PX4](=O)([OX2H1])", "[SX4](=O)(=O)[NX3H1]", "[SX4](=O)(=O)[NX3H2]", "c1nn[nH]n1",
    "[NX3;H2;!$(NC=[O,N,S]);!$(Na)]", "[NX3;H1;!$(NC=[O,N,S]);!$(Na)]",
    "[NX3;H0;!$(NC=[O,N,S]);!$(Na)]", "[NX4+]", "[nX2;r6]", "[nX2;r5]", "[nH]",
    "c[NX3H2]", "c[NX3H1][CX4]", "c[NX3]([CX4])[CX4]", "[NX3][CX3]=[NX2]",
    "[NX3][CX3](=[NX2])[NX3]", "[CX3](=O)[NX3H2]", "[CX3](=O)[NX3H1]", "[CX3](=O)[NX3H0]",
    "[CX3](=O)[OX2][#6]", "[CX3H1](=O)", "[#6][CX3](=O)[#6]", "[OX2H][CX4]",
    "[OX2]([#6])[#6]", "[SX2H]", "[SX2]([#6])[#6]", "[CX3]=[CX3][CX3]=O",
    "[CX3]=[CX3][SX4](=O)=O", "[CX2]#[NX1]", "[N+](=O)[O-]", "[F,Cl,Br,I]",
    "c[F,Cl,Br,I]", "[CX4][Cl,Br,I]", "C(F)(F)F", "[OX2H]c1ccccc1[CX3]=O",
    "[NX3]-[NX3]", "[NX2]=[NX2]", "[NX3][OX2H]", "[CX3]=[NX2][OX2H]", "O=C1NC(=O)**1",
    "O=C1NC(=O)C=C1", "c1ccc2[nH]ccc2c1", "c1ccc2ncccc2c1", "c1cncnc1", "c1ncc[nH]1",
    "c1cn[nH]c1", "c1ccsc1", "c1ccoc1", "[R2]", "[r3]", "[r4]", "[$([CX4]([#6])([#6])([#6])[#6])]",
    "[#7][CX4][CX4][OX2H]", "[OX2H][CX3]=[CX3]", "[CX3](=O)[CX3](=O)", "[SX3](=O)",
    "[SX4](=O)(=O)[#6]", "[PX4]", "[BX3]", "[Si]", "[NX3][SX4](=O)(=O)c",
    "[OX2H][CX4][CX4][OX2H]", "[CX3](=[OX1])[OX2][CX3](=[OX1])", "[NX3;R][CX3;R](=O)",
    "[NX1]=[NX2+]=[NX1-]", "[CX3](=O)[Cl,Br]",
]
assert len(FLOOR_SMARTS) == 70


def benchmark_smiles(n: int) -> tuple[list[str], str]:
    if SHARED.exists():
        with open(SHARED, encoding="utf-8", newline="") as fh:
            unique = list(dict.fromkeys(row["smiles"] for row in csv.DictReader(fh)))
        origin = f"{SHARED.name} ({len(unique)} unique SMILES, cycled)"
    else:
        from saltplan.demo import load_programme

        unique = [c.smiles for c in load_programme()]
        origin = f"package demo structures ({len(unique)}, cycled)"
    return [unique[i % len(unique)] for i in range(n)], origin


def write_csv(path: Path, smiles: list[str]) -> None:
    with open(path, "w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "smiles"])
        for i, s in enumerate(smiles):
            w.writerow([f"B{i:07d}", s])


_PATTERNS = None


def floor_evaluator(smiles, **_kw):
    """Parse + standardize + 70 SMARTS; returns a Plan-shaped dict with no sites."""
    global _PATTERNS
    from rdkit import Chem

    from saltplan.structure import read_structure

    if _PATTERNS is None:
        _PATTERNS = [Chem.MolFromSmarts(s) for s in FLOOR_SMARTS]
    parent = read_structure(smiles)
    hits = sum(1 for p in _PATTERNS if parent.mol.HasSubstructMatch(p))
    return {"parent": {"smiles": parent.smiles}, "sites": [], "candidates": [],
            "verdict": {"code": f"floor_{min(hits, 1)}"}}


def time_floor(smiles: list[str], rounds: int = 3) -> float:
    """Best of ``rounds`` passes (the machine may be shared: the minimum is the least noisy)."""
    floor_evaluator(smiles[0])  # warm-up: imports, pattern compilation
    best = float("inf")
    for _ in range(rounds):
        t0 = time.perf_counter()
        for s in smiles:
            try:
                floor_evaluator(s)
            except Exception:  # noqa: BLE001 - a refused structure still costs its parse
                pass
        best = min(best, time.perf_counter() - t0)
    return best


def time_batch(path: Path, jobs: int, evaluator=None, rounds: int = 1) -> tuple[float, int]:
    from saltplan import evaluate_many

    best, failed = float("inf"), 0
    for _ in range(rounds):
        t0 = time.perf_counter()
        df = evaluate_many(path, jobs=jobs, evaluator=evaluator)
        best = min(best, time.perf_counter() - t0)
        failed = int(df["error"].notna().sum())
    return best, failed


_CHILD = r"""
import resource, sys, time
sys.path.insert(0, {bench!r})
from saltplan.batch.run import run_batch
evaluator = None
if {which!r} == "floor":
    from batch_throughput import floor_evaluator as evaluator
t0 = time.perf_counter()
res = run_batch({src!r}, {out!r}, summary={summary!r}, jobs={jobs}, evaluator=evaluator)
dt = time.perf_counter() - t0
print(res.rows, res.failed, dt, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
      resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
"""


def peak_memory(path: Path, rows: int, which: str, jobs: int, tmp: Path) -> dict:
    out, summary = tmp / f"out_{rows}.csv", tmp / f"summary_{rows}.html"
    code = _CHILD.format(bench=str(Path(__file__).resolve().parent), which=which,
                         src=str(path), out=str(out), summary=str(summary), jobs=jobs)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True, cwd=str(ROOT))
    n, failed, dt, rss_kib, child_kib = done.stdout.split()
    # with jobs > 1 the workers are separate processes: the parent (reader, writer,
    # summary) and the largest worker are reported separately
    return {"rows": int(n), "failed": int(failed), "seconds": float(dt),
            "max_rss_mib": int(rss_kib) / 1024, "worker_max_rss_mib": int(child_kib) / 1024}


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--rows", type=int, default=5000)
    ap.add_argument("--memory-rows", type=int, nargs="*", default=[5000, 50000])
    ap.add_argument("--memory-evaluator", choices=["plan", "floor"], default="plan")
    ap.add_argument("--jobs", type=int, default=os.cpu_count() or 1)
    ap.add_argument("--memory-jobs", type=int, default=1,
                    help="worker processes in the memory runs (1 = all in one process)")
    ap.add_argument("--rounds", type=int, default=1,
                    help="timed rounds of the planner runs (best is kept)")
    ap.add_argument("--skip-throughput", action="store_true", help="memory runs only")
    ap.add_argument("--json", action="store_true", help="also print the figures as JSON")
    args = ap.parse_args(argv)

    smiles, origin = benchmark_smiles(args.rows)
    figures: dict = {"molecules": args.rows, "origin": origin, "cores": os.cpu_count()}
    print(f"molecules: {args.rows} from {origin}; cores: {os.cpu_count()}; "
          f"load average at start: {os.getloadavg()[0]:.2f} (other work on the machine "
          "slows every figure; timings are the best of a few rounds where cheap)")
    with tempfile.TemporaryDirectory() as td:
        tmp = Path(td)
        src = tmp / "in.csv"
        write_csv(src, smiles)

        if not args.skip_throughput:
            floor_s = time_floor(smiles)
            figures["floor_mol_per_s"] = args.rows / floor_s
            print(f"floor (parse + standardize + {len(FLOOR_SMARTS)} SMARTS), 1 core: "
                  f"{args.rows / floor_s:,.0f} mol/s")

            mach_s, _ = time_batch(src, 1, evaluator=floor_evaluator, rounds=2)
            figures["machinery_overhead"] = mach_s / floor_s
            print(f"batch machinery with the floor as evaluator, jobs=1: "
                  f"{args.rows / mach_s:,.0f} mol/s  (x{mach_s / floor_s:.2f} the floor's time)")

        try:
            import saltplan.plan.planner  # noqa: F401
            have_plan = True
        except ImportError:
            have_plan = False
            print("plan_salts not available: batch-with-planner figures skipped")
        if have_plan and not args.skip_throughput:
            # rounds interleave the job counts, so that load from elsewhere hits both alike
            best: dict[int, tuple[float, int]] = {}
            for _ in range(args.rounds):
                for jobs in sorted({1, args.jobs}):
                    dt, failed = time_batch(src, jobs)
                    if jobs not in best or dt < best[jobs][0]:
                        best[jobs] = (dt, failed)
            for jobs, (dt, failed) in sorted(best.items()):
                per_core = args.rows / dt / jobs
                figures[f"plan_jobs{jobs}"] = {"seconds": dt, "mol_per_s": args.rows / dt,
                                               "mol_per_s_per_core": per_core,
                                               "ratio_to_floor": (dt * jobs) / floor_s,
                                               "failed_rows": failed}
                print(f"batch with plan_salts, jobs={jobs}: {args.rows / dt:,.1f} mol/s, "
                      f"{per_core:,.1f} mol/s per core; time per molecule x{dt * jobs / floor_s:.1f} "
                      f"the floor's; {failed} rows with an error")

        which = args.memory_evaluator if have_plan else "floor"
        mem = []
        for rows in args.memory_rows:
            path = tmp / f"mem_{rows}.csv"
            write_csv(path, benchmark_smiles(rows)[0])
            m = peak_memory(path, rows, which, args.memory_jobs, tmp)
            mem.append(m)
            workers = (f", largest worker {m['worker_max_rss_mib']:.0f} MiB"
                       if args.memory_jobs > 1 else "")
            print(f"peak memory, streamed CLI path ({which} evaluator, jobs={args.memory_jobs}), "
                  f"{rows:,} rows: {m['max_rss_mib']:.0f} MiB max RSS{workers} "
                  f"({m['seconds']:.0f} s, {m['failed']} rows with an error)", flush=True)
        figures["memory"] = mem
        if len(mem) >= 2:
            print(f"memory ratio {mem[-1]['rows']:,} / {mem[0]['rows']:,} rows: "
                  f"{mem[-1]['max_rss_mib'] / mem[0]['max_rss_mib']:.2f}")
    print(f"load average at end: {os.getloadavg()[0]:.2f}")
    if args.json:
        print(json.dumps(figures, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
