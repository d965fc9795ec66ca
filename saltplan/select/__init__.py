"""Selection: reading screen results and the design, criteria and tiers, ranking of the
forms, lead and back-up (:class:`Selection`).

Imports ``screen``'s files only as data (design.json), the private helpers; ``reports``
only lazily, for ``Selection._repr_html_``.
"""
from __future__ import annotations

from .evaluate import RANKING_ORDER, Evidence, FormGroup, Selection, evaluate_results, load_design, read_results

__all__ = ["Evidence", "FormGroup", "Selection", "evaluate_results", "read_results",
           "load_design", "RANKING_ORDER"]
