"""SVG charts of the reports, drawn with matplotlib (Agg/SVG backend, no pyplot state).

Every chart is returned as an SVG fragment ready to inline in HTML: no XML declaration, no
comments, element ids prefixed so several charts can share one page, text drawn as paths
(``svg.fonttype = "path"``, DejaVu Sans shipped with matplotlib) so a chart looks the same
in every browser and on every machine. Bytes are stable: ``svg.hashsalt`` is fixed and the
``Date`` metadata is dropped.

Colours: the Okabe–Ito palette (M. Okabe, K. Ito, *Color Universal Design*, 2008), chosen
because it stays distinguishable with the common colour-vision deficiencies; every colour
is also paired with a text label or a line style, so colour is never the only cue.
"""
from __future__ import annotations

import contextvars
import io
import math
import re
import threading
from html import escape
from typing import Iterable, Sequence

# Okabe–Ito (2008), in the order used for series
PALETTE = ("#0072B2", "#D55E00", "#009E73", "#CC79A7", "#E69F00", "#56B4E9", "#F0E442",
           "#000000")
LINESTYLES = ("-", "--", "-.", ":")

#: light fills for the ΔpKa category bands, weakest (left) to strongest (right); a grey ramp
#: plus the band name printed inside the band, readable in greyscale print
BAND_FILLS = ("#f2f2f2", "#e0e0e0", "#cfdff0", "#b3cde6")
BAND_LABELS = {"unlikely": "unlikely", "uncertain": "uncertain", "likely": "likely",
               "salt_expected": "salt expected"}

_RC = {
    "svg.fonttype": "path",
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.titlesize": 10.0,
    "axes.labelsize": 9.0,
    "text.parse_math": False,       # user-supplied labels must never be read as mathtext
    "text.usetex": False,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "svg.image_inline": True,
    "path.simplify": True,
}

_CACHE: dict[str, str] = {}
_CACHE_MAX = 64
_CACHE_LOCK = threading.Lock()


def cached(fn):
    """Memoize an SVG function on the JSON of its arguments (the output is deterministic).

    Rendering the same plan as page, fragment and Markdown draws each chart once.
    :func:`clear_cache` empties it (tests that compare two fresh renders use it).
    """
    import functools
    import json

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        key = (fn.__qualname__ + ("/png" if _PNG.get() else "")
               + json.dumps([args, kwargs], sort_keys=True, default=str))
        with _CACHE_LOCK:
            hit = _CACHE.get(key)
        if hit is None:
            hit = fn(*args, **kwargs)
            with _CACHE_LOCK:
                while len(_CACHE) >= _CACHE_MAX:
                    _CACHE.pop(next(iter(_CACHE)))
                _CACHE[key] = hit
        return hit

    return wrapper


def clear_cache() -> None:
    """Forget every memoized chart and drawing."""
    with _CACHE_LOCK:
        _CACHE.clear()


_ID_RE = re.compile(r'\bid="([^"]+)"')
_REF_RE = re.compile(r'(\bid="|"#|url\(#)([^")]+)')
_HASHED_ID_RE = re.compile(r"^([a-zA-Z]{1,2})[0-9a-f]{10}$")


def _figure(width_in: float, height_in: float):
    from matplotlib.figure import Figure

    return Figure(figsize=(width_in, height_in), dpi=72, layout="constrained")


_PNG: contextvars.ContextVar[bool] = contextvars.ContextVar("saltplan_chart_png", default=False)
PNG_DPI = 200


def as_png(fn, *args, **kwargs) -> bytes:
    """The PNG (``PNG_DPI``, deterministic bytes) of a chart function's figure, for the
    Word report, which cannot hold SVG: ``as_png(delta_pka_chart, rows, bands, 2.0)``."""
    import base64

    token = _PNG.set(True)
    try:
        text = fn(*args, **kwargs)
    finally:
        _PNG.reset(token)
    return base64.b64decode(text.split(",", 1)[1])


