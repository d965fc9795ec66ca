"""From an API structure to a ranked, explained counterion plan: :func:`plan_salts` → :class:`Plan`.

Steps: standardize the structure (:mod:`saltplan.structure`), find ionizable sites and pKa
(:mod:`saltplan.ionization`, measured values win), load the counterion library
(:mod:`saltplan.counterions`), apply the ΔpKa rule and build stoichiometries
(:mod:`saltplan.assessment`), sketch solubility and pHmax (:mod:`saltplan.solubility`),
attach caveats (:mod:`saltplan.caveats`), score and rank (:mod:`saltplan.ranking`), then
give a verdict with alternatives when no salt is in reach.

A planning aid, not a measurement: see :data:`CAUTIONS`.
"""
from __future__ import annotations

import functools
import json
import math
import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, cast

from ..errors import ParameterError

if TYPE_CHECKING:
    from rdkit import Chem

    from ..ledger.store import InhouseEvidence
    from ..library.counterions import Library
    from ..structure import Parent
    from .ranking import RankingConfig

ROUTES = ("oral", "parenteral", "inhalation", "topical", "other")

CAUTIONS = (
    "Planning aid, not a measurement: pKa values, ΔpKa categories, proton-transfer "
    "probabilities, solubilities and pHmax are estimates with stated sources.",
    "Confirm pKa values by potentiometric or UV titration, and salt formation and "
    "stoichiometry by XRPD, DSC/TGA and NMR (ideally a crystal structure locating the proton).",
    "Final choices defer to the pharmacopoeias (USP–NF, Ph. Eur.), ICH Q3C, Q6A and M7, local "
    "regulation and the judgement of qualified staff.",
    "Strong acids and bases (hydrochloric, sulfuric and sulfonic acids, metal hydroxides) and "
    "many solvents are hazardous: handle them under the site's safety rules.",
)

REFERENCES = (
    ("stahl2011", "P. H. Stahl, C. G. Wermuth (eds.), Handbook of Pharmaceutical Salts: "
     "Properties, Selection, and Use, 2nd ed., Wiley-VCH, 2011",
     "ΔpKa rule of thumb (≥ 2–3), acceptability tiers, known liabilities (common practice)"),
    ("cruzcabeza2012", "A. J. Cruz-Cabeza, CrystEngComm 2012, 14, 6362–6365",
     "ΔpKa categories and proton-transfer probability P ≈ 0.17·ΔpKa + 0.28 (from memory)"),
    ("ran2001", "Y. Ran, S. H. Yalkowsky, J. Chem. Inf. Comput. Sci. 2001, 41, 354",
     "General Solubility Equation (from memory)"),
    ("delaney2004", "J. S. Delaney, J. Chem. Inf. Comput. Sci. 2004, 44, 1000–1005",
     "ESOL intrinsic solubility (from memory)"),
    ("wildman1999", "S. A. Wildman, G. M. Crippen, J. Chem. Inf. Comput. Sci. 1999, 39, 868",
     "atomic logP (RDKit Crippen MolLogP)"),
    ("serajuddin2007", "A. T. M. Serajuddin, Adv. Drug Deliv. Rev. 2007, 59, 603–616",
     "pHmax, disproportionation, common-ion effect (from memory)"),
    ("paulekuhn2007", "G. S. Paulekuhn, J. B. Dressman, C. Saal, J. Med. Chem. 2007, 50, 6665",
     "frequency of counterions in marketed salts (precedence term; from memory)"),
    ("ichm7", "ICH M7(R2): Assessment and control of DNA reactive (mutagenic) impurities",
     "sulfonate esters, nitrosamines"),
    ("ichq3c", "ICH Q3C(R8): Impurities: guideline for residual solvents", "solvent classes"),
    ("ichq6a", "ICH Q6A: Specifications for new drug substances", "salt form specification"),
)

