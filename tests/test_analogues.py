"""Measured-analogue evidence (saltplan.ionization.analogues).

External sources: the reference table is built from the literature compilation of
Mansouri, Cariello, Korotcov et al., J. Cheminform. 2019, 11, 60 (values compiled for
DataWarrior; ../shared/data/pka-train); the textbook series is tests/handbook_pka.py (CRC
Handbook, Perrin 1965, Serjeant & Dempsey 1979; from memory where marked there).
"""
from __future__ import annotations

import json
import math
import shutil
import statistics

import numpy as np
import pytest
from handbook_pka import HANDBOOK

from saltplan.errors import ParameterError
from saltplan.ionization import analogues, ionizable_sites
from saltplan.ionization.analogues import (
    MEASURED_PROVENANCE,
    OUTSIDE_NOTE,
    Fit,
    ReferenceTable,
    load_fit,
    shipped_table,
    site_fingerprints,
)
from saltplan.ionization.estimate import estimate_all
from saltplan.ionization.reference import cv_neighbours, scaffold_folds
from saltplan.structure import read_structure

DATA = analogues._data_path("")


# --------------------------------------------------------------------------- loading
@pytest.fixture
def table_copy(tmp_path):
    for name in (analogues.TABLE_NPZ, analogues.TABLE_JSON):
        shutil.copy(DATA / name, tmp_path / name)
    return tmp_path


def _load(folder):
    return ReferenceTable.load(folder / analogues.TABLE_NPZ, folder / analogues.TABLE_JSON)


def test_shipped_table_loads_with_attribution():
    t = _load(DATA)
    assert len(t) == t.header["rows"] > 3000
    # pka-train README: attribute Mansouri et al. 2019 wherever the data are used
    assert "Mansouri" in t.header["attribution"] and "J. Cheminform. 2019, 11, 60" in t.header["attribution"]
    assert t.fps.dtype == np.uint64 and t.fps.shape[1] == t.fingerprint["bits"] // 64


@pytest.mark.parametrize("missing", [analogues.TABLE_NPZ, analogues.TABLE_JSON])
def test_missing_table_is_one_line_error_naming_the_file(table_copy, missing):
    (table_copy / missing).unlink()
    with pytest.raises(ParameterError) as exc:
        _load(table_copy)
    text = str(exc.value)
    assert "\n" not in text and missing in text and "missing" in text


