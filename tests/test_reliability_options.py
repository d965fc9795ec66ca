"""Hostile option values at every command: each is refused with exit 1 (domain error, one
line naming the option or field) or 2 (usage error from click), leaving no output."""
from __future__ import annotations

import pytest
from hostile import assert_refused, files_under

API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base; screens with the defaults
NUMBERS = {"negative": "-1", "zero": "0", "nan": "nan", "inf": "inf", "minus_inf": "-inf",
           "overflow": "1e400"}

# (command prefix, option, value name) -> (exit code, words); built below
CASES: dict[str, tuple[list, int, tuple[str, ...]]] = {}


def _add(name, args, code, words=()):
    assert name not in CASES
    CASES[name] = (args, code, words)


for key, value in NUMBERS.items():
    _add(f"plan --dose-mg {key}", ["plan", API, "--dose-mg", value], 1, ("dose",))
    _add(f"screen --dose-mg {key}", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                     "--dose-mg", value], 1, ("dose",))
    _add(f"screen --api-budget-mg {key}", ["screen", API, "--api-budget-mg", value, "--out",
                                           "{o}"], 1, ("api_budget_mg",))
    for opt, field in (("--api-mg", "api_mg_per_well"), ("--stock-molarity", "stock_molarity")):
        _add(f"screen {opt} {key}", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                     opt, value], 1, (field,))
    if key not in ("zero",):
        _add(f"screen --excess {key}", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                        "--excess", value], 1, ("excess",))
for key in ("nan", "inf", "minus_inf", "overflow"):
    value = NUMBERS[key]
    for opt, word in (("--min-delta-pka", "δpka"), ("--mp", "melting point"),
                      ("--s0", "solubility"), ("--salt-solubility", "solubility")):
        _add(f"plan {opt} {key}", ["plan", API, opt, value], 1, (word,))
    # click's FloatRange(min=0, min_open) refuses -inf itself (usage error); nan and +inf
    # pass it and are refused by the evaluation
    _add(f"select --dose-mg {key}", ["select", "{d}", "{r}", "--out", "{o}", "--dose-mg", value],
         2 if key == "minus_inf" else 1, ("dose",))
for key in ("negative", "zero"):
    for opt in ("--s0", "--salt-solubility"):
        _add(f"plan {opt} {key}", ["plan", API, opt, NUMBERS[key]], 1, ("positive",))
    _add(f"select --dose-mg {key}", ["select", "{d}", "{r}", "--out", "{o}", "--dose-mg",
                                     NUMBERS[key]], 2, ("dose-mg",))
_add("plan --mp out of range", ["plan", API, "--mp", "9999"], 1, ("melting point",))
_add("plan --min-delta-pka out of range", ["plan", API, "--min-delta-pka", "99"], 1, ("δpka",))
_add("plan --dose-mg absurd", ["plan", API, "--dose-mg", "1e9"], 1, ("dose",))
_add("plan --dose-mg text", ["plan", API, "--dose-mg", "abc"], 2, ("dose-mg",))
_add("plan --top 0", ["plan", API, "--top", "0"], 2, ("--top",))
_add("plan --route bogus", ["plan", API, "--route", "nasal-spray"], 2, ("--route",))
_add("plan --max-atoms 0", ["plan", API, "--max-atoms", "0"], 2, ("--max-atoms",))
_add("plan --max-atoms huge", ["plan", API, "--max-atoms", "100000"], 2, ("--max-atoms",))
_add("screen --top 0", ["screen", API, "--api-budget-mg", "500", "--out", "{o}", "--top", "0"],
     2, ("--top",))
_add("screen --n-solvents 0", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                               "--n-solvents", "0"], 2, ("--n-solvents",))
_add("screen --api-budget-mg tiny", ["screen", API, "--api-budget-mg", "1e-9", "--out", "{o}"],
     1, ("budget",))
_add("screen --api-budget-mg missing", ["screen", API, "--out", "{o}"], 2, ("api-budget-mg",))
_add("screen unknown counterion", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                   "--counterion", "nosuch"], 1, ("nosuch",))
_add("screen counterion not a candidate", ["screen", API, "--api-budget-mg", "500", "--out",
                                           "{o}", "--counterion", "sodium"], 1, ("sodium",))
