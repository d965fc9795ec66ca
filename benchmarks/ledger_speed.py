"""Ledger speed and size on SQLite and PostgreSQL.

Prints, for each engine:

* **recording plans**: the batch path with ``--record`` (:func:`saltplan.batch.run_batch`
  with ``ledger=``, as ``saltplan batch --record`` calls it) over N drug-like molecules
  (the SMILES of ``../shared/data/pka-dev/literature_pka.csv`` cycled to N rows, each row
  its own id, so N distinct plans): rows per second end to end (planning + recording),
  rows per second of the recording alone (time inside ``Ledger.record_plan``, one
  transaction per plan), and the database size (SQLite: the file; PostgreSQL:
  ``pg_database_size`` minus the empty ledger's);
* **outcomes query** on a ledger of M screens (each recorded by ``Ledger.record_results``
  with its design and plan, one transaction each): median and slowest of 30 queries
  (counterion, site class, pKa range), and the first (cold) one. The designs are compact
  (the wells' counterion, stoichiometry and kind, the plan's sites and candidates) so that
  M = 10,000 fits in minutes; their outcomes are drawn at random (seeded), 8 invented
  programmes, 12 counterions, 4 site classes.

PostgreSQL comes from ``SALTPLAN_TEST_PG_URL`` (e.g. ``eval "$(.ci/postgres.sh start)"``);
a fresh database is created for each measurement and dropped after. Run from the
repository root::

    python benchmarks/ledger_speed.py [--plans 10000] [--screens 10000]
                                      [--engines sqlite postgresql] [--json]
"""
from __future__ import annotations

import argparse
import copy
import csv
import json
import os
import random
import statistics
import sys
import tempfile
import time
import uuid
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
SHARED = ROOT.parent / "shared" / "data" / "pka-dev" / "literature_pka.csv"
DESIGN = ROOT / "reports" / "HRN-101" / "screen" / "design.json"
PROGRAMMES = ("HRN", "KIT", "OWL", "FOX", "ELK", "YAK", "EMU", "GNU")   # invented codes
COUNTERIONS = ("hydrochloride", "mesylate", "sulfate", "tartrate", "phosphate", "citrate",
               "maleate", "fumarate", "besylate", "tosylate", "succinate", "acetate")
CLASSES = ("amine_tertiary", "amine_secondary", "pyridine", "imidazole")


def molecules(n: int) -> list[str]:
    if SHARED.exists():
        with SHARED.open(encoding="utf-8", newline="") as fh:
            smiles = list(dict.fromkeys(row["smiles"] for row in csv.DictReader(fh)))
    else:  # pragma: no cover - without the shared set: the demo structures
        from saltplan.demo import load_programme

        smiles = [c.smiles for c in load_programme()]
    return [smiles[i % len(smiles)] for i in range(n)]


# --------------------------------------------------------------------------- databases
class Database:
    """A fresh ledger database on one engine; ``size()`` in bytes; ``drop()``."""

    def __init__(self, engine: str, workdir: Path):
        self.engine = engine
        if engine == "sqlite":
            self.path = workdir / f"ledger-{uuid.uuid4().hex[:8]}.sqlite"
            self.url = str(self.path)
            return
        import psycopg
        from psycopg import sql
        from sqlalchemy.engine import make_url

        server = os.environ.get("SALTPLAN_TEST_PG_URL", "").strip()
        if not server:
            raise SystemExit("PostgreSQL: set SALTPLAN_TEST_PG_URL (eval \"$(.ci/postgres.sh "
                             "start)\") or pass --engines sqlite")
        u = make_url(server)
        self.conninfo = dict(host=u.host, port=u.port, user=u.username, password=u.password,
                             dbname=u.database)
        self.name = "bench_" + uuid.uuid4().hex[:12]
        with psycopg.connect(**self.conninfo, autocommit=True) as conn:
            conn.execute(sql.SQL("CREATE DATABASE {}").format(sql.Identifier(self.name)))
        self.url = u.set(database=self.name).render_as_string(hide_password=False)
        self._sql = sql

    def size(self) -> int:
        if self.engine == "sqlite":
            return sum(p.stat().st_size for p in self.path.parent.glob(self.path.name + "*"))
        import sqlalchemy as sa

        eng = sa.create_engine(self.url.replace("postgresql://", "postgresql+psycopg://"))
        with eng.connect() as conn:
            size = conn.execute(sa.select(sa.func.pg_database_size(
                sa.func.current_database()))).scalar()
        eng.dispose()
        return int(size)

    def drop(self) -> None:
        if self.engine == "sqlite":
            for p in self.path.parent.glob(self.path.name + "*"):
                p.unlink()
            return
        import psycopg

        with psycopg.connect(**self.conninfo, autocommit=True) as conn:
            conn.execute(self._sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)")
                         .format(self._sql.Identifier(self.name)))


