"""Word (.docx) output of the reports, written with python-docx.

The Word file is made from the report's own HTML, so it has the same sections in the same
order as the page: ``<h1>`` becomes the document title, ``<h2>``/``<h3>``/``<h4>`` the
built-in styles Heading 1/2/3 (a company template maps its own styles onto those), each
``<table>`` a Word table whose first row is marked as a header row (repeated on every page),
each ``<figure>`` a picture (PNG, since Word cannot hold SVG) with a caption in the Caption
style, ``<ol>`` a numbered and ``<ul>`` a bulleted list. Text is only ever added as text
runs (python-docx escapes it), so user-supplied names stay text.

Bytes are deterministic: the document properties take the report's creation time and the
zip entries a fixed date, so the same plan gives the same file.
"""
from __future__ import annotations

import datetime as _dt
import io
import zipfile
from html.parser import HTMLParser
from typing import Any

__all__ = ["html_to_docx", "PAPER"]

#: page sizes [mm] (ISO 216 A4; US Letter 8.5 × 11 in)
PAPER = {"a4": (210.0, 297.0), "letter": (215.9, 279.4)}

_SKIP = {"style", "script", "head", "title", "svg", "colgroup"}
_BLOCK_TEXT = {"p", "li", "figcaption", "h1", "h2", "h3", "h4", "pre", "dt", "dd"}
_HEADINGS = {"h1": 0, "h2": 1, "h3": 2, "h4": 3}


class _Cell:
    def __init__(self, header: bool, rowspan: int, colspan: int):
        self.header = header
        self.rowspan = max(1, rowspan)
        self.colspan = max(1, colspan)
        self.runs: list[tuple[str, dict]] = []


class _Converter(HTMLParser):
    """Walks the report HTML and builds the python-docx document."""

    def __init__(self, doc, images: dict[str, bytes], width_mm: float):
        super().__init__(convert_charrefs=True)
        self.doc = doc
        self.images = images
        self.width_mm = width_mm
        self.skip = 0
        self.fmt: list[dict] = []          # inline formatting stack (bold, mono, ...)
        self.tags: list[str] = []          # open inline tags, to pop the right format
        self.runs: list[tuple[str, dict]] = []
        self.block: str | None = None
        self.lists: list[str] = []
        self.table: list[list[_Cell]] | None = None
        self.cell: _Cell | None = None
        self.figure: dict | None = None
        self.n_figures = 0

    # ------------------------------------------------------------------ helpers
    def _style(self) -> dict:
        out: dict = {}
        for f in self.fmt:
            out.update(f)
        return out

    def _text(self, text: str) -> None:
        if not text:
            return
        target = self.cell.runs if self.cell is not None else self.runs
        target.append((text, self._style()))

    def _flush(self, kind: str | None) -> None:
        runs = _tidy(self.runs)
        self.runs = []
        if not runs:
            return
        if kind in _HEADINGS:
            self.doc.add_heading("".join(t for t, _ in runs), level=_HEADINGS[kind])
            return
        style = None
        if kind == "li":
            style = "List Number" if self.lists and self.lists[-1] == "ol" else "List Bullet"
        elif kind == "figcaption":
            style = "Caption"
        para = self.doc.add_paragraph(style=style)
        if kind == "figcaption" and self.figure is not None:
            para.add_run(f"Figure {self.n_figures}. ").bold = True
        _add_runs(para, runs)

    # ------------------------------------------------------------------ parser events
    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if self.skip or tag in _SKIP:
            if tag in _SKIP:
                self.skip += 1
            return
        cls = (a.get("class") or "").split()
        if tag in _BLOCK_TEXT and self.table is None:
            self._flush(self.block)
            self.block = tag
        elif tag in ("ul", "ol"):
            self._flush(self.block)
            self.block = None
            self.lists.append(tag)
        elif tag == "div" and "sp-card" in cls:
            self._flush(self.block)
            self.block = "p"
        elif tag == "table":
            self._flush(self.block)
            self.block = None
            self.table = []
        elif tag == "tr" and self.table is not None:
            self.table.append([])
        elif tag in ("td", "th") and self.table is not None:
            if not self.table:
                self.table.append([])
            self.cell = _Cell(tag == "th", int(a.get("rowspan") or 1), int(a.get("colspan") or 1))
            self.table[-1].append(self.cell)
        elif tag == "figure":
            self._flush(self.block)
            self.block = None
            self.n_figures += 1
            self.figure = {"id": a.get("id") or ""}
            self._picture(self.figure["id"])
        elif tag == "br":
            self._text("\n")
        elif tag in ("strong", "b", "em", "i", "code", "span", "a", "sup", "sub"):
            style: dict = {}
            if tag in ("strong", "b"):
                style["bold"] = True
            if tag in ("em", "i"):
                style["italic"] = True
            if tag == "code" or "sp-mono" in cls:
                style["mono"] = True
            if tag == "sup":
                style["sup"] = True
            if tag == "sub":
                style["sub"] = True
            if "sp-sev" in cls:
                style["bold"] = True
                style["suffix"] = ": "
            if "sp-tag" in cls:
                style["bold"] = True
            self.fmt.append(style)
            self.tags.append(tag)

    def handle_startendtag(self, tag, attrs):
        if tag == "br" and not self.skip:
            self._text("\n")

    def handle_endtag(self, tag):
        if self.skip:
            if tag in _SKIP:
                self.skip -= 1
            return
        if tag in self.tags:
            while self.tags:
                t = self.tags.pop()
                style = self.fmt.pop()
                if style.get("suffix"):
                    self._text(style["suffix"])
                if t == tag:
                    break
            return
        if tag in _BLOCK_TEXT and self.table is None:
            self._flush(tag)
            self.block = None
        elif tag == "div" and self.block == "p" and self.table is None:
            self._flush("p")
            self.block = None
        elif tag in ("ul", "ol"):
            self._flush(self.block)
            self.block = None
            if self.lists:
                self.lists.pop()
        elif tag in ("td", "th"):
            self.cell = None
        elif tag == "table" and self.table is not None:
            rows = [r for r in self.table if r]
            self.table = None
            if rows:
                _add_table(self.doc, rows)
        elif tag == "figure":
            self._flush(self.block)
            self.block = None
            self.figure = None
        elif tag == "section":
            self._flush(self.block)
            self.block = None

    def handle_data(self, data):
        if self.skip:
            return
        if self.table is not None and self.cell is None:
            return
        self._text(data)

    def close(self):
        super().close()
        self._flush(self.block)

    def _picture(self, fig_id: str) -> None:
        from docx.shared import Mm

        png = self.images.get(fig_id)
        if png is None:
            return
        self.doc.add_picture(io.BytesIO(png), width=Mm(min(160.0, self.width_mm)))