@pytest.mark.parametrize("broken", [analogues.TABLE_NPZ, analogues.TABLE_JSON])
def test_corrupt_table_is_one_line_error_naming_the_file(table_copy, broken):
    path = table_copy / broken
    path.write_bytes(path.read_bytes()[: len(path.read_bytes()) // 2])   # truncated
    with pytest.raises(ParameterError) as exc:
        _load(table_copy)
    text = str(exc.value)
    assert "\n" not in text and broken in text and "corrupt" in text


def test_table_whose_columns_disagree_is_corrupt(table_copy):
    path = table_copy / analogues.TABLE_JSON
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["smiles"] = doc["smiles"][:-1]
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ParameterError, match="corrupt"):
        _load(table_copy)


def test_estimator_never_falls_back_silently_when_the_table_is_gone(tmp_path, monkeypatch):
    monkeypatch.setattr(analogues, "_data_path", lambda name: tmp_path / name)
    shipped_table.cache_clear()
    try:
        with pytest.raises(ParameterError, match=analogues.TABLE_JSON):
            ionizable_sites("CCN")
        # the estimator alone stays available when asked for explicitly
        assert ionizable_sites("CCN", analogues=False)
    finally:
        shipped_table.cache_clear()


def test_nothing_is_loaded_at_import():
    import subprocess
    import sys

    code = ("import saltplan.ionization.analogues as a, sys; "
            "print(a.shipped_table.cache_info().currsize, 'numpy' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.split()[0] == "0"


# --------------------------------------------------------------------------- exact match / user value
def _a_table_row(table, group_id):
    i = next(i for i in range(len(table)) if table.class_keys[table.cls[i]][0] == group_id)
    return table.smiles[i], int(table.atom[i]), float(table.measured[i]), table.source[i]


@pytest.mark.parametrize("group_id", ["carboxylic_aromatic", "amine_tertiary", "phenol", "pyridine"])
def test_exact_match_shows_the_compiled_value_and_its_source_line(group_id):
    smiles, atom, value, source = _a_table_row(shipped_table(), group_id)
    site = {s.atom: s for s in ionizable_sites(smiles)}[atom]
    assert site.provenance == MEASURED_PROVENANCE
    assert site.pka == pytest.approx(value, abs=1e-5)
    assert source in site.source and "measured_pka.csv line" in site.source
    assert math.isclose(sum(st.value for st in site.steps), site.pka, abs_tol=1e-6)


def test_phenylboronic_acid_compiled_value_agrees_with_handbook():
    # phenylboronic acid 8.8 (CRC Handbook, from memory); the compilation's value is used
    site = ionizable_sites("OB(O)c1ccccc1")[0]
    assert site.provenance == MEASURED_PROVENANCE
    assert abs(site.pka - 8.8) <= 0.3


def test_user_value_still_wins_over_the_compilation():
    smiles, atom, value, _src = _a_table_row(shipped_table(), "carboxylic_aromatic")
    user = round(value + 1.3, 2)
    site = {s.atom: s for s in ionizable_sites(smiles, measured={atom: user})}[atom]
    assert site.provenance == "measured" and site.source == "user"
    assert site.pka == user
    labels = [st.label for st in site.steps]
    assert labels.index(MEASURED_PROVENANCE) < labels.index("measured")


# --------------------------------------------------------------------------- correction
def test_correction_shrinks_to_zero_as_similarity_falls():
    fit = load_fit()
    res = [1.5, 1.2, 1.8, 1.0, 1.4]
    prev = None
    for scale in np.linspace(1.0, 0.0, 21):
        sims = [scale * s for s in (1.0, 0.95, 0.9, 0.85, 0.8)]
        c, _w = fit.correction(sims, res)
        assert 0.0 <= c <= max(res)
        if prev is not None:
            assert c <= prev + 1e-12
        prev = c
    assert fit.correction([fit.min_similarity * 0.99] * 5, res)[0] == 0.0
    assert fit.correction([1.0] * 5, res)[0] > 0.5   # close analogues do move the estimate


def test_correction_is_weighted_mean_of_residuals_with_shrinkage():
    fit = Fit(k=3, power=2.0, kappa=0.5, min_similarity=0.3, clip=3.0)
    c, w = fit.correction([1.0, 0.5], [1.0, -1.0])
    w2 = ((0.5 - 0.3) / 0.7) ** 2
    assert w == pytest.approx(1.0 + w2)
    assert c == pytest.approx((1.0 - w2) / (0.5 + 1.0 + w2))
    assert fit.correction([0.3, 0.2], [1.0, 1.0]) == (0.0, 0.0)   # at / below s_min: nothing
    assert fit.correction([1.0], [10.0])[0] == pytest.approx(3.0 / 1.5)   # residual clipped


def test_uncertainty_grows_when_the_nearest_analogue_is_far():
    fit = load_fit()
    factors = [fit.sim_factor(s) for s in np.linspace(0.0, 1.0, 41)]
    assert all(a >= b for a, b in zip(factors, factors[1:], strict=False))
    assert factors[0] > factors[-1]


def test_site_far_from_any_measured_site_says_outside_the_calibrated_domain():
    fit = load_fit()
    smi = "NC12CC3CC(CC(C3)C1)C2"   # 1-adamantylamine: no adamantyl amine in the compilation
    alone = ionizable_sites(smi, analogues=False)[0]
    site = ionizable_sites(smi)[0]
    notes = [st.detail for st in site.steps if st.label == "note"]
    assert any(n.startswith(OUTSIDE_NOTE) for n in notes)
    assert site.uncertainty > alone.uncertainty
    near = [st for st in site.steps if st.label.startswith("measured analogue")]
    assert near and all(float(st.detail.rsplit("similarity ", 1)[1]) < fit.domain_similarity
                        for st in near[:1])


def test_steps_show_up_to_three_analogues_with_structure_value_residual_similarity():
    site = ionizable_sites("CN1CCN(c2ccc(Cl)c(C(F)(F)F)c2)CC1")[0]
    shown = [st for st in site.steps if st.label.startswith("measured analogue")]
    assert 1 <= len(shown) <= 3
    for st in shown:
        assert st.value == 0.0
        assert "measured" in st.detail and "residual" in st.detail and "similarity" in st.detail
        assert "Mansouri" in st.source and "measured_pka.csv line" in st.source
    sims = [float(st.detail.rsplit("similarity ", 1)[1]) for st in shown]
    assert sims == sorted(sims, reverse=True)
    corr = [st for st in site.steps if st.label == "measured-analogue correction"]
    assert len(corr) == 1 and "analogue_fit.yaml" in corr[0].source
    assert math.isclose(sum(st.value for st in site.steps), site.pka, abs_tol=1e-6)


def test_textbook_series_still_holds_with_the_analogue_step():
    # tests/handbook_pka.py: CRC Handbook / Perrin / Serjeant & Dempsey values
    errors = []
    for _name, smiles, kind, value, _src in HANDBOOK:
        sites = [s for s in ionizable_sites(smiles) if s.kind == kind]
        if sites:
            est = (max if kind == "base" else min)(s.pka for s in sites)
            errors.append(abs(est - value))
    assert len(errors) >= 0.95 * len(HANDBOOK)
    assert statistics.mean(errors) <= 0.2


# --------------------------------------------------------------------------- cross-validation
def _rows(n_scaffolds=6, per=4):
    rng = np.random.default_rng(7)
    words = analogues.FINGERPRINT["bits"] // 64
    rows = []
    for g in range(n_scaffolds):
        base = rng.integers(0, 2 ** 63, size=words, dtype=np.uint64)
        for j in range(per):
            rows.append({"fp": base.copy(), "group_id": "phenol", "kind": "acid", "measured": 9.0,
                         "residual": float(g), "atom": 0, "smiles": f"S{g}M{j}", "inchikey": "",
                         "scaffold": f"scaffold-{g}", "source": f"line {g * per + j}"})
    return rows


def test_cv_reference_never_holds_the_scored_molecules_scaffold_group():
    rows = _rows()
    fold = scaffold_folds(rows, k=3)
    by_scaffold = {}
    for r, f in zip(rows, fold, strict=True):
        by_scaffold.setdefault(r["scaffold"], set()).add(f)
    assert all(len(v) == 1 for v in by_scaffold.values())   # a scaffold is in one fold
    S, R = cv_neighbours(rows, fold, depth=30)
    for i, r in enumerate(rows):
        # identical fingerprints within a scaffold: were it present it would be found at 1.0
        own = float(r["residual"])
        found = R[i][S[i] >= 0]
        assert own not in set(found.tolist())


def test_search_can_exclude_a_scaffold_group():
    rows = _rows()
    table = ReferenceTable.from_rows(rows)
    hits = table.search("phenol", "acid", rows[0]["fp"], 50, exclude_scaffold="scaffold-0")
    assert hits and all(table.scaffold[i] != "scaffold-0" for i, _s in hits)
    assert table.search("phenol", "acid", rows[0]["fp"], 1)[0][1] == 1.0
    assert table.search("pyridine", "base", rows[0]["fp"], 5) == []


def test_correct_for_the_benchmark_uses_only_the_given_rows():
    rows = _rows()
    table = ReferenceTable.from_rows([r for r in rows if r["scaffold"] != "scaffold-3"])
    fit = Fit(k=3, power=2.0, kappa=0.5, min_similarity=0.3, clip=3.0)
    q = next(r for r in rows if r["scaffold"] == "scaffold-3")
    pka, sigma, ev = table.correct("phenol", "acid", q["fp"], 9.0, 0.5, fit)
    assert all(a.scaffold != "scaffold-3" for a in ev.analogues)
    assert math.isfinite(pka) and sigma > 0


# --------------------------------------------------------------------------- determinism, JSON
def test_fingerprints_are_deterministic_and_site_rooted():
    mol = read_structure("CC(=O)Nc1ccc(O)cc1").mol
    atoms = [s.atom for s in estimate_all(mol)]
    a = site_fingerprints(mol, atoms)
    b = site_fingerprints(read_structure("CC(=O)Nc1ccc(O)cc1").mol, atoms)
    assert np.array_equal(a, b)
    other = site_fingerprints(mol, [0])
    assert not np.array_equal(a[0], other[0])   # rooted elsewhere, another environment


def test_same_input_same_bytes():
    smi = "CC(C)NCC(O)c1ccc(O)c(CO)c1"
    one = json.dumps([s.to_dict() for s in ionizable_sites(smi)])
    two = json.dumps([s.to_dict() for s in ionizable_sites(smi)])
    assert one == two


def test_sites_json_shows_analogues_and_correction_as_steps(cli):
    r = cli("sites", "CN1CCN(c2ccc(Cl)c(C(F)(F)F)c2)CC1", "--json")
    assert r.exit_code == 0
    doc = json.loads(r.stdout)
    steps = [st for s in doc["sites"] for st in s["steps"]]
    analogue = [st for st in steps if st["label"].startswith("measured analogue")]
    corr = [st for st in steps if st["label"] == "measured-analogue correction"]
    assert analogue and corr
    assert all(st["source"] for st in analogue + corr)
    assert all("Mansouri" in st["source"] for st in analogue)
