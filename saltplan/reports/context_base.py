"""Small helpers shared by the report view-model builders (no chemistry, no templates)."""
from __future__ import annotations

import json
from typing import Any

CATEGORY_LABELS = {"salt_expected": "salt expected", "likely": "likely",
                   "uncertain": "uncertain", "unlikely": "unlikely"}
SEVERITY_ORDER = {"serious": 0, "warning": 1, "info": 2}
PROVENANCE_SHORT = {"measured": "meas.", "user": "user", "estimated": "est."}


class MissingKey(KeyError):
    """A required key is missing from a plan / screen dict (message names its path)."""

    def __str__(self) -> str:
        return str(self.args[0])


def need(d: Any, key: str, where: str) -> Any:
    """``d[key]``, or :class:`MissingKey` naming ``where.key``."""
    if not isinstance(d, dict):
        raise MissingKey(f"report input: '{where}' must be a mapping, got {type(d).__name__}")
    if key not in d:
        raise MissingKey(f"report input: missing required key '{where}.{key}'")
    return d[key]


def text_of(item: Any) -> str:
    """Plain text of a caution / reference that may be a string or a small dict."""
    if isinstance(item, str):
        return item
    if isinstance(item, dict):
        for key in ("text", "citation", "reference", "title"):
            if item.get(key):
                return str(item[key])
    return json.dumps(item, ensure_ascii=False, sort_keys=True)


def fmt(value: Any, digits: int = 2, unit: str = "") -> str:
    """A number with fixed decimals (``−`` for negatives), or "n/a" for None."""
    if value is None:
        return "n/a"
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    s = f"{value:.{digits}f}".replace("-", "−")
    return f"{s} {unit}".strip()


def plain(value: Any) -> str:
    """A value as one line of text: floats to 2 decimals, lists "a, b", dicts "k: v; k: v"."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return fmt(value, 2)
    if isinstance(value, dict):
        return "; ".join(f"{k}: {plain(v)}" for k, v in value.items()) or "—"
    if isinstance(value, (list, tuple)):
        return ", ".join(plain(v) for v in value) or "—"
    if value is None:
        return "—"
    return str(value)
