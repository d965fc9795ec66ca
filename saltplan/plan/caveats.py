"""Liabilities computed from both partners' structures (API and counterion).

Each caveat is a :class:`~saltplan.assessment.Caveat` (code, severity info|warning|serious,
text, source). Candidate caveats come from the counterion's machine-readable flags, made
stronger when the API's structure triggers them (a primary or secondary amine next to a
Michael-acceptor acid, a poorly soluble base with hydrochloric acid, a weak base with a
volatile acid), from the daily counterion exposure at the stated dose, and from the
disproportionation risk (weak base, pHmax). API caveats (secondary amines, permanent
charge) belong to the plan, not to one counterion.

Sources: common practice as summarised in Stahl & Wermuth, *Handbook of Pharmaceutical
Salts*, 2nd ed., Wiley-VCH 2011; ICH M7(R2) (mutagenic impurities); A. T. M. Serajuddin,
*Adv. Drug Deliv. Rev.* 2007, 59, 603–616 (pHmax, common-ion effect; from memory).
"""
from __future__ import annotations

import functools
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from .assessment import Candidate, Caveat, is_cation_base, parse_stoichiometry

STAHL = "Stahl & Wermuth, Handbook of Pharmaceutical Salts, 2nd ed. 2011 (common practice)"
SERAJUDDIN = "Serajuddin, Adv. Drug Deliv. Rev. 2007, 59, 603 (from memory)"
NITROSAMINE_SOURCE = ("N-nitrosamine risk assessment per current regulatory guidance "
                      "(ICH M7 cohort of concern; EMA/FDA nitrosamine guidance)")

# SMARTS (compiled lazily): nucleophilic amines, alcohols, quaternary centres
_SMARTS = {
    # aliphatic primary amine, not amide/sulfonamide/amidine/aniline nitrogen
    "primary_amine": "[NX3;H2;!$(N[#6,#16,#15]=[O,S,N]);!$(N-a);!$(N[#7,#8])][#6]",
    # secondary amine (aliphatic or aryl-alkyl), not acylated/sulfonylated/N-N/N-O
    "secondary_amine": "[NX3;H1;!$(N[#6,#16,#15]=[O,S,N]);!$(N[#7,#8])]([#6])[#6]",
    "aliphatic_secondary_amine": "[NX3;H1;!$(N[#6,#16,#15]=[O,S,N]);!$(N[#7,#8]);!$(N-a)]([CX4])[CX4]",
    "alcohol": "[OX2H1][CX4]",
    "quaternary": "[N+,P+;H0;!$([N+]-[O-]);!$([N+]=O);!$([N+]~[#7,#8-])]",
}


@functools.cache
def _pattern(name: str):
    from rdkit import Chem

    return Chem.MolFromSmarts(_SMARTS[name])


def _matches(mol, name: str) -> tuple[int, ...]:
    return tuple(sorted({m[0] for m in mol.GetSubstructMatches(_pattern(name))}))


@dataclass(frozen=True)
class ApiFeatures:
    """Structural features of the API that turn counterion flags into real risks."""

    primary_amines: tuple[int, ...]
    secondary_amines: tuple[int, ...]
    aliphatic_secondary_amines: tuple[int, ...]
    alcohols: tuple[int, ...]
    quaternary: tuple[int, ...]
    net_charge: int

    @property
    def nucleophilic_amines(self) -> tuple[int, ...]:
        """Aliphatic primary and secondary amines (Michael donors); aryl amines excluded."""
        return tuple(sorted(set(self.primary_amines) | set(self.aliphatic_secondary_amines)))

    @property
    def permanent_charge(self) -> bool:
        """A positive charge no proton can remove (quaternary centre without an anionic partner)."""
        return self.net_charge > 0

    def to_dict(self) -> dict[str, Any]:
        return {"primary_amines": list(self.primary_amines),
                "secondary_amines": list(self.secondary_amines),
                "aliphatic_secondary_amines": list(self.aliphatic_secondary_amines),
                "alcohols": list(self.alcohols), "quaternary": list(self.quaternary),
                "net_charge": self.net_charge}


def api_features(mol) -> ApiFeatures:
    """Find the API groups the caveats look for (SMARTS on the standardized parent)."""
    from rdkit import Chem

    quats = _matches(mol, "quaternary")
    net = Chem.GetFormalCharge(mol)
    return ApiFeatures(
        primary_amines=_matches(mol, "primary_amine"),
        secondary_amines=_matches(mol, "secondary_amine"),
        aliphatic_secondary_amines=_matches(mol, "aliphatic_secondary_amine"),
        alcohols=_matches(mol, "alcohol"),
        quaternary=quats,
        net_charge=net,
    )


@functools.lru_cache(maxsize=512)
def counterion_secondary_amine(smiles: str) -> bool:
    """True when a counterion itself is a secondary amine (nitrosatable)."""
    from rdkit import Chem

    mol = Chem.MolFromSmiles(smiles)
    return mol is not None and bool(mol.GetSubstructMatches(_pattern("aliphatic_secondary_amine")))


