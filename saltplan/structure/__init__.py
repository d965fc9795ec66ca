"""Structure: read SMILES / MOL / SDF, standardize to the free form, strip salt formers,
water and solvents (:class:`Parent`); RDKit helpers used by every later step.

Imports only the private helpers (``_data``, ``errors``) below it.
"""
from __future__ import annotations

from ._rdkit import mol_weight, rdkit_messages
from .parent import Parent, StrippedComponent, read_structure, standardize
from .reading import DEFAULT_MAX_HEAVY_ATOMS, MAX_COMPONENTS, check_smiles_text, iter_sdf

__all__ = ["Parent", "StrippedComponent", "read_structure", "standardize", "iter_sdf",
           "check_smiles_text", "mol_weight", "rdkit_messages", "DEFAULT_MAX_HEAVY_ATOMS",
           "MAX_COMPONENTS"]
