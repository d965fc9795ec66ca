"""Caveats computed from both partners' structures.

Rules are the trade's known liabilities (common practice, Stahl & Wermuth, Handbook of
Pharmaceutical Salts, 2nd ed. 2011; ICH M7 for sulfonate esters; nitrosamine guidance).
Counterions here are tiny in-test objects with the library's fields and flags.
"""
from __future__ import annotations

from dataclasses import replace
from types import SimpleNamespace as NS

import pytest
from rdkit import Chem

from saltplan.plan import assessment as A
from saltplan.plan import caveats as C
from saltplan.plan import ranking as R

SETTINGS = R.load_ranking_config().caveat_settings


def ion(id, smiles, role, pka, flags=(), **kw):
    base = dict(id=id, name=id, smiles=smiles, role=role, pka=tuple(pka), tier=1,
                flags=tuple(flags), hygroscopicity="low", stoichiometries=(), pka_sources=("t",),
                exposure_note=None)
    base.update(kw)
    return NS(**base)


def site(atom, kind, pka):
    return NS(atom=atom, kind=kind, pka=pka, provenance="measured", source="user")


MALEATE = ion("maleate", "OC(=O)/C=C\\C(=O)O", "acid", [1.92, 6.23], ["michael_acceptor"])
MESYLATE = ion("mesylate", "CS(=O)(=O)O", "acid", [-1.9], ["sulfonate_ester_risk"])
HCL = ion("hydrochloride", "Cl", "acid", [-6.1], ["common_ion_gastric", "corrosive", "volatile_acid"])
DIETHYLAMINE = ion("diethylamine", "CCNCC", "base", [10.84])      # no flag on purpose
SODIUM = ion("sodium", "[Na+].[OH-]", "base", [13.8], ["strongly_basic_solution"],
             exposure_note="Sodium intake: WHO adult guideline < 2 g/day.")

# secondary amine API (sertraline-like, atom 1 the N), tertiary amine API (diphenhydramine)
SECONDARY = "CN[C@H]1CC[C@@H](c2ccc(Cl)c(Cl)c2)c2ccccc21"
TERTIARY = "CN(C)CCOC(c1ccccc1)c1ccccc1"
PRIMARY = "NCCc1ccc(O)c(O)c1"          # dopamine: primary amine
ACID = "OC(=O)c1ccccc1"


def caveats_of(smiles, counterion, pka, kind="base", atom=1, dose=None, s0=1.0, route="oral",
               ph_max=None):
    mol = Chem.MolFromSmiles(smiles)
    feats = C.api_features(mol)
    parent = NS(smiles=smiles)
    cand = A.assess(parent, [site(atom, kind, pka)], [counterion])[0]
    cand = replace(cand, ph_max=ph_max, ph_max_basis="assumed" if ph_max is not None else None)
    from rdkit.Chem import Descriptors

    return C.candidate_caveats(cand, counterion, feats, dose_mg=dose, route=route, s0_mg_ml=s0,
                               s0_basis="ESOL", api_mw=Descriptors.MolWt(mol),
                               api_base_pka=pka if kind == "base" else None, settings=SETTINGS)


def by_code(caveats):
    return {c.code: c for c in caveats}


def test_api_features_find_amines():
    f = C.api_features(Chem.MolFromSmiles(SECONDARY))
    assert f.secondary_amines == (1,) and f.primary_amines == ()
    f = C.api_features(Chem.MolFromSmiles(TERTIARY))
    assert f.secondary_amines == () and f.primary_amines == ()
    f = C.api_features(Chem.MolFromSmiles(PRIMARY))
    assert f.primary_amines == (0,)
    # amides, sulfonamides and anilides are not nucleophilic amines
    f = C.api_features(Chem.MolFromSmiles("CNC(=O)C.CNS(C)(=O)=O.CC(=O)Nc1ccccc1"))
    assert f.nucleophilic_amines == ()


def test_maleate_with_secondary_amine_is_a_warning_and_triggers():
    # common practice (Stahl & Wermuth 2011): maleate adds to primary/secondary amines (aza-Michael)
    cav, trig = caveats_of(SECONDARY, MALEATE, 9.5)
    c = by_code(cav)["michael_acceptor"]
    assert c.severity == "warning" and "atom 1" in c.text
    assert trig == ("michael_acceptor",)


def test_maleate_with_primary_amine_triggers():
    cav, trig = caveats_of(PRIMARY, MALEATE, 9.0, atom=0)
    assert by_code(cav)["michael_acceptor"].severity == "warning"
    assert "michael_acceptor" in trig


def test_maleate_with_tertiary_amine_is_only_info():
    cav, trig = caveats_of(TERTIARY, MALEATE, 9.0)
    assert by_code(cav)["michael_acceptor"].severity == "info"
    assert trig == ()


def test_sulfonate_ester_caveat_always_present_for_sulfonic_acids():
    # ICH M7: alkyl sulfonates from sulfonic acids + alcohols are potential mutagenic impurities
    for smiles in (TERTIARY, SECONDARY):
        cav, _ = caveats_of(smiles, MESYLATE, 9.0)
        c = by_code(cav)["sulfonate_ester"]
        assert c.severity == "warning"
        assert "ICH M7" in c.text and "alcohol" in c.text
        assert "stronger when alcohols are planned" in c.text


