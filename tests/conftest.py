"""Shared pytest configuration. Fixtures used by one test module live in that module."""
from __future__ import annotations

import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
FIXTURES = Path(__file__).resolve().parent / "fixtures"
SHARED_PKA = ROOT.parent / "shared" / "data" / "pka-dev" / "literature_pka.csv"


@pytest.fixture
def fixtures_dir() -> Path:
    return FIXTURES


@pytest.fixture
def cli():
    """Invoke the saltplan CLI in-process; returns click's Result (exit_code, stdout, stderr)."""
    from click.testing import CliRunner

    from saltplan.cli import main

    runner = CliRunner()

    def run(*args, input=None):
        return runner.invoke(main, [str(a) for a in args], input=input, catch_exceptions=False)

    return run


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    """Under CI (``CI`` set, as ``.ci/run`` runs) a skipped test is a failure.

    Skips are for a developer's machine that lacks a service (Chromium, PostgreSQL); CI
    installs and starts them, so a skip there means a missing install step.
    """
    outcome = yield
    report = outcome.get_result()
    if report.skipped and not hasattr(report, "wasxfail") and os.environ.get("CI", "") not in ("", "0", "false"):
        reason = report.longrepr[2] if isinstance(report.longrepr, tuple) else str(report.longrepr)
        report.outcome = "failed"
        report.longrepr = f"skipped under CI ({reason}): CI must provide what this test needs"
