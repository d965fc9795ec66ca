"""saltplan: plan the salt forms of a drug candidate.

Structure → ionizable sites and pKa → counterion shortlist (ΔpKa rule, acceptability,
liabilities) → screen design → reports and decision record. A planning aid, not a
measurement: confirm by experiment and defer to pharmacopoeias, ICH guidance, local
regulation and qualified staff.

Importing this package is cheap: heavy modules (RDKit, pandas, YAML data) load on first use.
"""
from __future__ import annotations

import importlib
from typing import Any

from ._version import __version__

# public name -> module that defines it (imported lazily)
_LAZY = {
    "read_structure": "saltplan.structure",
    "Parent": "saltplan.structure",
    "ionizable_sites": "saltplan.ionization",
    "Site": "saltplan.ionization",
    "load_counterions": "saltplan.library",
    "Counterion": "saltplan.library",
    "load_solvents": "saltplan.library",
    "plan_salts": "saltplan.plan",
    "Plan": "saltplan.plan",
    "design_screen": "saltplan.screen",
    "ScreenDesign": "saltplan.screen",
    "evaluate_many": "saltplan.batch",
    "evaluate_results": "saltplan.select",
    "Selection": "saltplan.select",
    "SaltplanError": "saltplan.errors",
}

__all__ = ["__version__", *_LAZY]


def __getattr__(name: str) -> Any:
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'saltplan' has no attribute '{name}'")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
