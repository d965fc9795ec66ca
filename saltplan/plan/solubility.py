"""Solubility sketch: intrinsic solubility, pH–solubility profile and pHmax.

Intrinsic solubility S0 of the free form (neutral species) comes from the user, or is
estimated with the General Solubility Equation when a melting point is known, otherwise with
ESOL; logP is RDKit's Crippen estimate. Both estimates are rough (about ±1 log unit).

References
----------
1. Y. Ran, S. H. Yalkowsky, *J. Chem. Inf. Comput. Sci.* 2001, 41, 354 (General Solubility
   Equation, log S0 = 0.5 − 0.01·(mp − 25) − log P; from memory).
2. J. S. Delaney, *J. Chem. Inf. Comput. Sci.* 2004, 44, 1000–1005 (ESOL,
   log S = 0.16 − 0.63·clogP − 0.0062·MW + 0.066·RB − 0.74·AP; from memory).
3. S. A. Wildman, G. M. Crippen, *J. Chem. Inf. Comput. Sci.* 1999, 39, 868 (atomic logP,
   as implemented in RDKit ``Crippen.MolLogP``).
4. W. H. Streng et al., *J. Pharm. Sci.* 1984; A. T. M. Serajuddin, *Adv. Drug Deliv. Rev.*
   2007, 59, 603 (pH–solubility with a salt plateau, pHmax; from memory).
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from ..errors import ParameterError

GSE_SOURCE = "General Solubility Equation (Ran & Yalkowsky 2001; from memory)"
ESOL_SOURCE = "ESOL (Delaney, J. Chem. Inf. Comput. Sci. 2004, 44, 1000; from memory)"
LOGP_SOURCE = "RDKit Crippen MolLogP (Wildman & Crippen 1999)"
PHMAX_SOURCE = ("Henderson–Hasselbalch with a salt solubility plateau: base pHmax = pKa + "
                "log10(S0/S_salt), acid pHmax = pKa − log10(S0/S_salt) (Streng 1984; "
                "Serajuddin 2007; from memory)")
SLURRY_SOURCE = ("pH of the salt's saturated solution from textbook acid–base equilibria "
                 "at the (given or assumed) salt solubility; compared with pHmax "
                 "(Serajuddin 2007; from memory)")
#: pH grid of the profile: 1.0, 1.5, … 10.0
DEFAULT_PH_GRID = tuple(round(1.0 + 0.5 * i, 1) for i in range(19))


# --------------------------------------------------------------------------- equations
def gse_log_s(logp: float, melting_point_c: float) -> float:
    """General Solubility Equation [log10 mol/L].

    .. math:: \\log S_0 = 0.5 - 0.01\\,(T_m - 25) - \\log P

    For liquids (mp below 25 °C) the melting-point term is zero.

    >>> round(gse_log_s(3.30, 80.0), 2)   # naphthalene: mp 80 °C, log P 3.30
    -3.35
    """
    return 0.5 - 0.01 * max(0.0, float(melting_point_c) - 25.0) - float(logp)


def esol_log_s(clogp: float, mw: float, rotatable_bonds: int, aromatic_proportion: float) -> float:
    """ESOL estimate of aqueous solubility [log10 mol/L].

    .. math:: \\log S = 0.16 - 0.63\\,c\\log P - 0.0062\\,MW + 0.066\\,RB - 0.74\\,AP

    >>> round(esol_log_s(2.0, 200.0, 2, 0.5), 3)
    -2.578
    """
    return (0.16 - 0.63 * float(clogp) - 0.0062 * float(mw) + 0.066 * float(rotatable_bonds)
            - 0.74 * float(aromatic_proportion))


def base_solubility(ph: float, s0: float, pka: float) -> float:
    """Total solubility of a base above pHmax: S = S0·(1 + 10^(pKa − pH)) [units of S0]."""
    return s0 * (1.0 + 10.0 ** (pka - ph))


def acid_solubility(ph: float, s0: float, pka: float) -> float:
    """Total solubility of an acid below pHmax: S = S0·(1 + 10^(pH − pKa)) [units of S0]."""
    return s0 * (1.0 + 10.0 ** (ph - pka))


def ph_max(kind: str, pka: float, s0: float, s_salt: float) -> float:
    """pH of maximum solubility, where the free form and the salt both saturate.

    Base: pHmax = pKa + log10(S0/S_salt); acid: pHmax = pKa − log10(S0/S_salt) (1:1 salt,
    S0 and S_salt in the same units, both as free form).

    >>> round(ph_max("base", 9.0, 0.01, 10.0), 2)
    6.0
    """
    if s0 <= 0 or s_salt <= 0:
        raise ParameterError("solubilities must be positive to compute pHmax")
    shift = math.log10(s0 / s_salt)
    return pka + shift if kind == "base" else pka - shift


def slurry_ph(api_kind: str, api_pka: float, counterion_pka: float, conc_mol_l: float) -> float:
    """Approximate pH of a saturated solution (slurry) of a 1:1 salt in water.

    Salt of a base (BH⁺A⁻): the higher of ½(pKa_BH + pKa_HA) (weak acid and weak base) and
    ½(pKa_BH − log10 C) (hydrolysis of BH⁺ alone, strong acids). Salt of an acid (A⁻ with a
    protonated base or cation): the lower of ½(pKa_HA + pKa_BH) and
    7 + ½·pKa_HA + ½·log10 C (hydrolysis of A⁻ alone, strong bases). A salt whose slurry pH
    passes its pHmax converts to the free form in its own saturated solution.

    Parameters
    ----------
    api_kind : str
        "base" (salt with an acid counterion) or "acid".
    api_pka, counterion_pka : float
        Aqueous pKa values [pKa units] (bases: of the conjugate acid).
    conc_mol_l : float
        Salt concentration at saturation [mol/L].

    References: textbook acid–base equilibria (Harris, Quantitative Chemical Analysis);
    slurry pH against pHmax: Serajuddin 2007 (from memory).

    >>> round(slurry_ph("base", 9.0, -6.0, 0.01), 2)   # strong acid: ½(9 + 2)
    5.5
    >>> round(slurry_ph("base", 9.0, 4.0, 0.01), 2)    # weak acid: ½(9 + 4)
    6.5
    """
    log_c = math.log10(conc_mol_l)
    if api_kind == "base":
        return max(0.5 * (api_pka + counterion_pka), 0.5 * (api_pka - log_c))
    return min(0.5 * (api_pka + counterion_pka), 7.0 + 0.5 * api_pka + 0.5 * log_c)


# --------------------------------------------------------------------------- results
@dataclass(frozen=True)
class IntrinsicSolubility:
    """S0 of the free form with the method that gave it."""

    mg_ml: float
    log_s_mol_l: float
    method: str            # "GSE" | "ESOL" | "user"
    provenance: str        # "estimated" | "user"
    source: str
    inputs: tuple[tuple[str, Any], ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"mg_ml": _sig(self.mg_ml), "log_s_mol_l": round(self.log_s_mol_l, 2),
                "method": self.method, "provenance": self.provenance, "source": self.source,
                "inputs": {k: (round(v, 3) if isinstance(v, float) else v)
                           for k, v in self.inputs}}


@dataclass(frozen=True)
class SitePhMax:
    atom: int
    kind: str
    pka: float
    ph_max: float

    def to_dict(self) -> dict[str, Any]:
        return {"atom": self.atom, "kind": self.kind, "pka": round(self.pka, 2),
                "ph_max": round(self.ph_max, 2)}


@dataclass(frozen=True)
class SolubilitySketch:
    """Intrinsic solubility, salt solubility (given or assumed), pHmax per site, pH profile."""

    intrinsic: IntrinsicSolubility
    salt_mg_ml: float
    salt_basis: str                      # "user" | "assumed"
    ph_max: tuple[SitePhMax, ...]
    profile: tuple[tuple[float, float, float], ...]   # (pH, free form, with salt plateau) mg/mL
    profile_sites: tuple[tuple[str, int, float], ...]  # (kind, atom, pKa) used by the profile
    notes: tuple[str, ...] = ()

    def ph_max_for(self, atom: int, kind: str) -> float | None:
        for p in self.ph_max:
            if p.atom == atom and p.kind == kind:
                return p.ph_max
        return None

    def to_dict(self) -> dict[str, Any]:
        primary = self.profile_sites[0] if self.profile_sites else None
        primary_ph_max = (None if primary is None else
                          self.ph_max_for(primary[1], primary[0]))
        return {
            "s0_mg_ml": _sig(self.intrinsic.mg_ml),
            "s0_method": self.intrinsic.method,
            "s0_provenance": self.intrinsic.provenance,
            "intrinsic": self.intrinsic.to_dict(),
            "salt_solubility_mg_ml": _sig(self.salt_mg_ml),
            "salt_solubility_basis": self.salt_basis,
            "ph_max": None if primary_ph_max is None else round(primary_ph_max, 2),
            "ph_max_sites": [p.to_dict() for p in self.ph_max],
            "ph_max_source": PHMAX_SOURCE,
            "profile_sites": [{"kind": k, "atom": a, "pka": round(p, 2)}
                              for k, a, p in self.profile_sites],
            "profile": [{"ph": ph, "s_mg_ml": _sig(s), "free_form_mg_ml": _sig(f)}
                        for ph, f, s in self.profile],
            "notes": list(self.notes),
        }


def _sig(x: float, digits: int = 4) -> float:
    """Round to significant digits (solubilities span many decades)."""
    if x == 0 or not math.isfinite(x):
        return x
    return float(f"{x:.{digits}g}")


# --------------------------------------------------------------------------- estimation
def _check_representable(log_s: float, mw: float, method: str) -> None:
    """Refuse an estimate so far below any real solubility that it underflows to 0 mg/mL
    (very large structures allowed by a raised --max-atoms)."""
    s0 = 10 ** log_s * mw if log_s > -400 else 0.0
    if not (math.isfinite(s0) and s0 > 0):
        raise ParameterError(f"estimated intrinsic solubility (log S {log_s:.0f} mol/L, {method}) "
                             "is outside any range the model was fitted on; give a measured "
                             "value with --s0", field="s0")


def intrinsic_solubility(mol, *, melting_point_c: float | None = None,
                         user_mg_ml: float | None = None) -> IntrinsicSolubility:
    """Intrinsic solubility S0 of the free form [mg/mL].

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        The standardized parent.
    melting_point_c : float, optional
        Melting point [°C]; selects the General Solubility Equation.
    user_mg_ml : float, optional
        A measured or known S0 [mg/mL]; used as given (provenance "user").

    Returns
    -------
    IntrinsicSolubility
    """
    from rdkit.Chem import rdMolDescriptors

    from .stoichiometry import mol_weight

    mw = mol_weight(mol)
    if user_mg_ml is not None:
        _check_positive(user_mg_ml, "intrinsic solubility (mg/mL)")
        return IntrinsicSolubility(float(user_mg_ml), math.log10(user_mg_ml / mw), "user", "user",
                                   "value supplied by the user", (("mw", mw),))
    logp = rdMolDescriptors.CalcCrippenDescriptors(mol)[0]   # = Crippen.MolLogP
    if melting_point_c is not None:
        if not (isinstance(melting_point_c, (int, float)) and -100 <= melting_point_c <= 500):
            raise ParameterError(f"melting point must be between -100 and 500 °C, got "
                                 f"{melting_point_c!r}", field="melting_point_c")
        log_s = gse_log_s(logp, melting_point_c)
        _check_representable(log_s, mw, "GSE")
        return IntrinsicSolubility(10 ** log_s * mw, log_s, "GSE", "estimated",
                                   f"{GSE_SOURCE}; log P: {LOGP_SOURCE}",
                                   (("logp", logp), ("melting_point_c", float(melting_point_c)),
                                    ("mw", mw)))
    heavy = mol.GetNumHeavyAtoms() or 1
    ap = sum(1 for a in mol.GetAtoms() if a.GetIsAromatic()) / heavy
    rb = rdMolDescriptors.CalcNumRotatableBonds(mol)
    log_s = esol_log_s(logp, mw, rb, ap)
    _check_representable(log_s, mw, "ESOL")
    return IntrinsicSolubility(10 ** log_s * mw, log_s, "ESOL", "estimated",
                               f"{ESOL_SOURCE}; clogP: {LOGP_SOURCE}",
                               (("clogp", logp), ("mw", mw), ("rotatable_bonds", rb),
                                ("aromatic_proportion", ap)))


def _check_positive(value, what):
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value) \
            or value <= 0:
        raise ParameterError(f"{what} must be a positive number, got {value!r}")


def ph_profile(s0: float, *, base_pka: float | None = None, acid_pka: float | None = None,
               s_salt: float | None = None, grid: Sequence[float] = DEFAULT_PH_GRID):
    """pH–solubility profile [(pH, free form, with salt plateau)] in the units of ``s0``.

    The free-form curve adds the ionized fractions of the most basic and the most acidic
    site (for a zwitterion the cation forms below the acid pKa and the anion above the base
    pKa); with a salt solubility the total is capped by the salt plateau on each side
    (``S_salt·(1 + 10^(pH − pKa))`` for a base salt, mirrored for an acid salt), which meets
    the free-form curve at pHmax.
    """
    # cationic side below the lower pKa, anionic side above the upper one; for a zwitterion
    # (base pKa above acid pKa) the carboxylate-type site protonates first
    cat_pka, an_pka = base_pka, acid_pka
    if base_pka is not None and acid_pka is not None and base_pka > acid_pka:
        cat_pka, an_pka = acid_pka, base_pka
    rows = []
    for ph in grid:
        free = s0 * (1.0 + (10.0 ** (cat_pka - ph) if cat_pka is not None else 0.0)
                     + (10.0 ** (ph - an_pka) if an_pka is not None else 0.0))
        total = free
        if s_salt is not None:
            if cat_pka is not None:
                total = min(total, s_salt * (1.0 + 10.0 ** (ph - cat_pka)))
            if an_pka is not None:
                total = min(total, s_salt * (1.0 + 10.0 ** (an_pka - ph)))
            total = max(total, s0)
        rows.append((float(ph), free, total))
    return tuple(rows)


def sketch(mol, sites: Sequence, *, melting_point_c: float | None = None,
           intrinsic_mg_ml: float | None = None, salt_mg_ml: float | None = None,
           assumed_salt_mg_ml: float = 10.0) -> SolubilitySketch:
    """The solubility sketch of a plan.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
    sites : sequence of Site
    melting_point_c, intrinsic_mg_ml : optional
        See :func:`intrinsic_solubility`.
    salt_mg_ml : float, optional
        Salt solubility [mg/mL as free form], when measured; otherwise ``assumed_salt_mg_ml``
        is used and labelled "assumed".

    Returns
    -------
    SolubilitySketch
    """
    s0 = intrinsic_solubility(mol, melting_point_c=melting_point_c, user_mg_ml=intrinsic_mg_ml)
    if salt_mg_ml is not None:
        _check_positive(salt_mg_ml, "salt solubility (mg/mL)")
        s_salt, basis = float(salt_mg_ml), "user"
    else:
        s_salt, basis = float(assumed_salt_mg_ml), "assumed"
    ordered = sorted(sites, key=lambda s: (s.atom, s.kind))
    maxima = tuple(SitePhMax(s.atom, s.kind, float(s.pka), ph_max(s.kind, s.pka, s0.mg_ml, s_salt))
                   for s in ordered)
    bases = sorted((s for s in sites if s.kind == "base"), key=lambda s: (-s.pka, s.atom))
    acids = sorted((s for s in sites if s.kind == "acid"), key=lambda s: (s.pka, s.atom))
    used = []
    base_pka = acid_pka = None
    if bases:
        base_pka = float(bases[0].pka)
        used.append(("base", bases[0].atom, base_pka))
    if acids:
        acid_pka = float(acids[0].pka)
        used.append(("acid", acids[0].atom, acid_pka))
    notes = ["S0 estimates are rough (about ±1 log unit); measure S0 and the pH–solubility "
             "profile before relying on pHmax."]
    if basis == "assumed":
        notes.append(f"Salt solubility not given: {s_salt:g} mg/mL assumed for pHmax.")
    return SolubilitySketch(
        intrinsic=s0, salt_mg_ml=s_salt, salt_basis=basis, ph_max=maxima,
        profile=ph_profile(s0.mg_ml, base_pka=base_pka, acid_pka=acid_pka, s_salt=s_salt),
        profile_sites=tuple(used), notes=tuple(notes))
