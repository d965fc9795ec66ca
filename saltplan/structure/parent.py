"""Structure input: SMILES, MOL and SDF to a standardized parent molecule.

Reading (text and files) is in :mod:`saltplan.structure.reading`; this module standardizes.

Chemists hand over structures as drawn: often already a salt, a hydrate or a solvate,
sometimes with charges on both partners. :func:`read_structure` keeps the API, records
what was stripped (so a plan can say "supplied as a hydrochloride"), neutralizes charges
where a neutral form exists, keeps stereochemistry and returns a canonical SMILES.

Refusals raise :class:`~saltplan.errors.StructureError` with a one-line message that
names the problem and, where RDKit failed, what RDKit said.
"""
from __future__ import annotations

import functools
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import StructureError
from ._rdkit import _pattern, _rdkit_reason, mol_weight, rdkit_messages  # noqa: F401 (re-exported)
from .reading import DEFAULT_MAX_HEAVY_ATOMS, MAX_COMPONENTS, _parse, check_smiles_text, iter_sdf  # noqa: F401

if TYPE_CHECKING:
    from rdkit import Chem

#: a second organic component at least this fraction of the largest one's heavy-atom
#: count is "of similar size": we cannot tell which is the API and ask the user.
SIMILAR_SIZE_FRACTION = 0.5

_NONMETALS = {"H", "B", "C", "N", "O", "F", "Si", "P", "S", "Cl", "Se", "Br", "I",
              "He", "Ne", "Ar", "Kr", "Xe", "As", "Te", "At"}
#: metals whose bonds to heteroatoms are ionic in a drawn salt (disconnected, not refused)
_SALT_METALS = {"Li", "Na", "K", "Rb", "Cs", "Mg", "Ca", "Sr", "Ba", "Zn", "Al"}


# --------------------------------------------------------------------------- result types
@dataclass(frozen=True)
class StrippedComponent:
    """A component removed from the supplied structure (counterion, water, solvent)."""

    smiles: str
    name: str           # "hydrochloride", "water", "ethanol", "unidentified component"
    kind: str           # counterion | water | solvent | unidentified
    count: int = 1

    def to_dict(self) -> dict[str, Any]:
        return {"smiles": self.smiles, "name": self.name, "kind": self.kind, "count": self.count}


@dataclass(frozen=True)
class Parent:
    """The standardized parent (free form) of a supplied structure."""

    input: str
    smiles: str
    mol: Any = field(repr=False, compare=False)
    name: str | None = None
    stripped: tuple[StrippedComponent, ...] = ()
    api_copies: int = 1
    notes: tuple[str, ...] = ()
    heavy_atoms: int = 0
    formula: str = ""
    mw: float = 0.0

    @property
    def supplied_as(self) -> str | None:
        """Human phrase for the supplied form, e.g. "hydrochloride monohydrate"; None if free form."""
        return describe_supplied_form(self.stripped, self.api_copies)

    def to_dict(self) -> dict[str, Any]:
        return {
            "input": self.input,
            "smiles": self.smiles,
            "name": self.name,
            "formula": self.formula,
            "mw": round(self.mw, 3),
            "heavy_atoms": self.heavy_atoms,
            "supplied_as": self.supplied_as,
            "api_copies": self.api_copies,
            "stripped": [s.to_dict() for s in self.stripped],
            "notes": list(self.notes),
        }


_MULTIPLIERS = {1: "", 2: "di", 3: "tri", 4: "tetra", 5: "penta", 6: "hexa"}
_HYDRATES = {1: "monohydrate", 2: "dihydrate", 3: "trihydrate", 4: "tetrahydrate",
             5: "pentahydrate", 6: "hexahydrate"}


