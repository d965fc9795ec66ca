"""Shared pytest configuration. Fixtures used by one test module live in that module."""
from __future__ import annotations

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
