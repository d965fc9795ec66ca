"""Reading structures: SMILES text, MOL blocks, MOL/SDF/SMILES files, streamed SDF records.

Returns RDKit molecules for :func:`saltplan.structure.standardize`; refusals raise
:class:`~saltplan.errors.StructureError` naming the problem and what RDKit said.
"""
from __future__ import annotations

import re
from collections.abc import Iterator
from pathlib import Path

from ..errors import StructureError
from ._rdkit import _rdkit_reason, rdkit_messages

DEFAULT_MAX_HEAVY_ATOMS = 150
#: more disconnected components than this is not a drawn salt or solvate (API, counterions,
#: water, solvent molecules); refused before each one is canonicalized.
MAX_COMPONENTS = 64


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
