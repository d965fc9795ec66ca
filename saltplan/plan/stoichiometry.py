"""Stoichiometries of a salt and their composition: formula, salt MW, drug content.

Which proton transfers make up a 1:1, 2:1 (two API per counterion), 1:2 (bis-salt) or
divalent-cation salt, and the exact formula and masses of each, from RDKit's average
atomic weights. The ΔpKa rule itself lives in :mod:`saltplan.assessment`.

References
----------
1. P. H. Stahl, C. G. Wermuth (eds.), *Handbook of Pharmaceutical Salts*, 2nd ed.,
   Wiley-VCH, 2011 (stoichiometry practice; common practice).
"""
from __future__ import annotations

import functools
import re
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from ..errors import ParameterError
from ..structure import mol_weight  # noqa: F401  (re-exported)

MASS_SOURCE = ("RDKit average atomic weights (IUPAC) of the salt species (API or API anion, "
               "counterion or cation), summed per formula unit")
#: metals that appear as cations in pharmaceutical salts (charge when the SMILES has none)
_METAL_CHARGE = {"Li": 1, "Na": 1, "K": 1, "Rb": 1, "Cs": 1, "Mg": 2, "Ca": 2, "Sr": 2,
                 "Ba": 2, "Zn": 2, "Al": 3, "Fe": 2, "Cu": 2, "Bi": 3}


@dataclass(frozen=True)
class Composition:
    """Formula and masses of one salt species (per formula unit)."""

    n_api: int
    n_counterion: int
    salt_smiles: str
    formula: str                  # Hill formula of the whole formula unit (RDKit)
    formula_display: str          # "(C17H21NO)·HCl"-style: components with multipliers
    salt_mw: float                # g/mol
    drug_content: float           # % w/w of free form = n·MW(API)/MW(salt)·100
    counterion_mass_per_api: float  # g of counterion moiety delivered per mol API


def parse_stoichiometry(text: str) -> tuple[int, int]:
    """"2:1" → (2, 1): API molecules and counterion units per formula unit."""
    try:
        left, right = (int(x) for x in str(text).split(":"))
    except ValueError:
        raise ParameterError(f"stoichiometry must look like '1:1' or '2:1', got {text!r}") from None
    if left < 1 or right < 1:
        raise ParameterError(f"stoichiometry must be positive, got {text!r}")
    return left, right


# --------------------------------------------------------------------------- counterion access
def counterion_pkas(ion) -> tuple[float, ...]:
    return tuple(float(p) for p in (getattr(ion, "pka", None) or ()))


def salt_pka_index(ion) -> int | None:
    """Index (in the ascending pKa tuple) of the pKa the ΔpKa rule uses for this counterion.

    Acids: the first (lowest) pKa; bases: the conjugate-acid pKa, i.e. the highest. When the
    library states ``pka_for_salt`` the matching entry is used.
    """
    pkas = counterion_pkas(ion)
    if not pkas:
        return None
    stated = getattr(ion, "pka_for_salt", None)
    if stated is not None:
        best = min(range(len(pkas)), key=lambda i: (abs(pkas[i] - float(stated)), i))
        if abs(pkas[best] - float(stated)) < 1e-6:
            return best
    return 0 if ion.role == "acid" else len(pkas) - 1


def salt_pka(ion) -> float | None:
    stated = getattr(ion, "pka_for_salt", None)
    if stated is not None:
        return float(stated)
    i = salt_pka_index(ion)
    return None if i is None else counterion_pkas(ion)[i]


def pka_source(ion, index: int | None) -> str:
    sources = getattr(ion, "pka_sources", None) or ()
    if index is not None and 0 <= index < len(sources):
        return str(sources[index])
    if len(sources) == 1:
        return str(sources[0])
    return f"counterion library entry '{ion.id}'"


