"""Risky counterion × solvent × mode combinations of a salt screen.

Each rule names the chemistry, whether the combination is dropped by default (``drop``) or
only flagged, and its source. :func:`risks_for` returns the rules that fire for one well.
Rules use the counterion library's machine-readable ``flags`` (``sulfonate_ester_risk``,
``strongly_basic_solution``, ``oxidizer``, ``volatile_acid``), the solvent library
(``is_alcohol``, ``family``) and the structures (primary amines).

These are cautions of common practice, not a hazard assessment: the site's safety rules,
ICH M7 and qualified staff decide.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass


@dataclass(frozen=True)
class Rule:
    code: str
    drop: bool
    text: str
    source: str


RULES = {r.code: r for r in (
    Rule("sulfonate_ester", True,
         "sulfonic acid with an alcohol: alkyl sulfonate esters (methyl, ethyl, isopropyl "
         "mesylate, ...) are potential mutagenic impurities",
         "ICH M7(R2); common practice: avoid alcohols in sulfonate salt formation or plan the "
         "control"),
    Rule("ester_solvolysis", True,
         "strongly basic counterion in an ester: hydrolysis / transesterification of the "
         "solvent (acetate and alcohol in the well)",
         "common practice (base-catalysed ester hydrolysis)"),
    Rule("imine_formation", True,
         "primary-amine counterion in a ketone: imine (Schiff base) formation",
         "common practice (amine-carbonyl condensation)"),
    Rule("oxidizer_organic", True,
         "oxidizing acid with an organic solvent: risk of runaway oxidation or nitrate esters",
         "counterion library liability (oxidizer); common practice"),
    Rule("volatile_acid_loss", False,
         "volatile acid in an evaporation: the acid can be lost on drying, leaving free form "
         "or a non-stoichiometric salt",
         "common practice (loss of HCl from salts of weak bases on drying)"),
    Rule("api_imine_risk", False,
         "the API has a primary aliphatic amine: ketone solvents can form imines with it",
         "common practice (amine-carbonyl condensation)"),
)}
#: flag code -> one-line meaning with source (the worksheet's flag legend)
FLAG_TEXT = {code: f"{r.text} [{r.source}]" for code, r in RULES.items()}

_PRIMARY_AMINE = ("[NX3;H2;!$(N-[#6]=[O,N,S]);!$(N-a);!$(N-[S,P]=O)][CX4]",
                  "[NX4+;H3][CX4]")


@dataclass(frozen=True)
class Risk:
    code: str
    drop: bool
    reason: str
    source: str


def _fire(code: str, detail: str) -> Risk:
    r = RULES[code]
    return Risk(code, r.drop, f"{r.text} ({detail})", r.source)


def risks_for(counterion, solvent, antisolvent=None, stock_solvent=None, mode: str = "",
              api_primary_amine: bool = False) -> list[Risk]:
    """Rules that fire for a well (counterion None for a control).

    Parameters
    ----------
    counterion : Counterion or None
    solvent, antisolvent, stock_solvent : Solvent or None
        Every solvent the counterion meets in the well.
    mode : str
        Crystallization mode id.
    api_primary_amine : bool
        Whether the API has a primary aliphatic amine.
    """
    media = [s for s in (solvent, antisolvent, stock_solvent) if s is not None]
    out: list[Risk] = []
    flags = set(getattr(counterion, "flags", ()) or ()) if counterion is not None else set()
    if "sulfonate_ester_risk" in flags:
        alcohols = [s.name for s in media if s.is_alcohol]
        if alcohols:
            out.append(_fire("sulfonate_ester", ", ".join(alcohols)))
    if "strongly_basic_solution" in flags:
        esters = [s.name for s in media if s.family == "ester"]
        if esters:
            out.append(_fire("ester_solvolysis", ", ".join(esters)))
    if counterion is not None and _has_primary_amine(getattr(counterion, "smiles", "") or ""):
        ketones = [s.name for s in media if s.family == "ketone"]
        if ketones:
            out.append(_fire("imine_formation", ", ".join(ketones)))
    if "oxidizer" in flags:
        organic = [s.name for s in media if s.family != "water"]
        if organic:
            out.append(_fire("oxidizer_organic", ", ".join(organic)))
    if "volatile_acid" in flags and mode == "evaporation":
        out.append(_fire("volatile_acid_loss", solvent.name))
    if api_primary_amine:
        ketones = [s.name for s in media if s.family == "ketone"]
        if ketones:
            out.append(_fire("api_imine_risk", ", ".join(ketones)))
    return out


@functools.lru_cache(maxsize=256)
def _has_primary_amine(smiles: str) -> bool:
    if not smiles:
        return False
    from rdkit import Chem

    from ..structure import rdkit_messages

    with rdkit_messages():
        mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        return False
    return any(mol.HasSubstructMatch(_pattern(p)) for p in _PRIMARY_AMINE)


@functools.cache
def _pattern(smarts: str):
    from rdkit import Chem

    return Chem.MolFromSmarts(smarts)


def api_has_primary_amine(smiles: str) -> bool:
    """Whether a structure (SMILES) has a primary aliphatic amine (not amide, not aniline)."""
    return _has_primary_amine(smiles)
