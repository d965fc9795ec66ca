"""Rank salt candidates with a transparent score.

score = Σ weight·term, each term in 0..1, bonuses added and penalties subtracted:

* ``delta_pka_margin`` — clip((ΔpKa − k·σ) / saturation, 0, 1), σ the uncertainty of the
  API site's pKa (saturates near ΔpKa 4, above which crystal structures are almost only
  salts; Cruz-Cabeza 2012);
* ``tier`` — acceptability tier of the counterion (Stahl & Wermuth 2011, as in the library);
* ``precedence`` — log of the counterion's share among marketed salts of its kind (Berge,
  Bighley, Monkhouse, J. Pharm. Sci. 1977, 66, 1, Table I; see :func:`precedence_score`);
* ``mass`` — (1 − drug content) scaled by the daily dose (matters more at high dose);
* ``liabilities`` — one penalty per counterion flag (times an optional per-counterion
  ``flag_strength``), stronger when the API's structure triggers it (see :mod:`saltplan.caveats`);
* ``hygroscopicity`` — tendency of the counterion's salts to take up water;
* ``disproportionation`` — pHmax against a typical formulation microenvironment pH;
* ``slurry_disproportionation`` — pHmax against the pH of the salt's own saturated solution
  (depends on the counterion's strength, see :func:`saltplan.solubility.slurry_ph`);
* ``stoichiometry`` — a stoichiometry the library does not list for that counterion, or a
  second-choice one (2:1, 1:2) next to a feasible 1:1 of the same counterion.

Weights and thresholds live in ``saltplan/data/ranking_weights.yaml``; a user file given to
:func:`load_ranking_config` overrides any of them. Ties break deterministically: score
(desc), ΔpKa (desc), counterion id, stoichiometry.
"""
from __future__ import annotations

import copy
import functools
import json
import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

from ..errors import ParameterError
from .assessment import Candidate, Thresholds

BREAKDOWN_KEYS = ("delta_pka_margin", "tier", "precedence", "mass", "liabilities",
                  "hygroscopicity", "disproportionation", "slurry_disproportionation",
                  "stoichiometry")
#: sections whose keys are open (new flags, counterion ids, tiers may be added)
_OPEN_SECTIONS = {"liability_penalties", "exposure_mg_day", "tier_scores",
                  "hygroscopicity_scores", "stoichiometry_scores", "anions", "cations",
                  "flag_strength"}


@dataclass(frozen=True)
class RankingConfig:
    """The effective ranking configuration: defaults merged with a user file."""

    data: Mapping[str, Any]
    source: str
    hash: str

    @property
    def thresholds(self) -> Thresholds:
        t = self.data["thresholds"]
        return Thresholds(float(t["salt_expected"]), float(t["likely"]), float(t["uncertain"]))

    @property
    def caveat_settings(self) -> Mapping[str, Any]:
        """The ``caveats`` section plus the formulation microenvironment pH."""
        out = dict(self.data["caveats"])
        out["microenvironment_ph"] = self.data["disproportionation"]["microenvironment_ph"]
        return out

    def to_dict(self) -> dict[str, Any]:
        return {"source": self.source, "hash": self.hash,
                "thresholds": self.thresholds.to_dict(),
                "probability": dict(self.data["probability"]),
                "weights": dict(self.data["weights"])}


@functools.lru_cache(maxsize=1)
def _defaults() -> dict[str, Any]:
    from .._data import package_yaml

    return package_yaml("data", "ranking_weights.yaml")


def _merge(base: Any, user: Any, where: str, origin: str) -> Any:
    if isinstance(base, dict):
        if not isinstance(user, dict):
            raise ParameterError(f"expected a mapping, got {type(user).__name__}",
                                 file=origin, field=where or "top level")
        out = copy.deepcopy(base)
        section = where.rsplit(".", 1)[-1]
        for key, value in user.items():
            path = f"{where}.{key}" if where else str(key)
            if key not in base:
                if section in _OPEN_SECTIONS:
                    out[key] = _validated_leaf(value, path, origin)
                    continue
                raise ParameterError(f"unknown key (allowed: {', '.join(map(str, base))})",
                                     file=origin, field=path)
            out[key] = _merge(base[key], value, path, origin)
        return out
    if isinstance(base, list):
        if not isinstance(user, list) or not all(isinstance(x, str) for x in user):
            raise ParameterError("expected a list of counterion ids", file=origin, field=where)
        return list(user)
    if isinstance(base, (int, float)) and not isinstance(base, bool):
        return _validated_leaf(user, where, origin)
    return user