@functools.lru_cache(maxsize=512)
def _cation_of(smiles: str) -> tuple[str, int] | None:
    """(cation SMILES, charge) of a hydroxide-supplied base or a bare metal ion, else None.

    Metal hydroxides and quaternary hydroxides (``[Na+].[OH-]``, ``[Ca+2].[OH-].[OH-]``,
    ``C[N+](C)(C)CCO.[OH-]``) give salts of the cation; the hydroxide leaves as water.
    Organic amines (``NCCO``) and ammonia are not cations here: the proton moves to them.
    """
    from rdkit import Chem

    frags = smiles.split(".")
    others = [f for f in frags if f.replace(" ", "") not in ("[OH-]", "O[H-]")]
    if len(set(others)) != 1:
        return None
    cation = others[0]
    mol = Chem.MolFromSmiles(cation)
    if mol is None:
        return None
    charge = Chem.GetFormalCharge(mol)
    if len(others) < len(frags) and charge > 0:
        return cation, charge
    if mol.GetNumAtoms() == 1:
        sym = mol.GetAtomWithIdx(0).GetSymbol()
        if sym in _METAL_CHARGE:
            charge = charge or _METAL_CHARGE[sym]
            return f"[{sym}+{charge if charge > 1 else ''}]", charge
    return None


def is_cation_base(ion) -> bool:
    """True for metal and quaternary hydroxides: their salts hold the bare cation."""
    return _cation_of(ion.smiles) is not None


# --------------------------------------------------------------------------- stoichiometry
@dataclass(frozen=True)
class Option:
    """A stoichiometry before masses: who gives which proton to whom."""

    stoichiometry: str
    n_api: int
    n_counterion: int
    pairs: tuple[tuple[Any, int], ...]   # (API site, counterion pKa index) per proton transfer
    delta_pkas: tuple[float, ...]
    bearers: tuple[int, ...] = ()        # atom that gains/loses the proton in the drawing
    notes: tuple[str | None, ...] = ()

    def bearer(self, k: int) -> int:
        return self.bearers[k] if self.bearers else self.pairs[k][0].atom

    @property
    def limiting(self) -> float:
        return min(self.delta_pkas)


def _site_order(sites, kind):
    chosen = [s for s in sites if s.kind == kind]
    if kind == "base":
        return sorted(chosen, key=lambda s: (-s.pka, s.atom))
    return sorted(chosen, key=lambda s: (s.pka, s.atom))


def salt_sites(sites: Sequence, counterion_role: str) -> list[tuple[Any, int, str | None]]:
    """API sites in the order a counterion of ``counterion_role`` reaches them.

    Returns ``(site whose pKa enters ΔpKa, atom that gains/loses the proton, note)``.
    An acid counterion protonates basic sites (most basic first), a base deprotonates
    acidic sites (most acidic first).

    A zwitterion (most basic pKa above the most acidic one) is internally ionized in its
    neutral form: its most basic site already holds the proton of its most acidic site.
    An acid counterion then protonates the strongest proton acceptor left: a further basic
    site (lysine's second amine, histidine's imidazole) or else the carboxylate-type site,
    whose acid pKa enters ΔpKa (glycine hydrochloride). A base counterion likewise takes the
    proton of the most acidic donor left: a further acidic site, or else the ammonium-type
    site, whose pKa enters ΔpKa (the drawn anion loses the acidic H). Transfers onto the
    carboxylate-type / from the ammonium-type site carry a note (see
    :func:`is_zwitterion_transfer`). Textbook pattern: pKa sequence of amino acids, the
    neutral form being the zwitterion (e.g. lysine 2.18 / 8.95 / 10.53; CRC Handbook, from
    memory).
    """
    bases = _site_order(sites, "base")
    acids = _site_order(sites, "acid")
    zwitterion = bool(bases and acids and bases[0].pka > acids[0].pka)
    if counterion_role == "acid":
        if zwitterion:
            note = (f"zwitterion: the base site (atom {bases[0].atom}, pKa {bases[0].pka:.1f}) is "
                    f"already protonated; the acid must protonate atom {acids[0].atom}")
            left = [(b.pka, b.atom, (b, b.atom, None)) for b in bases[1:]]
            left.append((acids[0].pka, acids[0].atom, (acids[0], acids[0].atom, note)))
            return [x for _, _, x in sorted(left, key=lambda t: (-t[0], t[1]))]
        return [(b, b.atom, None) for b in bases]
    if zwitterion:
        note = (f"zwitterion: the acidic site (atom {acids[0].atom}, pKa {acids[0].pka:.1f}) is "
                f"already ionized; the base must take the proton of atom {bases[0].atom}")
        left = [(a.pka, a.atom, (a, a.atom, None)) for a in acids[1:]]
        left.append((bases[0].pka, bases[0].atom, (bases[0], acids[0].atom, note)))
        return [x for _, _, x in sorted(left, key=lambda t: (t[0], t[1]))]
    return [(a, a.atom, None) for a in acids]