ALTERNATIVES = {
    "cocrystal": "Co-crystal screen with acceptable co-formers (carboxylic acids, amides, "
                 "phenols): ΔpKa below about 2 favours co-crystals over salts (Cruz-Cabeza 2012).",
    "asd": "Amorphous solid dispersion with a polymer carrier (spray drying or hot-melt "
           "extrusion) to raise apparent solubility.",
    "prodrug": "Prodrug that adds an ionizable group (e.g. a phosphate ester or an amino-acid "
               "ester) so that a salt becomes possible.",
    "particle": "Particle-size reduction (micronization, nanosuspension) or a lipid-based "
                "formulation for a poorly soluble neutral form.",
    "exchange": "Choose the anion of the permanently charged API by ion exchange or salt "
                "metathesis (chloride, bromide, sulfate, mesylate ...), judged on "
                "crystallinity, hygroscopicity and solubility.",
}


# --------------------------------------------------------------------------- result type
@dataclass(frozen=True)
class Plan:
    """The salt plan of one API (see DEVELOPERS.md, ``plan.Plan``)."""

    name: str | None
    inputs: Mapping[str, Any]
    parent: Any                       # structure.Parent
    sites: tuple                      # ionization.Site
    candidates: tuple                 # assessment.Candidate, feasible, ranked 1..n
    excluded: tuple                   # assessment.Candidate, infeasible, with reason
    verdict: Mapping[str, Any]
    solubility: Any                   # solubility.SolubilitySketch
    caveats: tuple                    # assessment.Caveat of the API itself
    thresholds: Any                   # assessment.Thresholds
    settings: Mapping[str, Any]
    cautions: tuple[str, ...]
    references: tuple[tuple[str, str, str], ...]
    provenance: Mapping[str, Any]

    @property
    def top(self):
        """The best-ranked feasible candidate, or None."""
        return self.candidates[0] if self.candidates else None

    def to_dict(self) -> dict[str, Any]:
        return {
            "name": self.name,
            "inputs": dict(self.inputs),
            "parent": self.parent.to_dict(),
            "sites": [_site_dict(s) for s in self.sites],
            "verdict": dict(self.verdict),
            "candidates": [c.to_dict() for c in self.candidates],
            "excluded": [c.to_dict() for c in self.excluded],
            "solubility": None if self.solubility is None else self.solubility.to_dict(),
            "caveats": [c.to_dict() for c in self.caveats],
            "thresholds": self.thresholds.to_dict(),
            "settings": dict(self.settings),
            "cautions": list(self.cautions),
            "references": [{"id": i, "citation": c, "used_for": u} for i, c, u in self.references],
            "provenance": dict(self.provenance),
        }

    def _repr_html_(self) -> str:  # pragma: no cover - needs Jupyter to matter
        from ..reports import repr_html

        return repr_html(self)


def _site_dict(site) -> dict[str, Any]:
    if hasattr(site, "to_dict"):
        return site.to_dict()
    return {"atom": site.atom, "kind": site.kind, "pka": round(float(site.pka), 2),
            "provenance": getattr(site, "provenance", "estimated"),
            "source": getattr(site, "source", "")}


# --------------------------------------------------------------------------- validation
def _number(value, what, low=None, high=None, positive=False):
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ParameterError(f"{what} must be a finite number, got {value!r}")
    if positive and value <= 0:
        raise ParameterError(f"{what} must be positive, got {value!r}")
    if (low is not None and value < low) or (high is not None and value > high):
        raise ParameterError(f"{what} must be between {low:g} and {high:g}, got {value!r}")
    return float(value)


def _measured_json(measured) -> Any:
    if measured is None:
        return None
    if isinstance(measured, Mapping):
        return {str(k): (float(v) if isinstance(v, (int, float)) else v)
                for k, v in measured.items()}
    if isinstance(measured, (list, tuple)):
        return [float(v) if isinstance(v, (int, float)) else v for v in measured]
    return measured


def _library_paths(libraries) -> list[str]:
    """User library files as given (a Library: its non-built-in sources)."""
    if libraries is None:
        return []
    if hasattr(libraries, "hash"):
        return [str(s) for s in libraries.sources if not str(s).startswith("built-in")]
    if isinstance(libraries, (str, os.PathLike)):
        libraries = [libraries]
    return [str(p) for p in libraries]


