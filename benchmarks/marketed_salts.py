"""Independent check of the planner: do marketed salt forms come out feasible and ranked high?

Reads ``benchmarks/data/marketed_salts.csv`` (marketed drugs and the counterion of a marketed
salt form, public knowledge written down from memory) and runs ``plan_salts`` twice per drug:
once on the structure alone (every pKa estimated) and once with the literature pKa given as
"measured", which separates ranking errors from estimation errors. Prints, for each mode,
the share of drugs whose marketed counterion is feasible, the share found in the top 3,
top 5 and top 10 (any stoichiometry), the median rank, and for the estimator the error of the most
basic / most acidic site against the literature value.

    python benchmarks/marketed_salts.py [--verbose]
"""
from __future__ import annotations

import csv
import statistics
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
#: library ids used for counterions whose marketed name differs from the id stem
ALIASES = {"hydrogen_sulfate": ("hydrogen_sulfate", "bisulfate", "sulfate")}


def load_rows():
    with open(HERE / "data" / "marketed_salts.csv", encoding="utf-8") as fh:
        return list(csv.DictReader(line for line in fh if not line.startswith("#")))


def rank_of(plan_dict, counterion):
    """Rank of the counterion (each counterion counted once, by its best stoichiometry)."""
    ids = ALIASES.get(counterion, (counterion,))
    for cand in plan_dict["candidates"]:
        if cand["counterion"] in ids:
            return cand.get("counterion_rank", cand["rank"]), cand["feasible"], cand["stoichiometry"]
    return None, False, None


def main(argv):
    from saltplan.plan.planner import plan_salts

    verbose = "--verbose" in argv
    rows = load_rows()
    report = {}
    pka_errors = []
    for mode in ("estimated", "literature pKa"):
        ranks, feasible, misses = [], 0, []
        for r in rows:
            kind, value = r["pka_from_memory"].split()
            measured = {kind: float(value)} if mode != "estimated" else None
            try:
                plan = plan_salts(r["smiles"], name=r["inn"], measured=measured).to_dict()
            except Exception as exc:  # a refusal is a miss, reported with its reason
                misses.append(f"    {r['inn']:18s} refused: {exc}")
                ranks.append(99)
                if mode == "estimated":
                    pka_errors.append((r["inn"], None))
                continue
            rank, ok, stoich = rank_of(plan, r["marketed_counterion"])
            if mode == "estimated":
                sites = [s for s in plan["sites"] if s["kind"] == kind]
                if sites:
                    best = max(sites, key=lambda s: s["pka"]) if kind == "base" else min(sites, key=lambda s: s["pka"])
                    pka_errors.append((r["inn"], best["pka"] - float(value)))
                else:
                    pka_errors.append((r["inn"], None))
            feasible += bool(ok)
            ranks.append(rank if (rank is not None and ok) else 99)
            if verbose or not ok or (rank or 99) > 5:
                misses.append(f"    {r['inn']:18s} {r['marketed_counterion']:16s} rank {rank} feasible {ok} {stoich}")
        n = len(rows)
        report[mode] = (feasible / n, sum(x <= 3 for x in ranks) / n, sum(x <= 5 for x in ranks) / n,
                        sum(x <= 10 for x in ranks) / n, statistics.median(ranks), misses)
    print(f"marketed salt forms: {len(rows)} drugs (benchmarks/data/marketed_salts.csv, from memory)")
    for mode, (f, t3, t5, t10, med, misses) in report.items():
        print(f"  {mode:15s} feasible {f:5.0%}   top-3 {t3:5.0%}   top-5 {t5:5.0%}   top-10 {t10:5.0%}   "
              f"median rank {med}")
        if misses:
            print("\n".join(misses))
    errs = [abs(e) for _, e in pka_errors if e is not None]
    missing = [name for name, e in pka_errors if e is None]
    print(f"  estimator vs literature (most basic/acidic site): MAE {statistics.mean(errs):.2f} over {len(errs)}, "
          f"{sum(e > 2 for e in errs)} off by > 2, site not found for {len(missing)} {missing}")
    if verbose:
        for name, e in pka_errors:
            print(f"    {name:18s} {e if e is None else round(e, 2)}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