def _validated_leaf(value, where, origin):
    if isinstance(value, dict):
        return {k: _validated_leaf(v, f"{where}.{k}", origin) for k, v in value.items()}
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise ParameterError(f"must be a finite number, got {value!r}", file=origin, field=where)
    return value


def load_ranking_config(path: str | Path | None = None) -> RankingConfig:
    """Ranking configuration: the shipped defaults, overridden by ``path`` when given.

    Raises
    ------
    ParameterError
        Missing file, invalid YAML, unknown keys, non-numeric values, thresholds out of order.
    """
    if path is None:
        return _default_config()
    from .._data import load_yaml_path, sha256_text

    user = load_yaml_path(path) or {}
    data = _merge(_defaults(), user, "", str(path))
    cfg = RankingConfig(data, f"saltplan/data/ranking_weights.yaml + {path}",
                        "sha256:" + sha256_text(json.dumps(data, sort_keys=True, default=str)))
    _check(cfg, str(path))
    return cfg


@functools.lru_cache(maxsize=1)
def _default_config() -> RankingConfig:
    from .._data import sha256_text

    data = _defaults()
    cfg = RankingConfig(data, "saltplan/data/ranking_weights.yaml",
                        "sha256:" + sha256_text(json.dumps(data, sort_keys=True, default=str)))
    _check(cfg, "saltplan/data/ranking_weights.yaml")
    return cfg


def _check(cfg: RankingConfig, origin: str) -> None:
    try:
        _ = cfg.thresholds  # building the thresholds validates them
    except ParameterError as exc:
        raise ParameterError(exc.message, file=origin, field="thresholds") from None
    for key, value in cfg.data["weights"].items():
        if value < 0:
            raise ParameterError(f"weight must be ≥ 0, got {value}", file=origin,
                                 field=f"weights.{key}")
    if cfg.data["margin"]["saturation"] <= 0:
        raise ParameterError("must be > 0", file=origin, field="margin.saturation")
    if cfg.data["slurry"]["span"] <= 0:
        raise ParameterError("must be > 0", file=origin, field="slurry.span")
    if cfg.data["zwitterion"]["allowance"] < 0:
        raise ParameterError("must be ≥ 0", file=origin, field="zwitterion.allowance")
    if cfg.data["precedence"]["floor_percent"] <= 0:
        raise ParameterError("must be > 0", file=origin, field="precedence.floor_percent")
    for kind in ("anions", "cations"):
        for key, value in cfg.data["precedence"][kind].items():
            if value < 0 or value > 100:
                raise ParameterError(f"share must be 0–100 %, got {value}", file=origin,
                                     field=f"precedence.{kind}.{key}")
    if cfg.data["disproportionation"]["span"] <= 0:
        raise ParameterError("must be > 0", file=origin, field="disproportionation.span")


# --------------------------------------------------------------------------- terms
def _clip01(x: float) -> float:
    return min(1.0, max(0.0, x))


def dose_factor(dose_mg: float | None, cfg: RankingConfig) -> float:
    """How much the counterion mass matters at this daily dose (0..1)."""
    m = cfg.data["mass"]
    dose = m["unknown_dose_mg"] if dose_mg is None else dose_mg
    floor = m["min_dose_factor"]
    return floor + (1.0 - floor) * min(1.0, dose / m["reference_dose_mg"])


def disproportionation_risk(ph_max: float | None, counterion_role: str,
                            cfg: RankingConfig) -> float:
    """0..1: how far pHmax lies on the wrong side of the formulation microenvironment pH."""
    if ph_max is None:
        return 0.0
    d = cfg.data["disproportionation"]
    if counterion_role == "acid":      # salt of a base: free base forms above pHmax
        return _clip01((d["microenvironment_ph"] + d["safe_margin"] - ph_max) / d["span"])
    return _clip01((ph_max - (d["microenvironment_ph"] - d["safe_margin"])) / d["span"])