# --------------------------------------------------------------------------- planning
def plan_salts(structure: str | Path | Chem.Mol | Parent, name: str | None = None,
               dose_mg: float | None = None, route: str = "oral",
               measured: Mapping[Any, float] | Sequence[float] | None = None,
               libraries: Sequence[str | Path] | Library | None = None,
               weights: str | Path | RankingConfig | None = None,
               min_delta_pka: float = 2.0, melting_point_c: float | None = None,
               intrinsic_solubility_mg_ml: float | None = None,
               salt_solubility_mg_ml: float | None = None,
               max_heavy_atoms: int = 150,
               inhouse: InhouseEvidence | None = None) -> Plan:
    """Plan the salt forms of an API: ranked, explained counterion × stoichiometry candidates.

    Parameters
    ----------
    structure : str, Path, rdkit Mol or Parent
        SMILES, MOL block or structure file (see :func:`saltplan.structure.read_structure`).
    name : str, optional
        Compound name.
    dose_mg : float, optional
        Daily dose as free form [mg/day]; scales the mass penalty and the exposure caveats.
    route : str
        One of :data:`ROUTES`.
    measured : mapping or sequence, optional
        Measured pKa values (see :func:`saltplan.ionization.ionizable_sites`); they replace
        estimates and are labelled "measured".
    libraries : sequence of paths or Library, optional
        Extra counterion library files (added to / overriding the built-in library).
    weights : path or RankingConfig, optional
        Ranking configuration overriding ``saltplan/data/ranking_weights.yaml``.
    min_delta_pka : float
        ``feasible`` = limiting ΔpKa ≥ this [pKa units]; default 2 (common practice).
    melting_point_c : float, optional
        Melting point of the free form [°C]: S0 from the General Solubility Equation.
    intrinsic_solubility_mg_ml : float, optional
        Known S0 of the free form [mg/mL] (provenance "user").
    salt_solubility_mg_ml : float, optional
        Salt solubility [mg/mL as free form] for pHmax; otherwise a default is assumed
        (and labelled "assumed").
    max_heavy_atoms : int
        Refuse larger structures.
    inhouse : InhouseEvidence, optional
        In-house screen outcomes from a ledger
        (:meth:`saltplan.ledger.Ledger.inhouse_evidence`): the precedence term of each
        candidate is shrunk toward the in-house success rate on similar sites
        (:mod:`saltplan.plan.inhouse`), and the candidate says so (``precedence_basis``).
        None (the default): the published prior alone, exactly as without a ledger.

    Returns
    -------
    Plan

    Raises
    ------
    StructureError, ParameterError, CounterionLibraryError
    """
    from .._provenance import input_hash, provenance
    from ..ionization import ionizable_sites
    from ..library.counterions import load_counterions
    from ..structure import read_structure
    from .assessment import assess
    from .caveats import api_caveats, api_features
    from .ranking import RankingConfig, load_ranking_config
    from .solubility import sketch

    dose_mg = _number(dose_mg, "dose (mg/day)", positive=True)
    if dose_mg is not None and dose_mg > 1e6:
        raise ParameterError(f"dose (mg/day) must be at most 1e6 mg, got {dose_mg:g}")
    if route not in ROUTES:
        raise ParameterError(f"route must be one of {', '.join(ROUTES)}, got {route!r}",
                             field="route")
    min_delta_pka = _number(min_delta_pka, "minimum ΔpKa", -10.0, 20.0)
    melting_point_c = _number(melting_point_c, "melting point (°C)", -100.0, 500.0)
    intrinsic_solubility_mg_ml = _number(intrinsic_solubility_mg_ml,
                                         "intrinsic solubility (mg/mL)", positive=True)
    salt_solubility_mg_ml = _number(salt_solubility_mg_ml, "salt solubility (mg/mL)",
                                    positive=True)

    parent = read_structure(structure, name=name, max_heavy_atoms=max_heavy_atoms)
    sites = tuple(ionizable_sites(parent, measured=measured))
    library: Library = cast("Library", libraries) if hasattr(libraries, "hash") else (
        load_counterions(libraries) if libraries else _builtin_library())
    cfg = weights if isinstance(weights, RankingConfig) else load_ranking_config(weights)
    thresholds = cfg.thresholds
    prob = cfg.data["probability"]

    features = api_features(parent.mol)
    sol = sketch(parent.mol, sites, melting_point_c=melting_point_c,
                 intrinsic_mg_ml=intrinsic_solubility_mg_ml, salt_mg_ml=salt_solubility_mg_ml,
                 assumed_salt_mg_ml=float(cfg.data["solubility"]["assumed_salt_mg_ml"]))
    # sites outside the salt range (acid pKa > 12, base pKa < 1) are shown, not paired
    relevant = tuple(s for s in sites if getattr(s, "salt_relevant", True))
    raw = assess(parent, relevant, library, min_delta_pka=min_delta_pka, thresholds=thresholds,
                 slope=float(prob["slope"]), intercept=float(prob["intercept"]),
                 zwitterion_allowance=float(cfg.data["zwitterion"]["allowance"]))

    ranked, excluded = _score_and_rank(raw, library, parent, features, sol, cfg,
                                       dose_mg=dose_mg, route=route, sites=sites,
                                       inhouse=inhouse)

    verdict = _verdict(sites, relevant, ranked, excluded, library, features, min_delta_pka)
    inputs = {
        "smiles": parent.smiles,
        "structure": parent.input,
        "dose_mg": dose_mg,
        "route": route,
        "measured": _measured_json(measured),
        "libraries": _library_paths(libraries),
        "weights": None if weights is None else (cfg.source if isinstance(weights, RankingConfig)
                                                 else str(weights)),
        "min_delta_pka": min_delta_pka,
        "melting_point_c": melting_point_c,
        "intrinsic_solubility_mg_ml": intrinsic_solubility_mg_ml,
        "salt_solubility_mg_ml": salt_solubility_mg_ml,
    }
    settings = _settings(cfg, min_delta_pka, dose_mg)
    if inhouse is not None:
        from .inhouse import PKA_WINDOW, PRIOR_STRENGTH, SOURCE

        settings["inhouse_prior"] = {"ledger": getattr(inhouse, "source", None),
                                     "prior_strength_screens": PRIOR_STRENGTH,
                                     "pka_window": PKA_WINDOW, "source": SOURCE}
    digest = input_hash(json.dumps(inputs, sort_keys=True, ensure_ascii=False),
                        library.hash, cfg.hash)
    prov = provenance(library_hash=library.hash, weights_hash=cfg.hash,
                      input_hash=f"sha256:{digest}")
    return Plan(
        name=parent.name, inputs=inputs, parent=parent, sites=sites,
        candidates=tuple(ranked), excluded=tuple(excluded), verdict=verdict, solubility=sol,
        caveats=api_caveats(features), thresholds=thresholds, settings=settings,
        cautions=CAUTIONS, references=REFERENCES, provenance=prov)