def is_zwitterion_transfer(note: str | None) -> bool:
    """True for a transfer onto a zwitterion's carboxylate-type (or from its ammonium-type)
    site, as marked by :func:`salt_sites`."""
    return bool(note) and str(note).startswith("zwitterion:")


def required_delta_pka(note: str | None, min_delta_pka: float,
                       zwitterion_allowance: float = 0.0) -> float:
    """Minimum ΔpKa one proton transfer must reach [pKa units].

    ``min_delta_pka`` for ordinary transfers; ``min_delta_pka − zwitterion_allowance`` for a
    transfer onto a zwitterion's carboxylate-type site (or from its ammonium-type site).
    Common practice: amino acids and other zwitterions form cationic salts with acids clearly
    stronger than their own carboxylic acid (pKa below about 2: hydrochlorides, hydrogen
    maleates, hydrogen oxalates; anionic salts likewise with strong bases), although the
    ΔpKa against the carboxylate is small (from memory).
    """
    return min_delta_pka - (zwitterion_allowance if is_zwitterion_transfer(note) else 0.0)


def option_clears(option: Option, min_delta_pka: float,
                  zwitterion_allowance: float = 0.0) -> bool:
    """Every proton transfer of ``option`` reaches its required ΔpKa."""
    notes = option.notes or (None,) * len(option.delta_pkas)
    return all(d >= required_delta_pka(n, min_delta_pka, zwitterion_allowance)
               for d, n in zip(option.delta_pkas, notes, strict=True))


def stoichiometry_options(sites: Sequence, ion, min_delta_pka: float = 2.0,
                          zwitterion_allowance: float = 0.0) -> list[Option]:
    """The stoichiometries worth considering for one counterion.

    Parameters
    ----------
    sites : sequence of Site
        The API's sites (acids and bases).
    ion : Counterion
        A library entry; its role decides which API sites it pairs with.
    min_delta_pka : float
        ΔpKa a *second* proton transfer must reach before 2:1 / 1:2 salts are proposed.
    zwitterion_allowance : float
        How much lower the minimum is for a transfer onto a zwitterion's carboxylate-type
        site (see :func:`required_delta_pka`).

    Returns
    -------
    list of Option
        Always the 1:1 salt with the strongest opposite site (also when infeasible, so that it
        can be reported as excluded); "k:1" (k API per counterion) when the counterion's next
        pKa values also clear ``min_delta_pka`` (diacids: 2:1 salts, the 1:1 being the
        hydrogen salt; diamines likewise); "2:1" for divalent metal cations with a monoacidic
        drug (and "1:1" when the API's second acidic site qualifies); "1:2" bis-salts when
        the API's second site clears the rule with a monoprotic counterion.
        Empty when the API has no site of the opposite role or the counterion has no pKa.

    Notes
    -----
    Stoichiometry rules: Stahl & Wermuth 2011 (common practice); see domain notes §3.
    """
    pkas = counterion_pkas(ion)
    first = salt_pka_index(ion)
    if first is None:
        return []
    ordered = salt_sites(sites, ion.role)
    if not ordered:
        return []
    s1, b1, n1 = ordered[0]
    s2, b2, n2 = ordered[1] if len(ordered) > 1 else (None, None, None)

    def dp(site, idx):
        value = salt_pka(ion) if idx == first else pkas[idx]
        # ΔpKa = pKa(BH+) − pKa(HA), as saltplan.assessment.delta_pka
        if ion.role == "acid":
            return float(site.pka) - float(value)
        return float(value) - float(site.pka)

    # next counterion pKa values in the order protons are given/taken
    if ion.role == "acid":
        further = list(range(first + 1, len(pkas)))
    else:
        further = list(range(first - 1, -1, -1))
    cation = _cation_of(ion.smiles)
    options: list[Option] = []

    def opt(label, n_api, n_ci, pairs, bearers, notes):
        return Option(label, n_api, n_ci, tuple(pairs), tuple(dp(s, i) for s, i in pairs),
                      tuple(bearers), tuple(notes))

    if cation is not None and cation[1] >= 2:
        valence = cation[1]
        # one metal ion takes `valence` protons; from `valence` API molecules ...
        idx = [first] + further[: valence - 1]
        idx += [idx[-1]] * (valence - len(idx))
        options.append(opt(f"{valence}:1", valence, 1, [(s1, i) for i in idx],
                           [b1] * valence, [n1] * valence))
        # ... or from one API with enough acidic sites (dianion + Ca²⁺)
        if valence == 2 and s2 is not None:
            o = opt("1:1", 1, 1, [(s1, idx[0]), (s2, idx[1])], [b1, b2], [n1, n2])
            if option_clears(o, min_delta_pka, zwitterion_allowance):
                options.append(o)
        return options

    options.append(opt("1:1", 1, 1, [(s1, first)], [b1], [n1]))
    n_protons = getattr(ion, "n_protons", None)
    polyprotic = [first] + (further if cation is None else [])
    if n_protons:
        polyprotic = polyprotic[: int(n_protons)]
    # k API per counterion: the counterion's k-th pKa must also qualify against the API site
    for k in range(2, len(polyprotic) + 1):
        o = opt(f"{k}:1", k, 1, [(s1, i) for i in polyprotic[:k]], [b1] * k, [n1] * k)
        if o.delta_pkas[-1] < required_delta_pka(n1, min_delta_pka, zwitterion_allowance):
            break
        options.append(o)
    # bis-salt: the API's second site with a second (monoprotic) counterion
    monoprotic = len(polyprotic) == 1 or (cation is not None and cation[1] == 1)
    if s2 is not None and monoprotic:
        o = opt("1:2", 1, 2, [(s1, first), (s2, first)], [b1, b2], [n1, n2])
        if option_clears(o, min_delta_pka, zwitterion_allowance):
            options.append(o)
    return options


