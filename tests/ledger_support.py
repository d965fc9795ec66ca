"""Ledger test support: a fresh ledger URL on SQLite or on PostgreSQL.

PostgreSQL comes from ``SALTPLAN_TEST_PG_URL`` (``.ci/run`` sources ``.ci/postgres.sh``, which
exports it; by hand: ``eval "$(.ci/postgres.sh start)"``). Without
it the PostgreSQL cases are skipped with the reason, except under ``CI=true`` where they
fail: CI must run them.
"""
from __future__ import annotations

import json
import os
import uuid
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
ENGINES = ["sqlite", "postgresql"]
DESIGN = ROOT / "reports" / "HRN-101" / "screen" / "design.json"
RESULTS = ROOT / "reports" / "HRN-101" / "screen" / "results-invented.csv"


def pg_server_url() -> str:
    url = os.environ.get("SALTPLAN_TEST_PG_URL", "").strip()
    if not url:
        if os.environ.get("CI", "").lower() == "true":
            pytest.fail("CI=true but SALTPLAN_TEST_PG_URL is not set: .ci/run must start "
                        "PostgreSQL (`. .ci/postgres.sh DIR`)")
        pytest.skip("PostgreSQL ledger tests need a server: run `eval \"$(.ci/postgres.sh "
                    "start)\"` (sets SALTPLAN_TEST_PG_URL)")
    return url


def fresh_url(engine: str, tmp_path: Path):
    """(url, cleanup) of an empty ledger database on ``engine``."""
    if engine == "sqlite":
        return str(tmp_path / "ledger.sqlite"), lambda: None
    import psycopg
    from sqlalchemy.engine import make_url

    server = make_url(pg_server_url())
    name = "t_" + uuid.uuid4().hex[:16]
    conninfo = dict(host=server.host, port=server.port, user=server.username,
                    password=server.password, dbname=server.database)
    with psycopg.connect(**conninfo, autocommit=True) as conn:
        conn.execute(psycopg.sql.SQL("CREATE DATABASE {}").format(psycopg.sql.Identifier(name)))

    def cleanup():
        with psycopg.connect(**conninfo, autocommit=True) as conn:
            conn.execute(psycopg.sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)")
                         .format(psycopg.sql.Identifier(name)))

    return server.set(database=name).render_as_string(hide_password=False), cleanup


def demo_design() -> dict:
    return json.loads(DESIGN.read_text(encoding="utf-8"))


def demo_results(design=None):
    from saltplan.select import read_results

    return read_results(RESULTS, design or demo_design())
