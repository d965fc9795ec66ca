"""Property-based reliability checks (hypothesis; derandomized so CI is reproducible).

* never a crash: ``sites`` / ``plan`` / ``screen`` on random drug-like molecules
  (tests/molgen.py) give a result (screen may refuse with a SaltplanError, e.g. budget);
  on random text they give a result or a SaltplanError, nothing else;
* every pKa finite, every JSON strict (no NaN);
* deterministic: the same input gives byte-identical JSON (SOURCE_DATE_EPOCH fixed), also
  across interpreter hash seeds; only ``created`` timestamps change with the clock;
* chemical sanity from Hammett / Taft signs (substituent constants: Hansch, Leo & Taft,
  Chem. Rev. 1991, 91, 165, table 1; sigma_p(NO2) = +0.78, sigma_p(CH3) = -0.17,
  sigma_p(OCH3) = -0.27; Taft sigma*(CH3) below sigma*(H): Perrin, Dempsey & Serjeant,
  "pKa Prediction for Organic Acids and Bases", 1981, ch. 2): a para-nitro group never
  raises the pKa of a phenol or benzoic acid; a C-methyl on an amine's carbon skeleton and
  a para-methyl / para-methoxy on an aniline or pyridine never lower its base pKa.
  Pairs are built systematically from scaffolds, not sampled. These are properties of the
  Hammett / Taft estimator, so they are checked on it alone (``analogues=False``): the
  measured-analogue correction moves a value towards measured neighbours' residuals and
  carries no substituent sign (it is checked in tests/test_analogues.py).
"""
from __future__ import annotations

import itertools
import json
import math
import os
import subprocess
import sys

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from molgen import drug_like_smiles, hostile_text, random_text, salted_smiles, smiles_like

from saltplan.errors import SaltplanError

settings.register_profile("reliability", derandomize=True, deadline=None, database=None,
                          suppress_health_check=[HealthCheck.too_slow,
                                                 HealthCheck.function_scoped_fixture])
FEW = settings(settings.get_profile("reliability"), max_examples=40)
SOME = settings(settings.get_profile("reliability"), max_examples=80)


def _strict_json(data) -> str:
    return json.dumps(data, ensure_ascii=False, allow_nan=False, indent=2)


def _finite_numbers(value, path="$"):
    if isinstance(value, float):
        assert math.isfinite(value), path
    elif isinstance(value, dict):
        for k, v in value.items():
            _finite_numbers(v, f"{path}.{k}")
    elif isinstance(value, (list, tuple)):
        for i, v in enumerate(value):
            _finite_numbers(v, f"{path}[{i}]")


# ------------------------------------------------------------------ never a crash
@SOME
@given(drug_like_smiles())
def test_sites_and_plan_never_crash_on_drug_like(smiles):
    from saltplan.ionization.report import sites_report
    from saltplan.plan.planner import plan_salts

    rep = sites_report(smiles)
    for s in rep.sites:
        assert math.isfinite(s.pka)
    d = plan_salts(smiles).to_dict()
    _finite_numbers(d)
    _strict_json(d)
    for s in d["sites"]:
        assert math.isfinite(s["pka"])
    ranks = [c["rank"] for c in d["candidates"]]
    assert ranks == sorted(ranks)
    # nothing lost: every candidate is either ranked or excluded with a reason
    for c in d["excluded"]:
        assert c.get("reason")


@FEW
@given(drug_like_smiles())
def test_screen_never_crashes_on_drug_like(smiles):
    from saltplan.screen.output import screen_structure

    try:
        design, _ = screen_structure(smiles, 500)
    except SaltplanError as exc:
        assert "\n" not in exc.one_line()
        return
    d = design.to_dict()
    _finite_numbers(d)
    _strict_json(d)
    assert sum(1 for w in d["wells"] if w["kind"] == "sample") >= 1


@SOME
@given(st.one_of(random_text, smiles_like, hostile_text))
def test_random_text_gives_a_result_or_a_saltplan_error(text):
    from saltplan.ionization.report import sites_report
    from saltplan.plan.planner import plan_salts
    from saltplan.screen.output import screen_structure

    def screen(t):
        return screen_structure(t, 500)[0]

    for call in (sites_report, plan_salts, screen):
        try:
            result = call(text)
        except SaltplanError as exc:
            line = exc.one_line()
            assert line and "\n" not in line
            continue
        _strict_json(result.to_dict())


