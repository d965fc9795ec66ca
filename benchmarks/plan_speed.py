"""Speed of `saltplan plan`: one CLI call (wall time, start-up included) and plan_salts itself.

Goals (issue 5): one `saltplan plan` call < 1.5 s wall including interpreter start-up and
imports; `plan_salts` on a warm process < 50 ms per molecule. Prints figures; asserts nothing.

    python benchmarks/plan_speed.py [--repeat N]
"""
from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import time

# a few drug-like structures of different kinds (public structures; no names needed)
MOLECULES = [
    "CN(C)CCOC(c1ccccc1)c1ccccc1",                                   # tertiary amine
    "CN[C@H]1CC[C@@H](c2ccc(Cl)c(Cl)c2)c2ccccc21",                   # secondary amine
    "COc1ccc2cc([C@H](C)C(=O)O)ccc2c1",                              # carboxylic acid
    "Cc1ccc(NC(=O)c2ccc(CN3CCN(C)CC3)cc2)cc1Nc1nccc(-c2cccnc2)n1",   # polybasic kinase-type
    "CCCCc1nc(Cl)c(CO)n1Cc1ccc(-c2ccccc2-c2nn[nH]n2)cc1",            # tetrazole + imidazole
    "CC(=O)[C@H]1CC[C@H]2[C@@H]3CCC4=CC(=O)CC[C@]4(C)[C@H]3CC[C@]12C",  # neutral steroid
]


def _command() -> list[str]:
    """The installed `saltplan` console script beside this interpreter (no shell shims),
    else the first on PATH, else the same entry point through the interpreter."""
    from pathlib import Path

    beside = Path(sys.executable).with_name("saltplan")
    if beside.exists():
        return [str(beside)]
    exe = shutil.which("saltplan")
    if exe:
        return [exe]
    return [sys.executable, "-c", "import sys; from saltplan.cli import main; sys.exit(main())"]


def cli_wall(smiles: str, repeat: int) -> list[float]:
    env = dict(os.environ, PYTHONDONTWRITEBYTECODE="0")
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        proc = subprocess.run(_command() + ["plan", smiles, "--json"],
                              capture_output=True, text=True, env=env)
        times.append(time.perf_counter() - t0)
        if proc.returncode != 0:
            raise SystemExit(f"saltplan plan failed: {proc.stderr.strip()}")
    return times


def import_wall() -> float:
    t0 = time.perf_counter()
    subprocess.run([sys.executable, "-c", "import saltplan.cli"], check=True)
    return time.perf_counter() - t0


def in_process(repeat: int) -> dict[str, list[float]]:
    from saltplan.plan.planner import plan_salts

    plan_salts(MOLECULES[0])          # warm caches: library, weights, SMARTS
    out = {}
    for smi in MOLECULES:
        times = []
        for _ in range(repeat):
            t0 = time.perf_counter()
            plan_salts(smi)
            times.append(time.perf_counter() - t0)
        out[smi] = times
    return out


def distinct_molecules(limit: int) -> tuple[list[str], str]:
    """Distinct drug-like SMILES: the shared pKa data set when present (read at run time)."""
    import csv
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "shared" / "data" / "pka-dev" / "literature_pka.csv"
    if not path.exists():
        return MOLECULES, "built-in list"
    seen: dict[str, None] = {}
    with path.open(encoding="utf-8") as fh:
        for row in csv.DictReader(fh):
            seen.setdefault(row["smiles"], None)
            if len(seen) >= limit:
                break
    return list(seen), f"first {len(seen)} distinct molecules of {path.name}"


def cold_per_molecule(limit: int) -> None:
    """Each molecule planned once (no per-molecule cache help): the realistic figure."""
    from saltplan.errors import SaltplanError
    from saltplan.plan.planner import plan_salts

    mols, label = distinct_molecules(limit)
    times, failed = [], 0
    for smi in mols:
        t0 = time.perf_counter()
        try:
            plan_salts(smi)
        except SaltplanError:
            failed += 1
            continue
        times.append(time.perf_counter() - t0)
    times.sort()
    p95 = times[int(0.95 * (len(times) - 1))]
    print(f"plan_salts once per molecule ({label}; {failed} refused as input errors):")
    print(f"  median {statistics.median(times) * 1000:.1f} ms, p95 {p95 * 1000:.1f} ms, "
          f"max {times[-1] * 1000:.1f} ms over {len(times)} molecules  (goal < 50 ms)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--molecules", type=int, default=200, help="distinct molecules for the cold figure")
    args = ap.parse_args()

    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"python {sys.version.split()[0]}, {os.cpu_count()} CPUs, load average {load:.1f}")
    print(f"command: {' '.join(_command())}")
    print(f"interpreter + `import saltplan.cli`: {import_wall() * 1000:.0f} ms")
    cli = cli_wall(MOLECULES[0], args.repeat)
    print(f"`saltplan plan SMILES --json` wall (incl. start-up), {args.repeat} runs: "
          f"median {statistics.median(cli):.2f} s, max {max(cli):.2f} s  (goal < 1.5 s)")

    t0 = time.perf_counter()
    from saltplan.plan.planner import plan_salts
    plan_salts(MOLECULES[0])
    print(f"first plan_salts in this process (imports, library, caches): "
          f"{(time.perf_counter() - t0) * 1000:.0f} ms")
    results = in_process(args.repeat)
    print(f"plan_salts repeated on the same molecule, median of {args.repeat}:")
    for smi, times in results.items():
        print(f"  {statistics.median(times) * 1000:7.1f} ms  {smi}")
    allt = [t for ts in results.values() for t in ts]
    print(f"  overall median {statistics.median(allt) * 1000:.1f} ms, max {max(allt) * 1000:.1f} ms")
    cold_per_molecule(args.molecules)


if __name__ == "__main__":
    main()