def _score_and_rank(raw, library, parent, features, sol, cfg, *, dose_mg, route,
                    sites=(), inhouse=None):
    """pHmax, slurry pH, caveats and score of every candidate; (ranked, excluded)."""
    from .assessment import ranking_key
    from .caveats import candidate_caveats
    from .ranking import counterion_ranks, rank_order, score_candidate
    from .solubility import ph_max as solubility_ph_max
    from .solubility import slurry_ph

    settings_caveats = dict(cfg.caveat_settings)
    with_1_1 = {c.counterion for c in raw if c.stoichiometry == "1:1" and c.feasible}
    conc = sol.salt_mg_ml / parent.mw            # mol/L at the salt solubility (as free form)
    basis = f"salt solubility {sol.salt_basis}, S0 {sol.intrinsic.method}"
    scored = []
    for cand in raw:
        ion = library.get(cand.counterion)
        limiting = cand.limiting_transfer
        # the salt of an acid counterion behaves as a base salt (also for a zwitterion,
        # whose carboxylate-type site takes the proton), and vice versa
        salt_kind = "base" if ion.role == "acid" else "acid"
        ph_max = solubility_ph_max(salt_kind, limiting.api_pka, sol.intrinsic.mg_ml,
                                   sol.salt_mg_ml)
        fields: dict[str, Any] = {"ph_max": ph_max, "ph_max_basis": basis,
                  "slurry_ph": slurry_ph(salt_kind, limiting.api_pka, limiting.counterion_pka,
                                         conc)}
        cavs, triggered = candidate_caveats(
            cand, ion, features, dose_mg=dose_mg, route=route, s0_mg_ml=sol.intrinsic.mg_ml,
            s0_basis=sol.intrinsic.method, api_mw=parent.mw,
            api_base_pka=limiting.api_pka if ion.role == "acid" else None,
            settings=settings_caveats, ph_max=ph_max, ph_max_basis=basis)
        evidence = _inhouse_for(inhouse, cand, limiting, sites)
        score, breakdown = score_candidate(
            cand, ion, dose_mg=dose_mg, triggered_flags=triggered,
            alternative=cand.counterion in with_1_1, cfg=cfg, ph_max=ph_max,
            slurry_ph=fields["slurry_ph"], inhouse=evidence[:2] if evidence else None)
        fields.update(caveats=cavs, score=score, breakdown=breakdown)
        if evidence and evidence[0] > 0:
            from .inhouse import describe

            fields["precedence_basis"] = describe(*evidence)
        key = ranking_key(score, cand.delta_pka, cand.counterion, cand.stoichiometry)
        scored.append((_Keyed(cand.feasible, key), cand, fields))
    good, bad = rank_order(scored, key=lambda x: x[0])
    ci_rank = counterion_ranks(good, bad, key=lambda x: x[1])
    ranked = [replace(c, rank=i, counterion_rank=ci_rank[c.counterion], **f)
              for i, (_, c, f) in enumerate(good, start=1)]
    excluded = [replace(c, rank=i, counterion_rank=ci_rank[c.counterion], **f)
                for i, (_, c, f) in enumerate(bad, start=len(ranked) + 1)]
    return ranked, excluded


