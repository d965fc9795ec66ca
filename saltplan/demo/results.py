"""An INVENTED results file for a screen design, for the demo only.

:func:`make_demo_results` fills a design's results template with plausible but invented
observations so that ``saltplan demo`` can show the whole loop (plan → screen → results →
decision record). The file starts with the line
``# INVENTED DATA for the saltplan demo — not measurements``; ``saltplan select`` reads that
marker and labels the decision record as invented.

The values are deterministic: each is drawn from a SHA-256 of the well's design (counterion,
stoichiometry, solvent, mode), never from a random state, so the same design gives the same
bytes. The draws follow common-practice expectations loosely (a larger ΔpKa crystallizes
more often; slurries more than evaporations; a solid form keeps its properties from well to
well; DVS and solubility only on one well per form), but they are not a model of anything.
"""
from __future__ import annotations

import hashlib
import io

from ..select.results import COLUMNS, INVENTED_MARKER

HEADER_LINE = f"# {INVENTED_MARKER} for the saltplan demo — not measurements"
_NOTES = ("needles", "plates", "prisms", "fine powder, birefringent under polarized light",
          "agglomerated laths")


def _u(*parts) -> float:
    """Deterministic uniform number in [0, 1) from the text of ``parts``."""
    digest = hashlib.sha256("|".join(str(p) for p in parts).encode("utf-8")).digest()
    return int.from_bytes(digest[:8], "big") / 2.0 ** 64


def _api_is_base(plan: dict) -> bool:
    kinds = [s.get("kind") for s in plan.get("sites") or []]
    return "acid" not in kinds or "base" in kinds


def _form(counterion: str, label: str, base: bool) -> dict:
    """Invented properties of one solid form (the same in every well that shows it)."""
    hydrate = label == "B" and _u("hydrate", counterion) < 0.6
    low, span = (80.0, 70.0) if label == "FF-I" else (105.0, 150.0)  # free form melts lower
    return {
        "melting_onset_c": low + span * _u("mp", counterion, label),
        "weight_gain_80rh_pct": 0.05 * 10 ** (2.0 * _u("dvs", counterion, label)),
        "solubility_mg_ml": 0.3 * 10 ** (2.2 * _u("sol", counterion, label)),
        "saturated_ph": (2.5 + 3.0 * _u("ph", counterion, label)) if base
        else (7.5 + 2.5 * _u("ph", counterion, label)),
        "solvent_content_pct": (3.0 + 3.0 * _u("tga", counterion, label)) if hydrate
        else 0.1 + 0.5 * _u("tga", counterion, label),
    }


def make_demo_results(design) -> str:
    """Invented results CSV text for ``design`` (a ScreenDesign or its dict).

    Returns
    -------
    str
        CSV text with the results-template columns, headed by the INVENTED DATA line.
    """
    d = design.to_dict() if hasattr(design, "to_dict") else design
    plan = d.get("plan") or {}
    base = _api_is_base(plan)
    dpka = {(c.get("counterion"), c.get("stoichiometry")): c.get("delta_pka")
            for c in plan.get("candidates") or []}
    buf = io.StringIO()
    buf.write(HEADER_LINE + "\n")
    buf.write("# Invented by saltplan.demo_results.make_demo_results from the design; every value "
              "is invented.\n")
    from .._io import SafeCsvWriter

    writer = SafeCsvWriter(buf, lineterminator="\n")
    writer.writerow(COLUMNS)
    characterized: set[tuple[str, str]] = set()
    for w in d["wells"]:
        ci, st, sv, mode = w.get("counterion"), w.get("stoichiometry"), w["solvent"], w["mode"]
        key = (ci or "control", st or "", sv, mode)
        row = {"well": w["well"], "counterion": ci or "", "stoichiometry": st or "",
               "solvent": sv, "mode": mode}
        if _u("blank", *key) < 0.04:  # a few wells left unreported, as in real plates
            writer.writerow([row.get(c, "") for c in COLUMNS])
            continue
        p = 0.35 if ci is None else 0.25 + 0.06 * min(max(dpka.get((ci, st)) or 3.0, 0.0), 9.0)
        p += {"slurry": 0.1, "cooling": 0.0, "antisolvent": 0.0, "evaporation": -0.15}.get(mode, 0.0)
        if _u("cryst", *key) < p:
            row["outcome"] = "crystalline"
            if ci is None or (dpka.get((ci, st)) or 9.0) < 3.0 and _u("ff", *key) < 0.5:
                label = "FF-I"  # the free form (no salt formed)
            else:
                label = "A" if _u("form", *key) < 0.75 else "B"
            row["form_label"] = label
            props = _form(ci or "free form", label, base)
            noise = (_u("noise", *key) - 0.5) * 2.0
            row["melting_onset_c"] = f"{props['melting_onset_c'] + noise:.1f}"
            if ci is not None and label != "FF-I":
                row["solvent_content_pct"] = f"{props['solvent_content_pct']:.2f}"
                if _u("nmr", *key) < 0.85:
                    # a form keeps its stoichiometry: now and then a 2:1 design gives a 1:1 form
                    off = st == "2:1" and _u("off", ci, label) < 0.3
                    row["stoichiometry_found"] = "1:1" if off else st
                if (ci, label) not in characterized:  # DVS and solubility on one well per form
                    characterized.add((ci, label))
                    row["weight_gain_80rh_pct"] = f"{props['weight_gain_80rh_pct']:.2f}"
                    row["solubility_mg_ml"] = f"{props['solubility_mg_ml']:.3g}"
                    row["saturated_ph"] = f"{props['saturated_ph']:.1f}"
            row["notes"] = _NOTES[int(_u("habit", *key) * len(_NOTES))]
        else:
            draw = _u("other", *key)
            if mode == "evaporation":
                row["outcome"] = "amorphous" if draw < 0.5 else "oil" if draw < 0.8 else "gel"
            else:
                row["outcome"] = "clear_solution" if draw < 0.5 else "amorphous" if draw < 0.8 else "oil"
        writer.writerow([row.get(c, "") for c in COLUMNS])
    return buf.getvalue()
