"""Measured pKa values that replace estimates (by atom, group, kind or nearest site)."""
from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence

from ..errors import ParameterError
from .site import Site, Step

PKA_MIN, PKA_MAX = -5.0, 20.0


def _check_value(value, what: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise ParameterError(f"measured pKa {value!r} for {what} is not a number") from None
    if not math.isfinite(v) or not PKA_MIN <= v <= PKA_MAX:
        raise ParameterError(f"measured pKa {value!r} for {what} is outside {PKA_MIN:g} ... {PKA_MAX:g}")
    return v


def _normalize(measured) -> list[tuple[object, float]]:
    if isinstance(measured, Mapping):
        items = list(measured.items())
    elif isinstance(measured, (str, bytes)):
        raise ParameterError("measured pKa values must be a mapping or a sequence, not a string")
    elif isinstance(measured, Sequence):
        items = []
        for item in measured:
            if isinstance(item, (tuple, list)) and len(item) == 2:
                items.append((item[0], item[1]))
            else:
                items.append((None, item))
    else:
        raise ParameterError(f"measured pKa values of type {type(measured).__name__} are not understood")
    out = []
    for sel, value in items:
        if isinstance(sel, bool):
            raise ParameterError(f"measured pKa selector {sel!r} is not an atom index or group")
        if isinstance(sel, str) and sel.strip().lstrip("-").isdigit():
            sel = int(sel.strip())
        what = "the nearest site" if sel is None else (f"atom {sel}" if isinstance(sel, int) else f"'{sel}'")
        out.append((sel, _check_value(value, what)))
    return out


def apply_measured(sites: list[Site], measured) -> list[Site]:
    """Replace estimates by measured values; the estimate stays as a step."""
    from .catalogue import group_index

    items = _normalize(measured)
    sites = list(sites)
    replaced: set[int] = set()

    def replace(i: int, value: float):
        s = sites[i]
        step = Step("measured", value, f"estimate was {s.pka:.2f}, replaced by measured value", "user")
        sites[i] = dataclasses.replace(s, pka=value, uncertainty=0.0, provenance="measured",
                                       source="user", steps=s.steps + (step,))
        replaced.add(i)

    # explicit selectors first, nearest-site values last
    for sel, value in sorted(items, key=lambda kv: kv[0] is None):
        if isinstance(sel, int):
            idx = [i for i, s in enumerate(sites) if s.atom == sel]
            if not idx:
                atoms = ", ".join(str(s.atom) for s in sites) or "none"
                raise ParameterError(f"atom {sel} is not an ionizable site (sites: {atoms})")
            replace(idx[0], value)
        elif sel in ("acid", "base"):
            idx = [i for i, s in enumerate(sites) if s.kind == sel and i not in replaced]
            if not idx:
                raise ParameterError(f"no {sel} site left to take the measured pKa {value:g}")
            pick = (min if sel == "acid" else max)(idx, key=lambda i: (sites[i].pka, -sites[i].atom))
            replace(pick, value)
        elif isinstance(sel, str):
            if sel not in group_index():
                raise ParameterError(f"unknown group '{sel}' (see saltplan/ionization/data/groups.yaml)")
            idx = [i for i, s in enumerate(sites) if s.group_id == sel and i not in replaced]
            if not idx:
                raise ParameterError(f"no site of group '{sel}' in this molecule")
            pick = min(idx, key=lambda i: (abs(sites[i].pka - value), sites[i].atom))
            replace(pick, value)
        elif sel is None:
            idx = [i for i, s in enumerate(sites) if i not in replaced]
            if not idx:
                raise ParameterError(f"no estimated site left for the measured pKa {value:g}")
            pick = min(idx, key=lambda i: (abs(sites[i].pka - value), sites[i].atom))
            replace(pick, value)
        else:
            raise ParameterError(f"measured pKa selector {sel!r} is not an atom index or group")
    return sites


def parse_measured(values: Sequence[str]) -> list[tuple[object, float]]:
    """Parse ``--pka`` options: ``9.1``, ``12=9.1``, ``base=9.1``, ``acid=4.2``,
    ``amine_tertiary=9.1``. Returns ``(selector, pKa)`` pairs for ``measured=``.

    Raises
    ------
    ParameterError
        ``--pka '<text>': <reason>``.
    """
    from .catalogue import group_index

    out: list[tuple[object, float]] = []
    for text in values or ():
        raw = str(text).strip()
        sel: object
        if "=" in raw:
            left, _, right = raw.partition("=")
            left = left.strip()
            if not left:
                raise ParameterError(f"--pka '{text}': nothing before '='")
            if left.lstrip("-").isdigit():
                sel = int(left)
                if sel < 0:
                    raise ParameterError(f"--pka '{text}': atom index must be >= 0")
            elif left in ("acid", "base") or left in group_index():
                sel = left
            else:
                raise ParameterError(f"--pka '{text}': '{left}' is not an atom index, 'acid', 'base' "
                                     "or a group id")
        else:
            sel, right = None, raw
        try:
            v = float(right)
        except ValueError:
            raise ParameterError(f"--pka '{text}': '{right.strip()}' is not a number") from None
        if not math.isfinite(v) or not PKA_MIN <= v <= PKA_MAX:
            raise ParameterError(f"--pka '{text}': pKa must be within {PKA_MIN:g} ... {PKA_MAX:g}")
        out.append((sel, v))
    return out
