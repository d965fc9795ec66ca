"""What the workbench holds while it runs: compounds, their inputs, plans and screens.

Kept in memory, keyed by ids the server makes (``c1``, ``c2`` ...); a user never names a
file or path on the server. Recording into the shared ledger goes through
``saltplan.ledger`` once that subpackage is present (see DEVELOPERS.md).
"""
from __future__ import annotations

import threading
from dataclasses import dataclass, field
from typing import Any


@dataclass
class Compound:
    id: str
    name: str
    structure: Any                     # structure.Parent
    inputs: dict[str, Any] = field(default_factory=dict)
    plan: Any = None                   # plan.Plan
    plan_dict: dict | None = None
    screen_dict: dict | None = None
    screen_form: dict[str, Any] = field(default_factory=dict)
    wells: Any = None                  # web.wells.WellBook of the current screen


class Store:
    def __init__(self):
        self._lock = threading.Lock()
        self._items: dict[str, Compound] = {}
        self._next = 1

    def add(self, name: str, structure) -> Compound:
        with self._lock:
            cid = f"c{self._next}"
            self._next += 1
            item = Compound(cid, name, structure)
            self._items[cid] = item
            return item

    def get(self, cid: str) -> Compound | None:
        return self._items.get(cid)

    def all(self) -> list[Compound]:
        with self._lock:
            return list(reversed(self._items.values()))
