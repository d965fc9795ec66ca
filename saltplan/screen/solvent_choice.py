"""Choosing a diverse solvent set for a salt screen (max-min / farthest-point selection).

The solvents of :mod:`saltplan.solvents` are points in a space of standardized polarity and
hydrogen-bonding properties; :func:`select_solvents` picks a set that spans it, never an ICH
Q3C class 1 solvent and preferring class 3 (a distance penalty for class 2).
"""
from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from ..errors import ParameterError
from ..library.solvents import Solvent, SolventLibrary

#: properties spanned by the diversity selection, each standardized over the pool
SELECTION_FEATURES = ("log10_dielectric", "kt_alpha", "kt_beta", "kt_pi_star", "water")
#: standardized-distance penalty for ICH class 2 solvents (class 3 and water preferred)
CLASS2_PENALTY = 0.75
_MISCIBILITY_VALUE = {"miscible": 1.0, "partial": 0.5, "immiscible": 0.0}


@dataclass(frozen=True)
class SolventChoice:
    """A chosen solvent, why it was chosen and its place in the selection order."""

    solvent: Solvent
    order: int
    reason: str
    min_distance: float | None  # standardized units; None for the first / requested ones

    def to_dict(self) -> dict[str, Any]:
        s = self.solvent
        return {"id": s.id, "name": s.name, "order": self.order, "reason": self.reason,
                "min_distance": None if self.min_distance is None else round(self.min_distance, 3),
                "ich_class": s.ich_class, "ich_limit_ppm": s.ich_limit_ppm,
                "is_alcohol": s.is_alcohol, "family": s.family, "bp_c": s.bp_c,
                "dielectric": s.dielectric, "kt_alpha": s.kt_alpha, "kt_beta": s.kt_beta,
                "kt_pi_star": s.kt_pi_star, "water_miscibility": s.water_miscibility,
                "antisolvent": s.antisolvent}


def solvent_features(s: Solvent) -> tuple[float, ...]:
    """Raw feature vector of :data:`SELECTION_FEATURES` (log10 ε, α, β, π*, water 0/0.5/1)."""
    return (math.log10(s.dielectric), s.kt_alpha, s.kt_beta, s.kt_pi_star,
            _MISCIBILITY_VALUE[s.water_miscibility])


def select_solvents(library: SolventLibrary, n: int, *, requested: Sequence[str] = (),
                    class2_penalty: float = CLASS2_PENALTY) -> list[SolventChoice]:
    """Choose ``n`` solvents that span polarity and hydrogen bonding (max–min diversity).

    Parameters
    ----------
    library : SolventLibrary
    n : int
        How many solvents in total (requested ones included).
    requested : sequence of str
        Solvent ids the user wants; they come first, in the given order. Any solvent of
        the library may be requested except ICH class 1.
    class2_penalty : float
        Subtracted from an ICH class 2 candidate's distance [standardized units].

    Returns
    -------
    list of SolventChoice
        In selection order.

    Notes
    -----
    Features: log10 of the dielectric constant, Kamlet–Taft α, β and π*, and water
    miscibility (1, 0.5, 0), each standardized (z-score) over the candidate pool (solvents
    with ``default_pool: true``, never class 1, plus the requested ones). Without a request
    the first solvent is the class-3 (or unclassified) pool member closest to the pool's
    centroid. Each further pick maximizes its Euclidean distance to the nearest chosen
    solvent minus ``class2_penalty`` for class 2. Ties break by id, so the result is
    deterministic (farthest-point sampling; T. F. Gonzalez, Theor. Comput. Sci. 1985, 38,
    293-306, "from memory").
    """
    if n < 1:
        raise ParameterError(f"number of solvents must be at least 1, got {n}",
                             field="n_solvents")
    chosen: list[Solvent] = []
    for sid in requested:
        s = library.get(sid)
        if s.ich_class == 1:
            raise ParameterError(f"solvent '{s.id}' is ICH Q3C class 1 (to be avoided); "
                                 "it is never used", entry=s.id, field="solvents")
        if s in chosen:
            raise ParameterError(f"solvent '{s.id}' is requested twice", entry=s.id,
                                 field="solvents")
        chosen.append(s)
    if n < len(chosen):
        raise ParameterError(f"{n} solvents asked for but {len(chosen)} requested by id",
                             field="n_solvents")
    pool = [s for s in library if s.default_pool and s.ich_class != 1 and s not in chosen]
    space = chosen + pool
    if n > len(space):
        raise ParameterError(f"{n} solvents asked for but only {len(space)} are available "
                             "(default pool plus requested)", field="n_solvents")
    vectors = _standardized(space)
    result = [SolventChoice(s, i + 1, "requested by the user", None) for i, s in enumerate(chosen)]
    remaining = list(pool)
    if not chosen:
        centroid = [0.0] * len(SELECTION_FEATURES)  # z-scores: the centroid is the origin
        preferred = [s for s in remaining if s.ich_class != 2] or remaining
        first = min(preferred, key=lambda s: (_dist(vectors[s.id], centroid), s.id))
        chosen.append(first)
        remaining.remove(first)
        result.append(SolventChoice(first, 1, "start: the class-3 solvent closest to the "
                                    "centre of the pool's property space", None))
    while len(chosen) < n:
        best = None
        for s in remaining:
            near = min(chosen, key=lambda c: (_dist(vectors[s.id], vectors[c.id]), c.id))
            d = _dist(vectors[s.id], vectors[near.id])
            score = d - (class2_penalty if s.ich_class == 2 else 0.0)
            key = (-score, s.id)
            if best is None or key < best[0]:
                best = (key, s, d, near)
        _, s, d, near = best
        reason = (f"most different from the chosen set (distance {d:.2f} to {near.id}, "
                  "standardized polarity/H-bond units)")
        if s.ich_class == 2:
            reason += f"; chosen despite the class-2 penalty of {class2_penalty:g}"
        chosen.append(s)
        remaining.remove(s)
        result.append(SolventChoice(s, len(chosen), reason, d))
    return result


def _standardized(space: Sequence[Solvent]) -> dict[str, tuple[float, ...]]:
    raw = {s.id: solvent_features(s) for s in space}
    columns = list(zip(*raw.values(), strict=True))
    means = [sum(c) / len(c) for c in columns]
    sds = [math.sqrt(sum((x - m) ** 2 for x in c) / len(c)) or 1.0
           for c, m in zip(columns, means, strict=True)]
    return {sid: tuple((x - m) / sd for x, m, sd in zip(v, means, sds, strict=True)) for sid, v in raw.items()}


def _dist(a: Sequence[float], b: Sequence[float]) -> float:
    return math.sqrt(sum((x - y) ** 2 for x, y in zip(a, b, strict=True)))
