"""Schema of a counterion library file: allowed keys and values, validation, derived masses.

Used by :mod:`saltplan.counterions`; documented for contributors in
``counterions/README.md`` (keep the two in step). Every problem raises
:class:`~saltplan.errors.CounterionLibraryError` naming file, entry and field.
"""
from __future__ import annotations

import difflib
import math
import re
from typing import Any

from ..errors import CounterionLibraryError

#: machine-readable liability flags and their one-line meaning
FLAGS: dict[str, str] = {
    "sulfonate_ester_risk": "sulfonic acid: with alcohols can form alkyl sulfonate esters, "
                            "potential mutagenic impurities (ICH M7)",
    "michael_acceptor": "alpha,beta-unsaturated acid that can add primary/secondary amines "
                        "of the API",
    "nitrosamine_precursor": "secondary amine: can form an N-nitrosamine; risk assessment "
                             "needed",
    "common_ion_gastric": "common-ion effect lowers solubility in gastric fluid (chloride)",
    "strongly_basic_solution": "salts and their solutions are strongly basic",
    "renal_toxicity": "known renal toxicity of the counterion (e.g. oxalate)",
    "low_solubility_depot": "gives very poorly soluble salts: depots, not immediate release",
    "hygroscopic_salts": "salts are often hygroscopic or deliquescent",
    "pharmacologically_active": "the counterion itself has pharmacological activity",
    "corrosive": "the acid/base as supplied is corrosive to skin or equipment",
    "volatile_acid": "volatile acid: salts can lose it on drying or storage",
    "volatile_base": "volatile base: salts can lose it on drying or storage",
    "oxidizer": "oxidizing agent: incompatible with oxidizable APIs and solvents",
    "heavy_counterion": "counterion MW above 200 g/mol: lowers drug content",
    "flammable": "the reagent as supplied is highly flammable",
}

#: mass limit [g/mol] of the neutral acid/base above which heavy_counterion is required
HEAVY_MW = 200.0
PKA_MIN, PKA_MAX = -12.0, 16.0
ROLES = ("acid", "base")
FORMS = ("solid", "liquid", "gas_solution")
HYGROSCOPICITY = ("low", "moderate", "high", "unknown")
TIERS = (1, 2, 3)
STOICHIOMETRIES = ("1:1", "2:1", "3:1", "1:2", "1:3")

REQUIRED = ("id", "name", "smiles", "role", "pka", "pka_sources", "n_protons", "form",
            "tier", "tier_source", "stoichiometries", "hygroscopicity",
            "hygroscopicity_source", "liabilities", "flags", "references")
OPTIONAL = ("pka_for_salt", "pka_note", "density_g_ml", "density_source", "solution_w_w",
            "exposure_note", "notes")
ENTRY_KEYS = REQUIRED + OPTIONAL
FILE_KEYS = ("family", "description", "references", "notes", "counterions")

_ID = re.compile(r"^[a-z][a-z0-9_]*$")
_STOICH = re.compile(r"^(\d+):(\d+)$")


def _fail(message, file, entry, field):
    raise CounterionLibraryError(message, file=file, entry=entry, field=field)


def _is_number(value) -> bool:
    return (isinstance(value, (int, float)) and not isinstance(value, bool)
            and math.isfinite(value))