def _tidy(runs: list[tuple[str, dict]]) -> list[tuple[str, dict]]:
    """Collapse HTML whitespace inside runs (line breaks from <br> kept), trim the ends."""
    out: list[tuple[str, dict]] = []
    for text, style in runs:
        parts = text.split("\n")
        text = "\n".join(" ".join(p.split()) + (" " if p[-1:].isspace() else "")
                         if p else "" for p in parts)
        if parts and parts[0][:1].isspace():
            text = " " + text.lstrip(" ")
        if text:
            out.append((text, style))
    while out and not out[0][0].strip():
        out.pop(0)
    while out and not out[-1][0].strip():
        out.pop()
    if out:
        out[0] = (out[0][0].lstrip(), out[0][1])
        out[-1] = (out[-1][0].rstrip(), out[-1][1])
    merged: list[tuple[str, dict]] = []
    for text, style in out:
        if merged and merged[-1][1] == style:
            merged[-1] = (merged[-1][0] + text, style)
        elif merged and merged[-1][0].endswith(" ") and text.startswith(" "):
            merged.append((text[1:], style))
        else:
            merged.append((text, style))
    return merged


def _add_runs(para, runs: list[tuple[str, dict]], size_pt: float | None = None) -> None:
    from docx.shared import Pt

    for text, style in runs:
        run = para.add_run(text)
        run.bold = style.get("bold") or None
        run.italic = style.get("italic") or None
        if style.get("mono"):
            run.font.name = "Courier New"
        if style.get("sup"):
            run.font.superscript = True
        if style.get("sub"):
            run.font.subscript = True
        if size_pt:
            run.font.size = Pt(size_pt)


def _add_table(doc, rows: list[list[_Cell]]) -> None:
    """A Word table from HTML rows (rowspan/colspan placed on a grid and merged)."""
    from docx.oxml import OxmlElement
    from docx.oxml.ns import qn

    grid: dict[tuple[int, int], _Cell] = {}
    spans: list[tuple[int, int, _Cell]] = []
    for r, row in enumerate(rows):
        c = 0
        for cell in row:
            while (r, c) in grid:
                c += 1
            spans.append((r, c, cell))
            for dr in range(cell.rowspan):
                for dc in range(cell.colspan):
                    grid[(r + dr, c + dc)] = cell
            c += cell.colspan
    n_rows = max(r for r, _ in grid) + 1
    n_cols = max(c for _, c in grid) + 1
    table = doc.add_table(rows=n_rows, cols=n_cols)
    table.style = "Table Grid"
    size = 8.0 if n_cols <= 6 else 7.0
    cells = table._cells                         # once: table.cell() rebuilds this list
    for r, c, cell in spans:
        para = cells[r * n_cols + c].paragraphs[0]
        runs = _tidy(cell.runs)
        if cell.header:
            runs = [(t, dict(s, bold=True)) for t, s in runs]
        _add_runs(para, runs, size)
    for r, c, cell in spans:                     # merge after filling (few cells span)
        if cell.rowspan > 1 or cell.colspan > 1:
            table.cell(r, c).merge(table.cell(min(r + cell.rowspan, n_rows) - 1,
                                              min(c + cell.colspan, n_cols) - 1))
    first = rows[0]
    if first and all(cell.header for cell in first):
        tr_pr = table.rows[0]._tr.get_or_add_trPr()
        header = OxmlElement("w:tblHeader")
        header.set(qn("w:val"), "true")
        tr_pr.append(header)
    doc.add_paragraph()


