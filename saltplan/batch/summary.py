"""Summary of a batch: counts by verdict, pKa histograms, counterions most listed.

Built incrementally (:class:`SummaryBuilder`, bounded memory: fixed histogram bins, one
counter per counterion id, the first :data:`MAX_FAILED_SHOWN` failed rows). The HTML page
is rendered by :mod:`saltplan.reports.portfolio`.
"""
from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass, field
from typing import Any

#: histogram bins [pKa units]: 1-unit bins from -2 to 16 (values outside go to the end bins)
BIN_LOW, BIN_HIGH, BIN_WIDTH = -2.0, 16.0, 1.0
MAX_FAILED_SHOWN = 20
#: compounds listed one per row in the summary's table (the table output has them all)
MAX_TABLE_ROWS = 500
_NBINS = int((BIN_HIGH - BIN_LOW) / BIN_WIDTH)


def _bin(value: float) -> int:
    return min(max(int(math.floor((value - BIN_LOW) / BIN_WIDTH)), 0), _NBINS - 1)


@dataclass(frozen=True)
class BatchSummary:
    """Counts of one batch run (see :class:`SummaryBuilder`)."""

    source: str
    rows: int
    failed: int
    duplicates: int
    by_verdict: dict[str, int]
    basic_hist: tuple[int, ...]
    acidic_hist: tuple[int, ...]
    counterions: tuple[tuple[str, int, int], ...]   # (id, times listed, times first)
    failed_rows: tuple[tuple[int, str, str], ...]   # (row, id, error), the first few
    top: int = 3
    compounds: tuple[dict[str, Any], ...] = ()       # the first MAX_TABLE_ROWS rows, see below

    def to_dict(self) -> dict[str, Any]:
        return {
            "source": self.source, "rows": self.rows, "failed": self.failed,
            "duplicates": self.duplicates, "by_verdict": dict(self.by_verdict),
            "bins": {"low": BIN_LOW, "high": BIN_HIGH, "width": BIN_WIDTH},
            "most_basic_pka_histogram": list(self.basic_hist),
            "most_acidic_pka_histogram": list(self.acidic_hist),
            "counterions": [{"counterion": c, "listed": n, "first": f}
                            for c, n, f in self.counterions],
            "failed_rows": [{"row": r, "id": i, "error": e} for r, i, e in self.failed_rows],
            "compounds": [dict(c) for c in self.compounds],
        }


@dataclass
class SummaryBuilder:
    """Accumulate batch rows (dicts with the batch columns) for the summary."""

    source: str = ""
    top: int = 3
    rows: int = 0
    failed: int = 0
    duplicates: int = 0
    by_verdict: Counter = field(default_factory=Counter)
    basic: list = field(default_factory=lambda: [0] * _NBINS)
    acidic: list = field(default_factory=lambda: [0] * _NBINS)
    listed: Counter = field(default_factory=Counter)
    first: Counter = field(default_factory=Counter)
    failed_rows: list = field(default_factory=list)
    compounds: list = field(default_factory=list)

    def add(self, rows) -> None:
        for row in rows:
            self.rows += 1
            if len(self.compounds) < MAX_TABLE_ROWS:
                self.compounds.append(_compound(row))
            if row.get("duplicate_of") is not None:
                self.duplicates += 1
            if row.get("error"):
                self.failed += 1
                self.by_verdict["error"] += 1
                if len(self.failed_rows) < MAX_FAILED_SHOWN:
                    self.failed_rows.append((row["row"], row.get("id") or "", row["error"]))
                continue
            self.by_verdict[row.get("verdict") or "unknown"] += 1
            if row.get("most_basic_pka") is not None:
                self.basic[_bin(row["most_basic_pka"])] += 1
            if row.get("most_acidic_pka") is not None:
                self.acidic[_bin(row["most_acidic_pka"])] += 1
            ids = row.get("_top_ids") or ()
            for ion in dict.fromkeys(ids):
                self.listed[ion] += 1
            if ids:
                self.first[ids[0]] += 1

    def result(self) -> BatchSummary:
        verdicts = dict(sorted(self.by_verdict.items(), key=lambda kv: (-kv[1], kv[0])))
        ions = tuple(sorted(((c, n, self.first.get(c, 0)) for c, n in self.listed.items()),
                            key=lambda t: (-t[1], -t[2], t[0])))
        return BatchSummary(self.source, self.rows, self.failed, self.duplicates, verdicts,
                            tuple(self.basic), tuple(self.acidic), ions,
                            tuple(self.failed_rows), self.top, tuple(self.compounds))


def _compound(row: dict[str, Any]) -> dict[str, Any]:
    """One line of the summary's compound table (values as in the batch row)."""
    return {
        "row": row.get("row"), "id": row.get("id") or "", "name": row.get("name") or "",
        "smiles": row.get("smiles"), "verdict": "error" if row.get("error") else row.get("verdict"),
        "most_basic_pka": row.get("most_basic_pka"), "most_basic_unc": row.get("_basic_unc"),
        "most_acidic_pka": row.get("most_acidic_pka"), "most_acidic_unc": row.get("_acidic_unc"),
        "top": list(row.get("_top") or ()), "margin": row.get("_margin"),
        "serious": row.get("_serious"), "error": row.get("error"),
    }
