"""Ionizable sites and pKa estimation (calibrated, explained linear free-energy relationships).

Importing this package is cheap: the catalogue YAML is parsed and SMARTS compiled on the
first call. See ``README.md`` in this folder for how to add a pKa rule.
"""
from __future__ import annotations

from .estimate import ionizable_sites, permanent_charges
from .measured import parse_measured
from .site import PermanentCharge, Site, Step

__all__ = ["ionizable_sites", "permanent_charges", "parse_measured", "Site", "Step",
           "PermanentCharge"]
