"""Canonical JSON and checksums of ledger records.

The checksum of a record is ``sha256:`` + the SHA-256 of the canonical JSON of its
content (every stored field except the row id and the checksum itself): keys sorted,
no insignificant white space, UTF-8, no NaN/Infinity. Two ledgers compute the same
checksum for the same record, which is what export/import uses to merge without
duplicates.
"""
from __future__ import annotations

import hashlib
import json
from typing import Any


def canonical_json(value: Any) -> str:
    """Deterministic JSON text: sorted keys, compact separators, strict floats."""
    return json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def sha256_of(value: Any) -> str:
    """``sha256:<hex>`` of the canonical JSON of ``value``."""
    return "sha256:" + hashlib.sha256(canonical_json(value).encode("utf-8")).hexdigest()


def plain(value: Any) -> Any:
    """``value.to_dict()`` when it has one, else ``value``; round-tripped through JSON so
    tuples become lists and the stored body equals what is read back."""
    if hasattr(value, "to_dict"):
        value = value.to_dict()
    return json.loads(json.dumps(value, ensure_ascii=False, allow_nan=False))
