"""Structure input: SMILES, MOL and SDF to a standardized parent molecule.

Chemists hand over structures as drawn: often already a salt, a hydrate or a solvate,
sometimes with charges on both partners. :func:`read_structure` keeps the API, records
what was stripped (so a plan can say "supplied as a hydrochloride"), neutralizes charges
where a neutral form exists, keeps stereochemistry and returns a canonical SMILES.

Refusals raise :class:`~saltplan.errors.StructureError` with a one-line message that
names the problem and, where RDKit failed, what RDKit said.
"""
from __future__ import annotations

import contextlib
import functools
import logging
import re
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterator

from .errors import StructureError

DEFAULT_MAX_HEAVY_ATOMS = 150
#: a second organic component at least this fraction of the largest one's heavy-atom
#: count is "of similar size": we cannot tell which is the API and ask the user.
SIMILAR_SIZE_FRACTION = 0.5
#: more disconnected components than this is not a drawn salt or solvate (API, counterions,
#: water, solvent molecules); refused before each one is canonicalized.
MAX_COMPONENTS = 64

_NONMETALS = {"H", "B", "C", "N", "O", "F", "Si", "P", "S", "Cl", "Se", "Br", "I",
              "He", "Ne", "Ar", "Kr", "Xe", "As", "Te", "At"}
#: metals whose bonds to heteroatoms are ionic in a drawn salt (disconnected, not refused)
_SALT_METALS = {"Li", "Na", "K", "Rb", "Cs", "Mg", "Ca", "Sr", "Ba", "Zn", "Al"}


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

    from ._data import package_yaml

    data = package_yaml("data", "salt_components.yaml")
    table: dict[str, tuple[str, str]] = {}
    for row in data["components"]:
        mol = Chem.MolFromSmiles(row["smiles"])
        table[Chem.MolToSmiles(mol)] = (row["name"], row["kind"])
    return table, dict(data["metal_ions"])


@functools.lru_cache(maxsize=1)
def _library_components() -> dict[str, str]:
    """Canonical neutral SMILES → salt name from the built-in counterion library, if loadable."""
    try:
        from .counterions import load_counterions
        from rdkit import Chem

        out = {}
        for ion in load_counterions():
            for frag in ion.smiles.split("."):
                mol = Chem.MolFromSmiles(frag)
                if mol is not None and any(a.GetSymbol() == "C" for a in mol.GetAtoms()):
                    out.setdefault(Chem.MolToSmiles(mol), ion.id)
        return out
    except Exception:  # the library is optional here; naming falls back to the table
        return {}


# --------------------------------------------------------------------------- reading
def _looks_like_molblock(text: str) -> bool:
    return "M  END" in text or "V2000" in text or "V3000" in text


_ATOM_TOKEN = re.compile(r"\[[^\]]*\]|Br|Cl|[BCNOSPFI]|[bcnosp]|\*")
_HYDROGEN_TOKEN = re.compile(r"\[\d*H(?![a-z])")    # [H], [2H], [H+]; not [Hg], [He]


def check_smiles_text(smi: str, max_heavy_atoms: int = DEFAULT_MAX_HEAVY_ATOMS) -> None:
    """Refuse SMILES text RDKit would misread or take minutes over, before parsing it.

    RDKit stops reading at the first character it does not know and keeps what came
    before (``"CCN\u00e9"`` reads as ``CCN``), so any character outside printable ASCII is
    refused here, naming its position. A dot-separated piece of a SMILES is connected, so
    a piece with more heavy-atom tokens than ``max_heavy_atoms`` is a component over the
    cap: refused without parsing (ring perception of 10^4 fused rings takes minutes).

    Raises
    ------
    StructureError
    """
    for pos, ch in enumerate(smi):
        if not 33 <= ord(ch) <= 126:
            shown = ch if ch.isprintable() else f"U+{ord(ch):04X}"
            raise StructureError(f"character '{shown}' at position {pos + 1} of the SMILES is "
                                 "not allowed (SMILES is printable ASCII)")
    pieces = smi.split(".")
    if len(pieces) > MAX_COMPONENTS:
        raise StructureError(f"{len(pieces)} disconnected components exceeds the limit of "
                             f"{MAX_COMPONENTS}: give the API with its counterions and solvents")
    for piece in pieces:
        tokens = _ATOM_TOKEN.findall(piece)
        heavy = sum(1 for t in tokens if not _HYDROGEN_TOKEN.match(t))
        if heavy > max_heavy_atoms:
            raise StructureError(f"{heavy} heavy atoms exceeds the limit of {max_heavy_atoms} "
                                 "(raise it with --max-atoms if this is intended)")


#: text ending like this is a file name (missing file: "not found", not "unparsable SMILES")
_FILE_SUFFIXES = (".mol", ".sdf", ".sd", ".mdl", ".smi", ".smiles", ".txt")


def _is_file(candidate: Path) -> bool:
    """``Path.is_file`` that answers False for text no file system accepts as a name
    (too long a name, a NUL byte) instead of raising."""
    try:
        return candidate.is_file()
    except (OSError, ValueError):
        return False


def _is_dir(candidate: Path) -> bool:
    try:
        return candidate.is_dir()
    except (OSError, ValueError):
        return False


