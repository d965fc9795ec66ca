"""Solvent library: published ICH Q3C(R8) classes and limits, handbook values, validation."""
from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from saltplan.errors import SolventLibraryError
from saltplan.library.solvents import load_solvents

# ICH Q3C(R8), Impurities: Guideline for Residual Solvents (2021), Table 2 (class 2,
# Option-1 concentration limit in ppm) -- from memory, spot-checked against open copies of
# the table (also USP <467>).
ICH_CLASS2_PPM = {
    "methanol": 3000, "acetonitrile": 410, "thf": 720, "dichloromethane": 600,
    "toluene": 890, "hexane": 290, "dmf": 880, "1-4-dioxane": 380, "cyclohexane": 3880,
    "chloroform": 60, "nmp": 530, "mibk": 4500,
}
# ICH Q3C(R8) Table 2, PDE in mg/day (from memory).
ICH_CLASS2_PDE = {
    "methanol": 30.0, "acetonitrile": 4.1, "thf": 7.2, "dichloromethane": 6.0,
    "toluene": 8.9, "hexane": 2.9, "dmf": 8.8, "1-4-dioxane": 3.8, "cyclohexane": 38.8,
    "chloroform": 0.6, "nmp": 5.3, "mibk": 45.0,
}
# ICH Q3C(R8) Table 3 (class 3, low toxic potential; 2-methyltetrahydrofuran added in R8).
ICH_CLASS3 = {
    "ethanol", "2-propanol", "1-propanol", "1-butanol", "acetone", "2-butanone",
    "ethyl-acetate", "isopropyl-acetate", "butyl-acetate", "mtbe", "heptane", "dmso",
    "acetic-acid", "anisole", "2-methyltetrahydrofuran",
}
# ICH Q3C(R8) Table 1 (class 1, to be avoided), concentration limit in ppm.
ICH_CLASS1_PPM = {"benzene": 2, "carbon-tetrachloride": 4}


@pytest.fixture(scope="module")
def lib():
    return load_solvents()


def test_library_size_and_required_python_attributes(lib):
    # issue 6: at least 20 common crystallization solvents
    assert len(lib) >= 20
    for s in lib:
        assert isinstance(s.name, str) and s.name
        assert s.ich_class in (1, 2, 3, None)
        assert isinstance(s.is_alcohol, bool)


@pytest.mark.parametrize("sid,ppm", sorted(ICH_CLASS2_PPM.items()))
def test_class2_limits_match_ich_q3c_r8_table2(lib, sid, ppm):
    s = lib.get(sid)
    assert s.ich_class == 2
    assert s.ich_limit_ppm == ppm
    assert s.ich_pde_mg_day == pytest.approx(ICH_CLASS2_PDE[sid])


@pytest.mark.parametrize("sid", sorted(ICH_CLASS3))
def test_class3_matches_ich_q3c_r8_table3(lib, sid):
    s = lib.get(sid)
    assert s.ich_class == 3
    # ICH Q3C(R8) Option 1: class 3 at 5000 ppm (0.5 %) without justification
    assert s.ich_limit_ppm == 5000


@pytest.mark.parametrize("sid,ppm", sorted(ICH_CLASS1_PPM.items()))
def test_class1_matches_ich_q3c_r8_table1(lib, sid, ppm):
    s = lib.get(sid)
    assert s.ich_class == 1
    assert s.ich_limit_ppm == ppm
    assert s.default_pool is False


def test_every_classified_entry_is_in_one_of_the_published_lists(lib):
    # nothing in the library carries a class the lists above do not confirm
    published = set(ICH_CLASS2_PPM) | ICH_CLASS3 | set(ICH_CLASS1_PPM)
    unlisted = [s.id for s in lib if s.ich_class is not None and s.id not in published]
    assert unlisted == []


def test_water_is_outside_q3c_and_says_so(lib):
    water = lib.get("water")
    assert water.ich_class is None and "not" in water.ich_note


