"""Reading a screen design back for the select step: ``design.json`` and its shape.

The select step trusts nothing in ``design.json``: it was written by ``saltplan screen``
but may have been edited, truncated or replaced. Besides valid JSON (no ``NaN`` or
``Infinity``, which the JSON standard RFC 8259 does not allow) it checks the shape of the
parts the evaluation reads, so a damaged file is refused with a one-line message naming
the field instead of failing deep inside the evaluation.
"""
from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from ..errors import InputFileError

#: well fields read by the evaluation and the decision record, with their allowed types
_WELL_FIELDS = {"well": (str,), "kind": (str,), "counterion": (str, type(None)),
                "stoichiometry": (str, type(None)), "solvent": (str, type(None)),
                "mode": (str, type(None)), "antisolvent": (str, type(None)),
                "flags": (list,)}
#: plan fields read by the select step
_PLAN_FIELDS = {"name": (str, type(None)), "inputs": (dict,), "candidates": (list,),
                "excluded": (list,), "sites": (list,), "parent": (dict,), "verdict": (dict,),
                "cautions": (list,), "provenance": (dict,)}


_NUMBER = (int, float, type(None))
_TEXT = (str, type(None))
#: fields of each plan candidate (Candidate.to_dict) and site (Site.to_dict) that are read
_CANDIDATE_FIELDS = {"counterion": (str,), "stoichiometry": (str,), "category": _TEXT,
                     "counterion_name": _TEXT, "formula": _TEXT, "formula_display": _TEXT,
                     "delta_pka": _NUMBER, "probability": _NUMBER, "score": _NUMBER,
                     "drug_content": _NUMBER, "salt_mw": _NUMBER, "ph_max": _NUMBER,
                     "slurry_ph": _NUMBER, "rank": _NUMBER, "tier": _NUMBER,
                     "ph_max_basis": _TEXT, "reason": _TEXT, "caveats": (list,),
                     "transfers": (list,), "delta_pkas": (list,), "api_sites": (list,)}
_SITE_FIELDS = {"atom": (int,), "kind": (str,), "pka": (int, float), "uncertainty": _NUMBER,
                "group": _TEXT, "group_id": _TEXT, "provenance": _TEXT, "source": _TEXT}
_PARENT_FIELDS = {"smiles": (str,), "name": _TEXT, "formula": _TEXT, "mw": _NUMBER,
                  "supplied_as": _TEXT, "heavy_atoms": _NUMBER}


def _check_fields(item: Any, spec: dict, origin: str, where: str) -> None:
    if not isinstance(item, dict):
        raise InputFileError(f"expected a mapping, got {type(item).__name__}", file=origin,
                             field=where)
    for key, types in spec.items():
        if key not in item:
            continue
        value = item[key]
        if isinstance(value, bool) and bool not in types or not isinstance(value, types):
            raise InputFileError(f"expected {_type_names(types)}, got {type(value).__name__}",
                                 file=origin, field=f"{where}.{key}")


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not a JSON number")


def _type_names(types) -> str:
    names = {"str": "text", "dict": "mapping", "list": "list", "int": "a number",
             "float": "a number", "NoneType": "null"}
    return " or ".join(dict.fromkeys(names[t.__name__] for t in types))


def check_design_shape(data: Any, origin: str) -> dict[str, Any]:
    """Refuse a design dict whose wells or plan do not have the fields the evaluation reads.

    Raises
    ------
    InputFileError
        Naming ``origin`` and the field (``wells[3].well``, ``plan.candidates``).
    """
    if not isinstance(data, dict):
        raise InputFileError(f"expected a screen design (a JSON object), got "
                             f"{type(data).__name__}", file=origin)
    wells = data.get("wells")
    if not isinstance(wells, list) or not wells:
        raise InputFileError("design has no 'wells' list (write it with `saltplan screen`)",
                             file=origin, field="wells")
    for i, well in enumerate(wells):
        if not isinstance(well, dict):
            raise InputFileError(f"well {i + 1} is not a mapping", file=origin, field=f"wells[{i}]")
        for key, types in _WELL_FIELDS.items():
            if key in well and not isinstance(well[key], types):
                raise InputFileError(f"expected {_type_names(types)}, got "
                                     f"{type(well[key]).__name__}", file=origin,
                                     field=f"wells[{i}].{key}")
        if "well" not in well:
            raise InputFileError("well without an id", file=origin, field=f"wells[{i}].well")
    plan = data.get("plan")
    if plan is None:
        return data
    if not isinstance(plan, dict):
        raise InputFileError(f"expected a mapping, got {type(plan).__name__}", file=origin,
                             field="plan")
    for key, types in _PLAN_FIELDS.items():
        if key in plan and plan[key] is not None and not isinstance(plan[key], types):
            raise InputFileError(f"expected {_type_names(types)}, got {type(plan[key]).__name__}",
                                 file=origin, field=f"plan.{key}")
    for key in ("candidates", "excluded"):
        for i, cand in enumerate(plan.get(key) or []):
            _check_fields(cand, _CANDIDATE_FIELDS, origin, f"plan.{key}[{i}]")
    for i, site in enumerate(plan.get("sites") or []):
        _check_fields(site, _SITE_FIELDS, origin, f"plan.sites[{i}]")
    if plan.get("parent") is not None:
        _check_fields(plan["parent"], _PARENT_FIELDS, origin, "plan.parent")
    dose = (plan.get("inputs") or {}).get("dose_mg")
    if dose is not None and (isinstance(dose, bool) or not isinstance(dose, (int, float))
                             or not math.isfinite(dose) or dose <= 0):
        raise InputFileError(f"dose must be a number above 0 mg, got {dose!r}", file=origin,
                             field="plan.inputs.dose_mg")
    return data


def load_design(design_dir: str | Path) -> dict[str, Any]:
    """Read ``DESIGN_DIR/design.json`` (or a design.json path) written by the screen step."""
    path = Path(design_dir)
    if path.is_dir():
        path = path / "design.json"
    if not path.exists():
        raise InputFileError("design.json not found (write it with `saltplan screen`)",
                             file=str(path))
    if path.is_dir():
        raise InputFileError("is a directory, expected design.json", file=str(path))
    try:
        data = json.loads(path.read_text(encoding="utf-8-sig"), parse_constant=_refuse_constant)
    except UnicodeDecodeError as exc:
        raise InputFileError(f"not UTF-8 text (byte {exc.start}); not a design.json",
                             file=str(path)) from None
    except json.JSONDecodeError as exc:
        raise InputFileError(f"not a readable design.json ({exc})", file=str(path)) from None
    except ValueError as exc:
        raise InputFileError(f"not a readable design.json ({exc})", file=str(path)) from None
    except RecursionError:
        raise InputFileError("not a readable design.json (nested too deeply)",
                             file=str(path)) from None
    return check_design_shape(data, str(path))
