"""The portfolio summary page of a batch (``summary.html``).

Rendered from a :class:`saltplan.batch.summary.BatchSummary` with the Jinja2 template
``saltplan/reports/templates/portfolio.html.j2`` (autoescaped). The histograms are inline
SVG drawn by matplotlib with fixed settings, so the same batch gives the same bytes. The
page loads nothing from the network.
"""
from __future__ import annotations

import base64
import functools
import hashlib
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


#: verdict colours (Okabe–Ito palette, distinguishable with common colour-vision deficiencies)
VERDICT_COLOURS = {"salt_candidates": "#0072b2", "weak_sites_only": "#e69f00",
                   "no_ionizable_site": "#999999", "permanent_charge": "#cc79a7",
                   "error": "#d55e00"}


def margin_plot_svg(compounds) -> str | None:
    """Scatter of most basic pKa against the ΔpKa margin of the best candidate, by verdict.

    The margin is the best feasible candidate's ΔpKa minus the rule's minimum for a likely
    salt (``thresholds.likely`` of the plan, 2 by default: common practice). Compounds with
    no basic site or no feasible candidate are not plotted (the table lists them).
    """
    from .charts import _figure, _svg

    points = [c for c in compounds
              if c.get("most_basic_pka") is not None and c.get("margin") is not None]
    if not points:
        return None
    fig = _figure(6.4, 3.6)
    ax = fig.subplots()
    for verdict in sorted({c["verdict"] or "unknown" for c in points}):
        mine = [c for c in points if (c["verdict"] or "unknown") == verdict]
        ax.scatter([c["margin"] for c in mine], [c["most_basic_pka"] for c in mine], s=22,
                   color=VERDICT_COLOURS.get(verdict, "#444444"), label=verdict.replace("_", " "))
    ax.axvline(0.0, color="#888888", linewidth=0.8, linestyle="--")
    ax.set_xlabel("ΔpKa margin of the best candidate over the minimum [pKa units]")
    ax.set_ylabel("most basic pKa (conjugate acid) [pKa units]")
    ax.legend(title="verdict", fontsize=8, title_fontsize=8, frameon=False)
    ax.spines[["top", "right"]].set_visible(False)
    return _svg(fig, "margin", "most basic pKa against the ΔpKa margin of the best candidate")


def _thumbnail(smiles: str | None) -> str | None:
    from ..errors import SaltplanError
    from .drawing import structure_svg

    if not smiles:
        return None
    try:
        return structure_svg(smiles, [], width=330, height=220)   # 220 px: the least height
    except SaltplanError:
        return None


#: sorts the compound table by a clicked column header and filters it by verdict; its
#: sha256 goes into the page's Content-Security-Policy, so no other script can run.
_TABLE_SCRIPT = """
(function () {
  var table = document.getElementById("sp-compounds");
  if (!table) { return; }
  var body = table.tBodies[0];
  var heads = table.tHead.rows[0].cells;
  Array.prototype.forEach.call(heads, function (th, col) {
    var button = th.querySelector("button");
    if (!button) { return; }
    button.addEventListener("click", function () {
      var up = th.getAttribute("aria-sort") !== "ascending";
      Array.prototype.forEach.call(heads, function (h) { h.removeAttribute("aria-sort"); });
      th.setAttribute("aria-sort", up ? "ascending" : "descending");
      var rows = Array.prototype.slice.call(body.rows);
      rows.sort(function (a, b) {
        var x = a.cells[col].getAttribute("data-key"), y = b.cells[col].getAttribute("data-key");
        var nx = parseFloat(x), ny = parseFloat(y), r;
        if (x === "" && y === "") { r = 0; } else if (x === "") { return 1; } else if (y === "") { return -1; }
        else if (!isNaN(nx) && !isNaN(ny)) { r = nx - ny; } else { r = x < y ? -1 : (x > y ? 1 : 0); }
        if (r === 0) { r = parseFloat(a.getAttribute("data-row")) - parseFloat(b.getAttribute("data-row")); return r; }
        return up ? r : -r;
      });
      rows.forEach(function (row) { body.appendChild(row); });
    });
  });
  var filter = document.getElementById("sp-verdict-filter");
  filter.addEventListener("change", function () {
    Array.prototype.forEach.call(body.rows, function (row) {
      row.hidden = filter.value !== "" && row.getAttribute("data-verdict") !== filter.value;
    });
  });
})();
"""


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
    margin = margin_plot_svg(summary.compounds)
    charts["margin"] = Markup(margin) if margin else None
    compounds = [{**c, "thumbnail": Markup(t) if (t := _thumbnail(c.get("smiles"))) else None}
                 for c in summary.compounds]
    digest = base64.b64encode(hashlib.sha256(_TABLE_SCRIPT.encode("utf-8")).digest()).decode()
    return _template().render(s=summary, planned=planned, charts=charts, widest=widest,
                              compounds=compounds, script=Markup(_TABLE_SCRIPT),
                              script_hash=f"sha256-{digest}", colours=VERDICT_COLOURS,
                              verdicts=sorted({c["verdict"] or "unknown" for c in compounds}),
                              counterions=summary.counterions[:25], version=__version__,
                              n_basic=sum(summary.basic_hist), n_acidic=sum(summary.acidic_hist))
