"""Injection: every user text that reaches HTML or Markdown renders as the characters typed.

Checks (HTML): the page's tag structure (sequence of start tags and attribute names) is
the same with a hostile text as with a plain one, so no text became markup; the hostile
text is present as text. (Markdown): the text appears only in its escaped form
(saltplan.reports.markdown.md_escape, CommonMark 0.31 §2.4 backslash escapes), and the
file has the same number of lines as with the plain text (no line / block injection).

Entry points: compound name (plan report, Jupyter fragment), user counterion library
entry name and liabilities, user solvent-library names, results-file notes and form
labels (decision record), batch ids and names (batch HTML summary). The hostile strings
are the usual cross-site-scripting and Markdown-injection probes (OWASP XSS filter
evasion cheat sheet, common practice), invented here.
"""
from __future__ import annotations

import csv
import io
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import pytest
import yaml

API = "CN(C)CCc1ccc(Cl)cc1"   # invented test base
PLAIN = "Plaintext Name"

HOSTILE = {
    "script": '<script>alert("x")</script>',
    "img_onerror": "<img src=x onerror=alert(1)>",
    "attr_break": '"><svg onload=alert(1)>',
    "md_link": "[click](javascript:alert(1))",
    "md_image": "![t](http://evil.example/t.png)",
    "html_comment": "<!-- open comment",
    "entities": "&amp; &lt;b&gt; &#60;",
    "md_block": "# heading\n- item\n> quote",
    "md_table": "| a | b |\n|---|---|",
    "md_inline": "`code` *em* _u_ ~~s~~",
    "jinja": "{{ 7*7 }} {% raw %}",
    "autolink": "http://evil.example www.evil.example x@evil.example",
    "bidi_override": "abc\u202edcba",
}


class _Structure(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, tuple[str, ...]]] = []
        self.text: list[str] = []
        self.bad: list[str] = []

    def handle_starttag(self, tag, attrs):
        names = tuple(sorted(a for a, _ in attrs))
        self.tags.append((tag, names))
        if tag in ("script", "iframe", "object", "embed", "base", "form"):
            self.bad.append(tag)
        for name, value in attrs:
            if name.startswith("on"):
                self.bad.append(f"{tag}[{name}]")
            if name in ("href", "src", "xlink:href") and value and \
                    re.match(r"\s*(javascript|https?|vbscript):", value, re.I):
                self.bad.append(f"{tag}[{name}={value}]")

    def handle_data(self, data):
        self.text.append(data)


def _without_page_scripts(html: str) -> str:
    """Drop the page's own inline scripts: those whose sha256 its CSP lists (and only those).

    Any other script, e.g. one that user text turned into markup, stays and is flagged.
    """
    import base64
    import hashlib

    policy = re.search(r'http-equiv="Content-Security-Policy" content="([^"]*)"', html)
    allowed = set(re.findall(r"'sha256-([^']+)'", policy.group(1))) if policy else set()

    def _drop(m: re.Match) -> str:
        digest = base64.b64encode(hashlib.sha256(m.group(1).encode("utf-8")).digest()).decode()
        return "" if digest in allowed else m.group(0)

    return re.sub(r"<script>(.*?)</script>", _drop, html, flags=re.S)


def _parse(html: str) -> _Structure:
    p = _Structure()
    p.feed(_without_page_scripts(html))
    p.close()
    return p


def _same_structure(plain_html: str, hostile_html: str, hostile_text: str):
    a, b = _parse(plain_html), _parse(hostile_html)
    assert not b.bad, b.bad
    assert a.tags == b.tags                          # no text turned into markup
    shown = " ".join(" ".join(b.text).split())
    assert " ".join(hostile_text.split()) in shown   # and it is shown, as typed


def _md_checks(plain_md: str, hostile_md: str, hostile_text: str, plain_text: str = PLAIN):
    from saltplan.reports.markdown import md_escape

    assert len(plain_md.splitlines()) == len(hostile_md.splitlines())
    escaped = md_escape(hostile_text)
    assert escaped in hostile_md
    for probe in ("<script", "<img", "<svg", "](javascript", "](http", "<!--"):
        if probe in hostile_text:
            assert not _unescaped(probe, hostile_md), probe


