"""Limits: heavy-atom cap, pathological ring systems and many-site molecules finish in a
bounded time with a result or a clear refusal.

Time bounds here are generous guards against hangs (a run that took minutes before a
fix), not benchmarks; speed figures live in benchmarks/.
"""
from __future__ import annotations

import json
import time

import pytest
from hostile import assert_refused

# C60 fullerene (Ih); the test below checks with RDKit that it is 60 carbons in >= 31 rings
C60 = ("c12c3c4c5c1c1c6c7c2c2c8c3c3c9c4c4c%10c5c5c1c1c6c6c%11c7c2c2c7c8c3c3c8c9c4c4c9c%10"
       "c5c5c1c1c6c6c%11c2c2c7c3c3c8c4c4c9c5c1c1c6c2c3c41")


def ladder(n: int, aromatic: bool) -> str:
    """n linearly fused six-membered rings (polyacene if aromatic, else its perhydro form)."""
    from rdkit import Chem

    rw = Chem.RWMol()
    bond = Chem.BondType.AROMATIC if aromatic else Chem.BondType.SINGLE
    top = [rw.AddAtom(Chem.Atom(6)) for _ in range(2 * n + 1)]
    bot = [rw.AddAtom(Chem.Atom(6)) for _ in range(2 * n + 1)]
    for a in rw.GetAtoms():
        a.SetIsAromatic(aromatic)
    for i in range(2 * n):
        rw.AddBond(top[i], top[i + 1], bond)
        rw.AddBond(bot[i], bot[i + 1], bond)
    for i in range(0, 2 * n + 1, 2):
        rw.AddBond(top[i], bot[i], bond)
    return Chem.MolToSmiles(rw.GetMol())


def _ring_count(smiles: str) -> int:
    from rdkit import Chem

    mol = Chem.MolFromSmiles(smiles)   # keep a reference: RingInfo does not own the molecule
    return mol.GetRingInfo().NumRings()


PATHOLOGICAL = {
    "fullerene_c60": C60,
    "polyacene_30_rings": ladder(30, aromatic=True),
    "perhydro_ladder_30_rings": ladder(30, aromatic=False),
    "amino_polyacene_20_rings": "N" + ladder(20, aromatic=True),
    "cubane": "C12C3C4C1C5C2C3C45",
    "adamantane_amine": "NC12CC3CC(CC(C3)C1)C2",
    "macrocycle_150_atoms": "C1" + "CCNCC" * 29 + "CCN1",
    "macrolactam_103": "C1" + "C" * 60 + "NC(=O)" + "C" * 40 + "1",
    "polyamine_21_sites": "NCC" + "NCC" * 19 + "N",
    "polyacid_21_sites": "OC(=O)C" + "C(C(=O)O)" * 19 + "C(=O)O",
    "zwitterion_chain": "NCC(N)C(C(=O)O)" * 8 + "C",
    "peptide_like": "NCC(=O)" + "NC(CCCNC(=N)N)C(=O)" * 8 + "NC(CC(=O)O)C(=O)O",
    "azaspiro_undecane": "C1CCC2(CC1)CCNCC2",
}


def test_ladders_are_what_they_say():
    assert _ring_count(PATHOLOGICAL["polyacene_30_rings"]) == 30
    assert _ring_count(PATHOLOGICAL["perhydro_ladder_30_rings"]) == 30
    from rdkit import Chem

    assert _ring_count(C60) >= 31   # SSSR of C60 (RDKit)
    assert Chem.MolFromSmiles(C60).GetNumAtoms() == 60


@pytest.mark.parametrize("cmd", ["sites", "plan"])
@pytest.mark.parametrize("case", sorted(PATHOLOGICAL))
def test_pathological_ring_systems_finish(cli, case, cmd, hang_bound):
    start = time.perf_counter()
    result = cli(cmd, PATHOLOGICAL[case], "--json")
    elapsed = time.perf_counter() - start
    assert elapsed < hang_bound(15), f"{case}: {elapsed:.1f} s"
    if result.exit_code == 0:
        data = json.loads(result.stdout)
        sites = data["sites"]
        assert all(isinstance(s["pka"], (int, float)) for s in sites)
    else:
        assert_refused(result)


def test_many_site_molecule_beyond_the_default_cap_is_bounded(cli, hang_bound):
    """300 amine sites (901 heavy atoms) with a raised cap: still seconds, not minutes."""
    smi = "NCC" * 300 + "N"
    assert_refused(cli("sites", smi), mentions=("heavy atoms", "limit"))
    start = time.perf_counter()
    result = cli("sites", smi, "--max-atoms", 1000, "--json")
    assert result.exit_code == 0, result.stderr
    assert len(json.loads(result.stdout)["sites"]) == 301
    assert time.perf_counter() - start < hang_bound(30)


def test_underflowing_solubility_estimate_is_a_clear_error(cli):
    # a 3,300-atom alkylamine (raised cap): ESOL log S about -365, 10**-365 underflows
    # (3,500 atoms gave log S -387; 2,500 atoms still gave a finite 1e-296 mg/mL)
    smi = "C" * 3290 + "CCN"
    result = cli("plan", smi, "--max-atoms", 6000)
    assert_refused(result, mentions=("intrinsic solubility", "--s0"))
    assert cli("plan", smi, "--max-atoms", 6000, "--s0", "0.001").exit_code == 0


@pytest.mark.parametrize("n,ok", [(150, True), (151, False)])
def test_default_heavy_atom_cap(cli, n, ok):
    smi = "C" * (n - 1) + "N"
    for cmd in ("parent", "sites", "plan"):
        result = cli(cmd, smi)
        if ok:
            assert result.exit_code == 0, result.stderr
        else:
            assert_refused(result, mentions=(f"{n} heavy atoms", "150", "--max-atoms"))


def test_cap_counts_the_api_not_its_counterions(cli):
    # 148-atom amine + sulfate + water: the API is under the cap, the input is not
    smi = "C" * 147 + "N" + ".OS(=O)(=O)O.O.O"
    result = cli("parent", smi, "--json")
    assert result.exit_code == 0, result.stderr
    assert json.loads(result.stdout)["heavy_atoms"] == 148
