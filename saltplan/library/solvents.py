"""Solvent library: ICH Q3C class and limit, physical properties, hydrogen bonding.

The built-in library (``saltplan/data/solvents.yaml``) lists common crystallization
solvents. :func:`load_solvents` validates it as strictly as the counterion library: unknown
keys, duplicate ids or names, a class-2 entry without its limit, a limit that does not follow
from its PDE, an ``is_alcohol`` or family that disagrees with the structure, an unknown source
id ... each raise :class:`~saltplan.errors.SolventLibraryError` naming file, entry and field.

Notes
-----
ICH Q3C Option 1 converts a PDE [mg/day] into a concentration limit [ppm] for a 10 g daily
dose:

.. math::

    \\mathrm{limit\\,[ppm]} = \\frac{1000 \\cdot \\mathrm{PDE\\,[mg/day]}}
                                 {10\\,\\mathrm{g/day}}

References
----------
1. ICH Q3C(R8), Impurities: Guideline for Residual Solvents, 2021, Tables 1-3.
2. Y. Marcus, Chem. Soc. Rev. 1993, 22, 409-416 (Kamlet-Taft alpha, beta, pi*).
3. CRC Handbook of Chemistry and Physics, 97th ed., 2016.
"""
from __future__ import annotations

import functools
import math
import re
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .._data import load_yaml_path, load_yaml_text, package_file, sha256_text
from ..errors import SolventLibraryError

BUILTIN_NAME = "saltplan/data/solvents.yaml"

FAMILIES = ("water", "alcohol", "ketone", "ester", "ether", "nitrile", "sulfoxide", "amide",
            "chlorinated", "aromatic_hydrocarbon", "aliphatic_hydrocarbon", "carboxylic_acid")
MISCIBILITY = ("miscible", "partial", "immiscible")
#: ICH Q3C Option 1 general limit for class 3 solvents (0.5 %, 50 mg/day) [ppm]
CLASS3_LIMIT_PPM = 5000

_TOP_KEYS = ("schema", "title", "sources", "field_sources", "solvents")
_REQUIRED = ("id", "name", "smiles", "family", "ich_class", "bp_c", "density_g_ml",
             "density_t_c", "dielectric", "dielectric_t_c", "kt_alpha", "kt_beta",
             "kt_pi_star", "water_miscibility", "is_alcohol", "antisolvent", "default_pool")
_OPTIONAL = ("mp_c", "ich_pde_mg_day", "ich_limit_ppm", "ich_note", "pool_note", "notes",
             "sources")
_ALLOWED = _REQUIRED + _OPTIONAL
#: fields whose source can be named (field_sources / per-entry sources)
_SOURCED = ("ich_class", "ich_limit_ppm", "ich_pde_mg_day", "bp_c", "mp_c", "density_g_ml",
            "dielectric", "kt_alpha", "kt_beta", "kt_pi_star", "water_miscibility",
            "antisolvent", "default_pool")
#: plausible ranges: (low, high), inclusive
_RANGES = {
    "bp_c": (-50.0, 400.0),
    "mp_c": (-200.0, 200.0),
    "density_g_ml": (0.3, 3.0),
    "dielectric": (1.0, 200.0),
    "kt_alpha": (0.0, 1.6),
    "kt_beta": (0.0, 1.3),
    "kt_pi_star": (-0.3, 1.3),
    "ich_pde_mg_day": (0.0, 1000.0),
    "ich_limit_ppm": (0.0, 100000.0),
}
_ID_RE = re.compile(r"^[a-z0-9][a-z0-9-]*$")

# structure checks (compiled on first use, never at import)
_SMARTS = {
    "alcohol": "[CX4][OX2H1]",
    "ester": "[#6][CX3](=O)[OX2][#6]",
    "ketone": "[#6][CX3](=O)[#6]",
    "carboxylic_acid": "[CX3](=O)[OX2H1]",
    "nitrile": "[CX2]#[NX1]",
}