def _unescaped(probe: str, md: str) -> bool:
    """``probe`` occurs in ``md`` without a backslash escape before its first character."""
    return re.search(r"(?<!\\)" + re.escape(probe), md) is not None


def _html_md(folder: Path, html="report.html", md="report.md"):
    return (folder / html).read_text(encoding="utf-8"), (folder / md).read_text(encoding="utf-8")


# ------------------------------------------------------------------ compound name
@pytest.fixture(scope="module")
def plain_plan_report(tmp_path_factory):
    from saltplan.plan.planner import plan_salts
    from saltplan.reports import write_plan_report

    out = tmp_path_factory.mktemp("plain")
    write_plan_report(plan_salts(API, name=PLAIN), out)
    return _html_md(out)


@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_compound_name_is_escaped_in_plan_report(tmp_path, monkeypatch, plain_plan_report, case):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")
    from saltplan.plan.planner import plan_salts
    from saltplan.reports import write_plan_report

    text = HOSTILE[case]
    write_plan_report(plan_salts(API, name=text), tmp_path)
    html, md = _html_md(tmp_path)
    _same_structure(plain_plan_report[0], html, text)
    _md_checks(plain_plan_report[1], md, text)


@pytest.mark.parametrize("case", ["script", "attr_break", "md_link"])
def test_compound_name_is_escaped_in_jupyter_fragment(case):
    from saltplan.plan.planner import plan_salts

    plain = plan_salts(API, name=PLAIN)._repr_html_()
    hostile = plan_salts(API, name=HOSTILE[case])._repr_html_()
    _same_structure(plain, hostile, HOSTILE[case])


def test_name_from_a_mol_file_title_is_escaped(tmp_path, plain_plan_report):
    from rdkit import Chem

    from saltplan.plan.planner import plan_salts
    from saltplan.reports import write_plan_report

    mol = Chem.MolFromSmiles(API)
    mol.SetProp("_Name", HOSTILE["script"])
    path = tmp_path / "in.mol"
    path.write_text(Chem.MolToMolBlock(mol), encoding="utf-8")
    write_plan_report(plan_salts(str(path)), tmp_path / "out")
    html, md = _html_md(tmp_path / "out")
    _same_structure(plain_plan_report[0], html, HOSTILE["script"])
    assert not _unescaped("<script", md)