# --------------------------------------------------------------------------- composition
@functools.lru_cache(maxsize=1024)
def _mol_info(smiles: str) -> tuple[str, float]:
    from rdkit import Chem
    from rdkit.Chem import rdMolDescriptors

    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        raise ParameterError(f"cannot parse SMILES '{smiles}' while computing a salt formula")
    return rdMolDescriptors.CalcMolFormula(mol), mol_weight(mol)


_FORMULA_TOKEN = re.compile(r"([A-Z][a-z]?)(\d*)")


@functools.lru_cache(maxsize=1024)
def _formula_items(formula: str) -> tuple[tuple[str, int], ...]:
    counts: Counter = Counter()
    for el, n in _FORMULA_TOKEN.findall(re.sub(r"[+-]\d*$", "", formula)):
        counts[el] += int(n) if n else 1
    return tuple(counts.items())


def _formula_counts(formula: str) -> Counter:
    """Element counts of an RDKit Hill formula (a trailing charge such as "+" is ignored)."""
    return Counter(dict(_formula_items(formula)))


def hill_formula(counts: Counter) -> str:
    """Hill order: C, H, then the others alphabetically (all alphabetical without carbon)."""
    keys = sorted(k for k, v in counts.items() if v)
    if "C" in keys:
        keys = ["C"] + (["H"] if "H" in keys else []) + [k for k in keys if k not in ("C", "H")]
    return "".join(f"{k}{counts[k] if counts[k] != 1 else ''}" for k in keys)


def _combined(parts: Sequence[tuple[int, str]]) -> tuple[str, float]:
    """Formula and MW of ``n`` copies of each component SMILES (additive, RDKit per part).

    Equal to RDKit on the combined SMILES (formulas and average masses add up), but each
    component is parsed once and cached.
    """
    counts: Counter = Counter()
    mw = 0.0
    for n, smi in parts:
        formula, weight = _mol_info(smi)
        for el, k in _formula_items(formula):
            counts[el] += n * k
        mw += n * weight
    return hill_formula(counts), mw