def describe_supplied_form(stripped, api_copies: int = 1) -> str | None:
    """"hydrochloride", "dihydrochloride monohydrate", "sodium salt", "hemisulfate"..."""
    if not stripped:
        return None
    words = []
    for comp in stripped:
        if comp.kind == "counterion":
            if api_copies == 2 and comp.count == 1:
                words.append(f"hemi{comp.name}")
            else:
                words.append(_MULTIPLIERS.get(comp.count, f"{comp.count}×") + comp.name)
            if comp.smiles.startswith("["):  # metal cation: "sodium salt"
                words[-1] += " salt"
    for comp in stripped:
        if comp.kind == "water":
            n = comp.count / api_copies
            words.append(_HYDRATES.get(int(n), "hydrate") if n == int(n) else
                         ("hemihydrate" if n == 0.5 else "hydrate"))
    for comp in stripped:
        if comp.kind == "solvent":
            words.append(f"{comp.name} solvate")
    for comp in stripped:
        if comp.kind == "unidentified":
            words.append(f"with {comp.smiles}")
    return " ".join(words) if words else None


# --------------------------------------------------------------------------- component table
@functools.lru_cache(maxsize=1)
def _component_table() -> tuple[dict[str, tuple[str, str]], dict[str, str]]:
    from rdkit import Chem

    from .._data import package_yaml

    data = package_yaml("data", "salt_components.yaml")
    table: dict[str, tuple[str, str]] = {}
    for row in data["components"]:
        mol = Chem.MolFromSmiles(row["smiles"])
        table[Chem.MolToSmiles(mol)] = (row["name"], row["kind"])
    return table, dict(data["metal_ions"])


@functools.lru_cache(maxsize=1)
def _library_components() -> dict[str, str]:
    """Canonical neutral SMILES → salt name of the counterion library's organic salt formers.

    Read from this step's own table (``library_salt_formers`` in ``salt_components.yaml``),
    so reading a structure never loads the counterion library (tests check both agree).
    """
    from .._data import package_yaml

    return dict(package_yaml("data", "salt_components.yaml")["library_salt_formers"])


# --------------------------------------------------------------------------- standardization
def _metal_symbols(mol) -> list[str]:
    return sorted({a.GetSymbol() for a in mol.GetAtoms() if a.GetSymbol() not in _NONMETALS})


def _disconnect_salt_metals(mol):
    """Break bonds between salt-forming metals and heteroatoms (``CC(=O)O[Na]`` → ions)."""
    from rdkit import Chem

    bonds = []
    # walk from the metal atoms (few) rather than over every bond: RDKit's Python bond
    # sequence is slow to index on very large molecules
    for metal in mol.GetAtoms():
        if metal.GetSymbol() not in _SALT_METALS:
            continue
        for bond in metal.GetBonds():
            other = bond.GetOtherAtom(metal)
            if other.GetSymbol() in {"O", "N", "S", "F", "Cl", "Br", "I"}:
                bonds.append((metal.GetIdx(), other.GetIdx(), int(bond.GetBondTypeAsDouble())))
    bonds.sort()
    if not bonds:
        return mol
    rw = Chem.RWMol(mol)
    for m, o, order in bonds:
        rw.RemoveBond(m, o)
        rw.GetAtomWithIdx(m).SetFormalCharge(rw.GetAtomWithIdx(m).GetFormalCharge() + order)
        rw.GetAtomWithIdx(o).SetFormalCharge(rw.GetAtomWithIdx(o).GetFormalCharge() - order)
        rw.GetAtomWithIdx(m).SetNoImplicit(True)
    out = rw.GetMol()
    Chem.SanitizeMol(out)
    return out


@functools.lru_cache(maxsize=1)
def _uncharger():
    from rdkit.Chem.MolStandardize import rdMolStandardize

    return rdMolStandardize.Uncharger()


def _neutral_canonical(frag) -> str:
    """Canonical SMILES of a fragment with charges neutralized (for matching components)."""
    from rdkit import Chem

    un = _uncharger()
    try:
        neutral = un.uncharge(Chem.Mol(frag))
    except Exception:  # pragma: no cover - defensive
        neutral = frag
    return Chem.MolToSmiles(neutral)


def _has_carbon(mol) -> bool:
    return mol.HasSubstructMatch(_pattern("[#6]"))


