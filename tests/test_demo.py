"""The committed ``reports/`` folder is what the code produces now (timestamps aside).

Regenerate it with ``saltplan demo --out reports`` after any change that alters output.
Drawings and charts are byte-stable for a given RDKit / matplotlib version; when the
installed versions differ from those recorded in ``reports/environment.json`` the inline
SVG bodies are compared by count only (everything else still byte for byte).
"""
from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
REPORTS = ROOT / "reports"
STAMP = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\dZ")
SVG = re.compile(r"<svg\b.*?</svg>", re.S)


def _normalize(text: str, strip_svg: bool) -> str:
    text = STAMP.sub("<timestamp>", text)
    if strip_svg:
        text = SVG.sub("<svg/>", text)
    return text


def _ledger_db(path: Path) -> bool:
    """The demo's SQLite ledger (binary, not committed: .gitignore) is checked below."""
    return path.name.startswith("ledger.sqlite")


@pytest.fixture(scope="module")
def regenerated(tmp_path_factory):
    from saltplan.demo import run_demo

    out = tmp_path_factory.mktemp("demo")
    summary = run_demo(out)
    return out, summary


def test_demo_covers_the_scenario(regenerated):
    out, summary = regenerated
    verdicts = {c["code"]: c["verdict"] for c in summary["compounds"]}
    assert len(verdicts) == 6
    assert verdicts["HRN-106"] == "no_ionizable_site"           # the neutral compound
    assert sum(v == "salt_candidates" for v in verdicts.values()) == 5
    assert (out / "portfolio.csv").is_file() and (out / "portfolio-summary.html").is_file()
    assert (out / "HRN-101" / "decision" / "decision.html").is_file()
    invented = (out / "HRN-101" / "screen" / "results-invented.csv").read_text(encoding="utf-8")
    assert invented.startswith("# INVENTED DATA")


def test_committed_reports_match_the_code(regenerated):
    out, _ = regenerated
    from saltplan.demo import rendering_versions

    assert REPORTS.is_dir(), "reports/ missing: run `saltplan demo --out reports`"
    recorded = json.loads((REPORTS / "environment.json").read_text())["versions"]
    now = rendering_versions()
    strip_svg = {k: v for k, v in recorded.items() if k != "saltplan"} != \
                {k: v for k, v in now.items() if k != "saltplan"}
    new = sorted(p.relative_to(out).as_posix() for p in out.rglob("*")
                 if p.is_file() and not _ledger_db(p))
    old = sorted(p.relative_to(REPORTS).as_posix() for p in REPORTS.rglob("*")
                 if p.is_file() and not _ledger_db(p))
    assert new == old, "file list differs: regenerate with `saltplan demo --out reports`"
    stale = []
    for rel in new:
        if rel == "environment.json":
            continue
        a = (out / rel).read_text(encoding="utf-8")
        b = (REPORTS / rel).read_text(encoding="utf-8")
        if _normalize(a, strip_svg) != _normalize(b, strip_svg):
            stale.append(rel)
        elif strip_svg:
            assert len(SVG.findall(a)) == len(SVG.findall(b)), rel
    assert not stale, f"reports/ is stale for {stale[:5]}: regenerate with `saltplan demo --out reports`"


def test_demo_records_its_programme_in_a_ledger(regenerated):
    """Every compound's plan, the five screens, the lead's results and selection are in
    ``ledger.sqlite``; ``ledger-outcomes.txt`` is the outcomes query over it."""
    out, summary = regenerated
    from saltplan.cli.ledger import _pka_range
    from saltplan.ledger import open_ledger

    with open_ledger(out / "ledger.sqlite", create=False) as led:
        counts = led.counts()
        assert counts["compound"] == 6 and counts["plan"] == 6
        assert counts["screen"] == sum("wells" in c for c in summary["compounds"])
        assert (counts["results"], counts["selection"]) == (1, 1)
        assert led.verify().ok
        text = (out / "ledger-outcomes.txt").read_text(encoding="utf-8")
        query = text.splitlines()[0].split()
        counterion = query[4]
        site = query[query.index("--site-class") + 1]
        lo, hi = _pka_range(query[query.index("--pka") + 1])
        result = led.outcomes(counterion, site, lo, hi)
    assert result.screens == 1 and result.crystalline == 1        # the invented lead form
    assert result.render() in text
    assert {r["author"] for r in led_history(out)} == {"saltplan demo"}


def led_history(out):
    from saltplan.ledger import open_ledger

    with open_ledger(out / "ledger.sqlite", create=False) as led:
        return led.history("HRN-101")["records"]