# --------------------------------------------------------------------------- API caveats
def api_caveats(features: ApiFeatures) -> tuple[Caveat, ...]:
    """Caveats of the API itself (independent of the counterion)."""
    out = []
    if features.secondary_amines:
        atoms = ", ".join(str(a) for a in features.secondary_amines)
        out.append(Caveat(
            "nitrosamine_api", "warning",
            f"The API holds a secondary amine (atom {atoms}): a nitrosamine drug-substance-related "
            "impurity can form with nitrite (excipients, water, reagents). Carry out an "
            "N-nitrosamine risk assessment per current regulatory guidance.",
            NITROSAMINE_SOURCE))
    if features.permanent_charge:
        out.append(Caveat(
            "permanent_charge", "warning",
            "The API carries a permanent positive charge (quaternary centre): it is always a salt. "
            "The ΔpKa rule does not apply; choose the anion by exchange or metathesis "
            "(chloride, bromide, sulfate, mesylate ...).",
            STAHL))
    return tuple(out)


# --------------------------------------------------------------------------- candidate caveats
_FLAG_TEXT = {
    "renal_toxicity": ("warning", "Renal toxicity concerns (e.g. oxalate nephropathy) at "
                       "repeated doses: justify the counterion exposure."),
    "pharmacologically_active": ("serious", "The counterion is pharmacologically active: it "
                                 "is not a neutral partner."),
    "corrosive": ("info", "Corrosive reagent: handle under the site's safety rules; "
                  "corrosion of steel equipment at scale."),
    "oxidizer": ("warning", "Oxidizing counterion: incompatible with oxidizable APIs and "
                 "excipients; handle under the site's safety rules."),
    "heavy_counterion": ("info", "Heavy counterion: lower drug content, larger dosage form."),
    "hygroscopic_salts": ("info", "Salts with this counterion are often hygroscopic: "
                          "measure dynamic vapour sorption early."),
    "strongly_basic_solution": ("info", "Salts give strongly basic solutions (and the "
                                "hydroxide is caustic): watch excipient compatibility "
                                "and handling."),
}