def html_to_docx(html: str, *, images: dict[str, bytes] | None = None, paper: str = "a4",
                 title: str = "", created: str | None = None, footer: str = "") -> bytes:
    """A .docx (bytes) with the sections, tables, figures and lists of a report page.

    Parameters
    ----------
    html : str
        A saltplan report page (plan, plan with screen, decision record).
    images : dict, optional
        PNG bytes by ``<figure id>``: the picture placed at that figure.
    paper : {"a4", "letter"}
        Page size.
    title, created, footer : str
        Document properties (title, creation time ISO 8601 UTC) and the page footer text.
    """
    import docx
    from docx.enum.section import WD_ORIENT
    from docx.shared import Mm, Pt

    if paper not in PAPER:
        raise ValueError(f"paper must be one of {', '.join(PAPER)}, got {paper!r}")
    doc = docx.Document()
    section = doc.sections[0]
    w, h = PAPER[paper]
    section.orientation = WD_ORIENT.PORTRAIT
    section.page_width, section.page_height = Mm(w), Mm(h)
    for side in ("left_margin", "right_margin"):
        setattr(section, side, Mm(18))
    section.top_margin = section.bottom_margin = Mm(18)
    doc.styles["Normal"].font.name = "Calibri"
    doc.styles["Normal"].font.size = Pt(10)
    if footer:
        _footer(section.footer.paragraphs[0], footer)
    conv = _Converter(doc, images or {}, w - 36)
    conv.feed(html)
    conv.close()
    when = _when(created)
    props = doc.core_properties
    props.title = title
    props.author = props.last_modified_by = "saltplan"
    props.created = props.modified = when
    props.revision = 1
    props.comments = "Planning aid, not a measurement."
    raw = io.BytesIO()
    doc.save(raw)
    return _fixed_zip(raw.getvalue(), when)


def _footer(para, text: str) -> None:
    """Footer: the given text, then "page N of M" as Word fields."""
    from docx.oxml import OxmlElement
    from docx.oxml.ns import qn
    from docx.shared import Pt

    def field(instr: str) -> None:
        el = OxmlElement("w:fldSimple")
        el.set(qn("w:instr"), instr)
        run = OxmlElement("w:r")
        t = OxmlElement("w:t")
        t.text = "1"
        run.append(t)
        el.append(run)
        para._p.append(el)

    para.add_run(text + " · page ").font.size = Pt(7)
    field("PAGE")
    para.add_run(" of ").font.size = Pt(7)
    field("NUMPAGES")


def _when(created: str | None) -> _dt.datetime:
    if created:
        try:
            return _dt.datetime.strptime(created, "%Y-%m-%dT%H:%M:%SZ")
        except ValueError:
            pass
    return _dt.datetime(2000, 1, 1)


def _fixed_zip(data: bytes, when: _dt.datetime) -> bytes:
    """The same zip with every entry dated ``when`` (python-docx stamps the current time)."""
    src = zipfile.ZipFile(io.BytesIO(data))
    out = io.BytesIO()
    stamp = (max(when.year, 1980), when.month, when.day, when.hour, when.minute, when.second)
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as dst:
        for info in src.infolist():
            entry = zipfile.ZipInfo(info.filename, date_time=stamp)
            entry.compress_type = zipfile.ZIP_DEFLATED
            entry.external_attr = 0o644 << 16
            dst.writestr(entry, src.read(info.filename))
    return out.getvalue()


def plan_images(ctx: dict[str, Any]) -> dict[str, bytes]:
    """PNG pictures of a plan report's figures, by figure id (structure and charts)."""
    from . import charts, drawing

    out: dict[str, bytes] = {}
    plan = ctx["plan"]
    out["sp-structure-figure"] = drawing.structure_png(ctx["parent"]["smiles"], plan["sites"])
    for ch in ctx.get("charts") or []:
        draw = ch.get("draw")
        if draw:
            fn, args = draw[0], draw[1]
            kwargs = draw[2] if len(draw) > 2 else {}
            out[ch["id"]] = charts.as_png(fn, *args, **kwargs)
    return out