_add("screen unknown solvent", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                "--solvent", "nosuch"], 1, ("nosuch",))
_add("screen unknown stock solvent", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                      "--stock-solvent", "nosuch"], 1, ("nosuch",))
_add("screen counterion budget nan", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                      "--counterion-budget", "hydrochloride=nan"], 1, ("budget",))
_add("screen counterion budget negative", ["screen", API, "--api-budget-mg", "500", "--out",
                                           "{o}", "--counterion-budget", "hydrochloride=-1"], 1,
     ("budget",))
_add("screen counterion budget unknown id", ["screen", API, "--api-budget-mg", "500", "--out",
                                             "{o}", "--counterion-budget", "nosuch=5"], 1,
     ("nosuch",))
_add("screen counterion budget no id", ["screen", API, "--api-budget-mg", "500", "--out", "{o}",
                                        "--counterion-budget", "=5"], 2, ("id=mg",))
_add("screen mode bogus", ["screen", API, "--api-budget-mg", "500", "--out", "{o}", "--mode",
                           "boil"], 2, ("--mode",))
_add("library show unknown id", ["library", "show", "nosuch"], 1, ("nosuch",))
_add("library list bad role", ["library", "list", "--role", "salt"], 2, ("--role",))
for cmd in ("plan", "sites", "screen"):
    extra = ["--api-budget-mg", "500", "--out", "{o}"] if cmd == "screen" else []
    for name, value, words in (("above range", "99", ("-5",)), ("below range", "-99", ("-5",)),
                               ("nan", "nan", ("-5",)), ("text", "abc", ("number",)),
                               ("keyed nan", "base=nan", ("-5",)),
                               ("keyed absurd", "acid=1e9", ("-5",)),
                               ("unknown atom", "99=4", ("atom 99",)),
                               ("unknown key", "x=4", ("'x'",)), ("empty value", "12=", ("''",)),
                               ("empty key", "=4", ("before '='",)),
                               ("two equals", "base=4=5", ("4=5",))):
        _add(f"{cmd} --pka {name}", [cmd, API, *extra, "--pka", value], 1, ("--pka",) + words
             if "atom" not in name else words)
for key in ("negative", "nan"):
    _add(f"batch --top {key}", ["batch", "{c}", "--out", "{o}/t.csv", "--top", NUMBERS[key]], 2,
         ("--top",))
_add("batch --jobs 0", ["batch", "{c}", "--out", "{o}/t.csv", "--jobs", "0"], 2, ("--jobs",))
_add("batch --chunk-size 0", ["batch", "{c}", "--out", "{o}/t.csv", "--chunk-size", "0"], 2,
     ("--chunk-size",))
_add("batch unknown output type", ["batch", "{c}", "--out", "{o}/t.weird"], 1, ("unknown output",))
_add("batch output replaces input", ["batch", "{c}", "--out", "{c}"], 1, ("replace",))
_add("batch unknown smiles column", ["batch", "{c}", "--out", "{o}/t.csv", "--smiles-column",
                                     "nosuch"], 1, ("nosuch",))
_add("batch engine bogus", ["batch", "{c}", "--out", "{o}/t.csv", "--engine", "cloud"], 2,
     ("--engine",))
_add("unknown command", ["frobnicate"], 2, ("frobnicate",))
_add("unknown option", ["plan", API, "--frobnicate"], 2, ("--frobnicate",))


@pytest.fixture(scope="module")
def screened(tmp_path_factory):
    import json

    from saltplan.demo.results import make_demo_results
    from saltplan.screen.output import screen_structure

    base = tmp_path_factory.mktemp("screened")
    design, _ = screen_structure(API, 500, out_dir=base / "design")
    results = base / "results.csv"
    results.write_text(make_demo_results(json.loads(json.dumps(design.to_dict()))),
                       encoding="utf-8")
    return base / "design", results


@pytest.mark.parametrize("case", sorted(CASES))
def test_hostile_option_refused(cli, tmp_path, screened, case):
    args, code, words = CASES[case]
    csv_in = tmp_path / "in.csv"
    csv_in.write_text("id,smiles\nr1,CCN\n", encoding="utf-8")
    out = tmp_path / "out"
    args = [a.format(o=out, d=screened[0], r=screened[1], c=csv_in) for a in args]
    before = files_under(tmp_path)
    assert_refused(cli(*args), code=code, mentions=words)
    assert files_under(tmp_path) == before
