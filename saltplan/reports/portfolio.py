"""The portfolio summary page of a batch (``summary.html``).

Rendered from a :class:`saltplan.batch.summary.BatchSummary` with the Jinja2 template
``saltplan/reports/templates/portfolio.html.j2`` (autoescaped). The histograms are inline
SVG drawn by matplotlib with fixed settings, so the same batch gives the same bytes. The
page loads nothing from the network.
"""
from __future__ import annotations

import functools
import io
from typing import Any


# --------------------------------------------------------------------------- rendering
def histogram_svg(counts, title: str, color: str, bins: dict[str, Any]) -> str:
    """An SVG bar chart of binned pKa counts (deterministic bytes; no XML prologue).

    ``bins`` is the summary's ``{"low", "high", "width"}`` (``BatchSummary.to_dict()``).
    """
    from matplotlib import rc_context
    from matplotlib.figure import Figure

    BIN_LOW, BIN_HIGH, BIN_WIDTH = bins["low"], bins["high"], bins["width"]
    edges = [BIN_LOW + i * BIN_WIDTH for i in range(len(counts))]
    with rc_context({"svg.hashsalt": "saltplan", "svg.fonttype": "path",
                     "font.family": "DejaVu Sans", "font.size": 9}):
        fig = Figure(figsize=(4.6, 2.6), dpi=72)
        ax = fig.subplots()
        ax.bar(edges, list(counts), width=BIN_WIDTH * 0.92, align="edge", color=color)
        ax.set_xlim(BIN_LOW, BIN_HIGH)
        ax.set_xticks(list(range(int(BIN_LOW), int(BIN_HIGH) + 1, 2)))
        ax.set_xlabel("pKa (end bins include values beyond the axis)")
        ax.set_ylabel("compounds")
        ax.set_title(title)
        ax.spines[["top", "right"]].set_visible(False)
        fig.tight_layout()
        buf = io.StringIO()
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None,
                                                  "Format": None, "Type": None})
    text = buf.getvalue()
    return text[text.index("<svg"):]


@functools.lru_cache(maxsize=1)
def _template():
    from jinja2 import Environment, select_autoescape

    from .._data import package_file

    env = Environment(autoescape=select_autoescape(default=True, default_for_string=True),
                      trim_blocks=True, lstrip_blocks=True, keep_trailing_newline=True)
    text = package_file("reports", "templates", "portfolio.html.j2").read_text(encoding="utf-8")
    return env.from_string(text)


def render_summary(summary: Any) -> str:
    """The summary page as HTML text.

    ``summary`` is a :class:`saltplan.batch.summary.BatchSummary`, read through its
    attributes and ``to_dict()`` (reports do not import the batch step above them).
    """
    from markupsafe import Markup

    from .._version import __version__

    planned = summary.rows - summary.failed
    bins = summary.to_dict()["bins"]
    charts = {
        "basic": Markup(histogram_svg(summary.basic_hist, "Most basic pKa (conjugate acid)",
                                      "#3b6ea5", bins)),
        "acidic": Markup(histogram_svg(summary.acidic_hist, "Most acidic pKa", "#b5533c", bins)),
    }
    widest = max((n for _c, n, _f in summary.counterions), default=1)
    return _template().render(s=summary, planned=planned, charts=charts, widest=widest,
                              counterions=summary.counterions[:25], version=__version__,
                              n_basic=sum(summary.basic_hist), n_acidic=sum(summary.acidic_hist))
