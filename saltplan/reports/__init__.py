"""Reports of a salt plan (and its screen design): HTML, Markdown and JSON.

Templates live in ``saltplan/reports/templates`` and are loaded with
:class:`jinja2.PackageLoader` (works from the wheel). HTML autoescaping is on; the Markdown
environment neutralizes every ``{{ }}`` output (see :mod:`saltplan.reports.markdown`);
both use :class:`jinja2.StrictUndefined`, so a missing key fails loudly instead of
rendering a blank. The HTML page is self-contained: inline CSS and SVG, no script, no
network request (a Content-Security-Policy meta tag forbids any).

Public functions take the ``to_dict()`` output of :class:`~saltplan.plan.Plan` and
:class:`~saltplan.screen.ScreenDesign` (or the objects themselves).
"""
from __future__ import annotations

import functools
import json
import math
from pathlib import Path
from typing import Any

__all__ = ["render_plan_html", "render_plan_fragment", "render_plan_body", "render_plan_markdown",
           "render_plan_json", "render_plan_docx", "render_plan_pdf", "write_plan_report",
           "repr_html", "html_environment", "markdown_environment", "FORMATS", "footer_text"]

REPORT_FILES = ("report.html", "report.md", "plan.json")
from .formats import DEFAULT_FORMATS, FORMATS, check_formats, footer_text  # noqa: E402


def _as_dict(obj: Any) -> Any:
    if obj is None or isinstance(obj, dict):
        return obj
    to_dict = getattr(obj, "to_dict", None)
    if callable(to_dict):
        return to_dict()
    raise TypeError(f"expected a dict or an object with to_dict(), got {type(obj).__name__}")


@functools.lru_cache(maxsize=1)
def html_environment():
    """The Jinja2 environment of the HTML templates (autoescape on, StrictUndefined).

    Other report templates (e.g. a decision record) can use it and reuse
    ``partials/style.css.j2`` and ``partials/macros.html.j2``.
    """
    import jinja2

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("saltplan.reports", "templates"),
        autoescape=jinja2.select_autoescape(enabled_extensions=("html", "html.j2", "j2"),
                                            default_for_string=True, default=True),
        undefined=jinja2.StrictUndefined, trim_blocks=False, lstrip_blocks=False,
        keep_trailing_newline=True)
    return env


@functools.lru_cache(maxsize=1)
def markdown_environment():
    """The Jinja2 environment of the Markdown templates (user text neutralized)."""
    import jinja2

    from .markdown import MdRaw, finalize, md_escape, raw

    env = jinja2.Environment(
        loader=jinja2.PackageLoader("saltplan.reports", "templates"),
        autoescape=False, undefined=jinja2.StrictUndefined, finalize=finalize,
        keep_trailing_newline=True)
    env.filters["raw"] = raw
    env.filters["mdcode"] = lambda s: MdRaw(str(s)) if "`" not in str(s) else md_escape(s)
    return env


def _context(plan: Any, screen: Any, graphics: bool = True) -> dict:
    from .context import build_context

    plan_d = _as_dict(plan)
    screen_d = _as_dict(screen)
    if plan_d is None and screen_d is not None:
        plan_d = screen_d["plan"]
    return build_context(plan_d, screen_d, graphics=graphics)


def _markdown(ctx: dict) -> str:
    text = markdown_environment().get_template("plan.md.j2").render(**ctx)
    out: list[str] = []
    for line in (line.rstrip() for line in text.splitlines()):
        if line or (out and out[-1]):        # at most one blank line in a row
            out.append(line)
    return "\n".join(out).strip() + "\n"


def render_plan_html(plan_dict: Any, screen_dict: Any = None) -> str:
    """The plan (and screen) as one self-contained HTML page.

    Parameters
    ----------
    plan_dict : dict or Plan
        ``Plan.to_dict()`` (or the Plan).
    screen_dict : dict or ScreenDesign, optional
        ``ScreenDesign.to_dict()``; adds the plate map, wells and dropped combinations.

    Raises
    ------
    KeyError
        (:class:`saltplan.reports.context.MissingKey`) naming a missing required key.
    """
    ctx = _context(plan_dict, screen_dict)
    return html_environment().get_template("plan.html.j2").render(**ctx)


def render_plan_fragment(plan_dict: Any, screen_dict: Any = None) -> str:
    """The report as an embeddable HTML fragment (scoped ``<style>`` + ``<div>``)."""
    ctx = _context(plan_dict, screen_dict)
    return html_environment().get_template("plan_fragment.html.j2").render(**ctx)


def render_plan_body(plan_dict: Any, screen_dict: Any = None) -> str:
    """The report body alone (the ``partials/plan_body`` partial, no page or style), for
    pages that supply their own stylesheet (the workbench)."""
    ctx = _context(plan_dict, screen_dict)
    return html_environment().get_template("partials/plan_body.html.j2").render(**ctx)


def render_plan_markdown(plan_dict: Any, screen_dict: Any = None) -> str:
    """The plan (and screen) as Markdown (GitHub-flavoured tables; charts only in HTML)."""
    return _markdown(_context(plan_dict, screen_dict, graphics=False))


def _check_finite(value: Any, path: str) -> None:
    if isinstance(value, float) and not math.isfinite(value):
        raise ValueError(f"plan JSON: non-finite number {value!r} at '{path}'")
    if isinstance(value, dict):
        for k, v in value.items():
            _check_finite(v, f"{path}.{k}")
    elif isinstance(value, (list, tuple)):
        for i, v in enumerate(value):
            _check_finite(v, f"{path}[{i}]")


