"""Hypothesis strategies: random drug-like molecules assembled from fragments, random strings.

Molecules are built by attaching substituents to the open positions of a scaffold through
SMILES templates, so every generated structure is valid by construction (checked with RDKit).
"""
from __future__ import annotations

from hypothesis import strategies as st

# scaffolds with {0}, {1}, {2} attachment points
SCAFFOLDS = [
    "c1cc({0})ccc1{1}",                 # para-disubstituted benzene
    "c1cc({0})cc({1})c1",               # meta
    "c1ccc({0})c({1})c1",               # ortho
    "c1cc({0})ncc1{1}",                 # pyridine
    "C1CN({0})CCC1{1}",                 # piperidine (N-substituted)
    "C1CN({0})CCN1{1}",                 # piperazine
    "c1nc({0})cc({1})n1",               # pyrimidine
    "c1cc2cc({0})ccc2n1{1}",            # indole N-substituted
    "C1CC({0})CCC1{1}",                 # cyclohexane
    "c1ccc2c(c1)nc({0})n2{1}",          # benzimidazole
]
# substituents (a leading atom bonds to the scaffold); "" = hydrogen
SUBSTITUENTS = [
    "", "C", "CC", "C(C)C", "Cl", "F", "Br", "C(F)(F)F", "OC", "O", "N", "N(C)C",
    "C(=O)O", "CC(=O)O", "C(=O)N", "C(=O)OC", "C#N", "[N+](=O)[O-]", "S(=O)(=O)N",
    "S(=O)(=O)C", "NC(=O)C", "CN", "CCN", "CCN(C)C", "CN1CCOCC1", "CN1CCCCC1",
    "c1ccccc1", "c1ccncc1", "C(=N)N", "NC(=N)N", "c1nn[nH]n1", "OCC(O)CNC(C)C",
    "CC(N)C(=O)O", "NS(=O)(=O)C", "C(=O)NS(=O)(=O)C", "S", "OCCO",
]
_NEEDS_BOND = set(SUBSTITUENTS) - {""}


def _fill(scaffold: str, subs: list[str]) -> str:
    parts = []
    for s in subs:
        parts.append(s if s else "[H]")
    return scaffold.format(*parts)


@st.composite
def drug_like_smiles(draw) -> str:
    """A valid SMILES of a random drug-like molecule (one or two scaffolds)."""
    from rdkit import Chem, RDLogger

    RDLogger.DisableLog("rdApp.*")
    scaffold = draw(st.sampled_from(SCAFFOLDS))
    n = scaffold.count("{")
    subs = [draw(st.sampled_from(SUBSTITUENTS)) for _ in range(n)]
    smiles = _fill(scaffold, subs)
    mol = Chem.MolFromSmiles(smiles)
    if mol is None:  # pragma: no cover - template mistake
        smiles = "c1ccccc1" + subs[0]
        mol = Chem.MolFromSmiles(smiles) or Chem.MolFromSmiles("c1ccccc1")
    return Chem.MolToSmiles(Chem.RemoveHs(mol))


random_text = st.text(
    alphabet=st.characters(blacklist_categories=("Cs",), min_codepoint=1), min_size=0, max_size=80)

# strings that look almost like SMILES: more likely to reach deep parser paths
smiles_like = st.text(alphabet="CNOSPFIBrcl()[]=#@+-123456789.%/\\Hn ", min_size=0, max_size=60)

# components a chemist draws beside the API (counterions, water, solvents): the parent
# must come out the same with or without them
SALT_PARTNERS = ["Cl", "Br", "O", "O.O", "CS(=O)(=O)O", "OC(=O)/C=C\\C(=O)O", "[Na+]",
                 "OS(=O)(=O)O", "CCO", "OC(=O)C(O)C(O)C(=O)O"]


@st.composite
def salted_smiles(draw) -> tuple[str, str]:
    """``(free_form, drawn_as_salt)``: a drug-like SMILES and the same with partners added."""
    base = draw(drug_like_smiles())
    partners = draw(st.lists(st.sampled_from(SALT_PARTNERS), min_size=1, max_size=3))
    return base, ".".join([base] + partners)


# text with the characters that break naive readers: controls, quotes, separators, BOM,
# bidi overrides, NUL, surrogate-free astral characters
hostile_text = st.text(
    alphabet=st.one_of(
        st.sampled_from(list("\x00\x01\x07\x1b\t\r\n\"',;|<>&%$#{}[]\\\ufeff\u202e\u2028")),
        st.characters(blacklist_categories=("Cs",), min_codepoint=1)),
    min_size=0, max_size=60)