# CRC Handbook of Chemistry and Physics (from memory): bp [degC], density [g/mL, 20 degC]
# and relative permittivity; Kamlet-Taft beta from Y. Marcus, Chem. Soc. Rev. 1993, 22,
# 409 (from memory).
@pytest.mark.parametrize("sid,bp,density,eps", [
    ("water", 100.0, 0.997, 78.4),        # density at 25 degC, eps at 25 degC
    ("methanol", 64.6, 0.791, 32.7),
    ("ethanol", 78.3, 0.789, 24.6),
    ("acetone", 56.1, 0.790, 20.7),
    ("acetonitrile", 81.6, 0.786, 35.9),
    ("dichloromethane", 39.6, 1.326, 8.93),
    ("toluene", 110.6, 0.867, 2.38),
    ("dmso", 189.0, 1.100, 46.5),
])
def test_handbook_values(lib, sid, bp, density, eps):
    s = lib.get(sid)
    assert s.bp_c == pytest.approx(bp, abs=0.5)
    assert s.density_g_ml == pytest.approx(density, abs=0.003)
    assert s.dielectric == pytest.approx(eps, rel=0.01)


# CRC Handbook (from memory): melting points [degC]
@pytest.mark.parametrize("sid,mp", [("water", 0.0), ("dmso", 18.5), ("acetic-acid", 16.6),
                                    ("cyclohexane", 6.6), ("benzene", 5.5), ("ethanol", -114.1)])
def test_melting_points(lib, sid, mp):
    assert lib.get(sid).mp_c == pytest.approx(mp, abs=0.5)
    assert all(s.mp_c is not None for s in lib)


def test_kamlet_taft_orders_donors_and_acceptors(lib):
    # Marcus 1993 (from memory): water is the strongest donor of the set, alkanes neither
    # donate nor accept, DMSO is a strong acceptor and no donor.
    alpha = {s.id: s.kt_alpha for s in lib}
    assert max(alpha, key=alpha.get) == "water"
    assert lib.get("heptane").kt_alpha == 0 and lib.get("heptane").kt_beta == 0
    assert lib.get("dmso").kt_alpha == 0 and lib.get("dmso").kt_beta >= 0.7


def test_alcohols_are_the_aliphatic_c_oh_solvents(lib):
    alcohols = sorted(s.id for s in lib if s.is_alcohol)
    assert alcohols == ["1-butanol", "1-propanol", "2-propanol", "ethanol", "methanol"]


def test_every_value_has_a_source(lib):
    for s in lib:
        for f in ("ich_class", "bp_c", "density_g_ml", "dielectric", "kt_alpha", "kt_beta"):
            assert s.source_of(f), (s.id, f)
    assert "analogy" in lib.get("2-methyltetrahydrofuran").source_of("kt_beta")
    assert "Merck" in lib.get("mtbe").source_of("bp_c")


def test_antisolvents_resolve_and_are_not_class1(lib):
    for s in lib:
        if s.antisolvent:
            assert lib.get(s.antisolvent).ich_class != 1


def test_builtin_is_cached_and_to_dict_is_json_able(lib):
    import json

    assert load_solvents() is lib
    json.dumps(lib.to_dict())
    assert list(lib.get("ethanol").to_dict())[:3] == ["id", "name", "smiles"]


def test_unknown_id_names_the_id(lib):
    with pytest.raises(SolventLibraryError, match="unknown solvent 'etanol'"):
        lib.get("etanol")


# --------------------------------------------------------------------------- broken files
@pytest.mark.parametrize("name,entry,field,text", [
    ("unknown_key", "ethanol", "flash_point_c", "unknown key"),
    ("duplicate_id", "heptane", "id", "duplicate id"),
    ("bad_class", "ethanol", "ich_class", "must be 1, 2, 3 or null"),
    ("class2_no_ppm", "methanol", "ich_limit_ppm", "class 2 entries need"),
    ("alcohol_flag", "ethanol", "is_alcohol", "aliphatic C-OH"),
    ("antisolvent", "ethanol", "antisolvent", "not in the library"),
])
def test_broken_fixtures(fixtures_dir, name, entry, field, text):
    path = fixtures_dir / f"solvents_broken_{name}.yaml"
    with pytest.raises(SolventLibraryError) as info:
        load_solvents(path)
    err = info.value
    assert err.file == str(path) and err.entry == entry and err.field == field
    assert text in err.one_line()
    assert "\n" not in err.one_line()


