"""Hand-made plan / screen dicts for the report tests (invented data, shapes per DEVELOPERS.md).

The numbers are invented to exercise the templates (a dibasic amine, six candidates,
two exclusions, caveats, a 12-well screen); they are not claims about any compound.
"""
from __future__ import annotations

import copy

SMILES = "CN1CCC(Oc2ccc(-c3ccncc3)cc2)CC1"


def _transfer(atom, pka, prov, cpka, csrc):
    return {"api_atom": atom, "api_kind": "base", "api_pka": pka, "api_pka_provenance": prov,
            "api_pka_source": "user" if prov == "measured" else "amine_tertiary rule (fixture)",
            "counterion_pka": cpka, "counterion_pka_index": 0, "counterion_pka_source": csrc,
            "delta_pka": round(pka - cpka, 2)}


def _cand(rank, cid, name, stoich, atoms, dpkas, cat, prob, tier, mw, dc, score, bd, cav,
          cpka, feasible=True, reason=None):
    pkas = {1: (9.12, "estimated"), 13: (5.2, "measured")}
    transfers = [_transfer(a, pkas[a][0], pkas[a][1], cpka, f"{name} pKa (fixture source)")
                 for a in atoms]
    return {
        "rank": rank, "counterion": cid, "counterion_name": name, "stoichiometry": stoich,
        "api_sites": list(atoms), "delta_pka": min(dpkas), "delta_pkas": list(dpkas),
        "category": cat, "feasible": feasible, "probability": prob, "transfers": transfers,
        "tier": tier, "formula": "C17H20N2O.X", "formula_display": f"(C17H20N2O)·{cid}",
        "salt_smiles": SMILES, "salt_mw": mw, "drug_content": dc,
        "mass_source": "RDKit average atomic weights (IUPAC)", "score": score,
        "breakdown": bd, "ph_max": 5.1, "ph_max_basis": "estimate (fixture)",
        "caveats": cav, "reason": reason,
    }


def _cav(code, sev, text, src="fixture rule"):
    return {"code": code, "severity": sev, "text": text, "source": src}