def slurry_risk(ph_max: float | None, slurry_ph: float | None, counterion_role: str,
                cfg: RankingConfig) -> float:
    """0..1: how far the salt's own slurry pH lies on the wrong side of its pHmax.

    Counterion-specific: a weak acid gives a base salt a higher slurry pH than a strong acid
    does, so its salt is closer to converting back to the free base (Serajuddin 2007).
    """
    if ph_max is None or slurry_ph is None:
        return 0.0
    d = cfg.data["slurry"]
    if counterion_role == "acid":
        return _clip01((slurry_ph + d["safe_margin"] - ph_max) / d["span"])
    return _clip01((ph_max + d["safe_margin"] - slurry_ph) / d["span"])


def precedence_share(counterion_id: str, role: str, cfg: RankingConfig) -> float | None:
    """Published share [% of salts of its kind] of a counterion, None when not tabulated.

    ``role`` is the counterion's role: acids form anionic salts (``precedence.anions``),
    bases cationic ones (``precedence.cations``).
    """
    table = cfg.data["precedence"]["anions" if role == "acid" else "cations"]
    share = table.get(counterion_id)
    return None if share is None else float(share)


def precedence_score(counterion_id: str, cfg: RankingConfig, role: str = "acid") -> float:
    """0..1 from the counterion's share among marketed salts, on a log scale.

    term = clip(log10(share / floor) / log10(top / floor), 0, 1) with ``top`` the largest
    share of that kind (hydrochloride among anions, sodium among cations) and ``floor`` =
    ``precedence.floor_percent``. Ids not in the table score 0.

    >>> cfg = load_ranking_config()
    >>> precedence_score("hydrochloride", cfg, "acid"), precedence_score("sodium", cfg, "base")
    (1.0, 1.0)
    """
    p = cfg.data["precedence"]
    share = precedence_share(counterion_id, role, cfg)
    if share is None or share <= 0:
        return 0.0
    table = p["anions" if role == "acid" else "cations"]
    top = max(float(v) for v in table.values())
    floor = float(p["floor_percent"])
    if top <= floor:
        return 0.0
    return _clip01(math.log10(share / floor) / math.log10(top / floor))


def score_candidate(candidate: Candidate, ion, *, dose_mg: float | None,
                    triggered_flags: Iterable[str] = (), alternative: bool = False,
                    cfg: RankingConfig | None = None, ph_max: float | None = None,
                    slurry_ph: float | None = None,
                    inhouse: tuple[int, int] | None = None) -> tuple[float, dict[str, float]]:
    """Score and signed breakdown (weight × term; penalties negative) of one candidate.

    ``alternative`` marks a non-1:1 stoichiometry of a counterion whose 1:1 salt is also
    feasible (a second-choice experiment). ``ph_max`` and ``slurry_ph`` default to the
    candidate's own values. ``inhouse`` = (screens, crystalline) from a ledger for a
    similar site: the precedence term is then shrunk toward that in-house success rate
    (:func:`saltplan.plan.inhouse.blend`); None or no screens leaves it as published.
    """
    cfg = cfg or load_ranking_config()
    w = cfg.data["weights"]
    triggered = set(triggered_flags)
    m = cfg.data["margin"]
    lim = candidate.limiting_transfer
    sigma = lim.api_pka_uncertainty if lim is not None else 0.0
    margin = _clip01((candidate.delta_pka - m["uncertainty_factor"] * sigma) / m["saturation"])
    tiers = cfg.data["tier_scores"]
    tier = getattr(ion, "tier", None)
    tier_term = float(tiers.get(tier, tiers.get(str(tier), 0.0))) if tier is not None else 0.0
    mass = (1.0 - candidate.drug_content / 100.0) * dose_factor(dose_mg, cfg)
    penalties = cfg.data["liability_penalties"]
    factor = cfg.data["api_trigger_factor"]
    strength = cfg.data.get("flag_strength", {}).get(candidate.counterion, {}) or {}
    liab = sum(float(penalties.get(f, 0.0)) * float(strength.get(f, 1.0))
               * (factor if f in triggered else 1.0)
               for f in dict.fromkeys(getattr(ion, "flags", ()) or ()))
    hyg_scores = cfg.data["hygroscopicity_scores"]
    hyg = float(hyg_scores.get(str(getattr(ion, "hygroscopicity", None) or "unknown"),
                               hyg_scores.get("unknown", 0.0)))
    ph_max = candidate.ph_max if ph_max is None else ph_max
    slurry_ph = candidate.slurry_ph if slurry_ph is None else slurry_ph
    dispro = disproportionation_risk(ph_max, ion.role, cfg)
    slurry = slurry_risk(ph_max, slurry_ph, ion.role, cfg)
    listed = tuple(getattr(ion, "stoichiometries", ()) or ())
    st = cfg.data["stoichiometry_scores"]
    if listed and candidate.stoichiometry not in listed:
        stoich = float(st["unlisted"])
    elif alternative and candidate.stoichiometry != "1:1":
        stoich = float(st["alternative"])
    else:
        stoich = 0.0
    breakdown = {
        "delta_pka_margin": w["delta_pka_margin"] * margin,
        "tier": w["tier"] * tier_term,
        "precedence": w["precedence"] * _precedence(candidate.counterion, cfg,
                                                    getattr(ion, "role", "acid"), inhouse),
        "mass": -w["mass"] * mass,
        "liabilities": -w["liabilities"] * liab,
        "hygroscopicity": -w["hygroscopicity"] * hyg,
        "disproportionation": -w["disproportionation"] * dispro,
        "slurry_disproportionation": -w["slurry_disproportionation"] * slurry,
        "stoichiometry": -w["stoichiometry"] * stoich,
    }
    breakdown = {k: (0.0 if v == 0 else v) for k, v in breakdown.items()}  # no "-0.0"
    return sum(breakdown.values()), breakdown