# ------------------------------------------------------------------ user counterion library
def _library(tmp_path, name, liability):
    entry = {
        "id": "inhouse_acid", "name": name, "smiles": "CCC(=O)O", "role": "acid",
        "pka": [4.87], "pka_sources": ["CRC Handbook, 97th ed. (from memory)"], "n_protons": 1,
        "form": "liquid", "density_g_ml": 0.99, "density_source": "CRC Handbook (from memory)",
        "tier": 1, "tier_source": "in-house list", "stoichiometries": ["1:1"],
        "hygroscopicity": "unknown", "hygroscopicity_source": "no data",
        "liabilities": [liability], "flags": [], "references": ["CRC Handbook"],
    }
    path = tmp_path / "inhouse.yaml"
    path.write_text(yaml.safe_dump({"family": "in-house", "counterions": [entry]},
                                   allow_unicode=True), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def plain_library_report(tmp_path_factory):
    from saltplan.plan.planner import plan_salts
    from saltplan.reports import write_plan_report

    base = tmp_path_factory.mktemp("plainlib")
    lib = _library(base, PLAIN, PLAIN + " liability")
    write_plan_report(plan_salts(API, name="x", libraries=[str(lib)]), base / "out")
    return _html_md(base / "out")


@pytest.mark.parametrize("case", ["script", "img_onerror", "attr_break", "md_link", "md_table",
                                  "md_block", "jinja"])
def test_library_entry_name_and_liability_are_escaped(tmp_path, plain_library_report, case):
    from saltplan.plan.planner import plan_salts
    from saltplan.reports import write_plan_report

    text = HOSTILE[case]
    lib = _library(tmp_path, text, text + " liability")
    plan = plan_salts(API, name="x", libraries=[str(lib)])
    assert any(c["counterion"] == "inhouse_acid" for c in plan.to_dict()["candidates"])
    write_plan_report(plan, tmp_path / "out")
    html, md = _html_md(tmp_path / "out")
    _same_structure(plain_library_report[0], html, text)
    _md_checks(plain_library_report[1], md, text)


# ------------------------------------------------------------------ user solvent library
def _solvent_library(tmp_path, name):
    from saltplan._data import package_yaml

    data = json.loads(json.dumps(package_yaml("data", "solvents.yaml")))
    for s in data["solvents"]:
        if s["id"] == "ethanol":
            s["name"] = name
    tmp_path.mkdir(parents=True, exist_ok=True)
    path = tmp_path / "solvents.yaml"
    path.write_text(yaml.safe_dump(data, allow_unicode=True, sort_keys=False), encoding="utf-8")
    return path


def _screen_report(tmp_path, name):
    from saltplan.reports import write_plan_report
    from saltplan.screen.output import screen_structure

    lib = _solvent_library(tmp_path, name)
    design, _ = screen_structure(API, 500, solvent_library=str(lib), solvents=["ethanol"])
    write_plan_report(design.to_dict()["plan"], tmp_path / "out", screen=design)
    return _html_md(tmp_path / "out")


@pytest.mark.parametrize("case", ["script", "attr_break", "md_link", "md_table"])
def test_solvent_names_are_escaped(tmp_path, case):
    plain = _screen_report(tmp_path / "a", PLAIN)
    html, md = _screen_report(tmp_path / "b", HOSTILE[case])
    _same_structure(plain[0], html, HOSTILE[case])
    _md_checks(plain[1], md, HOSTILE[case])


# ------------------------------------------------------------------ results notes / labels
@pytest.fixture(scope="module")
def screened(tmp_path_factory):
    from saltplan.demo.results import make_demo_results
    from saltplan.screen.output import screen_structure

    base = tmp_path_factory.mktemp("screened")
    design, _ = screen_structure(API, 500, out_dir=base / "design")
    return base / "design", make_demo_results(design.to_dict())


def _results_with(text: str, notes: str, label: str | None) -> str:
    lines = [ln for ln in text.splitlines() if not ln.startswith("#")]
    rows = list(csv.DictReader(lines))
    for row in rows:
        if row.get("outcome"):
            row["notes"] = notes
            if label is not None and row.get("form_label"):
                row["form_label"] = label
    buf = io.StringIO()
    w = csv.DictWriter(buf, fieldnames=list(rows[0]), lineterminator="\n")
    w.writeheader()
    w.writerows(rows)
    return buf.getvalue()


def _decision(tmp_path, screened, notes, label=None):
    from saltplan.reports.decision import select_and_record

    tmp_path.mkdir(parents=True, exist_ok=True)
    path = tmp_path / "results.csv"
    path.write_text(_results_with(screened[1], notes, label), encoding="utf-8")
    select_and_record(screened[0], path, tmp_path / "out")
    return _html_md(tmp_path / "out", "decision.html", "decision.md")


@pytest.mark.parametrize("case", ["script", "img_onerror", "attr_break", "md_link",
                                  "md_image", "md_table", "html_comment", "autolink"])
def test_results_notes_are_escaped_in_decision_record(tmp_path, monkeypatch, screened, case):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")
    text = " ".join(HOSTILE[case].split())   # a CSV cell: one line
    plain = _decision(tmp_path / "a", screened, PLAIN)
    html, md = _decision(tmp_path / "b", screened, text)
    _same_structure(plain[0], html, text)
    for probe in ("<script", "<img", "](javascript", "<!--"):
        assert not _unescaped(probe, md), probe
    assert len(plain[1].splitlines()) == len(md.splitlines())


@pytest.mark.parametrize("case", ["script", "attr_break"])
def test_form_labels_are_escaped_in_decision_record(tmp_path, monkeypatch, screened, case):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "0")
    plain = _decision(tmp_path / "a", screened, "n", "Form Plain")
    html, md = _decision(tmp_path / "b", screened, "n", HOSTILE[case])
    a, b = _parse(plain[0]), _parse(html)
    assert not b.bad and a.tags == b.tags
    assert not _unescaped("<script", md) and not _unescaped("<svg", md)