def plan_dict(name="TST-7 (test fixture)") -> dict:
    bd = lambda a, b, c, d: {"delta_pka": a, "tier": b, "drug_content": c, "liabilities": d}  # noqa: E731
    cands = [
        _cand(1, "hydrochloride", "hydrochloric acid", "1:1", [1], [15.12], "salt_expected", 1.0,
              1, 304.82, 88.04, 0.91, bd(0.4, 0.3, 0.26, -0.05),
              [_cav("common_ion_gastric", "warning", "Common-ion effect in gastric fluid "
                    "(about 0.1 M chloride) can lower dissolution.")], -6.0),
        _cand(2, "mesylate", "methanesulfonic acid", "1:1", [1], [11.02], "salt_expected", 1.0,
              2, 364.46, 73.63, 0.82, bd(0.4, 0.2, 0.22, 0.0),
              [_cav("sulfonate_ester_risk", "serious", "With alcohols can form alkyl "
                    "methanesulfonates, potential mutagenic impurities (ICH M7).")], -1.9),
        _cand(3, "fumarate", "fumaric acid", "1:1", [1], [6.09], "salt_expected", 1.0, 1,
              384.43, 69.81, 0.78, bd(0.4, 0.3, 0.18, -0.1),
              [_cav("michael_acceptor", "info", "Weak Michael acceptor.")], 3.03),
        _cand(4, "tartrate", "L-tartaric acid", "1:1", [1], [6.14], "salt_expected", 1.0, 1,
              418.45, 64.13, 0.74, bd(0.4, 0.3, 0.14, -0.1), [], 2.98),
        _cand(5, "mesylate", "methanesulfonic acid", "1:2", [1, 13], [11.02, 7.1],
              "salt_expected", 1.0, 2, 460.56, 58.27, 0.61, bd(0.4, 0.2, 0.11, -0.1),
              [_cav("bis_salt", "warning", "Bis-salt of the weak pyridine site may lose acid "
                    "on drying.")], -1.9),
        _cand(6, "maleate", "maleic acid", "1:1", [1], [7.22], "salt_expected", 1.0, 2,
              384.43, 69.81, 0.55, bd(0.4, 0.2, 0.18, -0.23),
              [_cav("michael_acceptor", "warning", "Maleate is a Michael acceptor.")], 1.9),
    ]
    excluded = [
        _cand(0, "succinate", "succinic acid", "1:2", [1, 13], [4.91, 1.0], "uncertain", 0.45,
              1, 504.6, 53.2, 0.0, {}, [], 4.21, feasible=False,
              reason="second proton transfer ΔpKa 1.0 below the minimum 2"),
        _cand(0, "arginine", "L-arginine", "1:1", [], [-3.0], "unlikely", 0.0, 1, 442.6, 60.6,
              0.0, {}, [], 12.0, feasible=False,
              reason="a base counterion needs an acidic API site; this API has none"),
    ]
    return {
        "name": name,
        "inputs": {"smiles": SMILES, "dose_mg": 100.0, "route": "oral",
                   "structure": SMILES, "measured": {"13": 5.2}, "libraries": [],
                   "weights": None, "min_delta_pka": 2.0, "melting_point_c": None,
                   "intrinsic_solubility_mg_ml": None, "salt_solubility_mg_ml": None},
        "parent": {"input": SMILES, "smiles": SMILES, "name": name, "formula": "C17H20N2O",
                   "mw": 268.36, "heavy_atoms": 20, "supplied_as": None, "api_copies": 1,
                   "stripped": [], "notes": []},
        "sites": [
            {"atom": 1, "kind": "base", "pka": 9.12, "uncertainty": 0.6,
             "group": "tertiary aliphatic amine", "group_id": "amine_tertiary",
             "steps": [
                 {"label": "parent value", "value": 10.2, "detail": "N-methylpiperidine",
                  "source": "Perrin 1965 (fixture)"},
                 {"label": "β-oxygen", "value": -1.08, "detail": "σ* 0.52 × ρ* −2.08 (attenuated)",
                  "source": "Taft σ*, Hansch–Leo–Taft 1991 (fixture)"},
             ],
             "provenance": "estimated", "source": "amine_tertiary rule (fixture)"},
            {"atom": 13, "kind": "base", "pka": 5.2, "uncertainty": 0.0, "group": "pyridine",
             "group_id": "pyridine", "steps": [
                 {"label": "measured", "value": 5.2, "detail": "supplied by the user",
                  "source": "user"}],
             "provenance": "measured", "source": "user"},
        ],
        "candidates": cands,
        "excluded": excluded,
        "verdict": {"code": "salt_candidates",
                    "text": "Salt formation is well supported: the tertiary amine (pKa ~9.1) "
                            "clears the ΔpKa rule with many acids.",
                    "alternatives": []},
        "solubility": {
            "s0_mg_ml": 0.012, "s0_method": "ESOL", "s0_provenance": "estimated",
            "intrinsic": {"mg_ml": 0.012, "log_s_mol_l": -4.35, "method": "ESOL",
                          "provenance": "estimated", "source": "ESOL (fixture)",
                          "inputs": {"clogp": 3.1, "mw": 268.36}},
            "salt_solubility_mg_ml": 10.0, "salt_solubility_basis": "assumed",
            "ph_max": 6.2,
            "ph_max_sites": [{"atom": 1, "kind": "base", "pka": 9.12, "ph_max": 6.2}],
            "ph_max_source": "pHmax = pKa + log10(S0/S_salt) (fixture)",
            "profile_sites": [{"kind": "base", "atom": 1, "pka": 9.12}],
            "profile": [{"ph": float(p), "s_mg_ml": min(10.0, 0.012 * (1 + 10 ** (9.12 - p))),
                         "free_form_mg_ml": 0.012 * (1 + 10 ** (9.12 - p))}
                        for p in range(0, 15)],
            "notes": ["S0 from ESOL (fixture note)"]},
        "caveats": [_cav("nucleophilic_amine", "info", "No primary or secondary amine: "
                         "Michael addition of the counterion is not expected.")],
        "thresholds": {"salt_expected": 3.0, "likely": 2.0, "uncertain": -1.0,
                       "source": "common practice (fixture)"},
        "settings": {"min_delta_pka": 2.0, "probability": "P = clip(0.17·ΔpKa + 0.28, 0, 1)",
                     "weights_source": "built-in (fixture)", "weights_hash": "ef" * 8,
                     "weights": {"delta_pka": 0.4, "tier": 0.3},
                     "tie_breaks": "score desc, ΔpKa desc, counterion id, stoichiometry"},
        "cautions": ["Estimated pKa values must be confirmed by titration.",
                     "Final choices defer to the pharmacopoeias (USP–NF, Ph. Eur.), ICH Q3C, "
                     "Q6A and M7, local regulation and the judgement of qualified staff."],
        "references": [
            {"id": "stahl2011", "citation": "P. H. Stahl, C. G. Wermuth (eds.), Handbook of "
             "Pharmaceutical Salts, 2nd ed., Wiley-VCH, 2011", "used_for": "ΔpKa rule"},
            {"id": "cruzcabeza2012", "citation": "A. J. Cruz-Cabeza, CrystEngComm 2012, 14, "
             "6362–6365", "used_for": "categories, probability"}],
        "provenance": {"tool": "saltplan", "version": "0.1.0", "library_hash": "ab" * 32,
                       "weights_hash": "ef" * 8, "input_hash": "sha256:" + "cd" * 32,
                       "created": "2026-12-02T07:30:00Z"},
    }


def screen_dict(plan=None, budget_mg=400.0) -> dict:
    """The real screen designer run on the hand-made plan."""
    from saltplan.screen.design import design_screen

    return design_screen(copy.deepcopy(plan or plan_dict()), budget_mg).to_dict()
