"""Word and PDF reports: read back with python-docx and pypdf (general-purpose readers).

Checked: the sections in the same order as the HTML page, heading styles, Word tables with
a header row, the drawing and charts as captioned pictures, references as a numbered list,
page size (ISO 216 A4 210 × 297 mm, US Letter 8.5 × 11 in), page numbers and the footer
with tool version and hashes; user text stays text in both formats.
"""
from __future__ import annotations

import io
import re
import zipfile

import pytest
import report_fixtures as fx
from click.testing import CliRunner

from saltplan.reports import render_plan_docx, render_plan_html, render_plan_pdf
from saltplan.reports.pdf import find_chromium

EVIL = '<w:p>x</w:p> <script>alert(1)</script> [x](http://evil.example) ]]> & "q"'

needs_chromium = pytest.mark.skipif(find_chromium() is None, reason="Chromium not installed")


@pytest.fixture(scope="module")
def plan():
    return fx.plan_dict()


@pytest.fixture(scope="module")
def screen(plan):
    return fx.screen_dict(plan)


@pytest.fixture(scope="module")
def docx_bytes(plan, screen):
    return render_plan_docx(plan, screen)


def _doc(data: bytes):
    import docx

    return docx.Document(io.BytesIO(data))


def _html_headings(html: str) -> list[str]:
    body = html[html.index("<body"):]
    found = re.findall(r"<h([1-4])[^>]*>(.*?)</h\1>", body, re.S)
    return [" ".join(re.sub(r"<[^>]+>", "", t).split()) for _, t in found]


def test_docx_headings_are_heading_styles_in_page_order(docx_bytes, plan, screen):
    from html import unescape

    doc = _doc(docx_bytes)
    heads = [(p.style.name, p.text) for p in doc.paragraphs
             if p.style.name == "Title" or p.style.name.startswith("Heading")]
    html_heads = [unescape(h) for h in _html_headings(render_plan_html(plan, screen))]
    assert [t for _, t in heads] == html_heads
    assert heads[0] == ("Title", "Salt-form plan: TST-7 (test fixture)")
    level1 = [t for s, t in heads if s == "Heading 1"]
    order = ["Decision", "Rationale for the CMC file", "Structure and ionizable sites",
             "How each pKa was obtained", "Ranked candidates", "Charts", "Screen design",
             "Appendix A", "Appendix B", "Appendix C"]
    pos = [next(i for i, t in enumerate(level1) if t.startswith(o)) for o in order]
    assert pos == sorted(pos)
    assert "Why these counterions" in [t for s, t in heads if s == "Heading 2"]


def test_docx_tables_have_a_header_row(docx_bytes, plan):
    doc = _doc(docx_bytes)
    assert len(doc.tables) >= 10
    heads = 0
    for t in doc.tables:
        tr_pr = t.rows[0]._tr.trPr
        if tr_pr is not None and tr_pr.xpath("./w:tblHeader"):
            heads += 1
            assert all(r.bold for c in t.rows[0].cells for p in c.paragraphs for r in p.runs)
    assert heads >= 8
    # the candidate table: one row per candidate under its header
    cand = next(t for t in doc.tables if t.rows[0].cells[0].text == "rank")
    assert len(cand.rows) == 1 + len(plan["candidates"])
    assert cand.rows[1].cells[1].text.startswith(plan["candidates"][0]["counterion"])


def test_docx_figures_are_pictures_with_captions(docx_bytes):
    doc = _doc(docx_bytes)
    assert len(doc.inline_shapes) == 4                 # structure + 3 charts
    captions = [p.text for p in doc.paragraphs if p.style.name == "Caption"]
    assert len(captions) == 4 and captions[0].startswith("Figure 1. Parent (free form)")
    with zipfile.ZipFile(io.BytesIO(docx_bytes)) as z:
        media = [n for n in z.namelist() if n.startswith("word/media/")]
        assert len(media) == 4
        assert all(z.read(n)[:8] == b"\x89PNG\r\n\x1a\n" for n in media)


def test_docx_references_numbered_and_footer(docx_bytes, plan):
    doc = _doc(docx_bytes)
    numbered = [p.text for p in doc.paragraphs if p.style.name == "List Number"]
    assert numbered == [r["citation"] + (f" — used for: {r['used_for']}" if r.get("used_for")
                                         else "") for r in plan["references"]]
    footer = doc.sections[0].footer.paragraphs[0]
    prov = plan["provenance"]
    assert f"saltplan {prov['version']}" in footer.text
    assert prov["input_hash"][:19] in footer.text and prov["library_hash"][:19] in footer.text
    assert footer._p.xpath('.//w:fldSimple[@w:instr="PAGE"]')


def test_docx_paper_sizes_and_deterministic_bytes(plan, docx_bytes):
    a4 = _doc(docx_bytes).sections[0]
    assert round(a4.page_width.mm) == 210 and round(a4.page_height.mm) == 297
    letter = _doc(render_plan_docx(plan, paper="letter")).sections[0]
    assert round(letter.page_width.inches, 2) == 8.5 and round(letter.page_height.inches, 2) == 11
    assert render_plan_docx(plan, fx.screen_dict(plan)) == docx_bytes