@dataclass(frozen=True)
class Solvent:
    """One solvent of the library.

    Attributes
    ----------
    id, name, smiles, family
        Identity; ``family`` is one of :data:`FAMILIES`.
    ich_class : int or None
        ICH Q3C(R8) class 1, 2 or 3; None when the solvent is not covered (water).
    ich_limit_ppm, ich_pde_mg_day : float or None
        Option-1 concentration limit [ppm] and permitted daily exposure [mg/day].
    bp_c : float
        Normal boiling point [°C].
    mp_c : float or None
        Melting (freezing) point [°C]; None when not recorded.
    density_g_ml : float
        Density [g/mL] at ``density_t_c`` [°C].
    dielectric : float
        Static relative permittivity at ``dielectric_t_c`` [°C].
    kt_alpha, kt_beta, kt_pi_star : float
        Kamlet–Taft hydrogen-bond donor acidity, acceptor basicity and
        dipolarity/polarizability (dimensionless).
    water_miscibility : str
        ``miscible`` | ``partial`` | ``immiscible`` (see the library header).
    is_alcohol : bool
        Has an aliphatic C–OH (matters for sulfonate esters, ICH M7).
    antisolvent : str or None
        Id of the solvent used as its anti-solvent (common practice pairing).
    default_pool : bool
        Whether automatic selection may choose it.
    sources : tuple of (field, citation)
        Where each sourced field comes from.
    """

    id: str
    name: str
    smiles: str
    family: str
    ich_class: int | None
    ich_limit_ppm: float | None
    ich_pde_mg_day: float | None
    ich_note: str | None
    bp_c: float
    mp_c: float | None
    density_g_ml: float
    density_t_c: float
    dielectric: float
    dielectric_t_c: float
    kt_alpha: float
    kt_beta: float
    kt_pi_star: float
    water_miscibility: str
    is_alcohol: bool
    antisolvent: str | None
    default_pool: bool
    pool_note: str | None = None
    notes: str | None = None
    sources: tuple[tuple[str, str], ...] = field(default=(), repr=False)

    def source_of(self, field_name: str) -> str | None:
        """Citation of the value of ``field_name`` (None if the field carries none)."""
        for name, cite in self.sources:
            if name == field_name:
                return cite
        return None

    @property
    def ich_label(self) -> str:
        if self.ich_class is None:
            return "not in ICH Q3C"
        return f"ICH Q3C class {self.ich_class}"

    def to_dict(self) -> dict[str, Any]:
        return {
            "id": self.id, "name": self.name, "smiles": self.smiles, "family": self.family,
            "ich_class": self.ich_class, "ich_limit_ppm": self.ich_limit_ppm,
            "ich_pde_mg_day": self.ich_pde_mg_day, "ich_note": self.ich_note,
            "bp_c": self.bp_c, "mp_c": self.mp_c, "density_g_ml": self.density_g_ml,
            "density_t_c": self.density_t_c, "dielectric": self.dielectric,
            "dielectric_t_c": self.dielectric_t_c, "kt_alpha": self.kt_alpha,
            "kt_beta": self.kt_beta, "kt_pi_star": self.kt_pi_star,
            "water_miscibility": self.water_miscibility, "is_alcohol": self.is_alcohol,
            "antisolvent": self.antisolvent, "default_pool": self.default_pool,
            "pool_note": self.pool_note, "notes": self.notes,
            "sources": {name: cite for name, cite in self.sources},
        }


@dataclass(frozen=True)
class SolventLibrary(Sequence):
    """The loaded solvent library: a sequence of :class:`Solvent` in file order."""

    solvents: tuple[Solvent, ...]
    hash: str
    source: str
    references: tuple[tuple[str, str], ...] = ()

    def __len__(self) -> int:
        return len(self.solvents)

    def __getitem__(self, index):
        return self.solvents[index]

    def __iter__(self) -> Iterator[Solvent]:
        return iter(self.solvents)

    @property
    def ids(self) -> tuple[str, ...]:
        return tuple(s.id for s in self.solvents)

    def get(self, solvent_id: str) -> Solvent:
        """The solvent with this id (case-insensitive); SolventLibraryError if unknown."""
        key = str(solvent_id).strip().lower()
        for s in self.solvents:
            if s.id == key:
                return s
        raise SolventLibraryError(
            f"unknown solvent '{solvent_id}'; known: {', '.join(self.ids)}",
            file=self.source, entry=str(solvent_id))

    def to_dict(self) -> dict[str, Any]:
        return {"source": self.source, "hash": self.hash,
                "references": {k: v for k, v in self.references},
                "solvents": [s.to_dict() for s in self.solvents]}


