"""The plan: ΔpKa assessment, stoichiometry, solubility and pHmax, caveats, ranking, and
:func:`plan_salts` → :class:`Plan`.

Imports ``ionization``, ``library``, ``structure`` and the private helpers; ``reports``
only lazily, for ``Plan._repr_html_``.
"""
from __future__ import annotations

from .planner import Plan, plan_salts

__all__ = ["Plan", "plan_salts"]
