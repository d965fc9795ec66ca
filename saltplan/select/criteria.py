"""Criteria of the tiered evaluation: thresholds (YAML, user-overridable), Ph. Eur. 5.11
hygroscopicity classes and the ICH M9 dose/solubility rule.

Loaded lazily; nothing here runs at import time.
"""
from __future__ import annotations

import functools
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from .._data import load_yaml_path, package_yaml, sha256_text
from ..errors import ParameterError

# --------------------------------------------------------------------------- Ph. Eur. 5.11
#: Ph. Eur. 5.11 "Characters section in monographs", hygroscopicity: increase in mass
#: after 24 h at 25 ± 1 °C and 80 ± 2 % RH. Lower band edge (inclusive, % m/m) → class.
#: "deliquescent" (sufficient water absorbed to form a liquid) is an observation, not a
#: band. Band edges as the text states them: ≥ 15 very hygroscopic; < 15 and ≥ 2
#: hygroscopic; < 2 and ≥ 0.2 slightly hygroscopic; below 0.2 not hygroscopic
#: (from memory of Ph. Eur. 5.11; check against the current edition).
HYGROSCOPICITY_BANDS: tuple[tuple[float, str], ...] = (
    (15.0, "very_hygroscopic"),
    (2.0, "hygroscopic"),
    (0.2, "slightly_hygroscopic"),
)
#: classes from least to most hygroscopic (the order used to compare with a threshold)
HYGROSCOPICITY_CLASSES = ("non_hygroscopic", "slightly_hygroscopic", "hygroscopic",
                          "very_hygroscopic", "deliquescent")
HYGROSCOPICITY_TEXT = {
    "non_hygroscopic": "non-hygroscopic (< 0.2 %)",
    "slightly_hygroscopic": "slightly hygroscopic (0.2 % to < 2 %)",
    "hygroscopic": "hygroscopic (2 % to < 15 %)",
    "very_hygroscopic": "very hygroscopic (≥ 15 %)",
    "deliquescent": "deliquescent (liquefies)",
}
PH_EUR_511 = ("Ph. Eur. 5.11 (hygroscopicity classes; pharmacopoeial test 24 h at 25 °C / "
              "80 % RH)")


def hygroscopicity_class(weight_gain_pct: float | None, deliquescent: bool = False) -> str | None:
    """Ph. Eur. 5.11 hygroscopicity class of a weight gain at 80 % RH / 25 °C.

    Parameters
    ----------
    weight_gain_pct
        Increase in mass [% m/m]; None when not measured.
    deliquescent
        The sample liquefied (reported in the notes); overrides the bands.

    Returns
    -------
    str or None
        One of :data:`HYGROSCOPICITY_CLASSES`, None when nothing was measured.

    Examples
    --------
    >>> hygroscopicity_class(0.19), hygroscopicity_class(0.2), hygroscopicity_class(15)
    ('non_hygroscopic', 'slightly_hygroscopic', 'very_hygroscopic')
    """
    if deliquescent:
        return "deliquescent"
    if weight_gain_pct is None:
        return None
    for edge, name in HYGROSCOPICITY_BANDS:
        if weight_gain_pct >= edge:
            return name
    return "non_hygroscopic"


# --------------------------------------------------------------------------- ICH M9
ICH_M9 = ("ICH M9 (2019), BCS-based biowaivers: highest single dose soluble in ≤ 250 mL "
          "over pH 1.2–6.8 at 37 °C")


def required_solubility_mg_ml(dose_mg: float, volume_ml: float = 250.0) -> float:
    """Solubility needed to dissolve the highest dose in ``volume_ml`` [mg/mL].

    .. math:: S_{req} = D / V

    Parameters
    ----------
    dose_mg
        Highest single dose [mg] (same basis as the measured solubility, usually the free
        form equivalent).
    volume_ml
        Dissolution volume [mL]; 250 mL in the ICH M9 / BCS definition of "highly soluble".

    Examples
    --------
    >>> required_solubility_mg_ml(500)
    2.0
    """
    if dose_mg is None or dose_mg <= 0:
        raise ParameterError(f"dose must be a positive number of mg, got {dose_mg!r}", field="dose_mg")
    if volume_ml <= 0:
        raise ParameterError(f"volume must be positive, got {volume_ml!r}", field="dissolution_volume_ml")
    return dose_mg / volume_ml


