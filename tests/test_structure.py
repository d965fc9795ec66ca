"""Structure input and standardization (saltplan.structure).

Expected parents are checked against RDKit's own canonical SMILES of the free form
(RDKit is the general-purpose reference library here), and salt names against USAN
salt-name usage (USP Dictionary of USAN and International Drug Names).
"""
from __future__ import annotations

import pytest
from rdkit import Chem

from saltplan.errors import SaltplanError, StructureError
from saltplan.structure import read_structure


def canon(smiles: str) -> str:
    return Chem.MolToSmiles(Chem.MolFromSmiles(smiles))


@pytest.mark.parametrize("supplied, parent, supplied_as", [
    ("CCN(CC)CC.Cl", "CCN(CC)CC", "hydrochloride"),                    # triethylamine HCl
    ("CC[NH+](CC)CC.[Cl-]", "CCN(CC)CC", "hydrochloride"),              # drawn as ions
    ("[Na+].CC(=O)[O-]", "CC(=O)O", "sodium salt"),                     # sodium acetate
    ("CC(=O)O[Na]", "CC(=O)O", "sodium salt"),                          # covalent drawing
    ("O.O.Cl.c1ccncc1", "c1ccncc1", "hydrochloride dihydrate"),
    ("CCN.CCN.OS(=O)(=O)O", "CCN", "hemisulfate"),                      # 2:1 salt
    ("CNCCc1ccccc1.CS(=O)(=O)O", "CNCCc1ccccc1", "mesylate"),
    ("OC(=O)c1ccccc1.CCO", "OC(=O)c1ccccc1", "ethanol solvate"),
    ("Cl.Cl.C1CNCCN1", "C1CNCCN1", "dihydrochloride"),                  # piperazine 2HCl
    ("[K+].[O-]C(=O)c1ccccc1O", "OC(=O)c1ccccc1O", "potassium salt"),
    ("OC(=O)/C=C\\C(=O)O.CN(C)CCOC(c1ccccc1)c1ccccc1", "CN(C)CCOC(c1ccccc1)c1ccccc1", "maleate"),
])
def test_salt_stripping_keeps_api_and_names_the_salt(supplied, parent, supplied_as):
    p = read_structure(supplied)
    assert p.smiles == canon(parent)
    assert p.supplied_as == supplied_as


def test_free_form_has_no_supplied_as():
    p = read_structure("CCN(CC)CC")
    assert p.supplied_as is None and p.stripped == ()


def test_neutralization_of_charged_api():
    p = read_structure("C[NH+](C)Cc1ccccc1")          # protonated amine, no counterion drawn
    assert p.smiles == canon("CN(C)Cc1ccccc1")
    assert "charges neutralized to the free form" in p.notes
    zwitterion = read_structure("[NH3+][C@@H](C)C(=O)[O-]")  # L-alanine zwitterion
    assert zwitterion.smiles == canon("N[C@@H](C)C(=O)O")


def test_quaternary_ammonium_keeps_its_charge():
    p = read_structure("C[N+](C)(C)CCO.[Cl-]")       # choline chloride
    assert "[N+]" in p.smiles
    assert [c.smiles for c in p.stripped] == ["Cl"]


def test_stereochemistry_is_kept():
    l_alanine = "C[C@H](N)C(=O)O"
    p = read_structure(l_alanine + ".Cl")
    assert p.smiles == Chem.MolToSmiles(Chem.MolFromSmiles(l_alanine))
    assert "@" in p.smiles
    trans = read_structure("C/C=C/C(=O)O")
    assert "/" in trans.smiles


def test_undefined_stereocentre_is_noted():
    p = read_structure("CC(N)C(=O)O")
    assert any("stereocentre" in n for n in p.notes)


def test_canonical_smiles_is_independent_of_input_order():
    a = read_structure("OC(=O)c1ccccc1.Cl")
    b = read_structure("Cl.c1ccc(cc1)C(O)=O")
    assert a.smiles == b.smiles


def test_mol_and_sdf_files(tmp_path):
    mol = Chem.MolFromSmiles("CCN(CC)CC")
    mol.SetProp("_Name", "TEA")
    block = Chem.MolToMolBlock(mol)
    (tmp_path / "tea.mol").write_text(block)
    (tmp_path / "tea.sdf").write_text(block + "$$$$\n")
    for name in ("tea.mol", "tea.sdf"):
        p = read_structure(str(tmp_path / name))
        assert p.smiles == "CCN(CC)CC" and p.name == "TEA"


def test_sdf_with_two_records_is_refused(tmp_path):
    block = Chem.MolToMolBlock(Chem.MolFromSmiles("CCO"))
    path = tmp_path / "two.sdf"
    path.write_text(block + "$$$$\n" + block + "$$$$\n")
    with pytest.raises(StructureError, match="2 records"):
        read_structure(str(path))


def test_smiles_file_with_title(tmp_path):
    path = tmp_path / "x.smi"
    path.write_text("CCN(CC)CC triethylamine\r\n", encoding="utf-8-sig")
    p = read_structure(str(path))
    assert p.smiles == "CCN(CC)CC" and p.name == "triethylamine"