class _Timed:
    """The ledger seen by run_batch, timing each record_plan call."""

    def __init__(self, led):
        self.led = led
        self.seconds = 0.0
        self.calls = 0

    def inhouse_evidence(self):
        return self.led.inhouse_evidence()

    def record_plan(self, plan):
        t = time.perf_counter()
        ref = self.led.record_plan(plan)
        self.seconds += time.perf_counter() - t
        self.calls += 1
        return ref


# --------------------------------------------------------------------------- plans
def bench_plans(engine: str, n: int, workdir: Path, jobs: int) -> dict:
    import pandas as pd

    from saltplan.batch.run import run_batch
    from saltplan.ledger import open_ledger

    db = Database(engine, workdir)
    try:
        open_ledger(db.url).close()
        empty = db.size()
        frame = pd.DataFrame({"id": [f"BM-{i:05d}" for i in range(n)],
                              "smiles": molecules(n)})
        with open_ledger(db.url, author="benchmark") as led:
            timed = _Timed(led)
            t = time.perf_counter()
            run = run_batch(frame, workdir / f"out-{engine}.csv", id_column="id",
                            name_column="id", jobs=jobs, ledger=timed, learn=True)
            wall = time.perf_counter() - t
            counts = led.counts()
        size = db.size() - (empty if engine == "postgresql" else 0)
        return {"engine": engine, "rows": run.rows, "failed": run.failed,
                "recorded": run.recorded, "plans_in_ledger": counts.get("plan", 0),
                "wall_s": round(wall, 1), "rows_per_s": round(run.rows / wall, 1),
                "record_s": round(timed.seconds, 1),
                "record_rows_per_s": round(timed.calls / timed.seconds, 1),
                "db_bytes": size, "bytes_per_plan": round(size / max(1, timed.calls))}
    finally:
        db.drop()


# --------------------------------------------------------------------------- screens
def _compact(design: dict) -> dict:
    plan = design["plan"]
    keep_c = ("counterion", "stoichiometry", "transfers")
    return {
        "plan": {"name": plan["name"], "parent": plan["parent"], "sites": plan["sites"],
                 "provenance": dict(plan["provenance"]),
                 "candidates": [{k: c[k] for k in keep_c} for c in plan["candidates"]],
                 "excluded": []},
        "wells": [], "totals": {"wells": 0, "api_mg": 0},
    }


def screens(m: int, seed: int = 7):
    """(design, results) pairs: compact designs, random invented outcomes."""
    rng = random.Random(seed)
    base = _compact(json.loads(DESIGN.read_text(encoding="utf-8")))
    smiles = molecules(400)
    site = base["plan"]["sites"][0]
    for i in range(m):
        d = copy.deepcopy(base)
        prog = PROGRAMMES[i % len(PROGRAMMES)]
        name = f"{prog}-{i // len(PROGRAMMES) % 300:03d}"
        d["plan"]["name"] = name
        d["plan"]["parent"] = dict(d["plan"]["parent"], name=name, smiles=smiles[i % 400])
        d["plan"]["provenance"]["input_hash"] = f"sha256:bench-{i}"
        s = dict(site, atom=0, kind="base", group_id=rng.choice(CLASSES),
                 pka=round(rng.uniform(3.0, 11.0), 2))
        d["plan"]["sites"] = [s]
        ions = rng.sample(COUNTERIONS, 6)
        d["plan"]["candidates"] = [
            {"counterion": c, "stoichiometry": "1:1",
             "transfers": [{"api_atom": 0, "api_kind": "base", "api_pka": s["pka"],
                            "delta_pka": 3.0}]} for c in ions]
        wells, obs = [], []
        for j, c in enumerate(ions):
            for k in range(2):
                w = f"{'ABCDEFGH'[j]}{k + 1}"
                wells.append({"well": w, "kind": "sample", "counterion": c,
                              "stoichiometry": "1:1"})
                ok = rng.random() < 0.3
                obs.append({"well": w, "kind": "sample", "counterion": c,
                            "stoichiometry": "1:1",
                            "outcome": "crystalline" if ok else rng.choice(
                                ["amorphous", "oil", "clear_solution"]),
                            "form_label": "A" if ok else None,
                            "stoichiometry_found": "1:1" if ok else None})
        d["wells"] = wells
        d["totals"] = {"wells": len(wells), "api_mg": 5.0 * len(wells)}
        results = {"file": f"{name}/results.csv", "sha256": f"{i:064x}",
                   "invented": True, "observations": obs}
        yield d, results


