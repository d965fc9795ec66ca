"""The catalogue of ionizable groups and the parameter tables (loaded lazily, cached).

Nothing here runs at import time: the YAML files in ``ionization/data`` are parsed and the
SMARTS compiled on the first call of :func:`groups` / :func:`parameters`.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass, field

from ..errors import ParameterError

_DATA = ("ionization", "data")
_KINDS = ("acid", "base")
_MODELS = ("hammett", "taft", "fixed")
FITTED_FILE = "fitted_pka.yaml"


@dataclass(frozen=True)
class Group:
    """One catalogue entry (see ``data/groups.yaml`` for the meaning of the fields)."""

    id: str
    name: str
    kind: str
    smarts: str
    patterns: tuple = field(repr=False, compare=False)
    site: int = 0
    center: int | None = None
    anchor: int | None = None
    model: str = "fixed"
    family: str | None = None
    pka: float = 0.0
    rho: float = 0.0
    uncertainty: float = 0.5
    sensitivity: float = 1.0
    same_center: float | None = None
    one_per_center: bool = False
    require_aryl: bool = False
    exclude_amidine_like: bool = False
    source: str = ""
    requires: frozenset = frozenset()   # elements every pattern needs (cheap pre-filter)
    claims: tuple = ()                  # further match atoms no later group may take
    taft_too: bool = False              # hammett site with an aliphatic side (N-alkyl anilines)
    rho_taft: float = 0.0


def _yaml(name: str):
    from .._data import package_yaml

    return package_yaml(*_DATA, name)


@functools.lru_cache(maxsize=1)
def groups() -> tuple[Group, ...]:
    """The group catalogue in priority order, SMARTS compiled (cached)."""
    from rdkit import Chem

    origin = "saltplan/ionization/data/groups.yaml"
    data = _yaml("groups.yaml")
    out, seen = [], set()
    for i, row in enumerate(data.get("groups") or [], start=1):
        gid = row.get("id")
        if not gid or gid in seen:
            raise ParameterError("missing or duplicate group id", file=origin, row=i, entry=gid)
        seen.add(gid)
        if row.get("kind") not in _KINDS:
            raise ParameterError("kind must be acid or base", file=origin, entry=gid, field="kind")
        if row.get("model") not in _MODELS:
            raise ParameterError(f"model must be one of {_MODELS}", file=origin, entry=gid, field="model")
        texts = row["smarts"] if isinstance(row.get("smarts"), list) else [row.get("smarts")]
        patterns = []
        for text in texts:
            pat = Chem.MolFromSmarts(text) if isinstance(text, str) else None
            if pat is None:
                raise ParameterError("SMARTS does not parse", file=origin, entry=gid, field="smarts")
            patterns.append(pat)
        if row.get("model") == "hammett" and row.get("anchor") is None:
            raise ParameterError("hammett model needs an anchor atom", file=origin, entry=gid,
                                 field="anchor")
        if not row.get("source"):
            raise ParameterError("every parent value needs a source", file=origin, entry=gid,
                                 field="source")
        out.append(Group(
            id=gid, name=row["name"], kind=row["kind"], smarts=" | ".join(texts),
            patterns=tuple(patterns),
            site=int(row.get("site", 0)), center=row.get("center"), anchor=row.get("anchor"),
            model=row["model"], family=row.get("family"), pka=float(row["pka"]),
            rho=float(row.get("rho", 0.0)), uncertainty=float(row.get("uncertainty", 0.5)),
            sensitivity=float(row.get("sensitivity", 1.0)),
            same_center=(float(row["same_center"]) if row.get("same_center") is not None else None),
            one_per_center=bool(row.get("one_per_center", False)),
            require_aryl=bool(row.get("require_aryl", False)),
            exclude_amidine_like=bool(row.get("exclude_amidine_like", False)),
            source=row["source"],
            requires=frozenset.intersection(*[
                frozenset(a.GetAtomicNum() for a in p.GetAtoms() if a.GetAtomicNum() > 0)
                for p in patterns]),
            claims=tuple(int(i) for i in row.get("claims", ())),
            taft_too=bool(row.get("taft_too", False)),
            rho_taft=float(row.get("rho_taft", 0.0))))
    return tuple(out)


@functools.lru_cache(maxsize=1)
def group_index() -> dict[str, Group]:
    return {g.id: g for g in groups()}


@functools.lru_cache(maxsize=1)
def hammett_table() -> dict[str, dict]:
    return dict(_yaml("hammett_hansch_leo_taft_1991.yaml")["substituents"])


@functools.lru_cache(maxsize=1)
def hammett_rules() -> dict:
    return _yaml("hammett_rules.yaml")


@functools.lru_cache(maxsize=1)
def taft_table() -> dict:
    return _yaml("taft_sigma_star.yaml")


@functools.lru_cache(maxsize=1)
def interaction_table() -> dict:
    return _yaml("site_interaction.yaml")


@functools.lru_cache(maxsize=1)
def fitted_table() -> dict:
    """The calibration file written by ``scripts/fit_pka.py`` ({} when absent)."""
    from .._data import package_file

    node = package_file(*_DATA, FITTED_FILE)
    if not node.is_file():
        return {}
    return _yaml(FITTED_FILE) or {}


def prior_parameters() -> dict[str, float]:
    """Published (or from-memory) parameter values, keyed like the fitted file."""
    p: dict[str, float] = {}
    for g in groups():
        p[f"pka0:{g.id}"] = g.pka
        if g.model in ("hammett", "taft"):
            p[f"rho:{g.id}"] = g.rho
        if g.taft_too:
            p[f"rhot:{g.id}"] = g.rho_taft
        p[f"sens:{g.id}"] = g.sensitivity
    t = taft_table()
    p["gamma"] = float(t["gamma"])
    p["c_ar"] = float(t["aromatic_bond_cost"])
    p["geminal"] = float(t["geminal"])
    p["same_ring"] = float(t["same_ring"])
    for k, row in t["beta"].items():
        p[f"beta:{k}"] = float(row["value"])
    for k, row in t["alpha"].items():
        p[f"alpha:{k}"] = float(row["value"])
    it = interaction_table()
    for k in ("w0", "gq", "w1", "paths_bonus", "k_base_cation", "k_base_anion",
              "k_acid_cation", "k_acid_anion"):
        p[f"int:{k}"] = float(it[k])
    return p


@functools.lru_cache(maxsize=1)
def _default_parameters() -> tuple[tuple[str, float], ...]:
    p = prior_parameters()
    fitted = fitted_table()
    for key, value in (fitted.get("parameters") or {}).items():
        if key in p:
            p[key] = float(value)
    return tuple(sorted(p.items()))


@functools.lru_cache(maxsize=1)
def _parameters_dict() -> dict[str, float]:
    return dict(_default_parameters())


def parameters() -> dict[str, float]:
    """Parameters in use: priors, overridden by the calibration file when present.

    The returned dict is shared (cached): treat it as read-only; copy it to modify.
    """
    return _parameters_dict()


def is_fitted(key: str) -> bool:
    return key in (fitted_table().get("parameters") or {})


@functools.lru_cache(maxsize=1)
def class_uncertainty() -> dict[str, float]:
    """Per-group uncertainty: calibration RMSE where fitted, else the catalogue prior."""
    out = {g.id: g.uncertainty for g in groups()}
    fitted = fitted_table()
    for gid, rmse in (fitted.get("class_rmse") or {}).items():
        if gid in out:
            out[gid] = max(float(rmse), 0.2)
    # 1-sigma from the scaffold-grouped cross-validation (scripts/fit_pka.py)
    for gid, row in (fitted.get("class_sigma") or {}).items():
        if gid in out:
            out[gid] = max(float(row["sigma"]), 0.2)
    return out


def fitted_source() -> str:
    f = fitted_table()
    if not f:
        return ""
    sets = f.get("data_sets") or [f.get("data_set", "pka-dev")]
    names = "; ".join(str(x).split(" (")[0].split(",")[0] for x in sets)
    return f"fitted to {names} ({f.get('date', '')})"
