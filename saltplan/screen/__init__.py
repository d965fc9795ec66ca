"""The screen: counterion × solvent × stoichiometry design, solvent choice, amounts and
budget, plate / vial layout, risky combinations, and the screen's files.

Imports ``plan``, ``library``, ``structure`` and the private helpers; ``reports`` only
lazily, for ``ScreenDesign._repr_html_``.
"""
from __future__ import annotations

from .amounts import MIN_PIPETTE_UL, counterion_amounts, equivalents_for, mass_fraction, parse_stoichiometry
from .design import MODES, SCALES, Mode, Scale, ScreenDesign, design_screen
from .layout import PLATE_COLUMNS, PLATE_ROWS, PLATE_WELLS, Well
from .output import screen_structure, write_screen

__all__ = ["MODES", "SCALES", "Mode", "Scale", "Well", "ScreenDesign", "design_screen",
           "write_screen", "screen_structure", "counterion_amounts", "equivalents_for",
           "mass_fraction", "parse_stoichiometry", "PLATE_ROWS", "PLATE_COLUMNS", "PLATE_WELLS",
           "MIN_PIPETTE_UL"]