def _parse(source: str, messages: list[str], max_heavy_atoms: int = DEFAULT_MAX_HEAVY_ATOMS):
    """Parse a SMILES string, a MOL block, or a MOL/SDF file path. Returns (mol, name)."""
    from rdkit import Chem

    text = source.strip()
    if not text:
        raise StructureError("empty structure input")
    path = None
    if len(text) < 4096 and "\n" not in text:
        candidate = Path(text)
        low = text.lower()
        if low.endswith(_FILE_SUFFIXES):
            path = candidate
        elif _is_file(candidate) or ("/" in text and _is_dir(candidate)):
            path = candidate
    if path is not None:
        return _read_structure_file(path, messages, max_heavy_atoms)
    if _looks_like_molblock(source):
        mol = Chem.MolFromMolBlock(source, sanitize=True, removeHs=True)
        if mol is None:
            raise StructureError(f"MOL block could not be read: RDKit says {_rdkit_reason(messages)}")
        name = mol.GetProp("_Name").strip() if mol.HasProp("_Name") else None
        return mol, (name or None)
    if "\n" in text or "\r" in text:
        n_lines = len([ln for ln in text.splitlines() if ln.strip()])
        raise StructureError(f"structure text holds {n_lines} lines; give one SMILES (or a "
                             "MOL block), or use 'saltplan batch' for many")
    # a SMILES may carry a title after whitespace ("CCO ethanol", tab-separated too)
    smi, *rest = text.split(None, 1)
    text, name = smi, (rest[0].strip() if rest else "") or None
    check_smiles_text(text, max_heavy_atoms)
    mol = Chem.MolFromSmiles(text)
    if mol is None:
        shown = text if len(text) <= 60 else text[:57] + "..."
        raise StructureError(f"unparsable SMILES '{shown}': RDKit says {_rdkit_reason(messages)}")
    return mol, name


def _read_structure_file(path: Path, messages: list[str],
                         max_heavy_atoms: int = DEFAULT_MAX_HEAVY_ATOMS):
    from rdkit import Chem

    if not path.exists():
        raise StructureError("structure file not found", file=str(path))
    if path.is_dir():
        raise StructureError("is a directory, expected a SMILES, MOL or SDF file", file=str(path))
    raw = path.read_bytes()
    if b"\0" in raw[:4096]:
        raise StructureError("binary file, expected a SMILES, MOL or SDF text file", file=str(path))
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise StructureError(f"not UTF-8 text (byte {exc.start})", file=str(path)) from None
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    if not text.strip():
        raise StructureError("empty structure file", file=str(path))
    if _looks_like_molblock(text):
        records = [r for r in text.split("$$$$") if r.strip()]
        if len(records) > 1:
            raise StructureError(f"SDF holds {len(records)} records; give one structure, or use "
                                 "'saltplan batch' for many", file=str(path))
        block = records[0]
        if not block.startswith("\n") and block.count("\n") >= 3 and block.lstrip("\n") != block:
            block = block.lstrip("\n")
        mol = Chem.MolFromMolBlock(block, sanitize=True, removeHs=True)
        if mol is None:
            raise StructureError(f"MOL record could not be read: RDKit says {_rdkit_reason(messages)}",
                                 file=str(path))
        name = mol.GetProp("_Name").strip() if mol.HasProp("_Name") else ""
        return mol, (name or path.stem)
    lines = [ln.strip() for ln in text.split("\n") if ln.strip() and not ln.startswith("#")]
    if len(lines) != 1:
        raise StructureError(f"file holds {len(lines)} SMILES lines; give one structure, or use "
                             "'saltplan batch' for many", file=str(path))
    smi, *rest = lines[0].split(None, 1)
    title = rest[0] if rest else ""
    try:
        check_smiles_text(smi, max_heavy_atoms)
    except StructureError as exc:
        raise StructureError(exc.message, file=str(path)) from None
    mol = Chem.MolFromSmiles(smi)
    if mol is None:
        raise StructureError(f"unparsable SMILES: RDKit says {_rdkit_reason(messages)}", file=str(path))
    return mol, (title.strip() or path.stem)


def iter_sdf(path: str | Path) -> Iterator[tuple[int, str | None, str | None, dict, str | None]]:
    """Yield ``(record_number, smiles_or_None, name, properties, error)`` for each SDF record.

    Streaming (one record in memory at a time); a bad record yields an error, never stops.
    Record numbers start at 1.
    """
    from rdkit import Chem

    path = Path(path)
    with rdkit_messages() as messages:
        supplier = Chem.ForwardSDMolSupplier(str(path), sanitize=True, removeHs=True)
        for i, mol in enumerate(supplier, start=1):
            if mol is None:
                reason = _rdkit_reason(messages) if messages else "unreadable record"
                messages.clear()
                yield i, None, None, {}, f"SDF record {i} could not be read: {reason}"
                continue
            props = mol.GetPropsAsDict(includePrivate=False, includeComputed=False)
            name = mol.GetProp("_Name").strip() if mol.HasProp("_Name") else None
            yield i, Chem.MolToSmiles(mol), (name or None), props, None


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


@functools.lru_cache(maxsize=None)
def _pattern(smarts: str):
    """A compiled SMARTS query (cached): atom tests in C++ instead of Python loops."""
    from rdkit import Chem

    return Chem.MolFromSmarts(smarts)


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


def read_structure(source, *, name: str | None = None,
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