def _svg(fig, name: str, label: str) -> str:
    """Serialize a Figure to an inline-ready SVG fragment (deterministic bytes).

    Under :func:`as_png` the figure is rasterized instead ("data:image/png;base64,...").
    """
    import matplotlib
    from matplotlib.backends.backend_svg import FigureCanvasSVG

    if _PNG.get():
        import base64

        from matplotlib.backends.backend_agg import FigureCanvasAgg

        FigureCanvasAgg(fig)
        raw = io.BytesIO()
        with matplotlib.rc_context(_RC):
            fig.savefig(raw, format="png", dpi=PNG_DPI, metadata={"Software": None})
        return "data:image/png;base64," + base64.b64encode(raw.getvalue()).decode("ascii")

    FigureCanvasSVG(fig)
    buf = io.StringIO()
    with matplotlib.rc_context({**_RC, "svg.hashsalt": f"saltplan-{name}"}):
        fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": None,
                                                  "Format": None, "Type": None})
    return _inline(buf.getvalue(), name, label)


def _inline(svg: str, prefix: str, label: str) -> str:
    """Strip prolog and comments, prefix ids, add an accessible label."""
    start = svg.find("<svg")
    svg = svg[start:]
    svg = re.sub(r"<!--.*?-->", "", svg, flags=re.S)
    svg = re.sub(r"<metadata>.*?</metadata>", "", svg, flags=re.S)
    # matplotlib names clip paths and markers by a hash of their float coordinates, which can
    # differ in the last digit between machines; ids are renamed by order of first appearance
    # so the bytes depend on the drawing only.
    ids: dict[str, str] = {}
    for found in _ID_RE.findall(svg):
        hashed = _HASHED_ID_RE.match(found)
        ids.setdefault(found, f"{hashed.group(1)}{len(ids) + 1}" if hashed else found)

    def _prefixed(m: re.Match) -> str:
        name = ids.get(m.group(2))
        return f"{m.group(1)}{prefix}-{name}" if name is not None else m.group(0)

    svg = _REF_RE.sub(_prefixed, svg)
    svg = svg.replace("<svg ", f'<svg role="img" aria-label="{escape(label, quote=True)}" '
                      f'class="sp-chart" ', 1)
    svg = re.sub(r">\s+<", ">\n<", svg).strip()
    return svg + "\n"


def _rc():
    import matplotlib

    return matplotlib.rc_context(_RC)


# --------------------------------------------------------------------------- ΔpKa bands
@cached
def delta_pka_chart(rows: Sequence[dict], bands: Sequence[dict], minimum: float | None,
                    name: str = "dpka") -> str:
    """Horizontal bars of ΔpKa per counterion over the category bands.

    Parameters
    ----------
    rows : sequence of dict
        ``label`` (str), ``delta_pka`` [pKa units], ``uncertainty`` [pKa units] or None,
        ``shortlisted`` (bool; excluded counterions are drawn hollow).
    bands : sequence of dict
        ``code``, ``lo``, ``hi`` (None = open end) [pKa units], left to right.
    minimum : float or None
        The feasibility threshold, drawn as a solid vertical line.
    """
    with _rc():
        n = max(len(rows), 1)
        fig = _figure(7.2, 0.9 + 0.28 * n)
        ax = fig.add_subplot()
        values = [float(r["delta_pka"]) for r in rows] or [0.0]
        errs = [float(r.get("uncertainty") or 0.0) for r in rows] or [0.0]
        edges = [b["lo"] for b in bands if b["lo"] is not None] + \
                [b["hi"] for b in bands if b["hi"] is not None]
        lo = min(min(v - e for v, e in zip(values, errs)), min(edges, default=0.0), 0.0) - 1.0
        hi = max(max(v + e for v, e in zip(values, errs)), max(edges, default=0.0)) + 1.0
        lo, hi = math.floor(lo), math.ceil(hi)
        for i, band in enumerate(bands):
            b_lo = lo if band["lo"] is None else band["lo"]
            b_hi = hi if band["hi"] is None else band["hi"]
            ax.axvspan(b_lo, b_hi, color=BAND_FILLS[i % len(BAND_FILLS)], zorder=0, lw=0)
            ax.text((b_lo + b_hi) / 2, 1.0, BAND_LABELS.get(band["code"], band["code"]),
                    transform=ax.get_xaxis_transform(), ha="center", va="bottom",
                    fontsize=8, color="#333333")
        ys = list(range(len(rows)))
        short = [bool(r.get("shortlisted", True)) for r in rows]
        for keep, fill, hatch in ((True, PALETTE[0], None), (False, "white", "////")):
            idx = [i for i in ys if short[i] == keep]
            if idx:
                ax.barh(idx, [values[i] for i in idx], height=0.6, color=fill,
                        edgecolor=PALETTE[0], hatch=hatch, lw=0.8, zorder=2)
        idx = [i for i in ys if errs[i]]
        if idx:
            ax.errorbar([values[i] for i in idx], idx, xerr=[errs[i] for i in idx], fmt="none",
                        ecolor="#000000", elinewidth=0.8, capsize=2, zorder=3)
        if minimum is not None:
            ax.axvline(minimum, color="#000000", lw=1.2, zorder=4)
            ax.text(minimum, -0.9 if rows else 0, f" minimum {minimum:g}", fontsize=7.5,
                    va="center", ha="left", zorder=4)
        ax.axvline(0, color="#666666", lw=0.6, zorder=1)
        ax.set_yticks(ys, [_label(r["label"]) for r in rows])
        ax.set_ylim(len(rows) - 0.5, -1.3)
        ax.set_xlim(lo, hi)
        ax.set_xlabel("ΔpKa = pKa(protonated base) − pKa(acid)  [pKa units]")
        ax.tick_params(axis="y", length=0)
        return _svg(fig, name, "ΔpKa per counterion against the category bands")