def _suggest(word, choices) -> str:
    close = difflib.get_close_matches(str(word), list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


# --------------------------------------------------------------------------- file level
def validate_file(data, file: str) -> tuple[str, list]:
    """Check the top level of a library file; return (family, raw entries)."""
    if not isinstance(data, dict):
        got = "an empty file" if data is None else type(data).__name__
        raise CounterionLibraryError(
            f"a counterion library must be a mapping with a 'counterions' list, got {got}",
            file=file)
    for key in data:
        if key not in FILE_KEYS:
            raise CounterionLibraryError(
                f"unknown top-level key '{key}'{_suggest(key, FILE_KEYS)}; allowed: "
                f"{', '.join(FILE_KEYS)}", file=file, field=str(key))
    if "counterions" not in data:
        raise CounterionLibraryError("missing top-level key 'counterions' (a list of entries)",
                                     file=file, field="counterions")
    entries = data["counterions"]
    if not isinstance(entries, list) or not entries:
        raise CounterionLibraryError(
            f"'counterions' must be a non-empty list of entries, got {entries!r}",
            file=file, field="counterions")
    family = data.get("family")
    if family is None:
        from pathlib import Path
        family = Path(file).stem.replace("_", " ")
    elif not isinstance(family, str) or not family.strip():
        raise CounterionLibraryError(f"family must be a text, got {family!r}", file=file,
                                     field="family")
    return family, entries


# --------------------------------------------------------------------------- entry level
def validate_entry(raw, *, file: str, index: int) -> tuple[dict[str, Any], dict[str, Any]]:
    """Validate one raw entry.

    Returns the keyword arguments of :class:`~saltplan.counterions.Counterion` (without
    ``family`` and ``source``) and the canonical content used for the library hash.
    """
    label = f"#{index + 1}"
    if not isinstance(raw, dict):
        _fail(f"each entry must be a mapping of fields, got {raw!r}", file, label, None)
    cid = raw.get("id")
    if cid is None:
        _fail("missing required key 'id'", file, label, "id")
    if not isinstance(cid, str) or not _ID.match(cid):
        _fail(f"id must be a lower-case salt-name stem (letters, digits, _), got {cid!r}",
              file, label, "id")
    for key in raw:
        if key not in ENTRY_KEYS:
            _fail(f"unknown key '{key}'{_suggest(key, ENTRY_KEYS)}", file, cid, str(key))
    for key in REQUIRED:
        if key not in raw:
            _fail(f"missing required key '{key}'", file, cid, key)

    def fail(field, message):
        _fail(message, file, cid, field)

    def text(field, optional=False):
        value = raw.get(field)
        if value is None and optional:
            return None
        if not isinstance(value, str) or not value.strip():
            fail(field, f"{field} must be a non-empty text, got {value!r}")
        return " ".join(value.split())

    def texts(field):
        value = raw.get(field)
        if not isinstance(value, list) or not all(isinstance(v, str) and v.strip()
                                                  for v in value):
            fail(field, f"{field} must be a list of texts, got {value!r}")
        return tuple(" ".join(v.split()) for v in value)

    name = text("name")
    smiles = text("smiles")
    role = raw["role"]
    if role not in ROLES:
        fail("role", f"role must be 'acid' or 'base', got {role!r}")

    pka_raw = raw["pka"]
    if (not isinstance(pka_raw, list) or not pka_raw
            or not all(_is_number(v) and PKA_MIN <= v <= PKA_MAX for v in pka_raw)):
        bad = next((v for v in pka_raw if not (_is_number(v) and PKA_MIN <= v <= PKA_MAX)),
                   pka_raw) if isinstance(pka_raw, list) and pka_raw else pka_raw
        fail("pka", f"pka must be a list of numbers between {PKA_MIN:g} and {PKA_MAX:g}, "
                    f"got {bad!r}")
    pka = tuple(float(v) for v in pka_raw)
    if any(b <= a for a, b in zip(pka, pka[1:], strict=False)):
        fail("pka", f"pka values must be in ascending order, got {list(pka)}")
    pka_sources = texts("pka_sources")
    if len(pka_sources) != len(pka):
        fail("pka_sources", f"pka_sources has {len(pka_sources)} entries but pka has "
                            f"{len(pka)} values; give one source per value")

    n_protons = raw["n_protons"]
    if not isinstance(n_protons, int) or isinstance(n_protons, bool) or not 1 <= n_protons <= 4:
        fail("n_protons", f"n_protons must be a whole number from 1 to 4, got {n_protons!r}")

    pka_note = text("pka_note", optional=True)
    if raw.get("pka_for_salt") is None:
        pka_for_salt = pka[0] if role == "acid" else pka[-1]
    else:
        value = raw["pka_for_salt"]
        if not _is_number(value) or not PKA_MIN <= value <= PKA_MAX:
            fail("pka_for_salt", f"pka_for_salt must be a number between {PKA_MIN:g} and "
                                 f"{PKA_MAX:g}, got {value!r}")
        pka_for_salt = float(value)
        if not any(abs(pka_for_salt - v) < 1e-9 for v in pka) and not pka_note:
            fail("pka_for_salt", f"pka_for_salt {pka_for_salt:g} is not one of the pka "
                                 "values; explain the choice in pka_note")

    form = raw["form"]
    if form not in FORMS:
        fail("form", f"form must be one of {', '.join(FORMS)}, got {form!r}")
    density = raw.get("density_g_ml")
    solution = raw.get("solution_w_w")
    density_source = text("density_source", optional=True)
    if form == "solid":
        if density is not None:
            fail("density_g_ml", "density_g_ml is only for liquids and supplied solutions "
                                 "(form is 'solid')")
        if solution is not None:
            fail("solution_w_w", "solution_w_w is only for liquids and supplied solutions "
                                 "(form is 'solid')")
    else:
        if density is None:
            fail("density_g_ml", f"density_g_ml is required for form '{form}' (liquids are "
                                 "dosed by volume)")
        if not _is_number(density) or not 0.3 <= density <= 3.0:
            fail("density_g_ml", f"density_g_ml must be a number between 0.3 and 3.0 g/mL, "
                                 f"got {density!r}")
        if density_source is None:
            fail("density_source", "density_source is required when density_g_ml is given")
        if form == "gas_solution" and solution is None:
            fail("solution_w_w", "solution_w_w (% w/w) is required for form 'gas_solution'")
        if solution is not None and (not _is_number(solution) or not 0 < solution < 100):
            fail("solution_w_w", f"solution_w_w must be a percentage above 0 and below 100, "
                                 f"got {solution!r}")
    density = float(density) if density is not None else None
    solution = float(solution) if solution is not None else None

    tier = raw["tier"]
    if tier not in TIERS or isinstance(tier, bool) or not isinstance(tier, int):
        fail("tier", f"tier must be 1, 2 or 3, got {tier!r}")
    tier_source = text("tier_source")

    stoich_raw = raw["stoichiometries"]
    if not isinstance(stoich_raw, list) or not stoich_raw:
        fail("stoichiometries", f"stoichiometries must be a non-empty list of "
                                f"\"API:counterion\" texts, got {stoich_raw!r}")
    for s in stoich_raw:
        if isinstance(s, int) and not isinstance(s, bool):
            fail("stoichiometries", f"stoichiometry {s!r} is a number: quote it, e.g. \"1:1\" "
                                    "(YAML reads unquoted 1:1 as the base-60 number 61)")
        if not isinstance(s, str) or not _STOICH.match(s) or s not in STOICHIOMETRIES:
            fail("stoichiometries", f"stoichiometry must be one of "
                                    f"{', '.join(STOICHIOMETRIES)} (API:counterion), got {s!r}")
        api = int(s.split(":")[0])
        if api > n_protons:
            fail("stoichiometries", f"stoichiometry '{s}' needs {api} protons per counterion "
                                    f"but n_protons is {n_protons}")
    if len(set(stoich_raw)) != len(stoich_raw):
        fail("stoichiometries", f"stoichiometries repeat a value: {stoich_raw!r}")
    stoichiometries = tuple(stoich_raw)

    hygro = raw["hygroscopicity"]
    if hygro not in HYGROSCOPICITY:
        fail("hygroscopicity", f"hygroscopicity must be one of {', '.join(HYGROSCOPICITY)}, "
                               f"got {hygro!r}")
    hygro_source = text("hygroscopicity_source")
    liabilities = texts("liabilities")
    references = texts("references")
    flags = texts("flags")
    for flag in flags:
        if flag not in FLAGS:
            fail("flags", f"unknown flag '{flag}'{_suggest(flag, FLAGS)}; the vocabulary is "
                          "FLAGS in saltplan/_counterion_schema.py (counterions/README.md)")
    if len(set(flags)) != len(flags):
        fail("flags", f"flags repeat a value: {list(flags)}")
    exposure_note = text("exposure_note", optional=True)
    notes = text("notes", optional=True)

    derived = _derive(smiles, role, n_protons, pka, fail)
    heavy = derived["mw"] > HEAVY_MW
    if heavy and "heavy_counterion" not in flags and derived["cation_mw"] is None:
        fail("flags", f"MW {derived['mw']:.1f} g/mol is above {HEAVY_MW:g}: add the flag "
                      "'heavy_counterion'")
    if "heavy_counterion" in flags and not heavy:
        fail("flags", f"flag 'heavy_counterion' needs MW above {HEAVY_MW:g} g/mol, this one "
                      f"is {derived['mw']:.1f}")

    values = dict(id=cid, name=name, smiles=smiles, formula=derived["formula"], role=role,
                  pka=pka, pka_sources=pka_sources, pka_for_salt=pka_for_salt,
                  pka_note=pka_note, n_protons=n_protons, charge=derived["charge"],
                  mw=derived["mw"], ion_mw=derived["ion_mw"], cation_mw=derived["cation_mw"],
                  form=form, density_g_ml=density, density_source=density_source,
                  solution_w_w=solution, tier=tier, tier_source=tier_source,
                  stoichiometries=stoichiometries, hygroscopicity=hygro,
                  hygroscopicity_source=hygro_source, liabilities=liabilities, flags=flags,
                  exposure_note=exposure_note, references=references, notes=notes)
    canonical = {k: (list(v) if isinstance(v, tuple) else v) for k, v in values.items()
                 if k not in ("formula", "charge", "mw", "ion_mw", "cation_mw")}
    canonical["pka_for_salt_given"] = raw.get("pka_for_salt") is not None
    return values, canonical


# --------------------------------------------------------------------------- chemistry
def _rdkit_reason(messages: list[str]) -> str:
    useful = [m for m in messages if "rror" in m or "valence" in m or "kekulize" in m]
    text = (useful or messages or ["no message"])[0]
    text = re.sub(r"^\s*\[?\d\d:\d\d:\d\d\]?\s*", "", text)
    return " ".join(text.replace("[", " ").replace("]", " ").split())


def _derive(smiles: str, role: str, n_protons: int, pka: tuple, fail) -> dict[str, Any]:
    """Parse the SMILES and compute MW, formula, ion masses and charge (RDKit)."""
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    from ..structure import mol_weight, rdkit_messages

    with rdkit_messages() as messages:
        mol = Chem.MolFromSmiles(smiles)
    if mol is None or mol.GetNumAtoms() == 0:
        fail("smiles", f"RDKit cannot parse SMILES {smiles!r}: {_rdkit_reason(messages)}")
    net = sum(a.GetFormalCharge() for a in mol.GetAtoms())
    if net != 0:
        fail("smiles", f"SMILES {smiles!r} has net charge {net:+d}; give the neutral acid or "
                       "base (metal hydroxides as balanced ion pairs)")
    frags = Chem.GetMolFrags(mol, asMols=True)
    hydroxides = [f for f in frags if Chem.MolToSmiles(f) == "[OH-]"]
    others = [f for f in frags if Chem.MolToSmiles(f) != "[OH-]"]
    mw = mol_weight(mol)
    h_mass = Chem.GetPeriodicTable().GetAtomicWeight(1)
    cation_mw = None
    if hydroxides:
        if role != "base":
            fail("role", f"a hydroxide ({smiles}) is a base; role must be 'base'")
        cation_charge = sum(a.GetFormalCharge() for f in others for a in f.GetAtoms())
        if n_protons != len(hydroxides) or cation_charge != len(hydroxides):
            fail("n_protons", f"{smiles} has {len(hydroxides)} hydroxide(s) and cation charge "
                              f"{cation_charge:+d}; n_protons must equal both, got {n_protons}")
        cation_mw = sum(mol_weight(f) for f in others)
        ion_mw = cation_mw
    else:
        if len(frags) > 1:
            fail("smiles", f"SMILES {smiles!r} has {len(frags)} components; only metal or "
                           "quaternary hydroxides may be written as ion pairs")
        if n_protons > len(pka):
            fail("n_protons", f"n_protons is {n_protons} but only {len(pka)} pka value(s) are "
                              "given; each transferable proton needs its pKa")
        ion_mw = mw - n_protons * h_mass if role == "acid" else mw + n_protons * h_mass
    charge = -n_protons if role == "acid" else n_protons
    return {"mw": mw, "formula": rdMolDescriptors.CalcMolFormula(mol), "ion_mw": ion_mw,
            "cation_mw": cation_mw, "charge": charge}