def standardize(mol, *, source: str = "", name: str | None = None,
                max_heavy_atoms: int = DEFAULT_MAX_HEAVY_ATOMS) -> Parent:
    """Standardize an RDKit molecule to its parent. See :func:`read_structure`."""
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    notes: list[str] = []
    if mol.GetNumAtoms() == 0:
        raise StructureError("empty structure (no atoms)")
    for atom in mol.GetAtoms():
        if atom.GetNumRadicalElectrons():
            raise StructureError(f"radical at atom {atom.GetIdx()} ({atom.GetSymbol()}): "
                                 "give the closed-shell structure")
    mol = Chem.RemoveHs(mol)
    mol = _disconnect_salt_metals(mol)
    frags = list(Chem.GetMolFrags(mol, asMols=True, sanitizeFrags=True))
    # Refuse oversized input before any canonicalization: canonical SMILES of a very large
    # fragment (e.g. a 10^5-atom chain) takes minutes. The largest organic fragment is the
    # API (the component table holds only small molecules), so this is the same refusal as
    # the heavy-atom cap below, made early.
    largest = max((f.GetNumHeavyAtoms() for f in frags if _has_carbon(f)), default=0)
    if largest > max_heavy_atoms:
        raise StructureError(f"{largest} heavy atoms exceeds the limit of {max_heavy_atoms} "
                             "(raise it with --max-atoms if this is intended)")
    if len(frags) > MAX_COMPONENTS:
        raise StructureError(f"{len(frags)} disconnected components exceeds the limit of "
                             f"{MAX_COMPONENTS}: give the API with its counterions and solvents")

    table, metal_names = _component_table()
    organic, known_organic, stripped_raw = [], [], []
    for frag in frags:
        metals = _metal_symbols(frag)
        if _has_carbon(frag):
            if metals:
                raise StructureError(f"organometallic or metal complex ({', '.join(metals)} bound in "
                                     "an organic component): not supported")
            # a lone organic component is the API whatever it is: no need to match it
            key = Chem.MolToSmiles(frag) if len(frags) == 1 else _neutral_canonical(frag)
            if key in table:
                known_organic.append((frag, key))
            else:
                organic.append((frag, key))
            continue
        # inorganic component: metal ion, halide, water, inorganic acid
        if metals:
            if len(metals) == 1 and frag.GetNumAtoms() == 1:
                sym = metals[0]
                stripped_raw.append((f"[{sym}]", metal_names.get(sym, sym), "counterion"))
                continue
            raise StructureError(f"inorganic metal component '{Chem.MolToSmiles(frag)}' not supported")
        key = _neutral_canonical(frag)
        if key in table:
            stripped_raw.append((key, *table[key]))
        else:
            stripped_raw.append((key, "unidentified component", "unidentified"))

    if not organic and known_organic:
        # e.g. "[Na+].CC(=O)[O-]": the organic partner is itself the API (acetic acid)
        known_organic.sort(key=lambda fk: (-fk[0].GetNumHeavyAtoms(), fk[1]))
        top = known_organic[0][1]
        organic = [fk for fk in known_organic if fk[1] == top]
        known_organic = [fk for fk in known_organic if fk[1] != top]
    for _frag, key in known_organic:
        stripped_raw.append((key, *table[key]))
    if not organic:
        raise StructureError("no carbon atom: not an organic API")

    # group identical organic components (a 2:1 salt draws the API twice)
    by_key: dict[str, list] = {}
    for frag, key in organic:
        by_key.setdefault(key, []).append(frag)
    ranked = sorted(by_key.items(), key=lambda kv: (-kv[1][0].GetNumHeavyAtoms(), kv[0]))
    api_key, api_frags = ranked[0]
    api = api_frags[0]
    n_api = api.GetNumHeavyAtoms()
    for key, frags_k in ranked[1:]:
        size = frags_k[0].GetNumHeavyAtoms()
        if size >= SIMILAR_SIZE_FRACTION * n_api:
            raise StructureError(
                f"two different organic components of similar size ('{api_key}' with {n_api} heavy "
                f"atoms, '{key}' with {size}): say which one is the API")
        lib = _library_components()
        if key in lib:
            stripped_raw.extend([(key, lib[key], "counterion")] * len(frags_k))
        else:
            stripped_raw.extend([(key, "unidentified component", "unidentified")] * len(frags_k))
            notes.append(f"stripped an unidentified small component {key}")

    counts = Counter(stripped_raw)
    stripped = tuple(StrippedComponent(smiles=s, name=n, kind=k, count=c)
                     for (s, n, k), c in sorted(counts.items(), key=lambda kv: (kv[0][2], kv[0][1])))

    heavy = api.GetNumHeavyAtoms()
    if heavy > max_heavy_atoms:
        raise StructureError(f"{heavy} heavy atoms exceeds the limit of {max_heavy_atoms} "
                             "(raise it with --max-atoms if this is intended)")

    charged = _pattern("[!+0]")
    if api.HasSubstructMatch(charged):
        charged_before = sum(abs(api.GetAtomWithIdx(i).GetFormalCharge())
                             for (i,) in api.GetSubstructMatches(charged))
        parent = _uncharger().uncharge(api)
        Chem.SanitizeMol(parent)
        charged_after = sum(abs(parent.GetAtomWithIdx(i).GetFormalCharge())
                            for (i,) in parent.GetSubstructMatches(charged))
        if charged_after < charged_before:
            notes.append("charges neutralized to the free form")
        if parent.HasSubstructMatch(_pattern("[N+;H0;D4]")):
            notes.append("permanent positive charge (quaternary ammonium) kept")
    else:
        parent = api
    if len(api_frags) > 1:
        notes.append(f"API drawn {len(api_frags)} times: counted as a {len(api_frags)}:n salt")

    smiles = Chem.MolToSmiles(parent, isomericSmiles=True)
    parent = Chem.MolFromSmiles(smiles)  # atom order of the canonical SMILES
    unassigned = []
    if parent.HasSubstructMatch(_pattern("[CX4,SX3,SX4,PX4,NX4+]")):  # possible stereocentres only
        unassigned = [c for c in Chem.FindMolChiralCenters(parent, includeUnassigned=True,
                                                            useLegacyImplementation=False)
                      if c[1] == "?"]
    if unassigned:
        notes.append(f"{len(unassigned)} stereocentre(s) undefined in the input")

    return Parent(
        input=source,
        smiles=smiles,
        mol=parent,
        name=name,
        stripped=stripped,
        api_copies=len(api_frags),
        notes=tuple(notes),
        heavy_atoms=heavy,
        formula=rdMolDescriptors.CalcMolFormula(parent),
        mw=mol_weight(parent),
    )


