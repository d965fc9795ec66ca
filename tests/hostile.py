"""Shared checks of the reliability tests (tests/test_reliability_*.py).

A refused input must give: the expected exit status (1 domain error, 2 usage error), one
line of error on stderr naming the problem, no traceback, no "internal error" (which is how
the CLI reports a bug), and no output file left behind.
"""
from __future__ import annotations

import os
from pathlib import Path


def assert_refused(result, *, code: int = 1, mentions: tuple[str, ...] = ()) -> str:
    """Check a CLI result is a clean refusal; returns the error line."""
    err = result.stderr
    assert result.exit_code == code, (result.exit_code, result.stdout[-500:], err[-500:])
    assert "Traceback" not in err and "Traceback" not in result.stdout
    assert "internal error" not in err, err
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert lines, "no error message on stderr"
    if code == 1:
        error_lines = [ln for ln in lines if ln.startswith("Error: ")]
        assert len(error_lines) == 1, lines
        line = error_lines[0]
    else:  # click usage errors: "Usage: ...", "Try ...", "Error: ..."
        line = lines[-1]
        assert line.startswith("Error: "), lines
    assert len(line) < 2000, "error line unreasonably long"
    low = line.lower()
    for word in mentions:
        assert word.lower() in low, (word, line)
    return line


def files_under(folder: str | os.PathLike) -> list[str]:
    """Every file (including hidden temporaries) below ``folder``, sorted, relative."""
    root = Path(folder)
    if not root.exists():
        return []
    return sorted(str(p.relative_to(root)) for p in root.rglob("*") if p.is_file())
