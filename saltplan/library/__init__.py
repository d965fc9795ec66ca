"""Libraries: the counterion library (loading, merging user files, schema and flag
vocabulary) and the solvent library (ICH Q3C classes, properties).

Imports ``structure`` (molecular weights, RDKit messages) and the private helpers.
"""
from __future__ import annotations

from .counterions import FLAGS, Counterion, Library, LibraryCheck, build_library, check_counterions, load_counterions
from .solvents import Solvent, SolventLibrary, load_solvents

__all__ = ["FLAGS", "Counterion", "Library", "LibraryCheck", "build_library",
           "check_counterions", "load_counterions", "Solvent", "SolventLibrary",
           "load_solvents"]