def _label(text: str, limit: int = 40) -> str:
    text = " ".join(str(text).split())
    return text if len(text) <= limit else text[: limit - 1] + "…"


# --------------------------------------------------------------------------- ionization
def fraction_ionized(kind: str, pka: float, ph: float) -> float:
    """Henderson–Hasselbalch fraction ionized of one site at a pH.

    .. math:: f_{base} = 1 / (1 + 10^{pH - pK_a}),\\quad f_{acid} = 1 / (1 + 10^{pK_a - pH})

    Base pKa is the pKa of the conjugate acid BH⁺.
    """
    x = (ph - pka) if kind == "base" else (pka - ph)
    if x > 300:
        return 0.0
    return 1.0 / (1.0 + 10.0 ** x)


@cached
def ionization_chart(sites: Sequence[dict], name: str = "ionized") -> str:
    """Fraction ionized against pH (0–14) for each site, with its pKa marked.

    ``sites``: dicts with ``kind`` ("acid"/"base"), ``pka``, ``label``.
    """
    with _rc():
        fig = _figure(7.2, 3.0)
        ax = fig.add_subplot()
        grid = [i / 20 for i in range(0, 281)]
        for i, site in enumerate(sites):
            colour = PALETTE[i % len(PALETTE)]
            style = LINESTYLES[i % len(LINESTYLES)]
            ys = [100.0 * fraction_ionized(site["kind"], float(site["pka"]), ph) for ph in grid]
            ax.plot(grid, ys, color=colour, ls=style, lw=1.6, label=_label(site["label"], 60))
            ax.axvline(float(site["pka"]), color=colour, ls=":", lw=0.8)
        for ph, text in ((1.2, "pH 1.2"), (6.8, "pH 6.8")):
            ax.axvline(ph, color="#999999", lw=0.5, zorder=0)
            ax.text(ph, 101, text, fontsize=7, color="#555555", ha="center", va="bottom")
        ax.set_xlim(0, 14)
        ax.set_ylim(0, 100)
        ax.set_xticks(range(0, 15))
        ax.set_xlabel("pH")
        ax.set_ylabel("site ionized  [%]")
        if sites:
            ax.legend(loc="center right", fontsize=7.5, frameon=False)
        return _svg(fig, name, "Fraction ionized against pH per site (Henderson–Hasselbalch)")