def _builtin_data():
    from saltplan._data import package_file

    return yaml.safe_load(package_file("data", "solvents.yaml").read_text(encoding="utf-8"))


def _write(tmp_path: Path, data) -> Path:
    path = tmp_path / "lib.yaml"
    path.write_text(yaml.safe_dump(data, sort_keys=False), encoding="utf-8")
    return path


@pytest.mark.parametrize("sid,key,value,field,text", [
    ("methanol", "ich_limit_ppm", 300, "ich_limit_ppm", "does not follow from PDE"),
    ("ethanol", "ich_limit_ppm", 3000, "ich_limit_ppm", "class 3 Option-1 limit"),
    ("benzene", "default_pool", True, "default_pool", "class 1"),
    ("water", "ich_note", None, "ich_note", "needs an ich_note"),
    ("ethanol", "density_g_ml", "0.789", "density_g_ml", "expected a number"),
    ("ethanol", "density_g_ml", 7.89, "density_g_ml", "plausible range"),
    ("ethanol", "is_alcohol", "yes", "is_alcohol", "true or false"),
    ("ethanol", "water_miscibility", "soluble", "water_miscibility", "expected one of"),
    ("ethanol", "smiles", "C(C", "smiles", "does not parse"),
    ("ethyl-acetate", "family", "ketone", "family", "no such group"),
    ("ethanol", "sources", {"bp_c": "nowhere"}, "sources", "not in the library's sources"),
    ("hexane", "pool_note", None, "pool_note", "needs a pool_note"),
    ("ethanol", "antisolvent", "ethanol", "antisolvent", "its own anti-solvent"),
    ("ethanol", "antisolvent", "benzene", "antisolvent", "class 1"),
    ("ethanol", "mp_c", 90.0, "mp_c", "not below the boiling point"),
])
def test_entry_validation(tmp_path, sid, key, value, field, text):
    data = _builtin_data()
    entry = next(e for e in data["solvents"] if e["id"] == sid)
    if value is None:
        entry.pop(key, None)
    else:
        entry[key] = value
    with pytest.raises(SolventLibraryError) as info:
        load_solvents(_write(tmp_path, data))
    assert info.value.entry == sid and info.value.field == field
    assert text in info.value.one_line()


def test_duplicate_name_and_missing_top_key(tmp_path):
    data = _builtin_data()
    data["solvents"][1]["name"] = data["solvents"][0]["name"].upper()
    with pytest.raises(SolventLibraryError, match="duplicate name"):
        load_solvents(_write(tmp_path, data))
    data = _builtin_data()
    del data["field_sources"]
    with pytest.raises(SolventLibraryError, match="missing top-level key"):
        load_solvents(_write(tmp_path, data))


def test_duplicate_yaml_key_and_missing_file(tmp_path):
    path = tmp_path / "dup.yaml"
    path.write_text("schema: 1\nschema: 1\n", encoding="utf-8")
    with pytest.raises(SolventLibraryError, match="duplicate key"):
        load_solvents(path)
    with pytest.raises(SolventLibraryError, match="file not found"):
        load_solvents(tmp_path / "absent.yaml")


def test_a_valid_user_file_replaces_the_builtin(tmp_path):
    data = _builtin_data()
    data["solvents"] = [e for e in data["solvents"] if e["id"] in ("ethanol", "heptane")]
    user = load_solvents(_write(tmp_path, data))
    assert user.ids == ("ethanol", "heptane")
    assert user.hash != load_solvents().hash