# --------------------------------------------------------------------------- thresholds
@dataclass(frozen=True)
class Threshold:
    """One evaluation threshold with where it came from."""

    key: str
    value: Any
    unit: str
    source: str
    provenance: str  # "default" (package file) | "user" (override file or mapping)
    cite: str = ""   # short form of the source, shown beside each finding

    def to_dict(self) -> dict[str, Any]:
        return {"key": self.key, "value": self.value, "unit": self.unit, "cite": self.cite,
                "source": self.source, "provenance": self.provenance}


@dataclass(frozen=True)
class Thresholds:
    items: tuple[Threshold, ...]
    hash: str

    def __getitem__(self, key: str) -> Any:
        for item in self.items:
            if item.key == key:
                return item.value
        raise KeyError(key)

    def get(self, key: str) -> Threshold:
        return next(i for i in self.items if i.key == key)

    def to_dict(self) -> dict[str, Any]:
        return {"hash": self.hash, "items": [i.to_dict() for i in self.items]}


def _check_value(key: str, value: Any, origin: str) -> Any:
    def bad(why: str):
        return ParameterError(why, file=origin, entry=key, field="value")

    if key == "hygroscopicity_max_class":
        if value not in HYGROSCOPICITY_CLASSES:
            raise bad(f"'{value}' is not a Ph. Eur. 5.11 class; use one of "
                      f"{', '.join(HYGROSCOPICITY_CLASSES)}")
        return value
    if key == "backup_other_counterion":
        if not isinstance(value, bool):
            raise bad(f"expected true or false, got {value!r}")
        return value
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise bad(f"expected a number, got {value!r}")
    limits = {"melting_onset_min_c": (-50, 450), "dissolution_volume_ml": (1, 10000),
              "solvent_content_max_pct": (0, 100), "stoichiometry_tolerance": (0, 0.5)}
    low, high = limits[key]
    if not low <= value <= high:
        raise bad(f"{value} outside the accepted range {low} to {high}")
    return float(value)


@functools.lru_cache(maxsize=1)
def _defaults() -> tuple[tuple[str, Any, str, str, str], ...]:
    data = package_yaml("data", "selection_thresholds.yaml")
    origin = "saltplan/data/selection_thresholds.yaml"
    rows = []
    for key, entry in data["thresholds"].items():
        rows.append((key, _check_value(key, entry["value"], origin), str(entry.get("unit", "")),
                     " ".join(str(entry["source"]).split()), str(entry.get("cite", ""))))
    return tuple(rows)


def load_thresholds(override: str | Path | Mapping | Thresholds | None = None) -> Thresholds:
    """The package thresholds, with any subset replaced by ``override``.

    Parameters
    ----------
    override
        None; a YAML path holding ``thresholds: {key: value | {value, source}}``; or such
        a mapping (the ``thresholds`` level optional).

    Raises
    ------
    ParameterError
        Unknown key, wrong type or value out of range (naming file and key).
    """
    if isinstance(override, Thresholds):
        return override
    defaults = _defaults()
    given: Mapping = {}
    origin = "thresholds"
    if isinstance(override, (str, Path)):
        origin = str(override)
        given = load_yaml_path(override) or {}
    elif override is not None:
        given = override
    if not isinstance(given, Mapping):
        raise ParameterError("expected a mapping with a 'thresholds' section", file=origin)
    if "thresholds" in given:
        extra = [k for k in given if k not in ("thresholds", "source", "citation")]
        if extra:
            raise ParameterError(f"unknown top-level key '{extra[0]}' (expected 'thresholds')",
                                 file=origin, entry=str(extra[0]))
        given = given["thresholds"] or {}
        if not isinstance(given, Mapping):
            raise ParameterError("'thresholds' must be a mapping of key: value", file=origin)
    known = [row[0] for row in defaults]
    for key in given:
        if key not in known:
            raise ParameterError(f"unknown threshold '{key}'; known: {', '.join(known)}",
                                 file=origin, entry=str(key))
    items = []
    for key, value, unit, source, cite in defaults:
        if key in given:
            entry = given[key]
            src = f"user ({origin})"
            if isinstance(entry, Mapping):
                unknown = [k for k in entry if k not in ("value", "source", "unit", "cite")]
                if unknown or "value" not in entry:
                    raise ParameterError(f"expected {{value, source}}, got {sorted(map(str, entry))}",
                                         file=origin, entry=key, field="value")
                src = f"user ({origin}): {entry.get('source') or 'no source given'}"
                entry = entry["value"]
            items.append(Threshold(key, _check_value(key, entry, origin), unit, src, "user",
                                   cite=src))
        else:
            items.append(Threshold(key, value, unit, source, "default", cite=cite))
    digest = sha256_text(*(f"{i.key}={i.value!r}" for i in items))
    return Thresholds(tuple(items), digest)