# --------------------------------------------------------------------------- solubility
@cached
def solubility_chart(points: Sequence[tuple[float, float]], ph_max: float | None,
                     s0: float | None, unit: str, name: str = "solubility",
                     free: Sequence[tuple[float, float]] = ()) -> str:
    """pH–solubility profile on a log axis, with pHmax and the intrinsic solubility S₀.

    ``points``: (pH, solubility) pairs in ``unit`` (e.g. "mg/mL") with the salt plateau;
    ``free``: the free-form curve without it. Non-positive values are skipped (log axis).
    """
    with _rc():
        fig = _figure(7.2, 3.0)
        ax = fig.add_subplot()
        pts = [(float(p), float(s)) for p, s in points if s is not None and float(s) > 0]
        if pts:
            ax.plot([p for p, _ in pts], [s for _, s in pts], color=PALETTE[0], lw=1.8,
                    label="with the salt plateau (estimate)")
        fpts = [(float(p), float(s)) for p, s in free if s is not None and float(s) > 0]
        if fpts:
            ax.plot([p for p, _ in fpts], [s for _, s in fpts], color=PALETTE[3], lw=1.0,
                    ls=":", label="free form only (no salt limit)")
        if s0 is not None and s0 > 0:
            ax.axhline(s0, color=PALETTE[1], ls="--", lw=1.0, label=f"S₀ (free form) {s0:.3g} {unit}")
        if ph_max is not None:
            ax.axvline(ph_max, color=PALETTE[2], ls="-.", lw=1.0, label=f"pHmax {ph_max:.2f}")
        from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

        ax.set_yscale("log")
        ys = [s for _, s in pts] + ([s0] if s0 else [])
        if ys:
            ax.set_ylim(min(ys) / 3.0, max(ys) * 10.0)   # the free-form curve may leave the top
        ax.yaxis.set_major_locator(LogLocator(base=10))
        ax.yaxis.set_major_formatter(FuncFormatter(_plain_number))
        ax.yaxis.set_minor_formatter(NullFormatter())
        ax.set_xlim(0, 14)
        ax.set_xticks(range(0, 15))
        ax.set_xlabel("pH")
        ax.set_ylabel(f"solubility  [{unit}]")
        ax.legend(loc="best", fontsize=7.5, frameon=False)
        return _svg(fig, name, "pH–solubility profile")


def _plain_number(value: float, _pos=None) -> str:
    """Tick label without mathtext (parse_math is off): 0.001, 0.1, 10, 1e+04 ..."""
    return f"{value:g}"


# --------------------------------------------------------------------------- score bar
def score_bar(parts: Iterable[tuple[str, float]], scale: float, width: int = 120,
              height: int = 10) -> str:
    """A tiny stacked bar of a score breakdown (hand-written SVG, no matplotlib).

    Positive parts stack left to right in palette order; negative parts (penalties) are
    drawn hatched-grey below the bar. ``scale`` is the score mapped to the full width.
    """
    parts = list(parts)
    scale = scale if scale and scale > 0 else 1.0
    out = [f'<svg class="sp-bar" role="img" aria-label="score breakdown" width="{width}" '
           f'height="{height + 4}" viewBox="0 0 {width} {height + 4}" '
           f'xmlns="http://www.w3.org/2000/svg">',
           f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff" '
           f'stroke="#999999" stroke-width="0.5"/>']
    x = 0.0
    neg = 0.0
    for i, (key, value) in enumerate(parts):
        if value > 0:
            w = min(width - x, width * value / scale)
            out.append(f'<rect x="{x:.2f}" y="0" width="{w:.2f}" height="{height}" '
                       f'fill="{PALETTE[i % len(PALETTE)]}"><title>{escape(key)} '
                       f'{value:+.3f}</title></rect>')
            x += w
        elif value < 0:
            neg += -value
    if neg:
        w = min(width, width * neg / scale)
        out.append(f'<rect x="0" y="{height + 1}" width="{w:.2f}" height="3" '
                   f'fill="#555555"><title>penalties {-neg:+.3f}</title></rect>')
    out.append("</svg>")
    return "".join(out)


def part_colour(index: int) -> str:
    """Colour of the ``index``-th breakdown part in :func:`score_bar` (legend swatches)."""
    return PALETTE[index % len(PALETTE)]