def _proton_bearer(mol, idx: int) -> int:
    """The atom that gives the proton: ``idx`` itself, else the nearest O/N/S with an H.

    A site may be reported on the acidic centre rather than the H-bearing atom (the carbonyl
    carbon of a carboxylic acid, a tetrazole carbon); the nearest heteroatom within three
    bonds that still carries a hydrogen gives the proton.
    """
    from rdkit import Chem

    if mol.GetAtomWithIdx(idx).GetTotalNumHs() > 0:
        return idx
    dist = Chem.GetDistanceMatrix(mol)
    best = None
    for atom in mol.GetAtoms():
        j = atom.GetIdx()
        d = dist[idx][j]
        if 0 < d <= 3 and atom.GetSymbol() in ("O", "N", "S") and atom.GetTotalNumHs() > 0 \
                and atom.GetFormalCharge() <= 0:
            key = (d, j)
            best = key if best is None or key < best else best
    if best is None:
        raise ParameterError(f"acidic site at atom {idx} has no hydrogen to give within three "
                             "bonds; cannot draw its salt", field="sites")
    return best[1]


@functools.lru_cache(maxsize=256)
def _deprotonated(parent_smiles: str, atoms: tuple[int, ...]) -> str:
    """SMILES of the API anion with one proton removed from each atom in ``atoms``."""
    from rdkit import Chem

    mol = Chem.RWMol(Chem.MolFromSmiles(parent_smiles))
    for idx in atoms:
        atom = mol.GetAtomWithIdx(_proton_bearer(mol, idx))
        hs = atom.GetTotalNumHs()
        atom.SetNoImplicit(True)
        atom.SetNumExplicitHs(hs - 1)
        atom.SetFormalCharge(atom.GetFormalCharge() - 1)
    Chem.SanitizeMol(mol)
    return Chem.MolToSmiles(mol)


def _display(n_api: int, api_formula: str, n_ci: int, ion_formula: str) -> str:
    """"C17H21NO·HCl", "(C17H21NO)2·H2SO4", "C17H21NO·2HCl", "(C2H3O2-)2·Ca+2"."""
    left = api_formula if n_api == 1 else f"({api_formula}){n_api}"
    right = ion_formula if n_ci == 1 else f"{n_ci}{ion_formula}"
    return f"{left}·{right}"


def compose(parent_smiles: str, ion, option: Option) -> Composition:
    """Formula, salt MW and drug content of one stoichiometry.

    Acids and organic bases: the salt holds the same atoms as API + counterion (the proton
    moves). Metal and quaternary hydroxides: API minus the transferred protons plus the
    cation (the hydroxide leaves as water). Formula and MW come from RDKit for each species of the
    salt (``salt_smiles``), summed: the same numbers RDKit gives for the combined SMILES.

    Drug content = n_API·MW(API)/MW(salt)·100 [% w/w free form].
    """
    api_formula, api_mw = _mol_info(parent_smiles)
    cation = _cation_of(ion.smiles)
    n_api, n_ci = option.n_api, option.n_counterion
    if cation is None:
        ion_formula, ion_mw = _mol_info(ion.smiles)
        salt_smiles = ".".join([parent_smiles] * n_api + [ion.smiles] * n_ci)
        formula, salt_mw = _combined(((n_api, parent_smiles), (n_ci, ion.smiles)))
        display = _display(n_api, api_formula, n_ci, ion_formula)
        counterion_mass = n_ci * ion_mw / n_api
    else:
        cation_smiles, _charge = cation
        # protons leave API copy by copy: a 2:1 calcium salt takes one from each of two APIs
        per_copy: list[list[int]] = [[] for _ in range(n_api)]
        for k in range(len(option.pairs)):
            per_copy[k % n_api].append(option.bearer(k))
        anions = [_deprotonated(parent_smiles, tuple(atoms)) for atoms in per_copy]
        salt_smiles = ".".join(anions + [cation_smiles] * n_ci)
        formula, salt_mw = _combined([(1, a) for a in anions] + [(n_ci, cation_smiles)])
        cation_formula, cation_mw = _mol_info(cation_smiles)
        display = _display(n_api, _mol_info(anions[0])[0], n_ci, cation_formula)
        counterion_mass = n_ci * cation_mw / n_api
    return Composition(n_api, n_ci, salt_smiles, formula, display, salt_mw,
                       100.0 * n_api * api_mw / salt_mw, counterion_mass)