def render_plan_json(plan_dict: Any, screen_dict: Any = None) -> str:
    """Deterministic JSON of the plan dict (indent 2, UTF-8 text, key order kept, no NaN).

    With ``screen_dict`` the result is ``{"plan": ..., "screen": ...}`` (the screen's own
    files are written by :mod:`saltplan.screen`).
    """
    data = _as_dict(plan_dict)
    if screen_dict is not None:
        data = {"plan": data, "screen": _as_dict(screen_dict)}
    _check_finite(data, "plan")
    return json.dumps(data, indent=2, ensure_ascii=False, allow_nan=False) + "\n"


def _docx(ctx: dict, html: str, paper: str) -> bytes:
    from .wordfile import html_to_docx, plan_images

    prov = ctx["plan"]["provenance"]
    return html_to_docx(html, images=plan_images(ctx), paper=paper,
                        title=f"Salt-form plan: {ctx['name']}", created=prov.get("created"),
                        footer=footer_text(prov))


def render_plan_docx(plan_dict: Any, screen_dict: Any = None, paper: str = "a4") -> bytes:
    """The plan (and screen) as a Word document (bytes): same sections as the HTML page,
    real heading styles, Word tables, the drawing and charts as captioned pictures."""
    ctx = _context(plan_dict, screen_dict)
    return _docx(ctx, html_environment().get_template("plan.html.j2").render(**ctx), paper)


def render_plan_pdf(plan_dict: Any, screen_dict: Any = None, paper: str = "a4") -> bytes:
    """The plan (and screen) as PDF for archiving, printed by headless Chromium
    (:mod:`saltplan.reports.pdf`); page numbers, version and hashes in the footer."""
    from .pdf import html_to_pdf

    ctx = _context(plan_dict, screen_dict)
    html = html_environment().get_template("plan.html.j2").render(**ctx)
    prov = ctx["plan"]["provenance"]
    return html_to_pdf(html, paper=paper, footer=footer_text(prov), created=prov.get("created"))


def write_plan_report(plan: Any, out_dir: str | Path, screen: Any = None,
                      formats: Any = None, paper: str = "a4") -> list[Path]:
    """Write the report (``report.html`` and ``report.md`` by default; ``report.docx``,
    ``report.pdf`` on request) and ``plan.json`` into ``out_dir``.

    Everything is rendered in memory first and written atomically
    (:class:`saltplan._io.OutputSet`): on any error no file is written.

    Parameters
    ----------
    formats : iterable of str, optional
        Any of :data:`FORMATS` (default html and md).
    paper : {"a4", "letter"}
        Page size of the Word and PDF files.

    Returns
    -------
    list of Path
        The written files: the reports in :data:`FORMATS` order, then ``plan.json``.
    """
    from .._io import OutputSet

    chosen = check_formats(formats)
    plan_d = _as_dict(plan)
    screen_d = _as_dict(screen)
    if plan_d is None and screen_d is not None:
        plan_d = screen_d["plan"]
    ctx = _context(plan_d, screen_d)
    html = html_environment().get_template("plan.html.j2").render(**ctx)
    out = OutputSet(out_dir)
    if "html" in chosen:
        out.add("report.html", html)
    if "md" in chosen:
        out.add("report.md", _markdown(ctx))
    if "docx" in chosen:
        out.add("report.docx", _docx(ctx, html, paper))
    if "pdf" in chosen:
        from .pdf import html_to_pdf

        prov = plan_d["provenance"]
        out.add("report.pdf", html_to_pdf(html, paper=paper, footer=footer_text(prov),
                                          created=prov.get("created")))
    out.add("plan.json", render_plan_json(plan_d))
    return out.commit()


def repr_html(obj: Any) -> str:
    """HTML for Jupyter's ``_repr_html_`` of a Plan, ScreenDesign or Selection.

    Plans and screen designs render the report fragment (scoped CSS, no ``<html>``). A
    Selection renders through ``saltplan.select_report.render_decision_html`` when that
    module is present, else as an escaped key/value table in the report style.

    Each class adds one method::

        def _repr_html_(self):
            from .reports import repr_html; return repr_html(self)
    """
    d = _as_dict(obj)
    if "verdict" in d and "candidates" in d:
        return render_plan_fragment(d)
    if "wells" in d and "plan" in d:
        return render_plan_fragment(d["plan"], d)
    try:
        from .decision import render_decision_html
    except ImportError:
        render_decision_html = None
    if render_decision_html is not None and hasattr(obj, "to_dict") and (
            "lead" in d or "groups" in d):
        return render_decision_html(obj)
    return _generic_fragment(d)


def _generic_fragment(d: dict) -> str:
    env = html_environment()
    template = env.from_string(
        '<style>{% include "partials/style.css.j2" %}</style>'
        '<div class="sp-report"><table><tbody>{% for k, v in rows %}<tr><th>{{ k }}</th>'
        '<td class="sp-mono">{{ v }}</td></tr>{% endfor %}</tbody></table></div>')
    rows = [(k, v if isinstance(v, str) else json.dumps(v, ensure_ascii=False))
            for k, v in d.items()]
    return template.render(rows=rows)