@pytest.mark.parametrize("bad, message", [
    ("", "empty structure input"),
    ("   ", "empty structure input"),
    # saltplan's own words; RDKit's reason follows "RDKit says" in wording of its release
    ("C1CC", "unparsable SMILES 'C1CC': RDKit says "),
    ("c1cccc1", "unparsable SMILES 'c1cccc1': RDKit says "),
    ("O", "no carbon atom"),
    ("Cl.[Na+]", "no carbon atom"),
    ("C[Pt](Cl)(N)N", "organometallic or metal complex (Pt"),
    ("C[Hg]C", "organometallic"),
    ("CCCCCCCCCCO.CCCCCCCCCN", "two different organic components of similar size"),
    ("[CH3]", "radical at atom 0"),
])
def test_refusals_name_the_problem(bad, message):
    with pytest.raises(StructureError) as info:
        read_structure(bad)
    text = str(info.value)
    assert message in text
    assert "\n" not in text
    assert isinstance(info.value, SaltplanError) and isinstance(info.value, ValueError)


def test_heavy_atom_limit_is_configurable():
    big = "C" * 160
    with pytest.raises(StructureError, match="160 heavy atoms exceeds the limit of 150"):
        read_structure(big)
    assert read_structure(big, max_heavy_atoms=200).heavy_atoms == 160
    with pytest.raises(StructureError, match="exceeds the limit of 10"):
        read_structure("CCCCCCCCCCCC", max_heavy_atoms=10)


def test_small_unrelated_component_is_stripped_and_noted():
    # API with an unknown small organic acid: API kept, the acid recorded
    p = read_structure("CN1CCC(CC1)Oc1ccc(cc1)C(=O)NC1CC1.OC(=O)CC(O)=O")
    assert p.smiles == canon("CN1CCC(CC1)Oc1ccc(cc1)C(=O)NC1CC1")
    assert len(p.stripped) == 1


def test_structure_file_errors(tmp_path):
    with pytest.raises(StructureError, match="structure file not found"):
        read_structure(str(tmp_path / "missing.sdf"))
    binary = tmp_path / "bin.mol"
    binary.write_bytes(b"\x00\x01\x02garbage")
    with pytest.raises(StructureError, match="binary file"):
        read_structure(str(binary))
    latin = tmp_path / "latin.smi"
    latin.write_bytes("CCO \xe9thanol".encode("latin-1"))
    with pytest.raises(StructureError, match="not UTF-8"):
        read_structure(str(latin))
    folder = tmp_path / "folder.sdf"
    folder.mkdir()
    with pytest.raises(StructureError, match="is a directory"):
        read_structure(str(folder))


def test_to_dict_is_json_ready():
    import json

    d = read_structure("CCN(CC)CC.Cl", name="TEA").to_dict()
    assert json.loads(json.dumps(d)) == d
    assert d["supplied_as"] == "hydrochloride" and d["formula"] == "C6H15N"


# --------------------------------------------------------------------------- CLI
def test_cli_parent(cli):
    result = cli("parent", "CCN(CC)CC.Cl")
    assert result.exit_code == 0
    assert "CCN(CC)CC" in result.stdout and "hydrochloride" in result.stdout


def test_cli_parent_json(cli):
    import json

    result = cli("parent", "[Na+].CC(=O)[O-]", "--json")
    assert result.exit_code == 0
    assert json.loads(result.stdout)["smiles"] == "CC(=O)O"


@pytest.mark.parametrize("bad", ["", "C1CC", "O", "C[Pt]Cl"])
def test_cli_domain_errors_exit_1_with_one_line(cli, bad):
    result = cli("parent", bad)
    assert result.exit_code == 1
    assert result.stdout == ""
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("Error: ")
    assert "Traceback" not in result.stderr


def test_cli_verbose_shows_traceback():
    from click.testing import CliRunner

    from saltplan.cli import main

    result = CliRunner().invoke(main, ["--verbose", "parent", "C1CC"])
    assert result.exit_code == 1
    assert isinstance(result.exception, StructureError)


def test_cli_usage_error_exits_2(cli):
    assert cli("parent").exit_code == 2
    assert cli("no-such-command").exit_code == 2
    assert cli("parent", "CCO", "--no-such-option").exit_code == 2


def test_cli_version_and_help(cli):
    from saltplan import __version__

    result = cli("--version")
    assert result.exit_code == 0 and __version__ in result.stdout
    result = cli("--help")
    assert result.exit_code == 0 and "planning aid" in result.stdout


def test_salt_former_table_agrees_with_the_counterion_library():
    """structure/ names stripped salt formers from its own table (it does not load the
    library); the table must hold exactly the library's organic salt formers, by id."""
    from saltplan.library import load_counterions
    from saltplan.structure.parent import _library_components

    expected: dict[str, str] = {}
    for ion in load_counterions():
        for frag in ion.smiles.split("."):
            mol = Chem.MolFromSmiles(frag)
            if mol is not None and any(a.GetSymbol() == "C" for a in mol.GetAtoms()):
                expected.setdefault(Chem.MolToSmiles(mol), ion.id)
    table = _library_components()
    assert table == expected, sorted(set(table.items()) ^ set(expected.items()))


def test_supplied_tosylate_is_named_from_the_table():
    # a tosylate is not in the general component table; its name comes from the library's
    parent = read_structure("CN(C)CCc1ccc(OCc2ccc(OCc3ccccc3)cc2)cc1.Cc1ccc(S(=O)(=O)O)cc1")
    assert [c.name for c in parent.stripped] == ["tosylate"]