def _precedence(counterion_id: str, cfg: RankingConfig, role: str,
                inhouse: tuple[int, int] | None) -> float:
    published = precedence_score(counterion_id, cfg, role)
    if not inhouse or inhouse[0] <= 0:
        return published
    from .inhouse import blend

    return blend(published, int(inhouse[0]), int(inhouse[1]))


def order(candidates: Iterable[Candidate]) -> list[Candidate]:
    """Sort by score (desc), ΔpKa (desc), counterion id, stoichiometry."""
    return sorted(candidates, key=lambda c: c.sort_key)


def rank(candidates: Iterable[Candidate]) -> tuple[list[Candidate], list[Candidate]]:
    """Split scored candidates into (feasible ranked 1…n, excluded ranked n+1…).

    Each candidate also gets ``counterion_rank`` (see :func:`counterion_ranks`).
    """
    feasible, excluded = rank_order(candidates, key=lambda c: c)
    ranks = counterion_ranks(feasible, excluded, key=lambda c: c)
    ranked = [replace(c, rank=i, counterion_rank=ranks[c.counterion])
              for i, c in enumerate(feasible, start=1)]
    start = len(ranked) + 1
    return ranked, [replace(c, rank=i, counterion_rank=ranks[c.counterion])
                    for i, c in enumerate(excluded, start=start)]


def counterion_ranks(feasible: list, excluded: list, key=lambda c: c) -> dict[str, int]:
    """Rank of each counterion, counted once by its best entry (1 = best).

    ``rank`` numbers every counterion × stoichiometry row; a counterion with two feasible
    stoichiometries (sulfate 1:1 and 2:1) would otherwise push the next counterion down one
    place. Counterions with a feasible entry come first, in the order of their best feasible
    row; counterions with only infeasible entries follow, by their best excluded row. All
    rows of a counterion share its ``counterion_rank``.
    """
    out: dict[str, int] = {}
    for item in list(feasible) + list(excluded):
        ci = key(item).counterion
        if ci not in out:
            out[ci] = len(out) + 1
    return out


def rank_order(items: Iterable, key) -> tuple[list, list]:
    """(feasible, infeasible) items, each in ranking order; ``key(item)`` gives the
    scored Candidate-like object (``feasible``, ``sort_key``)."""
    items = list(items)
    feasible = sorted((x for x in items if key(x).feasible), key=lambda x: key(x).sort_key)
    excluded = sorted((x for x in items if not key(x).feasible), key=lambda x: key(x).sort_key)
    return feasible, excluded
