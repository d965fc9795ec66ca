"""Structure input from browser text or an uploaded file, never from a server path."""
from __future__ import annotations

from ..errors import StructureError

#: largest structure text or file accepted [characters]
MAX_STRUCTURE_CHARS = 200_000


def parent_from_text(text: str, name: str | None = None):
    """Read a SMILES (one line, optional title) or a MOL block / one-record SDF typed or
    uploaded in the browser. Text is never taken as a file name (``read_structure`` would)."""
    from rdkit import Chem

    from ..structure import check_smiles_text, rdkit_messages, read_structure

    text = (text or "").replace("\r\n", "\n").replace("\r", "\n")
    if len(text) > MAX_STRUCTURE_CHARS:
        raise StructureError(f"structure text holds {len(text)} characters; the limit is "
                             f"{MAX_STRUCTURE_CHARS}")
    if not text.strip():
        raise StructureError("empty structure input: paste a SMILES or MOL block, or choose a file")
    if "M  END" in text or "V2000" in text or "V3000" in text:
        records = [r for r in text.split("$$$$") if r.strip()]
        if len(records) > 1:
            raise StructureError(f"SDF holds {len(records)} records; give one structure here, "
                                 "or use the portfolio page for many")
        block = records[0]
        if "\n" not in block.rstrip("\n"):
            raise StructureError("MOL block could not be read: too few lines")
        return read_structure(block, name=name or None)   # holds newlines: never a path
    lines = [ln.strip() for ln in text.split("\n") if ln.strip() and not ln.startswith("#")]
    if len(lines) != 1:
        raise StructureError(f"structure text holds {len(lines)} lines; give one SMILES (or a MOL "
                             "block), or use the portfolio page for many")
    smi, *rest = lines[0].split(None, 1)
    title = rest[0].strip() if rest else ""
    check_smiles_text(smi)
    with rdkit_messages() as messages:
        mol = Chem.MolFromSmiles(smi)
    if mol is None:
        shown = smi if len(smi) <= 60 else smi[:57] + "..."
        reason = "; ".join(m for m in messages if m.strip())[:200] or "no reason given"
        raise StructureError(f"unparsable SMILES '{shown}': RDKit says {reason}")
    return read_structure(mol, name=(name or title or None))


def matches(parent_smiles: str, query: str, mode: str) -> float | None:
    """Substructure (query is SMARTS or SMILES) → 1.0/None; similarity → Tanimoto on Morgan
    radius-2 fingerprints (RDKit) or None below 0.3."""
    from rdkit import Chem, DataStructs
    from rdkit.Chem import rdFingerprintGenerator

    mol = Chem.MolFromSmiles(parent_smiles)
    if mol is None:
        return None
    if mode == "substructure":
        patt = Chem.MolFromSmarts(query) or Chem.MolFromSmiles(query)
        if patt is None:
            raise StructureError(f"search pattern '{query[:60]}' is neither SMARTS nor SMILES")
        return 1.0 if mol.HasSubstructMatch(patt) else None
    qmol = Chem.MolFromSmiles(query)
    if qmol is None:
        raise StructureError(f"search structure '{query[:60]}' is not a SMILES")
    gen = rdFingerprintGenerator.GetMorganGenerator(radius=2, fpSize=2048)
    sim = DataStructs.TanimotoSimilarity(gen.GetFingerprint(mol), gen.GetFingerprint(qmol))
    return sim if sim >= 0.3 else None