# --------------------------------------------------------------------------- loading
def load_solvents(path: str | Path | None = None) -> SolventLibrary:
    """Load and validate a solvent library.

    Parameters
    ----------
    path : str or Path, optional
        A complete library file with the schema of the built-in one; it replaces the
        built-in library. None (default) loads ``saltplan/data/solvents.yaml`` (cached).

    Returns
    -------
    SolventLibrary

    Raises
    ------
    SolventLibraryError
        Naming the file, the entry and the field of the first problem found.
    """
    if path is None:
        return _builtin()
    path = Path(path)
    data = load_yaml_path(path, SolventLibraryError)
    return _build(data, str(path), path.read_text(encoding="utf-8-sig"))


@functools.lru_cache(maxsize=1)
def _builtin() -> SolventLibrary:
    text = package_file("data", "solvents.yaml").read_text(encoding="utf-8")
    data = load_yaml_text(text, BUILTIN_NAME, SolventLibraryError)
    return _build(data, BUILTIN_NAME, text)


def _build(data: Any, origin: str, text: str) -> SolventLibrary:
    def fail(message, entry=None, field_name=None):
        raise SolventLibraryError(message, file=origin, entry=entry, field=field_name)

    if not isinstance(data, dict):
        fail("expected a mapping with keys " + ", ".join(_TOP_KEYS))
    for key in data:
        if key not in _TOP_KEYS:
            fail(f"unknown top-level key (allowed: {', '.join(_TOP_KEYS)})", field_name=str(key))
    for key in _TOP_KEYS:
        if key not in data:
            fail("missing top-level key", field_name=key)
    if data["schema"] != 1:
        fail(f"unsupported schema {data['schema']!r} (this version reads schema 1)",
             field_name="schema")
    refs = data["sources"]
    if not isinstance(refs, dict) or not refs:
        fail("expected a non-empty mapping of source id -> citation", field_name="sources")
    for key, cite in refs.items():
        if not isinstance(cite, str) or not cite.strip():
            fail(f"source '{key}' needs a citation text", field_name="sources")
    field_sources = data["field_sources"]
    if not isinstance(field_sources, dict):
        fail("expected a mapping of field -> source id", field_name="field_sources")
    for fname, sid in field_sources.items():
        if fname not in _SOURCED:
            fail(f"'{fname}' is not a sourced field (allowed: {', '.join(_SOURCED)})",
                 field_name="field_sources")
        if sid not in refs:
            fail(f"source id '{sid}' of field '{fname}' is not in sources",
                 field_name="field_sources")
    entries = data["solvents"]
    if not isinstance(entries, list) or not entries:
        fail("expected a non-empty list of solvent entries", field_name="solvents")

    solvents: list[Solvent] = []
    seen_ids: dict[str, int] = {}
    seen_names: dict[str, str] = {}
    for index, raw in enumerate(entries):
        label = raw.get("id") if isinstance(raw, dict) and isinstance(raw.get("id"), str) \
            else f"#{index + 1}"
        solvent = _entry(raw, label, refs, field_sources, fail)
        if solvent.id in seen_ids:
            fail(f"duplicate id (also entry #{seen_ids[solvent.id]})", solvent.id, "id")
        seen_ids[solvent.id] = index + 1
        name_key = solvent.name.lower()
        if name_key in seen_names:
            fail(f"duplicate name (also entry '{seen_names[name_key]}')", solvent.id, "name")
        seen_names[name_key] = solvent.id
        solvents.append(solvent)
    for s in solvents:
        if s.antisolvent is None:
            continue
        if s.antisolvent not in seen_ids:
            fail(f"anti-solvent '{s.antisolvent}' is not in the library", s.id, "antisolvent")
        partner = solvents[seen_ids[s.antisolvent] - 1]
        if partner.id == s.id:
            fail("a solvent cannot be its own anti-solvent", s.id, "antisolvent")
        if partner.ich_class == 1:
            fail(f"anti-solvent '{partner.id}' is ICH class 1", s.id, "antisolvent")
    return SolventLibrary(solvents=tuple(solvents), hash=sha256_text(text), source=origin,
                          references=tuple((k, " ".join(str(v).split())) for k, v in refs.items()))


