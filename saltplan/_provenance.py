"""Provenance helpers shared by every result: tool version, timestamps, input hashes."""
from __future__ import annotations

import datetime as _dt
import os

from ._data import sha256_text
from ._version import __version__

TOOL = "saltplan"


def now_iso() -> str:
    """UTC timestamp (seconds). Honours SOURCE_DATE_EPOCH for reproducible outputs."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    if epoch and epoch.strip().isdigit():
        moment = _dt.datetime.fromtimestamp(int(epoch), tz=_dt.timezone.utc)
    else:
        moment = _dt.datetime.now(tz=_dt.timezone.utc)
    return moment.replace(microsecond=0).isoformat().replace("+00:00", "Z")


def input_hash(*parts) -> str:
    """sha256 over the textual form of the inputs (None → empty)."""
    return sha256_text(*("" if p is None else repr(p) for p in parts))


def provenance(**extra) -> dict:
    out = {"tool": TOOL, "version": __version__}
    out.update(extra)
    out["created"] = now_iso()
    return out
