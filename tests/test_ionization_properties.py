"""Property-based checks of the pKa estimator on random drug-like molecules (tests/molgen.py).

No published values here: these check the contract (never a crash, sorted, finite, JSON-able,
steps add up to the value, the reporting window) on structures the catalogue never saw.
"""
from __future__ import annotations

import json
import math

from hypothesis import HealthCheck, given, settings
from molgen import drug_like_smiles, smiles_like

from saltplan.errors import SaltplanError
from saltplan.ionization import ionizable_sites


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(drug_like_smiles())
def test_random_drug_like_molecules(smiles):
    sites = ionizable_sites(smiles)
    assert [s.atom for s in sites] == sorted(s.atom for s in sites)
    assert len({s.atom for s in sites}) == len(sites)
    for s in sites:
        assert math.isfinite(s.pka) and math.isfinite(s.uncertainty) and s.uncertainty > 0
        assert (s.pka >= -2.0) if s.kind == "base" else (s.pka <= 16.0)
        assert math.isclose(sum(st.value for st in s.steps), s.pka, abs_tol=1e-6)
        json.dumps(s.to_dict(), allow_nan=False)


@settings(max_examples=150, deadline=None)
@given(smiles_like)
def test_garbage_is_refused_cleanly(text):
    try:
        sites = ionizable_sites(text)
    except SaltplanError:
        return
    assert isinstance(sites, list)