def _entry(raw, label, refs, field_sources, fail) -> Solvent:
    if not isinstance(raw, dict):
        fail("expected a mapping", label)
    for key in raw:
        if key not in _ALLOWED:
            fail(f"unknown key (allowed: {', '.join(_ALLOWED)})", label, str(key))
    for key in _REQUIRED:
        if key not in raw:
            fail("missing required field", label, key)

    def text(key, required=True):
        value = raw.get(key)
        if value is None and not required:
            return None
        if not isinstance(value, str) or not value.strip():
            fail("expected a non-empty text", label, key)
        return " ".join(value.split())

    def number(key, required=True):
        value = raw.get(key)
        if value is None and not required:
            return None
        if isinstance(value, bool) or not isinstance(value, (int, float)) \
                or not math.isfinite(value):
            fail(f"expected a number, got {value!r}", label, key)
        low, high = _RANGES.get(key, (-math.inf, math.inf))
        if not low <= value <= high:
            fail(f"{value} is outside the plausible range {low}..{high}", label, key)
        return float(value)

    def flag(key):
        value = raw.get(key)
        if not isinstance(value, bool):
            fail(f"expected true or false, got {value!r}", label, key)
        return value

    sid = text("id")
    if not _ID_RE.match(sid):
        fail("id must be lower-case letters, digits and hyphens", label, "id")
    name = text("name")
    smiles = text("smiles")
    family = text("family")
    if family not in FAMILIES:
        fail(f"unknown family '{family}' (allowed: {', '.join(FAMILIES)})", sid, "family")

    ich_class = raw.get("ich_class")
    if ich_class is not None and (isinstance(ich_class, bool) or ich_class not in (1, 2, 3)):
        fail(f"ICH Q3C class must be 1, 2, 3 or null, got {ich_class!r}", sid, "ich_class")
    pde = number("ich_pde_mg_day", required=False)
    ppm = number("ich_limit_ppm", required=False)
    ich_note = text("ich_note", required=False)
    if ich_class is None:
        if ich_note is None:
            fail("an entry outside ICH Q3C (ich_class: null) needs an ich_note saying why",
                 sid, "ich_note")
        if pde is not None or ppm is not None:
            fail("an entry outside ICH Q3C cannot carry a Q3C limit", sid, "ich_limit_ppm")
    elif ich_class == 1:
        if ppm is None:
            fail("class 1 entries need their concentration limit (ppm)", sid, "ich_limit_ppm")
    elif ich_class == 2:
        if ppm is None:
            fail("class 2 entries need their concentration limit (ppm)", sid, "ich_limit_ppm")
        if pde is None:
            fail("class 2 entries need their PDE (mg/day)", sid, "ich_pde_mg_day")
        expected = 100.0 * pde  # Option 1: 1000 * PDE / 10 g
        if abs(ppm - expected) > max(1.0, 0.005 * expected):
            fail(f"limit {ppm:g} ppm does not follow from PDE {pde:g} mg/day "
                 f"(Option 1 gives {expected:g} ppm)", sid, "ich_limit_ppm")
    else:  # class 3
        if ppm is not None and ppm != CLASS3_LIMIT_PPM:
            fail(f"class 3 Option-1 limit is {CLASS3_LIMIT_PPM} ppm, got {ppm:g}", sid,
                 "ich_limit_ppm")
        if pde is not None and pde > 50.0:
            fail(f"class 3 PDE is 50 mg/day or less, got {pde:g}", sid, "ich_pde_mg_day")

    bp = number("bp_c")
    mp = number("mp_c", required=False)
    if mp is not None and mp >= bp:
        fail(f"melting point {mp:g} degC is not below the boiling point {bp:g} degC", sid,
             "mp_c")
    density_t = number("density_t_c")
    dielectric_t = number("dielectric_t_c")
    for key, t in (("density_t_c", density_t), ("dielectric_t_c", dielectric_t)):
        if not 15.0 <= t <= 30.0:
            fail(f"reference temperature {t:g} degC is outside 15..30 degC", sid, key)
    miscibility = text("water_miscibility")
    if miscibility not in MISCIBILITY:
        fail(f"expected one of {', '.join(MISCIBILITY)}", sid, "water_miscibility")
    is_alcohol = flag("is_alcohol")
    default_pool = flag("default_pool")
    pool_note = text("pool_note", required=False)
    if not default_pool and pool_note is None:
        fail("an entry left out of the default pool needs a pool_note saying why", sid,
             "pool_note")
    if ich_class == 1 and default_pool:
        fail("a class 1 solvent cannot be in the default pool", sid, "default_pool")
    antisolvent = raw.get("antisolvent")
    if antisolvent is not None and (not isinstance(antisolvent, str) or not antisolvent):
        fail("expected a solvent id or null", sid, "antisolvent")

    _check_structure(smiles, family, is_alcohol, sid, fail)

    own = raw.get("sources")
    if own is not None and not isinstance(own, dict):
        fail("expected a mapping of field -> source id", sid, "sources")
    own = own or {}
    for fname, src in own.items():
        if fname not in _SOURCED:
            fail(f"'{fname}' is not a sourced field", sid, "sources")
        if src not in refs:
            fail(f"source id '{src}' is not in the library's sources", sid, "sources")
    cited = []
    for fname in _SOURCED:
        src = own.get(fname, field_sources.get(fname))
        if src is not None:
            cited.append((fname, " ".join(str(refs[src]).split())))

    return Solvent(
        id=sid, name=name, smiles=smiles, family=family, ich_class=ich_class,
        ich_limit_ppm=ppm, ich_pde_mg_day=pde, ich_note=ich_note, bp_c=bp,
        mp_c=mp,
        density_g_ml=number("density_g_ml"), density_t_c=density_t,
        dielectric=number("dielectric"), dielectric_t_c=dielectric_t,
        kt_alpha=number("kt_alpha"), kt_beta=number("kt_beta"),
        kt_pi_star=number("kt_pi_star"), water_miscibility=miscibility,
        is_alcohol=is_alcohol, antisolvent=antisolvent, default_pool=default_pool,
        pool_note=pool_note, notes=text("notes", required=False), sources=tuple(cited))


@functools.cache
def _pattern(key: str):
    from rdkit import Chem

    return Chem.MolFromSmarts(_SMARTS[key])


def _check_structure(smiles: str, family: str, is_alcohol: bool, sid: str, fail) -> None:
    """The SMILES parses and agrees with ``is_alcohol`` and the family."""
    from rdkit import Chem

    from ..structure import rdkit_messages

    with rdkit_messages() as messages:
        mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        reason = messages[0] if messages else "RDKit could not parse it"
        fail(f"SMILES '{smiles}' does not parse ({' '.join(reason.split())})", sid, "smiles")
    has_alcohol = mol.HasSubstructMatch(_pattern("alcohol"))
    if has_alcohol != is_alcohol:
        fail(f"is_alcohol is {str(is_alcohol).lower()} but the structure "
             f"{'has' if has_alcohol else 'has no'} aliphatic C-OH", sid, "is_alcohol")
    if family in ("ester", "ketone", "carboxylic_acid", "nitrile") \
            and not mol.HasSubstructMatch(_pattern(family)):
        fail(f"family '{family}' but the structure has no such group", sid, "family")
    if family == "alcohol" and not has_alcohol:
        fail("family 'alcohol' but the structure has no aliphatic C-OH", sid, "family")

