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


#: seconds :func:`_reference_work` took on the project's 2-core build machine, idle
#: (2026-12-05, five runs 0.082-0.086 s)
_REFERENCE_SECONDS = 0.08
_slowness_cache: list[float] = []          # [measured at (monotonic), factor]


def _reference_work() -> float:
    """A fixed CPU-bound workload (RDKit round trips and a Python loop); its time."""
    import time

    from rdkit import Chem

    start = time.perf_counter()
    mol = Chem.MolFromSmiles("CN1CCN(CC1)c1ccc(cc1)C(=O)Nc1ccc(C)c(Nc2nccc(n2)-c2cccnc2)c1")
    for _ in range(300):
        Chem.MolToSmiles(Chem.MolFromSmiles(Chem.MolToSmiles(mol)))
    total = 0
    for i in range(300_000):
        total += i * i
    return time.perf_counter() - start


def machine_slowness() -> float:
    """How much slower this machine is right now than the build machine idle (>= 1).

    Re-measured at most every 20 s (best of three), so a machine that is loaded by other
    work (a CI runner, a second test process) gets proportionally longer hang bounds.
    """
    import time

    now = time.monotonic()
    if not _slowness_cache or now - _slowness_cache[0] > 20:
        factor = max(1.0, min(_reference_work() for _ in range(3)) / _REFERENCE_SECONDS)
        _slowness_cache[:] = [now, factor]
    return _slowness_cache[1]


@pytest.fixture
def hang_bound():
    """``hang_bound(seconds)``: a bound against hangs and blow-ups, not a benchmark.

    ``seconds`` is generous on the idle build machine and is scaled by
    :func:`machine_slowness`, so the check does not depend on the speed or load of the
    machine that runs it (speed goals live in ``benchmarks/``)."""
    return lambda seconds: seconds * machine_slowness()


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
