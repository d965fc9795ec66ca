"""The decision record of a salt selection: HTML, Markdown and JSON.

Templates live in ``saltplan/reports/templates`` (``decision.*.j2``, Jinja2). The HTML is self-contained
(inline CSS, no script, no network request), autoescaped and print-friendly. In the
Markdown every ``{{ ... }}`` output is neutralized (:func:`md_escape`) so that user text
(compound names, form labels, notes) renders as typed, never as a link, HTML or markup.

:func:`write_decision_record` writes ``decision.html``, ``decision.md`` and
``selection.json`` through :class:`saltplan._io.OutputSet`: all three or none.
"""
from __future__ import annotations

import functools
import json
from pathlib import Path

from .._data import package_file
from .._io import OutputSet
from .markdown import MdRaw, md_escape  # one neutralizer for all Markdown output

TEMPLATES = ("reports", "templates")
FILES = ("decision.html", "decision.md", "selection.json")

# --------------------------------------------------------------------------- Markdown safety
def _md_finalize(value):
    if value is None:
        return MdRaw("")
    if isinstance(value, MdRaw):
        return value
    if isinstance(value, bool):
        return MdRaw("yes" if value else "no")
    if isinstance(value, (int, float)):
        return MdRaw(_num(value))
    return md_escape(value)


# --------------------------------------------------------------------------- filters
def _num(value, digits: int = 3) -> str:
    """Numbers as shown: up to ``digits`` significant decimals, no trailing zeros."""
    if value is None:
        return "–"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        text = f"{value:.{digits}f}".rstrip("0").rstrip(".")
        return "0" if text in ("-0", "") else text
    return str(value)


def _label(value) -> str:
    """Identifiers as words: ``not_measured`` → "not measured", ``non_hygroscopic`` →
    "non-hygroscopic"."""
    if value is None:
        return ""
    return str(value).replace("non_", "non-").replace("_", " ")


def _wells(values) -> str:
    return ", ".join(values or ()) or "–"


def _loader(name: str):
    node = package_file(*TEMPLATES, name)
    if not node.is_file():
        return None
    return node.read_text(encoding="utf-8")


@functools.lru_cache(maxsize=2)
def _env(kind: str):
    import jinja2

    options = dict(loader=jinja2.FunctionLoader(_loader), undefined=jinja2.StrictUndefined,
                   trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)
    if kind == "html":
        env = jinja2.Environment(autoescape=True, **options)
    else:
        env = jinja2.Environment(autoescape=False, finalize=_md_finalize, **options)
        env.filters["raw"] = lambda v: MdRaw("" if v is None else str(v))
    env.filters["num"] = _num if kind == "html" else (lambda v, digits=3: MdRaw(_num(v, digits)))
    env.filters["label"] = _label
    env.filters["wells"] = _wells
    return env


def _context(selection) -> dict:
    from ..select.results import OUTCOMES

    data = selection.to_dict()
    return {"s": data, "title": _title(data), "outcomes": OUTCOMES}


def _title(data: dict) -> str:
    name = (data.get("plan") or {}).get("name") or "unnamed compound"
    return f"Salt-form decision record: {name}"


# --------------------------------------------------------------------------- rendering
def render_decision_html(selection) -> str:
    """The decision record as one self-contained HTML page."""
    return _env("html").get_template("decision.html.j2").render(**_context(selection))


def render_decision_markdown(selection) -> str:
    """The decision record as Markdown (user text neutralized)."""
    return _env("md").get_template("decision.md.j2").render(**_context(selection))


def render_decision_json(selection) -> str:
    """``Selection.to_dict()`` as JSON (stable key order), newline-terminated."""
    return json.dumps(selection.to_dict(), indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def write_decision_record(selection, out_dir: str | Path) -> list[Path]:
    """Write decision.html, decision.md and selection.json into ``out_dir`` (all or none)."""
    out = OutputSet(out_dir)
    out.add("decision.html", render_decision_html(selection))
    out.add("decision.md", render_decision_markdown(selection))
    out.add("selection.json", render_decision_json(selection))
    return out.commit()


def select_and_record(design_dir, results, out_dir, thresholds=None, dose_mg=None):
    """Evaluate a results file against a design folder and write the decision record.

    Everything is read, validated and rendered before the first file is written, so a bad
    input leaves no output behind. Returns ``(Selection, [written paths])``.
    """
    from ..select.evaluate import evaluate_results, load_design

    design = load_design(design_dir)
    selection = evaluate_results(design, results, thresholds, dose_mg=dose_mg)
    return selection, write_decision_record(selection, out_dir)