def _inhouse_for(inhouse, cand, limiting, sites):
    """(screens, crystalline, programmes) of the ledger for this candidate's limiting site."""
    if inhouse is None or limiting is None:
        return None
    from .inhouse import PKA_WINDOW

    site = next((s for s in sites if s.atom == limiting.api_atom
                 and s.kind == limiting.api_kind), None)
    if site is None:
        return None
    return inhouse.lookup(cand.counterion, site.group_id, float(site.pka), PKA_WINDOW)


def _settings(cfg, min_delta_pka, dose_mg) -> dict[str, Any]:
    """Settings and sources recorded in the plan (how every derived number was made)."""
    from .assessment import MASS_SOURCE, PROBABILITY_SOURCE, THRESHOLD_SOURCE
    from .solubility import PHMAX_SOURCE, SLURRY_SOURCE

    prob = cfg.data["probability"]
    return {
        "min_delta_pka": min_delta_pka,
        "zwitterion_min_delta_pka": min_delta_pka - float(cfg.data["zwitterion"]["allowance"]),
        "probability": f"P = clip({prob['slope']}·ΔpKa + {prob['intercept']}, 0, 1) "
                       "(Cruz-Cabeza 2012; from memory)",
        "weights_source": cfg.source,
        "weights_hash": cfg.hash,
        "weights": dict(cfg.data["weights"]),
        "dose_for_mass_mg": dose_mg if dose_mg is not None else
        cfg.data["mass"]["unknown_dose_mg"],
        "dose_for_mass_basis": "user" if dose_mg is not None else "assumed (no dose given)",
        "microenvironment_ph": cfg.data["disproportionation"]["microenvironment_ph"],
        "tie_breaks": "score desc, ΔpKa desc, counterion id, stoichiometry",
        "sources": {
            "delta_pka": "API pKa per site (see sites and transfers); counterion pKa from the "
                         "library entry (transfers.counterion_pka_source)",
            "category": THRESHOLD_SOURCE,
            "probability": PROBABILITY_SOURCE,
            "salt_mw_drug_content": MASS_SOURCE,
            "ph_max": PHMAX_SOURCE,
            "slurry_ph": SLURRY_SOURCE,
            "score": f"weights {cfg.source} (common practice; see the file's header)",
        },
    }