def read_structure(source: str | Path | Chem.Mol | Parent, *, name: str | None = None,
                   max_heavy_atoms: int = DEFAULT_MAX_HEAVY_ATOMS) -> Parent:
    """Read a structure and standardize it to the parent (free form).

    Parameters
    ----------
    source : str, pathlib.Path, rdkit.Chem.Mol or Parent
        A SMILES string (optionally followed by a title), a MOL block, or the path of a
        MOL, SDF (one record) or SMILES file. A :class:`Parent` is returned unchanged.
    name : str, optional
        Compound name; defaults to the title found in the input.
    max_heavy_atoms : int
        Refuse larger structures (default 150).

    Returns
    -------
    Parent

    Raises
    ------
    StructureError
        Empty input, unparsable SMILES/MOL, no carbon, too many heavy atoms,
        organometallics, radicals, or two different organic components of similar size.

    Examples
    --------
    >>> p = read_structure("CCN(CC)CC.Cl")
    >>> p.smiles, p.supplied_as
    ('CCN(CC)CC', 'hydrochloride')
    """
    if isinstance(source, Parent):
        return source
    from rdkit import Chem

    with rdkit_messages() as messages:
        if isinstance(source, Chem.Mol):
            mol, found = Chem.Mol(source), None
            text = Chem.MolToSmiles(source)
        else:
            if source is None:
                raise StructureError("empty structure input")
            text = str(source)
            mol, found = _parse(text, messages, max_heavy_atoms)
        try:
            return standardize(mol, source=text.strip(), name=name or found,
                               max_heavy_atoms=max_heavy_atoms)
        except StructureError:
            raise
        except Exception as exc:  # RDKit sanitization failures during standardization
            reason = _rdkit_reason(messages) if messages else str(exc).splitlines()[0]
            raise StructureError(f"structure could not be standardized: RDKit says {reason}") from None


def to_mol(source):
    """The standardized parent as an RDKit molecule (atom order of the canonical SMILES)."""
    return read_structure(source).mol
