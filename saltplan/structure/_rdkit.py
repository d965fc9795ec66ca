"""Small RDKit helpers shared by the steps: log capture, compiled SMARTS, molecular weight."""
from __future__ import annotations

import contextlib
import functools
import logging
import re


# --------------------------------------------------------------------------- RDKit logging
class _Capture(logging.Handler):
    def __init__(self):
        super().__init__(level=logging.DEBUG)
        self.messages: list[str] = []

    def emit(self, record):  # pragma: no cover - trivial
        msg = record.getMessage().strip()
        if msg:
            self.messages.append(msg)


@contextlib.contextmanager
def rdkit_messages():
    """Silence RDKit's stderr noise and collect its messages instead.

    Yields the list the messages are appended to (useful in error texts).
    """
    from rdkit import RDLogger, rdBase

    handler = _Capture()
    rdBase.LogToPythonLogger()
    logger = logging.getLogger("rdkit")
    old_handlers, old_propagate = list(logger.handlers), logger.propagate
    for h in old_handlers:
        logger.removeHandler(h)
    logger.addHandler(handler)
    logger.propagate = False
    RDLogger.EnableLog("rdApp.error")
    try:
        yield handler.messages
    finally:
        logger.removeHandler(handler)
        for h in old_handlers:
            logger.addHandler(h)
        logger.propagate = old_propagate


def _rdkit_reason(messages: list[str]) -> str:
    useful = [m for m in messages if "SMILES Parse Error" in m or "Explicit valence" in m
              or "Can't kekulize" in m or "non-ring atom" in m or "Error" in m or "error" in m]
    text = (useful or messages or ["no message"])[0]
    text = re.sub(r"^\s*\[?\d\d:\d\d:\d\d\]?\s*", "", text)
    for junk in ("[", "]"):
        text = text.replace(junk, " ")
    return " ".join(text.split())


@functools.cache
def _pattern(smarts: str):
    """A compiled SMARTS query (cached): atom tests in C++ instead of Python loops."""
    from rdkit import Chem

    return Chem.MolFromSmarts(smarts)


def mol_weight(mol) -> float:
    """Average molecular weight [g/mol] from RDKit's periodic table (IUPAC atomic weights).

    The same sum as ``rdkit.Chem.Descriptors.MolWt`` (isotope-labelled atoms use their
    isotope mass), without importing the descriptor module (which loads NumPy).
    """
    from rdkit import Chem

    pt = Chem.GetPeriodicTable()
    h = pt.GetAtomicWeight(1)
    total = 0.0
    for atom in mol.GetAtoms():
        z = atom.GetAtomicNum()
        iso = atom.GetIsotope()
        total += pt.GetMassForIsotope(z, iso) if iso else pt.GetAtomicWeight(z)
        total += atom.GetTotalNumHs() * h
    return total
