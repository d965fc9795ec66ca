"""Reports: HTML / Markdown / JSON rendering, escaping, determinism, charts and drawing."""
from __future__ import annotations

import copy
import json
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser

import pytest
import report_fixtures as fx
from hypothesis import given, settings
from hypothesis import strategies as st

from saltplan.reports import (
    charts,
    drawing,
    platemap,
    render_plan_fragment,
    render_plan_html,
    render_plan_json,
    render_plan_markdown,
    repr_html,
    write_plan_report,
)
from saltplan.reports.context import MissingKey
from saltplan.reports.markdown import md_escape

EVIL = '<script>alert(1)</script> "quoted" \'single\' [x](http://evil) `tick` # | *b*'


class _Tags(HTMLParser):
    """Collects start tags with attributes, and the text inside <script> elements."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    handle_startendtag = handle_starttag


def _tags(html: str) -> list[tuple[str, dict]]:
    p = _Tags()
    p.feed(html)
    return p.tags


def _strip_created(text: str, created: str) -> str:
    return text.replace(created, "<created>")


@pytest.fixture(scope="module")
def plan():
    return fx.plan_dict()


@pytest.fixture(scope="module")
def screen(plan):
    return fx.screen_dict(plan)


@pytest.fixture(scope="module")
def html(plan, screen):
    return render_plan_html(plan, screen)


@pytest.fixture(scope="module")
def md(plan, screen):
    return render_plan_markdown(plan, screen)


# --------------------------------------------------------------------------- content & order
def test_html_sections_in_decision_first_order(html):
    order = ["sp-verdict", "sp-structure", "sp-inputs", "sp-sites", "sp-candidates",
             "sp-charts", "sp-screen", "sp-rationale", "sp-cautions", "sp-references",
             "sp-provenance"]
    positions = [html.index(f'id="{s}"') for s in order]
    assert positions == sorted(positions)


def test_html_verdict_shows_top_three_with_stoichiometry_and_caveat(html, plan):
    verdict = html[html.index('id="sp-verdict"'):html.index('id="sp-structure"')]
    for c in plan["candidates"][:3]:
        assert c["counterion"] in verdict
        assert f"{c['delta_pka']:.2f}" in verdict
    assert plan["candidates"][3]["counterion"] not in verdict  # only the top 3
    assert "Common-ion effect" in verdict                      # most important caveat


def test_html_every_site_pka_carries_provenance(html, plan):
    sites = html[html.index('id="sp-structure"'):html.index('id="sp-inputs"')]
    assert "sp-prov-estimated" in sites and "sp-prov-measured" in sites
    steps = html[html.index('id="sp-sites"'):html.index('id="sp-candidates"')]
    for s in plan["sites"]:
        for step in s["steps"]:
            assert step["source"] in steps


def test_html_transfer_table_names_both_pka_sources(html, plan):
    block = html[html.index("Where each ΔpKa comes from"):html.index('id="sp-charts"')]
    for c in plan["candidates"]:
        for t in c["transfers"]:
            assert t["counterion_pka_source"] in block
    assert "sp-prov-estimated" in block and "sp-prov-measured" in block


def test_html_contains_charts_plate_and_cautions(html):
    assert html.count('class="sp-chart"') == 3          # ΔpKa, ionized, solubility
    plate = html[html.index('class="sp-plate"'):]
    plate = plate[:plate.index("</table>")]
    assert plate.count("<tr>") == 9                     # header + rows A–H
    assert plate.count("<td") == 96
    for phrase in ("USP–NF", "Ph. Eur.", "ICH Q3C", "Q6A", "M7", "local regulation",
                   "qualified staff"):
        assert phrase in html


def test_html_makes_no_network_request_and_has_no_script(html):
    for tag, attrs in _tags(html):
        assert tag != "script"
        for key in ("src", "href", "xlink:href", "data", "action"):
            value = attrs.get(key)
            if value is not None:
                assert value.startswith("#"), (tag, key, value)
        assert tag not in ("link", "iframe", "object", "embed", "img")
    assert "@import" not in html and "@font-face" not in html
    for ref in re.findall(r"url\(([^)]*)\)", html):
        assert ref.startswith("#"), ref
    assert "Content-Security-Policy" in html


def test_html_ids_unique_and_references_resolve(html):
    ids = [a["id"] for _, a in _tags(html) if "id" in a]
    assert len(ids) == len(set(ids))
    refs = re.findall(r'(?:href="#|url\(#)([^")]+)', html)
    assert refs                                          # the charts use clip paths / glyphs
    assert set(refs) <= set(ids)


# --------------------------------------------------------------------------- escaping
def _evil_plan():
    p = fx.plan_dict(name=EVIL)
    p["candidates"][0]["counterion_name"] = EVIL
    p["candidates"][0]["caveats"][0]["text"] = EVIL
    p["sites"][0]["steps"][0]["detail"] = EVIL
    p["cautions"] = [EVIL]
    p["references"] = [EVIL]
    p["parent"]["notes"] = [EVIL]
    return p


def test_html_escapes_user_text():
    p = _evil_plan()
    html = render_plan_html(p, fx.screen_dict(p))
    assert "<script" not in html.lower()
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert all(tag not in ("script", "a") or attrs.get("href", "#").startswith("#")
               for tag, attrs in _tags(html))
    assert 'href="http://evil"' not in html
    # quotes cannot break out of an attribute: no tag gains an unexpected attribute
    for _tag, attrs in _tags(html):
        assert "single" not in attrs and "quoted" not in attrs


_LIVE_LINK = re.compile(r"(?<!\\)\[[^\]\n]*(?<!\\)\]\(")
_LIVE_TAG = re.compile(r"(?<!\\)<\s*/?\s*[A-Za-z]")


def test_markdown_neutralizes_user_text():
    p = _evil_plan()
    md = render_plan_markdown(p, fx.screen_dict(p))
    assert not _LIVE_LINK.search(md)
    assert not _LIVE_TAG.search(md)
    assert "http://evil" not in md                       # GFM would autolink a bare URL
    assert "\\[x\\]" in md                               # still readable as typed
    # the heading stays one heading: the name's '#' cannot close or start one
    first = md.splitlines()[0]
    assert first.startswith("# Salt-form plan: ") and "\\#" in first
    # table rows keep their column count despite '|' in the name
    for line in md.splitlines():
        if line.startswith("| compound |"):
            assert len(re.findall(r"(?<!\\)\|", line)) == 4


def _md_unescape(text: str) -> str:
    return re.sub(r"\\([!-/:-@\[-`{-~])", r"\1", text)


@settings(max_examples=200, deadline=None)
@given(st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=60))
def test_md_escape_reads_back_as_typed(s):
    # CommonMark 0.31 §2.4: a backslash before ASCII punctuation renders the character itself
    escaped = md_escape(s)
    assert _md_unescape(escaped) == " ".join(s.split())
    assert "\n" not in escaped
    assert not _LIVE_LINK.search(escaped)
    assert not _LIVE_TAG.search(escaped)


def test_md_escape_block_markers():
    assert md_escape("- item") == "\\- item"
    assert md_escape("12. item") == "12\\. item"
    assert md_escape("www.example.org").startswith("www\\.")


# --------------------------------------------------------------------------- determinism
def test_reports_byte_deterministic_apart_from_created(plan, screen):
    charts.clear_cache()
    a = render_plan_html(plan, screen)
    charts.clear_cache()                                  # draw every chart afresh
    b = render_plan_html(copy.deepcopy(plan), copy.deepcopy(screen))
    assert a == b
    later = copy.deepcopy(plan)
    later["provenance"]["created"] = "2027-01-01T00:00:00Z"
    later_screen = fx.screen_dict(later)
    created = plan["provenance"]["created"]
    assert _strip_created(a, created) == _strip_created(
        render_plan_html(later, later_screen), "2027-01-01T00:00:00Z")
    assert _strip_created(render_plan_markdown(plan, screen), created) == _strip_created(
        render_plan_markdown(later, later_screen), "2027-01-01T00:00:00Z")


def test_json_deterministic_and_faithful(plan):
    text = render_plan_json(plan)
    assert text == render_plan_json(copy.deepcopy(plan))
    assert json.loads(text) == plan
    assert list(json.loads(text)) == list(plan)         # key order kept
    assert "ΔpKa" in text                                # ensure_ascii=False
    assert text.startswith('{\n  "name"')


def test_json_refuses_nan_naming_the_path(plan):
    bad = copy.deepcopy(plan)
    bad["candidates"][1]["score"] = float("nan")
    with pytest.raises(ValueError, match=r"candidates\[1\]\.score"):
        render_plan_json(bad)


# --------------------------------------------------------------------------- strictness
@pytest.mark.parametrize("path", [("verdict",), ("provenance", "input_hash"),
                                  ("parent", "smiles"), ("candidates", 0, "stoichiometry"),
                                  ("sites", 0, "group")])
def test_missing_required_key_is_named(plan, path):
    bad = copy.deepcopy(plan)
    node = bad
    for key in path[:-1]:
        node = node[key]
    del node[path[-1]]
    with pytest.raises(KeyError) as err:
        render_plan_html(bad)
    assert str(path[-1]) in str(err.value)


def test_template_strict_undefined(plan):
    import jinja2

    from saltplan.reports import html_environment

    with pytest.raises(jinja2.UndefinedError):
        html_environment().from_string("{{ x.missing }}").render(x={})
    assert isinstance(MissingKey("k"), KeyError)


def test_optional_sections_absent(plan):
    p = copy.deepcopy(plan)
    p["solubility"] = None
    html = render_plan_html(p)
    assert 'id="sp-screen"' not in html
    assert html.count('class="sp-chart"') == 2
    assert "Plate map" not in render_plan_markdown(p)


def test_no_site_verdict():
    p = fx.plan_dict(name="TST-8 neutral")
    p.update(sites=[], candidates=[], excluded=[], solubility=None,
             verdict={"code": "no_ionizable_site",
                      "text": "No acidic or basic group strong enough to form a salt.",
                      "alternatives": ["co-crystal screen", "amorphous solid dispersion"]})
    html = render_plan_html(p)
    assert "no salt screen recommended" in html
    assert "sp-nosalt" in html and "co-crystal screen" in html
    assert 'class="sp-chart"' not in html
    md = render_plan_markdown(p)
    assert "no salt screen recommended" in md and "- co\\-crystal screen" not in md
    assert "- co-crystal screen" in md


# --------------------------------------------------------------------------- files
def test_write_plan_report_writes_three_files(tmp_path, plan, screen):
    paths = write_plan_report(plan, tmp_path / "out", screen=screen)
    assert [p.name for p in paths] == ["report.html", "report.md", "plan.json"]
    assert json.loads(paths[2].read_text(encoding="utf-8")) == plan
    assert paths[0].read_text(encoding="utf-8") == render_plan_html(plan, screen)


def test_write_plan_report_leaves_nothing_on_error(tmp_path, plan):
    bad = copy.deepcopy(plan)
    del bad["references"]
    with pytest.raises(KeyError):
        write_plan_report(bad, tmp_path / "out")
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())


def test_repr_html_fragment(plan, screen):
    frag = repr_html(plan)
    assert frag == render_plan_fragment(plan)
    assert "<html" not in frag and 'class="sp-report"' in frag
    assert "<style>" in frag and ".sp-report" in frag
    assert 'class="sp-plate"' in repr_html(screen)


def test_templates_are_package_resources():
    from importlib.resources import files

    root = files("saltplan.reports") / "templates"
    for name in ("plan.html.j2", "plan.md.j2", "plan_fragment.html.j2",
                 "partials/style.css.j2", "partials/macros.html.j2"):
        assert (root / name).is_file(), name


# --------------------------------------------------------------------------- charts
def test_fraction_ionized_henderson_hasselbalch():
    # Henderson–Hasselbalch (any physical chemistry text): half ionized at pH = pKa,
    # ratio 10:1 one unit away
    assert charts.fraction_ionized("base", 9.0, 9.0) == pytest.approx(0.5)
    assert charts.fraction_ionized("base", 9.0, 8.0) == pytest.approx(10 / 11)
    assert charts.fraction_ionized("acid", 4.0, 5.0) == pytest.approx(10 / 11)
    assert charts.fraction_ionized("acid", 4.0, 3.0) == pytest.approx(1 / 11)


def _chart_svgs(plan):
    bands = [{"code": "unlikely", "lo": None, "hi": -1}, {"code": "uncertain", "lo": -1, "hi": 2},
             {"code": "likely", "lo": 2, "hi": 3}, {"code": "salt_expected", "lo": 3, "hi": None}]
    rows = [{"label": c["counterion"], "delta_pka": c["delta_pka"], "uncertainty": 0.5}
            for c in plan["candidates"]]
    return [charts.delta_pka_chart(rows, bands, 2.0),
            charts.ionization_chart([{"kind": "base", "pka": 9.1, "label": "N1"}]),
            charts.solubility_chart([(1.0, 10.0), (7.0, 0.1), (12.0, 0.01)], 6.2, 0.01, "mg/mL")]


def test_charts_are_stable_svg_with_paths_only(plan):
    charts.clear_cache()
    first = _chart_svgs(plan)
    charts.clear_cache()
    assert first == _chart_svgs(plan)
    for svg in first:
        root = ET.fromstring(svg)
        assert root.tag.endswith("svg")
        assert "<text" not in svg                       # text drawn as paths
        assert "<!--" not in svg and "<?xml" not in svg
        assert "http" not in svg.replace("http://www.w3.org/", "")


def test_chart_labels_are_not_mathtext():
    svg = charts.ionization_chart([{"kind": "base", "pka": 9.1, "label": "$\\alpha$ x"}])
    assert svg.startswith("<svg")                      # no mathtext parse error raised


def test_score_bar_escapes_keys():
    svg = charts.score_bar([("<b>", 0.5), ("pen", -0.2)], 1.0)
    assert "<b>" not in svg and "&lt;b&gt;" in svg
    ET.fromstring(svg)


# --------------------------------------------------------------------------- drawing
def test_site_labels_distinguish_measured_and_estimated():
    assert drawing.site_label({"pka": 9.12, "provenance": "measured"}) == "pKa 9.1 (meas.)"
    assert drawing.site_label({"pka": 9.12, "provenance": "estimated"}) == "~9.1 est."


def test_structure_svg_deterministic_and_checked(plan):
    charts.clear_cache()
    a = drawing.structure_svg(plan["parent"]["smiles"], plan["sites"])
    charts.clear_cache()
    assert a == drawing.structure_svg(plan["parent"]["smiles"], plan["sites"])
    ET.fromstring(a)
    from saltplan.errors import StructureError

    with pytest.raises(StructureError, match="atom 99"):
        drawing.structure_svg(plan["parent"]["smiles"], [{"atom": 99, "kind": "base",
                                                           "pka": 9.0, "provenance": "estimated"}])


def test_structure_labels_are_drawn(plan):
    # each label adds glyph paths: a drawing with labels has more path data than without
    bare = drawing.structure_svg(plan["parent"]["smiles"], [])
    labelled = drawing.structure_svg(plan["parent"]["smiles"], plan["sites"])
    assert labelled.count("<path") > bare.count("<path") + 10


# --------------------------------------------------------------------------- plate map
def test_plate_grid_places_wells(screen):
    grids = platemap.plate_grids(screen["wells"], {})
    assert len(grids) == 1
    rows = grids[0]["rows"]
    assert [r["row"] for r in rows] == list("ABCDEFGH")
    assert all(len(r["cells"]) == 12 for r in rows)
    by_pos = {c["well"]: c for r in rows for c in r["cells"]}
    for w in screen["wells"]:
        cell = by_pos[w["well"]]
        assert cell["kind"] == w["kind"]
        assert cell["solvent"] == w["solvent"] and cell["mode"] == w["mode"]
        if w["kind"] == "sample":
            assert (cell["counterion"], cell["stoichiometry"]) == (w["counterion"],
                                                                   w["stoichiometry"])
    used = {w["well"] for w in screen["wells"]}
    assert sum(1 for c in by_pos.values() if c["kind"] == "empty") == 96 - len(used)
    fills = {}
    for w in screen["wells"]:
        if w["kind"] == "sample":
            fills.setdefault(w["counterion"], set()).add(by_pos[w["well"]]["fill"])
    assert all(len(f) == 1 for f in fills.values())     # one colour per counterion
    assert len({next(iter(f)) for f in fills.values()}) == len(fills)   # all different


@pytest.mark.parametrize("bad", ["I1", "A13", "A0", "", "1A"])
def test_plate_rejects_bad_wells(bad):
    with pytest.raises(ValueError, match="SBS"):
        platemap.parse_well(bad)


def test_plate_rejects_duplicate_well(screen):
    wells = screen["wells"] + [dict(screen["wells"][0])]
    with pytest.raises(ValueError, match="twice"):
        platemap.plate_grids(wells, {})


# --------------------------------------------------------------------------- real planner
@pytest.fixture(scope="module")
def real():
    """plan_salts + design_screen on the test structure (measured pyridine pKa, invented)."""
    from saltplan.plan.planner import plan_salts
    from saltplan.screen.design import design_screen

    plan = plan_salts(fx.SMILES, name="TST-7 (test compound)", dose_mg=100, measured={13: 5.2})
    return plan, design_screen(plan, 400)


@pytest.fixture(scope="module")
def real_html(real):
    plan, screen = real
    return render_plan_html(plan, screen)


def test_real_plan_numbers_are_traceable(real, real_html):
    from markupsafe import escape

    plan = real[0].to_dict()
    assert plan["sites"], "the test structure has two basic sites"
    for s in plan["sites"]:
        assert f"{s['pka']:.2f}" in real_html
        for step in s["steps"]:
            assert escape(step["source"]) in real_html
    assert "sp-prov-measured" in real_html and "sp-prov-estimated" in real_html
    table = real_html[real_html.index('id="sp-candidates"'):real_html.index('id="sp-charts"')]
    for c in plan["candidates"]:
        assert escape(c["counterion"]) in table
        for t in c["transfers"]:
            assert escape(t["counterion_pka_source"]) in table
    for c in plan["excluded"]:
        assert escape(c["reason"]) in table
    for ref in plan["references"]:
        assert escape(ref["citation"]) in real_html


def test_real_plan_verdict_first(real, real_html):
    plan = real[0].to_dict()
    verdict = real_html[real_html.index('id="sp-verdict"'):real_html.index('id="sp-structure"')]
    from markupsafe import escape

    assert escape(plan["verdict"]["text"]) in verdict
    for c in plan["candidates"][:3]:
        assert f"#{c['rank']}</span>" in verdict and escape(c["counterion"]) in verdict


def test_real_screen_plate_matches_wells(real, real_html):
    screen = real[1].to_dict()
    plate = real_html[real_html.index('class="sp-plate"'):]
    plate = plate[:plate.index("</table>")]
    for w in screen["wells"]:
        m = re.search(rf'<td class="sp-(\w+)[^"]*"[^>]*><span class="sp-well">{w["well"]}</span>',
                      plate)
        assert m and m.group(1) == w["kind"], w["well"]
    for d in screen["dropped"]:
        assert d["reason"].split("(")[0].strip() in real_html
    from markupsafe import escape

    basis = real_html[real_html.index("Basis of the amounts"):]
    for cid, b in screen["basis"]["counterions"].items():
        assert escape(cid) in basis and escape(b["mw_source"]) in basis
    assert escape(screen["basis"]["api_mw"]["source"]) in basis


def test_real_reports_deterministic(real):
    from saltplan.plan.planner import plan_salts

    plan, screen = real
    again = plan_salts(fx.SMILES, name="TST-7 (test compound)", dose_mg=100, measured={13: 5.2})
    a, b = plan.to_dict(), again.to_dict()
    assert _strip_created(render_plan_markdown(a), a["provenance"]["created"]) == \
        _strip_created(render_plan_markdown(b), b["provenance"]["created"])
    assert render_plan_json(a).replace(a["provenance"]["created"], "") == \
        render_plan_json(b).replace(b["provenance"]["created"], "")


def test_real_no_site_plan():
    from saltplan.plan.planner import plan_salts

    # an aryl ester-ether without acidic or basic group (general chemistry: neither esters
    # nor aryl ethers ionize in water)
    plan = plan_salts("CCOC(=O)c1ccc(OC)cc1", name="TST-9 neutral").to_dict()
    assert plan["verdict"]["code"] == "no_ionizable_site"
    html = render_plan_html(plan)
    assert "no salt screen recommended" in html and 'id="sp-candidates"' not in html
    for alt in plan["verdict"]["alternatives"]:
        assert alt.split(":")[0].split("(")[0].strip() in html


def test_real_vial_screen_has_no_plate(real):
    from saltplan.screen.design import design_screen

    vial = design_screen(real[0], 2000, scale="vial").to_dict()
    html = render_plan_html(real[0], vial)
    assert 'class="sp-plate"' not in html
    assert all(f"<td>{w['well']}</td>" in html for w in vial["wells"])


def test_write_report_objects(tmp_path, real):
    plan, screen = real
    paths = write_plan_report(plan, tmp_path, screen=screen)
    assert json.loads(paths[2].read_text(encoding="utf-8")) == plan.to_dict()
    assert "Screen design" in paths[1].read_text(encoding="utf-8")


def test_rationale_explains_choices_and_exclusions(html, plan, screen):
    from markupsafe import escape

    text = html[html.index('id="sp-rationale"'):html.index('id="sp-cautions"')]
    for c in plan["candidates"][:3]:
        assert escape(c["counterion"]) in text and f"ΔpKa {c['delta_pka']:.2f}" in text
    for c in plan["excluded"]:
        assert escape(c["reason"]) in text
    assert "Common-ion effect" in text                  # liability of a recommended salt
    if screen["dropped"]:
        assert escape(screen["dropped"][0]["reason"]) in text
    assert "USP–NF" in text and "qualified staff" in text


def test_rationale_caps_long_lists(plan):
    from saltplan.reports.context import build_context

    big = copy.deepcopy(plan)
    base = big["candidates"][5]
    big["candidates"] = [dict(base, rank=i + 1, counterion=f"ion{i:02d}") for i in range(30)]
    paras = build_context(big, graphics=False)["rationale"]
    lower = next(p for p in paras if p.startswith("Also feasible"))
    assert "and 19 more" in lower and "ion10" in lower and "ion11" not in lower


def _tag_names(html: str) -> list[str]:
    return [t for t, _ in _tags(html)]


@settings(max_examples=25, deadline=None)
@given(st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), min_size=1,
               max_size=40))
def test_any_user_text_leaves_the_markup_unchanged(text):
    # whatever a user types as a name or a library liability, the page keeps its structure
    p = fx.plan_dict(name=text)
    p["candidates"][0]["caveats"][0]["text"] = text
    reference = fx.plan_dict(name="plain")
    reference["candidates"][0]["caveats"][0]["text"] = "plain"
    assert _tag_names(render_plan_html(p)) == _tag_names(render_plan_html(reference))
    md = render_plan_markdown(p)
    assert not _LIVE_LINK.search(md) and not _LIVE_TAG.search(md)


def test_unnamed_compound(plan):
    p = copy.deepcopy(plan)
    p["name"] = None
    p["parent"]["name"] = None
    assert "Salt-form plan: unnamed compound" in render_plan_html(p)


def test_weak_sites_verdict_keeps_the_exclusions(plan):
    p = copy.deepcopy(plan)
    p["candidates"] = []
    p["verdict"] = {"code": "weak_sites_only", "text": "No counterion reaches ΔpKa ≥ 2.",
                    "alternatives": ["co-crystal screen"]}
    html = render_plan_html(p)
    assert "no salt screen recommended" in html and "Excluded counterions" in html
    assert html.count('class="sp-chart"') == 3          # ΔpKa chart shows the exclusions
    for c in p["excluded"]:
        assert c["reason"] in html