def test_nitrosamine_precursor_counterion_found_from_structure():
    # secondary-amine counterions raise an N-nitrosamine risk assessment (common practice);
    # found from the SMILES even when the library sets no flag
    cav, _ = caveats_of(ACID, DIETHYLAMINE, 4.2, kind="acid", atom=0)
    c = by_code(cav)["nitrosamine_counterion"]
    assert c.severity == "warning" and "nitrosamine" in c.text


def test_secondary_amine_api_gets_plan_level_nitrosamine_caveat():
    caveats = C.api_caveats(C.api_features(Chem.MolFromSmiles(SECONDARY)))
    assert [c.code for c in caveats] == ["nitrosamine_api"]
    assert "risk assessment" in caveats[0].text
    assert C.api_caveats(C.api_features(Chem.MolFromSmiles(TERTIARY))) == ()


def test_common_ion_for_poorly_soluble_hydrochloride():
    # gastric fluid ≈ 0.1 M chloride suppresses dissolution of a poorly soluble base's
    # hydrochloride (Serajuddin 2007, from memory)
    cav, trig = caveats_of(TERTIARY, HCL, 9.0, s0=0.01)
    assert by_code(cav)["common_ion"].severity == "warning"
    assert "common_ion_gastric" in trig
    cav, trig = caveats_of(TERTIARY, HCL, 9.0, s0=5.0)
    assert by_code(cav)["common_ion"].severity == "info"
    assert "common_ion_gastric" not in trig


def test_weak_base_disproportionation_and_volatile_acid():
    # domain notes §3: salts of weak bases (pKa below about 4–5) tend to disproportionate
    cav, trig = caveats_of(TERTIARY, HCL, 3.0)
    c = by_code(cav)["weak_base_disproportionation"]
    assert c.severity == "warning" and "volatile" in c.text
    assert "volatile_acid" in trig
    cav, _ = caveats_of(TERTIARY, HCL, 9.0)
    assert "weak_base_disproportionation" not in by_code(cav)


def test_ph_max_caveat_against_microenvironment():
    cav, _ = caveats_of(TERTIARY, HCL, 6.0, ph_max=3.0)
    assert by_code(cav)["ph_max"].severity == "warning"
    cav, _ = caveats_of(TERTIARY, HCL, 9.0, ph_max=8.5)
    assert "ph_max" not in by_code(cav)


def test_sodium_load_at_high_dose():
    # benzoic acid (MW 122.12) as sodium salt: 1000 mg/day → 1000/122.12·22.99 = 188 mg Na;
    # 2000 mg/day → 16.4 mmol → 377 mg Na, above the 200 mg/day planning threshold (10 % of WHO 2 g/day)
    cav, _ = caveats_of(ACID, SODIUM, 4.2, kind="acid", atom=0, dose=1000)
    c = by_code(cav)["cation_load"]
    assert c.severity == "info" and "188 mg/day" in c.text and "WHO" in c.text
    cav, _ = caveats_of(ACID, SODIUM, 4.2, kind="acid", atom=0, dose=2000)
    c = by_code(cav)["cation_load"]
    assert c.severity == "warning" and "377 mg/day" in c.text and "16.4 mmol/day" in c.text


def test_counterion_exposure_without_dose_is_silent():
    cav, _ = caveats_of(ACID, SODIUM, 4.2, kind="acid", atom=0, dose=None)
    assert "cation_load" not in by_code(cav)


def test_exposure_of_2_1_salt_counts_half_a_counterion_per_api():
    # 2:1 hemisulfate: 0.5 mol H2SO4 (98.08 g/mol) per mol API
    sulfate = ion("sulfate", "OS(=O)(=O)O", "acid", [-3.0, 1.99])
    mol = Chem.MolFromSmiles(TERTIARY)
    cands = A.assess(NS(smiles=TERTIARY), [site(1, "base", 9.0)], [sulfate])
    hemi = [c for c in cands if c.stoichiometry == "2:1"][0]
    from rdkit.Chem import Descriptors

    mw = Descriptors.MolWt(mol)
    assert C.daily_counterion_mg(hemi, 100.0, mw) == pytest.approx(100.0 / mw * 98.08 / 2, rel=1e-3)


def test_permanent_charge_detected():
    # a quaternary ammonium without an anionic partner (acetylcholine cation)
    f = C.api_features(Chem.MolFromSmiles("CC(=O)OCC[N+](C)(C)C"))
    assert f.permanent_charge
    assert [c.code for c in C.api_caveats(f)] == ["permanent_charge"]
    # a betaine-type inner salt is neutral overall: not flagged
    assert not C.api_features(Chem.MolFromSmiles("C[N+](C)(C)CC(=O)[O-]")).permanent_charge
    # an N-oxide or nitro group is not a permanent cation
    assert not C.api_features(Chem.MolFromSmiles("C[N+](C)(C)[O-]")).quaternary
    assert not C.api_features(Chem.MolFromSmiles("O=[N+]([O-])c1ccccc1")).quaternary


def test_acid_site_on_the_acidic_centre_still_gives_the_right_salt():
    # a site reported on the carboxyl carbon (atom 1) gives its proton from the OH (atom 0)
    a = A.assess(NS(smiles=ACID), [site(1, "acid", 4.2)], [SODIUM])[0]
    b = A.assess(NS(smiles=ACID), [site(0, "acid", 4.2)], [SODIUM])[0]
    assert a.formula == b.formula == "C7H5NaO2"   # sodium benzoate (CRC: 144.10 g/mol)
    assert a.salt_mw == pytest.approx(144.10, abs=0.01)