# ------------------------------------------------------------------ batch summary
@pytest.mark.parametrize("case", ["script", "img_onerror", "attr_break", "html_comment"])
def test_batch_ids_and_names_are_escaped_in_summary(cli, tmp_path, case):
    def run(folder, text):
        folder.mkdir()
        src = folder / "in.csv"
        with src.open("w", encoding="utf-8", newline="") as fh:
            w = csv.writer(fh)
            w.writerow(["id", "name", "smiles"])
            w.writerow([text, text, API])
            w.writerow(["bad-" + text, text, "xyz!!"])     # error rows are listed too
        res = cli("batch", src, "--out", folder / "t.csv", "--summary", folder / "s.html",
                  "--quiet")
        assert res.exit_code == 1, res.stderr
        return (folder / "s.html").read_text(encoding="utf-8")

    plain = run(tmp_path / "a", PLAIN)
    hostile = run(tmp_path / "b", HOSTILE[case])
    a, b = _parse(plain), _parse(hostile)
    assert not b.bad, b.bad
    assert a.tags == b.tags


# ------------------------------------------------------------------ template audit
def _templates():
    root = Path(__file__).resolve().parent.parent / "saltplan"
    return sorted(p for p in root.rglob("*.j2"))


# every `|safe` in a template, with why it is safe (reviewed); a new one fails this test
SAFE_USES = {
    # RDKit SVG of the canonical SMILES re-parsed (no user text: standardize() drops
    # names, aliases and atom labels); its aria-label is html.escape()d in drawing.py
    ("plan_body.html.j2", "structure_svg"),
    # matplotlib SVG charts of numbers; labels are counterion ids/names which matplotlib
    # escapes in SVG text (and the bar's <title> uses html.escape in charts.py)
    ("plan_body.html.j2", "c.bar_svg"),
    ("plan_body.html.j2", "ch.svg"),
    # the workbench places the report body rendered by saltplan.reports (autoescaped
    # templates above) into its pages
    ("plan_area.html.j2", "body"),
    ("screen_area.html.j2", "body"),
}


def test_every_safe_filter_in_templates_is_reviewed():
    found = set()
    for path in _templates():
        for m in re.finditer(r"\{\{\s*([\w.]+)\s*\|\s*safe\s*\}\}", path.read_text(encoding="utf-8")):
            found.add((path.name, m.group(1)))
        assert "autoescape false" not in path.read_text(encoding="utf-8")
    assert found == SAFE_USES


def test_markup_in_python_is_reviewed():
    root = Path(__file__).resolve().parent.parent / "saltplan"
    uses = []
    for path in sorted(root.rglob("*.py")):
        for line in path.read_text(encoding="utf-8").splitlines():
            if re.search(r"\bMarkup\(", line):
                uses.append((path.name, line.strip()[:40]))
    # reports/portfolio.py: histogram SVGs of counts with constant titles (no user text)
    assert {u[0] for u in uses} <= {"portfolio.py"}, uses


def test_chart_labels_with_markup_are_escaped():
    """A counterion name with markup in a chart label stays text inside the SVG."""
    from saltplan.reports import charts

    names = [n for n in dir(charts) if not n.startswith("_")]
    assert names  # module present
    import tempfile

    from saltplan.plan.planner import plan_salts

    with tempfile.TemporaryDirectory() as tmp:
        lib = _library(Path(tmp), HOSTILE["script"], "liability")
        d = plan_salts(API, name="x", libraries=[str(lib)]).to_dict()
        from saltplan.reports import render_plan_html

        html = render_plan_html(d)
    assert "<script" not in html