@FEW
@given(st.one_of(random_text, smiles_like, hostile_text))
def test_random_text_on_the_command_line(cli, text):
    for cmd in ("sites", "plan"):
        result = cli(cmd, "--", text) if text.startswith("-") else cli(cmd, text)
        assert result.exit_code in (0, 1), (text, result.stderr)
        assert "Traceback" not in result.stderr
        assert "internal error" not in result.stderr, result.stderr


@FEW
@given(salted_smiles())
def test_drawn_salts_give_the_same_parent(pair):
    from saltplan.structure import read_structure

    free, salt = pair
    try:
        drawn = read_structure(salt)
    except SaltplanError as exc:
        # a partner at least half the API's size is refused (ambiguous): that is a rule
        assert "similar size" in exc.one_line()
        return
    assert drawn.smiles == read_structure(free).smiles


# ------------------------------------------------------------------ determinism
@FEW
@given(drug_like_smiles())
def test_plan_json_is_byte_identical(smiles):
    os.environ["SOURCE_DATE_EPOCH"] = "1700000000"
    try:
        from saltplan.plan.planner import plan_salts

        a = _strict_json(plan_salts(smiles, name="x", dose_mg=100).to_dict())
        b = _strict_json(plan_salts(smiles, name="x", dose_mg=100).to_dict())
    finally:
        del os.environ["SOURCE_DATE_EPOCH"]
    assert a == b


def _without_created(value):
    if isinstance(value, dict):
        return {k: _without_created(v) for k, v in value.items() if k != "created"}
    if isinstance(value, list):
        return [_without_created(v) for v in value]
    return value


def test_only_timestamps_depend_on_the_clock(cli, monkeypatch):
    smi = "CN(C)CCc1ccc(Cl)cc1"
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")
    a = cli("plan", smi, "--json").stdout
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    b = cli("plan", smi, "--json").stdout
    assert a != b
    assert _without_created(json.loads(a)) == _without_created(json.loads(b))


def test_screen_and_select_outputs_byte_identical(cli, tmp_path, monkeypatch):
    from saltplan.demo.results import make_demo_results

    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")
    smi = "CN(C)CCc1ccc(Cl)cc1"
    outs = []
    for run in ("a", "b"):
        out = tmp_path / run
        assert cli("screen", smi, "--api-budget-mg", 500, "--out", out / "design").exit_code == 0
        design = json.loads((out / "design" / "design.json").read_text(encoding="utf-8"))
        (out / "results.csv").write_text(make_demo_results(design), encoding="utf-8")
        assert cli("select", out / "design", out / "results.csv", "--out",
                   out / "decision").exit_code == 0
        assert cli("plan", smi, "--out", out / "plan").exit_code == 0
        outs.append({p.relative_to(out).as_posix(): p.read_bytes()
                     for p in sorted(out.rglob("*")) if p.is_file()})
    assert outs[0].keys() == outs[1].keys() and len(outs[0]) >= 10
    for name in outs[0]:
        assert outs[0][name] == outs[1][name], name


def test_json_identical_across_hash_seeds(tmp_path):
    """Set iteration order changes with PYTHONHASHSEED; outputs must not."""
    smi = "OC(=O)CCN1CCN(Cc2ccc(Cl)cc2)CC1"
    code = ("import sys; from saltplan.cli import main; sys.argv=['saltplan']+sys.argv[1:]; "
            "main()")
    outputs = []
    for seed in ("1", "12345"):
        env = dict(os.environ, PYTHONHASHSEED=seed, SOURCE_DATE_EPOCH="0")
        res = subprocess.run([sys.executable, "-c", code, "plan", smi, "--json", "--dose-mg",
                              "50"], capture_output=True, text=True, env=env, timeout=120)
        assert res.returncode == 0, res.stderr
        outputs.append(res.stdout)
    assert outputs[0] == outputs[1]