def candidate_caveats(candidate: Candidate, ion, features: ApiFeatures, *,
                      dose_mg: float | None, route: str, s0_mg_ml: float | None,
                      s0_basis: str, api_mw: float, api_base_pka: float | None,
                      settings: Mapping[str, Any], ph_max: float | None = None,
                      ph_max_basis: str | None = None
                      ) -> tuple[tuple[Caveat, ...], tuple[str, ...]]:
    """Caveats of one candidate and the flags its API structure triggers.

    Parameters
    ----------
    candidate : Candidate
    ion : Counterion
    features : ApiFeatures
    dose_mg : float or None
        Daily dose expressed as free form [mg/day].
    route : str
    s0_mg_ml : float or None
        Intrinsic solubility of the free form [mg/mL] and ``s0_basis`` where it came from.
    api_mw : float
        Molecular weight of the free form [g/mol].
    api_base_pka : float or None
        pKa of the API base site that forms the salt (acid counterions).
    settings : mapping
        The ``caveats`` section of the ranking configuration (thresholds, exposure limits).
    ph_max, ph_max_basis : optional
        pHmax of the candidate and its basis, when not yet stored on ``candidate``.

    Returns
    -------
    (caveats, triggered_flags)
        ``triggered_flags`` are counterion flags the API structure makes worse; the ranking
        penalizes them more strongly.
    """
    flags = tuple(getattr(ion, "flags", ()) or ())
    src = f"counterion library entry '{ion.id}'"
    out: list[Caveat] = []
    triggered: list[str] = []

    if "michael_acceptor" in flags:
        amines = features.nucleophilic_amines
        if amines:
            triggered.append("michael_acceptor")
            out.append(Caveat(
                "michael_acceptor", "warning",
                f"{ion.id} is a Michael acceptor and the API holds a primary or secondary amine "
                f"(atom {', '.join(map(str, amines))}): aza-Michael addition can give an "
                "adduct impurity in the salt on storage; monitor it in stability studies.",
                f"{STAHL}; {src}"))
        else:
            out.append(Caveat(
                "michael_acceptor", "info",
                f"{ion.id} is a Michael acceptor; no primary or secondary amine was found in "
                "the API, so addition to the API is unlikely.", f"{STAHL}; {src}"))

    if "sulfonate_ester_risk" in flags:
        out.append(Caveat(
            "sulfonate_ester", "warning",
            f"Sulfonic acid ({ion.id}): with alcohols (solvents or residual alcohol) alkyl "
            "sulfonate esters can form, potential mutagenic impurities (ICH M7). The "
            "risk is stronger when alcohols are planned: avoid alcohol solvents in salt "
            "formation and crystallization, or plan the control.",
            f"ICH M7(R2); {STAHL}; {src}"))

    if "nitrosamine_precursor" in flags or counterion_secondary_amine(ion.smiles):
        out.append(Caveat(
            "nitrosamine_counterion", "warning",
            f"{ion.id} is (or contains) a secondary amine, a nitrosamine precursor: include it "
            "in the N-nitrosamine risk assessment per current regulatory guidance.",
            f"{NITROSAMINE_SOURCE}; {src}"))

    if "common_ion_gastric" in flags:
        limit = float(settings.get("common_ion_s0_mg_ml", 0.1))
        if s0_mg_ml is not None and s0_mg_ml < limit and route == "oral":
            triggered.append("common_ion_gastric")
            out.append(Caveat(
                "common_ion", "warning",
                f"Poorly soluble base (S0 ≈ {s0_mg_ml:.3g} mg/mL, {s0_basis}) as a "
                f"{ion.id}: gastric chloride (about 0.1 M) suppresses the salt's dissolution "
                "(common-ion effect); compare with a non-chloride salt.",
                f"{SERAJUDDIN}; {src}"))
        else:
            out.append(Caveat(
                "common_ion", "info",
                "Common-ion effect possible in gastric fluid (about 0.1 M chloride).",
                f"{SERAJUDDIN}; {src}"))

    weak = float(settings.get("weak_base_pka", 4.5))
    if ion.role == "acid" and api_base_pka is not None and api_base_pka < weak:
        if "volatile_acid" in flags:
            triggered.append("volatile_acid")
        out.append(Caveat(
            "weak_base_disproportionation", "warning",
            f"Weak base (pKa {api_base_pka:.1f} < {weak:g}): the salt tends to disproportionate "
            "to the free base in water, with moisture or basic excipients"
            + ("; the acid is volatile and can be lost on drying" if "volatile_acid" in flags
               else "") + ".", f"{SERAJUDDIN}; domain notes §3"))
    micro = float(settings.get("microenvironment_ph", 6.5))
    if ph_max is None:
        ph_max, ph_max_basis = candidate.ph_max, candidate.ph_max_basis
    if ph_max is not None:
        base_like = ion.role == "acid"
        at_risk = ph_max < micro if base_like else ph_max > micro
        if at_risk:
            side = "below" if base_like else "above"
            out.append(Caveat(
                "ph_max", "warning",
                f"pHmax {ph_max:.1f} ({ph_max_basis}) lies {side} a typical "
                f"formulation microenvironment pH of {micro:g}: conversion to the free form is "
                "possible in the dosage form.", SERAJUDDIN))

    if "low_solubility_depot" in flags:
        sev = "info" if route == "parenteral" else "warning"
        out.append(Caveat(
            "low_solubility_counterion", sev,
            "Very low solubility salts: useful for depots, a drawback for immediate-release "
            "oral products.", f"{STAHL}; {src}"))

    for flag in flags:
        if flag in _FLAG_TEXT:
            sev, text = _FLAG_TEXT[flag]
            out.append(Caveat(flag, sev, text, f"{STAHL}; {src}"))

    out.extend(_exposure_caveats(candidate, ion, dose_mg, api_mw, settings, src))
    return tuple(out), tuple(dict.fromkeys(triggered))


def daily_counterion_mg(candidate: Candidate, dose_mg: float, api_mw: float) -> float:
    """Counterion delivered per day [mg] at ``dose_mg`` of free form per day.

    mg/day = dose / MW(API) × (counterion moiety mass per mol API); for metal and
    quaternary hydroxides the cation, otherwise the whole acid or base.
    """
    return dose_mg / api_mw * candidate.counterion_mass_per_api


def _exposure_caveats(candidate, ion, dose_mg, api_mw, settings, src):
    if dose_mg is None or api_mw <= 0:
        return []
    mg = daily_counterion_mg(candidate, dose_mg, api_mw)
    limits = dict(settings.get("exposure_mg_day", {}) or {})
    limit = limits.get(ion.id, limits.get("default"))
    note = getattr(ion, "exposure_note", None)
    n_api, n_ci = parse_stoichiometry(candidate.stoichiometry)
    unit_mass = candidate.counterion_mass_per_api * n_api / n_ci  # g/mol of one counterion unit
    mmol = mg / unit_mass if unit_mass > 0 else 0.0
    what = "cation" if is_cation_base(ion) else "counterion"
    text = (f"At {dose_mg:g} mg/day of free form the {candidate.stoichiometry} {ion.id} salt "
            f"delivers about {mg:.3g} mg/day of {what} ({mmol:.3g} mmol/day).")
    if note:
        text += f" Library note: {note}"
    code = "cation_load" if ion.id in ("sodium", "potassium") else "counterion_exposure"
    severity = "info"
    if limit is not None and mg > float(limit):
        severity = "warning"
        text += (f" Above the planning threshold of {float(limit):g} mg/day set in the ranking "
                 "configuration (not a regulatory limit).")
    return [Caveat(code, severity, text, f"{src}; planning thresholds (common practice)")]