def test_docx_user_text_stays_text(plan):
    p = fx.plan_dict(name=EVIL)
    p["candidates"][0]["caveats"][0]["text"] = EVIL
    data = render_plan_docx(p)
    doc = _doc(data)
    assert doc.paragraphs[0].text == f"Salt-form plan: {EVIL}"
    cells = [c.text for t in doc.tables for r in t.rows for c in r.cells]
    assert any(EVIL in c for c in cells + [q.text for q in doc.paragraphs])
    with zipfile.ZipFile(io.BytesIO(data)) as z:
        xml = z.read("word/document.xml").decode("utf-8")
        rels = z.read("word/_rels/document.xml.rels").decode("utf-8")
    assert "<script>" not in xml and "<w:p>x</w:p>" not in xml
    assert "evil.example" not in rels                  # no hyperlink made from user text


def test_decision_docx(tmp_path):
    from saltplan.demo.results import make_demo_results
    from saltplan.plan.planner import plan_salts
    from saltplan.reports.decision import write_decision_record
    from saltplan.screen.design import design_screen
    from saltplan.select.evaluate import evaluate_results

    plan = plan_salts("CN1CCC(CC1)Oc1ccc(cc1)C(=O)NC1CC1", name="HRN-101", dose_mg=50)
    design = design_screen(plan, api_budget_mg=400)
    res = tmp_path / "results.csv"
    res.write_text(make_demo_results(design), encoding="utf-8")
    selection = evaluate_results(design, res)
    paths = write_decision_record(selection, tmp_path / "d", formats=["docx"])
    assert [p.name for p in paths] == ["decision.docx", "selection.json"]
    doc = _doc(paths[0].read_bytes())
    heads = [p.text for p in doc.paragraphs if p.style.name == "Heading 1"]
    assert heads[0] == "1. Decision" and heads[-1] == "10. Provenance"
    assert len(doc.tables) >= 5


# --------------------------------------------------------------------------- PDF
def _pdf_text(data: bytes) -> list[str]:
    import pypdf

    return [p.extract_text() for p in pypdf.PdfReader(io.BytesIO(data)).pages]


@pytest.mark.slow
@pytest.mark.browser
@needs_chromium
@pytest.mark.parametrize("paper,size_pt", [("a4", (595.92, 841.92)), ("letter", (612, 792))])
def test_pdf_paper_page_numbers_and_footer(plan, screen, paper, size_pt):
    import pypdf

    data = render_plan_pdf(plan, screen, paper=paper)
    reader = pypdf.PdfReader(io.BytesIO(data))
    n = len(reader.pages)
    assert n >= 2
    for i, page in enumerate(reader.pages, 1):
        box = page.mediabox
        assert abs(float(box.width) - size_pt[0]) < 1.5 and abs(float(box.height) - size_pt[1]) < 1.5
        text = page.extract_text()
        assert f"page {i} of {n}" in text
        prov = plan["provenance"]
        assert f"saltplan {prov['version']}" in text and prov["input_hash"][:19] in text
        assert prov["library_hash"][:19] in text
    assert "Salt-form plan: TST-7" in _pdf_text(data)[0]
    assert data == render_plan_pdf(plan, screen, paper=paper)          # same bytes


@pytest.mark.slow
@pytest.mark.browser
@needs_chromium
def test_pdf_user_text_stays_text():
    p = fx.plan_dict(name=EVIL)
    data = render_plan_pdf(p)
    first = " ".join(_pdf_text(data)[0].split())
    assert "Salt-form plan: <w:p>x</w:p> <script>alert(1)</script>" in first
    assert b"evil.example" not in data.replace(b"\n", b"") or b"/URI" not in data
    assert b"/JavaScript" not in data and b"/JS " not in data


def test_pdf_without_chromium_one_line_error(tmp_path, monkeypatch):
    from saltplan.cli import main

    monkeypatch.setenv("SALTPLAN_CHROMIUM", str(tmp_path / "no-such-chromium"))
    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["plan", "CCN(CC)CC", "--out", str(out), "--format",
                                       "pdf"])
    assert result.exit_code == 1
    lines = [x for x in result.output.splitlines() if x.strip()]
    assert len(lines) == 1 and "chromium" in lines[0] and "apt-get install" in lines[0]
    assert "Traceback" not in result.output and not out.exists()


def test_cli_plan_writes_requested_formats(tmp_path):
    from saltplan.cli import main

    out = tmp_path / "out"
    result = CliRunner().invoke(main, ["plan", "CCN(CC)CC", "--name", "HRN-T1", "--out",
                                       str(out), "--format", "docx,md", "--paper", "letter"])
    assert result.exit_code == 0, result.output
    assert sorted(p.name for p in out.iterdir()) == ["plan.json", "report.docx", "report.md"]
    sec = _doc((out / "report.docx").read_bytes()).sections[0]
    assert round(sec.page_width.inches, 2) == 8.5
    bad = CliRunner().invoke(main, ["plan", "CCN(CC)CC", "--out", str(tmp_path / "x"),
                                    "--format", "rtf"])
    assert bad.exit_code == 2 and "rtf" in bad.output and not (tmp_path / "x").exists()


def test_cli_screen_format_adds_the_report(tmp_path):
    from saltplan.cli import main

    out = tmp_path / "scr"
    result = CliRunner().invoke(main, ["screen", "CN1CCC(CC1)Oc1ccc(cc1)C(=O)NC1CC1", "--api-budget-mg", "400",
                                       "--out", str(out), "--format", "docx"])
    assert result.exit_code == 0, result.output
    names = {p.name for p in out.iterdir()}
    assert {"report.docx", "design.json", "worksheet.csv"} <= names
    heads = [p.text for p in _doc((out / "report.docx").read_bytes()).paragraphs
             if p.style.name == "Heading 1"]
    assert "Screen design" in heads