# ------------------------------------------------------------------ chemical sanity
def _site_pka(smiles: str, pattern: str, kind: str) -> float:
    """pKa from the Hammett / Taft estimator alone (no measured-analogue correction) of the
    site of ``kind`` whose atom is in the first match of SMARTS ``pattern``."""
    from rdkit import Chem

    from saltplan.ionization import ionizable_sites
    from saltplan.structure import read_structure

    parent = read_structure(smiles)
    match = parent.mol.GetSubstructMatch(Chem.MolFromSmarts(pattern))
    assert match, (smiles, pattern)
    values = [s.pka for s in ionizable_sites(parent, analogues=False) if s.kind == kind and s.atom in match]
    assert values, (smiles, "no site at", pattern)
    return max(values) if kind == "base" else min(values)


# other ring substituents: none acidic/basic themselves (so the site is unambiguous)
_OTHERS = ["[H]", "C", "F", "Cl", "Br", "OC", "C(F)(F)F", "C(C)=O", "C(C)(C)C"]

# phenol / benzoic acid with substituents at the 2- and 3-positions (para left open)
ACID_PAIRS = []
for (acid, smarts), (o, m) in itertools.product(
        [("Oc1c({o})c({m})c({p})cc1", "[OX2H1]c1ccccc1"),
         ("OC(=O)c1c({o})c({m})c({p})cc1", "[OX2H1]C(=O)c1ccccc1")],
        itertools.product(_OTHERS[:6], _OTHERS)):
    ACID_PAIRS.append((acid.format(o=o, m=m, p="[H]"),
                       acid.format(o=o, m=m, p="[N+](=O)[O-]"), smarts[:8]))


@pytest.mark.parametrize("plain,nitro,pattern", ACID_PAIRS,
                         ids=[f"{i}" for i in range(len(ACID_PAIRS))])
def test_para_nitro_never_raises_acid_pka(plain, nitro, pattern):
    smarts = "[OX2H1]c1ccccc1" if pattern.startswith("[OX2H1]c") else "[OX2H1]C(=O)c"
    assert _site_pka(nitro, smarts, "acid") <= _site_pka(plain, smarts, "acid") + 1e-9


# aniline / N,N-dimethylaniline / pyridine: para-methyl or para-methoxy vs para-H, with
# another substituent at the 3-position (and 2-position for the anilines)
BASE_PAIRS = []
for (base, smarts), donor, (o, m) in itertools.product(
        [("Nc1c({o})c({m})c({p})cc1", "[NX3H2]c"),
         ("CN(C)c1c({o})c({m})c({p})cc1", "[NX3](C)(C)c"),
         ("n1c({o})c({m})c({p})cc1", "n")],
        ["C", "OC"],
        itertools.product(["[H]", "C", "Cl"], _OTHERS[:7])):
    BASE_PAIRS.append((base.format(o=o, m=m, p="[H]"), base.format(o=o, m=m, p=donor), smarts))


@pytest.mark.parametrize("plain,donor,smarts", BASE_PAIRS,
                         ids=[f"{i}" for i in range(len(BASE_PAIRS))])
def test_para_donor_never_lowers_aryl_base_pka(plain, donor, smarts):
    assert _site_pka(donor, smarts, "base") >= _site_pka(plain, smarts, "base") - 1e-9


# aliphatic amines: C-methyl ("(C)") added on a skeleton carbon, with a remote substituent
AMINE_TEMPLATES = [
    "NC{m}CC{x}", "NCC{m}CC{x}", "CNC{m}CC{x}", "CN(C)C{m}CC{x}", "CN(C)CC{m}C{x}",
    "C1C{m}CCN(C)C1", "C1CC{m}CNC1", "NC{m}Cc1ccc({x})cc1", "CNCC{m}OC", "NC{m}C(F)F",
]
AMINE_REMOTE = ["", "(O)", "(OC)", "(F)", "(Cl)", "(C)"]
AMINE_PAIRS = []
for tpl in AMINE_TEMPLATES:
    remotes = AMINE_REMOTE if "{x}" in tpl else [""]
    for x in remotes:
        if "c1ccc({x})" in tpl:
            x = x.strip("()") or "[H]"
        AMINE_PAIRS.append((tpl.format(m="", x=x), tpl.format(m="(C)", x=x)))


@pytest.mark.parametrize("plain,methyl", AMINE_PAIRS, ids=[f"{i}" for i in range(len(AMINE_PAIRS))])
def test_c_methyl_never_lowers_amine_pka(plain, methyl):
    smarts = "[NX3;!$(N-c);!$(N-C=O)]"
    assert _site_pka(methyl, smarts, "base") >= _site_pka(plain, smarts, "base") - 1e-9