@dataclass(frozen=True)
class _Keyed:
    """Feasibility and sort key of a candidate before it is built (see ranking.rank_order)."""

    feasible: bool
    sort_key: tuple


@functools.lru_cache(maxsize=1)
def _builtin_library():
    """The built-in counterion library, loaded once per process."""
    from ..library.counterions import load_counterions

    return load_counterions(None)


def _fmt_site(site) -> str:
    prov = getattr(site, "provenance", "estimated")
    group = getattr(site, "group", None) or site.kind
    return f"{group} (atom {site.atom}) pKa {site.pka:.1f}, {prov}"


def _verdict(all_sites, sites, ranked, excluded, library, features,
             min_delta_pka) -> dict[str, Any]:
    """Verdict code, one-paragraph text and alternatives."""
    alts: list[str] = []
    if ranked:
        best = ranked[0]
        text = (f"{len(ranked)} feasible salt candidate(s) with ΔpKa ≥ {min_delta_pka:g}. "
                f"Best ranked: {best.counterion} {best.stoichiometry} (ΔpKa "
                f"{best.delta_pka:.1f}, {best.category.replace('_', ' ')}, P(transfer) "
                f"{best.probability:.2f}).")
        if best.category != "salt_expected":
            text += " Margins are small: keep a co-crystal screen in reserve."
            alts.append(ALTERNATIVES["cocrystal"])
        if features.permanent_charge:
            text += " The API also carries a permanent positive charge."
        return {"code": "salt_candidates", "text": text, "alternatives": alts}
    if features.permanent_charge:
        return {"code": "permanent_charge",
                "text": "The API carries a permanent positive charge (quaternary centre) and "
                        "is a salt whatever the counterion; the ΔpKa rule does not apply.",
                "alternatives": [ALTERNATIVES["exchange"]]}
    if not sites:
        found = ""
        if all_sites:
            found = (" Found only " + "; ".join(_fmt_site(s) for s in all_sites)
                     + ", outside the salt-forming range.")
        return {"code": "no_ionizable_site",
                "text": "No ionizable site in the range that matters for salts (base pKa above "
                        "about 1, acid pKa below about 12): a salt is not an option for this "
                        "molecule as drawn." + found,
                "alternatives": [ALTERNATIVES[k] for k in ("cocrystal", "asd", "particle",
                                                           "prodrug")]}
    kinds = sorted({s.kind for s in sites})
    roles_needed = {"base": "acid", "acid": "base"}
    offered = {c.role for c in library}
    missing = [roles_needed[k] for k in kinds if roles_needed[k] not in offered]
    best_d = max((c.delta_pka for c in excluded), default=None)
    site_text = "; ".join(_fmt_site(s) for s in sorted(sites, key=lambda s: (s.atom, s.kind)))
    if missing and not excluded:
        text = (f"Ionizable site(s): {site_text}; the counterion library holds no "
                f"{' or '.join(missing)} to pair with them.")
    else:
        text = (f"Ionizable site(s): {site_text}. No counterion reaches ΔpKa ≥ {min_delta_pka:g}"
                + (f" (best {best_d:.1f})" if best_d is not None else "")
                + ": the sites are too weak for a stable salt.")
    return {"code": "weak_sites_only", "text": text,
            "alternatives": [ALTERNATIVES[k] for k in ("cocrystal", "asd", "prodrug",
                                                       "particle")]}