def bench_outcomes(engine: str, m: int, workdir: Path) -> dict:
    from saltplan.ledger import open_ledger

    db = Database(engine, workdir)
    try:
        with open_ledger(db.url, author="benchmark") as led:
            t = time.perf_counter()
            for design, results in screens(m):
                led.record_results(results, design=design)
            fill = time.perf_counter() - t
            n_screens = led.counts().get("results", 0)
        rng = random.Random(11)
        queries = []
        for _ in range(30):
            lo = round(rng.uniform(3.0, 9.0), 1)
            queries.append((rng.choice(COUNTERIONS), rng.choice(CLASSES), lo, lo + 3.0))
        with open_ledger(db.url) as led:          # a new handle: the first query is cold
            times = []
            for q in queries:
                t = time.perf_counter()
                out = led.outcomes(*q)
                times.append(time.perf_counter() - t)
            wide = led.outcomes("hydrochloride")
        return {"engine": engine, "screens": n_screens, "fill_s": round(fill, 1),
                "fill_screens_per_s": round(n_screens / fill, 1),
                "query_cold_ms": round(times[0] * 1000, 1),
                "query_median_ms": round(statistics.median(times) * 1000, 1),
                "query_max_ms": round(max(times) * 1000, 1),
                "example": {"query": list(queries[-1]), "screens": out.screens,
                            "crystalline": out.crystalline},
                "all_hydrochloride_screens": wide.screens,
                "db_bytes": db.size()}
    finally:
        db.drop()


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--plans", type=int, default=10000)
    ap.add_argument("--screens", type=int, default=10000)
    ap.add_argument("--engines", nargs="+", default=["sqlite", "postgresql"],
                    choices=["sqlite", "postgresql"])
    ap.add_argument("--jobs", type=int, default=1, help="batch worker processes")
    ap.add_argument("--json", action="store_true")
    args = ap.parse_args(argv)
    sys.path.insert(0, str(ROOT))
    out = {"plans": [], "screens": []}
    with tempfile.TemporaryDirectory(prefix="ledger-bench-") as tmp:
        work = Path(tmp)
        for engine in args.engines:
            if args.plans:
                r = bench_plans(engine, args.plans, work, args.jobs)
                out["plans"].append(r)
                print(f"{engine:10s} batch --record: {r['rows']:,} rows ({r['failed']} "
                      f"failed, {r['recorded']:,} plans recorded) in {r['wall_s']} s = "
                      f"{r['rows_per_s']} rows/s end to end; recording alone "
                      f"{r['record_rows_per_s']} plans/s; database "
                      f"{r['db_bytes'] / 2**20:,.1f} MiB ({r['bytes_per_plan'] / 1024:,.1f} "
                      "KiB per plan)", flush=True)
            if args.screens:
                r = bench_outcomes(engine, args.screens, work)
                out["screens"].append(r)
                print(f"{engine:10s} outcomes on {r['screens']:,} screens (filled at "
                      f"{r['fill_screens_per_s']} screens/s): median "
                      f"{r['query_median_ms']} ms, max {r['query_max_ms']} ms, first "
                      f"{r['query_cold_ms']} ms (goal < 200 ms); database "
                      f"{r['db_bytes'] / 2**20:,.1f} MiB", flush=True)
    if args.json:
        print(json.dumps(out, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
