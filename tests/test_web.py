"""The browser workbench (saltplan/web) driven in-process by Starlette's TestClient."""
from __future__ import annotations

import html
import re

import pytest

pytest.importorskip("starlette")
from starlette.testclient import TestClient  # noqa: E402
from test_reliability_injection import HOSTILE  # noqa: E402

from saltplan.web import create_app  # noqa: E402
from saltplan.web.app import MAX_BODY_BYTES  # noqa: E402

# an invented tertiary-amine test base (aliphatic amine pKa around 9-10, CRC Handbook range)
API = "CN(C)CCc1ccc(Cl)cc1"
CSP_SELF = "script-src 'self'"


@pytest.fixture
def client(tmp_path):
    c = TestClient(create_app(jobs_root=tmp_path / "jobs"))
    assert c.get("/").status_code == 200          # sets the CSRF cookie
    return c


def _tok(c):
    return c.cookies.get("saltplan_csrf")


def _new(c, structure=API, name="HRN-101", **extra):
    return c.post("/new", data={"csrf_token": _tok(c), "structure": structure, "name": name, **extra},
                  follow_redirects=False)


def _compound(c, **kw):
    r = _new(c, **kw)
    assert r.status_code == 303, r.text[-500:]
    return r.headers["location"]


def test_pages_carry_security_headers(client):
    r = client.get("/")
    assert CSP_SELF in r.headers["content-security-policy"]
    assert r.headers["x-frame-options"] == "DENY"
    assert "http" not in r.headers["content-security-policy"]     # nothing from a network
    assert 'src="/static/htmx.min.js"' in r.text


def test_static_assets_served_and_licensed(client):
    for path in ("/static/htmx.min.js", "/static/workbench.js", "/static/workbench.css",
                 "/report.css", "/static/LICENSES.md"):
        assert client.get(path).status_code == 200, path
    assert "htmx" in client.get("/static/LICENSES.md").text


def test_new_compound_then_compound_page(client):
    url = _compound(client)
    r = client.get(url)
    assert r.status_code == 200
    assert "HRN-101" in r.text
    assert "Ranked candidates" in r.text and "sp-cands" in r.text
    assert 'for="pka"' in r.text and 'id="pka"' in r.text
    home = client.get("/")
    assert "HRN-101" in home.text and url in home.text


def test_bad_smiles_is_inline_error_not_error_page(client):
    r = _new(client, structure="C1CC((")
    assert r.status_code == 422
    assert 'id="structure-error"' in r.text and "unparsable SMILES" in r.text
    assert "C1CC((" in r.text                           # what was typed is kept
    assert "<h1>New compound</h1>" in r.text


def test_text_is_never_a_server_path(client, tmp_path):
    f = tmp_path / "x.smi"
    f.write_text("CCN(CC)CC\n")
    for text in (str(f), "/etc/passwd", "../../etc/hosts", str(tmp_path)):
        r = _new(client, structure=text)
        assert r.status_code == 422, text
        assert "not found" not in r.text and "directory" not in r.text


def test_upload_mol_file(client):
    from rdkit import Chem

    block = Chem.MolToMolBlock(Chem.MolFromSmiles(API))
    r = client.post("/new", data={"csrf_token": _tok(client), "name": ""},
                    files={"file": ("a.mol", block.encode(), "chemical/x-mdl-molfile")},
                    follow_redirects=False)
    assert r.status_code == 303


def test_upload_two_record_sdf_refused_inline(client):
    from rdkit import Chem

    block = Chem.MolToMolBlock(Chem.MolFromSmiles(API)) + "$$$$\n"
    r = client.post("/new", data={"csrf_token": _tok(client)},
                    files={"file": ("a.sdf", (block * 2).encode(), "chemical/x-mdl-sdfile")})
    assert r.status_code == 422 and "2 records" in r.text


def test_csrf_refused(client):
    r = client.post("/new", data={"structure": API}, follow_redirects=False)
    assert r.status_code == 403 and "security token" in r.text
    r = client.post("/new", data={"structure": API, "csrf_token": "x" * 32}, follow_redirects=False)
    assert r.status_code == 403
    url = _compound(client)
    r = client.post(url + "/inputs", data={"pka": "9"}, headers={"hx-request": "true"})
    assert r.status_code == 403
    r = client.post(url + "/screen", data={"budget_mg": "100"})
    assert r.status_code == 403


def test_upload_size_limit(client):
    big = b"C" * (MAX_BODY_BYTES + 10)
    r = client.post("/new", data={"csrf_token": _tok(client)}, files={"file": ("a.smi", big)})
    assert r.status_code == 413 and "too large" in r.text


def test_measured_pka_updates_plan_in_place(client):
    url = _compound(client)
    r = client.post(url + "/inputs", headers={"hx-request": "true"},
                    data={"csrf_token": _tok(client), "pka": "base=7.10", "dose_mg": "50",
                          "route": "oral"})
    assert r.status_code == 200
    assert "<html" not in r.text                       # a fragment for htmx, not a page
    assert "7.1" in r.text and "measured" in r.text
    plan = client.get(url + "/download/plan.json").json()
    assert plan["inputs"]["dose_mg"] == 50
    assert any(s.get("provenance") == "measured" or "measured" in str(s) for s in plan["sites"])


@pytest.mark.parametrize("field,value,word", [("dose_mg", "lots", "daily dose"),
                                               ("pka", "acid=x", "pka"),
                                               ("melting_point_c", "9000", "melting point"),
                                               ("route", "rectal<script>", "route")])
def test_bad_input_is_inline(client, field, value, word):
    url = _compound(client)
    r = client.post(url + "/inputs", headers={"hx-request": "true"},
                    data={"csrf_token": _tok(client), field: value})
    assert r.status_code == 200 and 'id="inputs-error"' in r.text
    assert word.lower() in r.text.lower()
    assert "<script>" not in r.text.split("sp-report")[0]


def test_screen_designer_and_over_budget(client):
    url = _compound(client)
    r = client.post(url + "/screen", data={"csrf_token": _tok(client), "budget_mg": "2"},
                    headers={"hx-request": "true"})
    assert 'id="screen-error"' in r.text and "budget" in r.text
    assert client.get(url + "/download/worksheet.csv").status_code == 404   # nothing saved
    r = client.post(url + "/screen", data={"csrf_token": _tok(client), "budget_mg": "800"},
                    headers={"hx-request": "true"})
    assert "sp-plate" in r.text and "screen-error" not in r.text
    csv_text = client.get(url + "/download/worksheet.csv").text
    assert csv_text.count("\n") > 4
    report = client.get(url + "/download/report.html")
    assert "attachment" in report.headers["content-disposition"] and "sp-plate" in report.text


def test_downloads(client):
    url = _compound(client)
    for kind, mark in (("report.html", "<html"), ("report.md", "#"), ("plan.json", "{")):
        r = client.get(url + "/download/" + kind)
        assert r.status_code == 200 and r.text.lstrip().startswith(mark) or mark in r.text[:200]
        assert 'filename="HRN-101-' in r.headers["content-disposition"]
    assert client.get(url + "/download/..%2f..%2fetc%2fpasswd").status_code == 404
    assert client.get("/c/../download/plan.json").status_code == 404
    assert client.get("/c/x1").status_code == 404


@pytest.mark.parametrize("case", sorted(HOSTILE))
def test_hostile_names_escaped_everywhere(client, case):
    text = HOSTILE[case]
    url = _compound(client, name=text)
    pages = [client.get("/").text, client.get(url).text, client.get(url + "/screen").text,
             client.get("/", params={"q": text}).text]
    for page in pages:
        assert "<script>alert" not in page
        assert "onerror=alert" not in page.replace("onerror=alert(1)&gt;", "")
        assert not re.search(r"<svg onload", page)
    if case == "jinja":                                   # not evaluated as a template
        assert "{{ 7*7 }}" in pages[1]


def test_search_name_substructure_similarity(client):
    _compound(client, name="HRN-101")
    _compound(client, structure="CCOC(=O)c1ccc(N)cc1", name="HRN-102")
    assert "HRN-102" not in client.get("/?q=101&mode=name").text.split("<main")[1]
    sub = client.get("/?q=c1ccc(Cl)cc1&mode=substructure").text.split("<main")[1]
    assert "HRN-101" in sub and "HRN-102" not in sub
    sim = client.get("/?q=CN(C)CCc1ccc(Br)cc1&mode=similarity").text.split("<main")[1]
    assert "HRN-101" in sim
    bad = client.get("/?q=C1((&mode=substructure").text
    assert 'class="error"' in bad


def test_token_gate_for_non_local_bind():
    c = TestClient(create_app(token="s3cret-token-value"))
    assert c.get("/").status_code == 401
    assert c.get("/static/htmx.min.js").status_code == 401
    assert c.get("/?token=wrong").status_code == 401
    r = c.get("/?token=s3cret-token-value")
    assert r.status_code == 200                  # redirected, cookie kept
    assert c.get("/new").status_code == 200


def test_serve_command_binds_loopback_by_default(monkeypatch, cli):
    import uvicorn

    seen = {}
    monkeypatch.setattr(uvicorn, "run", lambda app, host, port, **kw: seen.update(host=host, port=port))
    result = cli("serve")
    assert result.exit_code == 0, result.output
    assert seen["host"] == "127.0.0.1" and seen["port"] > 0
    assert "token" not in result.output and f":{seen['port']}/" in result.output


def test_serve_command_token_beyond_loopback(monkeypatch, cli):
    import uvicorn

    from saltplan.cli.serve import is_loopback

    monkeypatch.setattr(uvicorn, "run", lambda app, host, port, **kw: None)
    result = cli("serve", "--host", "0.0.0.0", "--port", "8765")     # never actually bound
    assert result.exit_code == 0
    assert re.search(r"token: \S{20,}", result.output)
    assert is_loopback("127.0.0.1") and is_loopback("::1") and not is_loopback("0.0.0.0")


def _screened(c):
    url = _compound(c)
    r = c.post(url + "/screen", data={"csrf_token": _tok(c), "budget_mg": "800"})
    assert r.status_code == 200 and "sp-plate" in r.text
    wells = list(dict.fromkeys(re.findall(r'action="[^"]*/results/well/([A-H][0-9]{1,2})"',
                                          c.get(url + "/results").text)))
    assert len(wells) >= 6
    return url, wells


GOOD = {"outcome": "crystalline", "form_label": "A", "melting_onset_c": "181",
        "weight_gain_80rh_pct": "0.4", "stoichiometry_found": "1:1"}


def _save(c, url, well, version, **values):
    return c.post(f"{url}/results/well/{well}", headers={"hx-request": "true"},
                  data={"csrf_token": _tok(c), "version": str(version), **values})


def test_results_entry_and_decision(client):
    url, wells = _screened(client)
    assert client.get(url + "/decision").text.count('class="error"') == 1   # nothing yet
    for w in wells[:3]:
        r = _save(client, url, w, 0, **GOOD)
        assert r.headers["x-saltplan-status"] == "200" and "saved (version 1)" in r.text
    r = client.get(url + "/decision")
    assert 'id="lead"' in r.text and "Open questions" in r.text
    lead = re.search(r'<dd id="lead">([^<]*)<', r.text).group(1)
    assert lead != "none"
    rec = client.get(url + "/decision/download/decision.md")
    assert rec.status_code == 200 and "attachment" in rec.headers["content-disposition"]
    assert lead.split("/")[0] in rec.text
    csv_text = client.get(url + "/decision/download/results.csv").text
    assert csv_text.count("\n") == 4 and csv_text.startswith("well,outcome")


def test_bad_well_value_same_message_as_results_file(client):
    from saltplan.errors import ResultsError
    from saltplan.select.results import parse_results

    url, wells = _screened(client)
    r = _save(client, url, wells[0], 0, outcome="crystalline", melting_onset_c="hot")
    assert r.headers["x-saltplan-status"] == "422"
    shown = html.unescape(re.search(r'role="alert"[^>]*>([^<]*)<', r.text).group(1))
    design = client.app.state.workbench.store.get(url.rsplit("/", 1)[1]).screen_dict
    with pytest.raises(ResultsError) as info:
        parse_results(f"well,outcome,melting_onset_c\n{wells[0]},crystalline,hot\n", design)
    assert info.value.message in shown
    assert 'value="hot"' in r.text                      # what was typed is kept
    r = _save(client, url, wells[0], 0, outcome="purple")
    assert r.headers["x-saltplan-status"] == "422" and "not recognised" in r.text


def test_two_tabs_same_well_second_refused_nothing_lost(client):
    url, wells = _screened(client)
    w = wells[0]
    first = _save(client, url, w, 0, **GOOD)               # tab 1, opened at version 0
    assert first.headers["x-saltplan-status"] == "200"
    second = _save(client, url, w, 0, outcome="oil", notes="tab two")   # tab 2, also version 0
    assert second.headers["x-saltplan-status"] == "409"
    assert "saved elsewhere" in second.text and "nothing was overwritten" in second.text
    assert 'value="tab two"' in second.text                # tab 2's values still in its form
    page = client.get(url + "/results").text
    form = page[page.index(f'id="well-{w}"'):]
    assert "<option selected>crystalline</option>" in form[:3000]    # tab 1's save kept
    again = _save(client, url, w, 1, outcome="oil", notes="tab two")  # after reload: accepted
    assert again.headers["x-saltplan-status"] == "200" and "version 2" in again.text


def test_results_file_upload(client):
    url, wells = _screened(client)
    body = "well,outcome,form_label\n" + "".join(f"{w},crystalline,A\n" for w in wells[:2])
    r = client.post(url + "/results/upload", data={"csrf_token": _tok(client)},
                    files={"file": ("r.csv", body.encode(), "text/csv")})
    assert r.status_code == 200 and "2 wells taken" in r.text
    bad = "well,outcome\nZ99,crystalline\n"
    r = client.post(url + "/results/upload", data={"csrf_token": _tok(client)},
                    files={"file": ("../../etc/r.csv", bad.encode(), "text/csv")})
    assert r.status_code == 422 and "Z99" in r.text and "/etc" not in r.text


def test_results_need_a_screen(client):
    url = _compound(client)
    assert client.get(url + "/results").status_code == 404
    assert "design the screen first" in client.get(url + "/decision").text


# ------------------------------------------------------------------ portfolio runs
# invented candidates: a tertiary amine, benzoic acid (pKa 4.20, CRC Handbook), pyridine
# (5.23, CRC Handbook), butane (no site), a bad SMILES, paracetamol-like phenol amide
PORTFOLIO = "id,name,smiles\n" + "".join(
    f"HRN-1{i:02d},cand {i},{s}\n" for i, s in enumerate(
        ["CN(C)CCc1ccc(Cl)cc1", "OC(=O)c1ccccc1", "c1ccncc1", "CCCC", "C1CC((",
         "CC(=O)Nc1ccc(O)cc1"] * 2))


def _portfolio(c, body=PORTFOLIO, name="cands.csv"):
    import time

    r = c.post("/portfolio", data={"csrf_token": _tok(c)},
               files={"file": (name, body.encode(), "text/csv")}, follow_redirects=False)
    assert r.status_code == 303, r.text[-400:]
    url = r.headers["location"]
    for _ in range(600):
        p = c.get(url + "/progress")
        assert p.status_code == 200 and "<progress" in p.text
        if p.headers.get("hx-refresh"):
            return url
        time.sleep(0.1)
    pytest.fail("portfolio run did not finish")


def test_portfolio_run_table_and_exports(client):
    url = _portfolio(client)
    page = client.get(url).text
    assert "All 12 rows planned." in page
    rows = re.findall(r'<tr data-row="(\d+)">', page)
    assert rows == [str(i) for i in range(1, 13)]            # input order, none lost
    # sorted by most basic pKa, highest first: the tertiary amine (aliphatic amine ~9-10)
    top = re.findall(r'<tr data-row="(\d+)">', client.get(url + "?sort=most_basic_pka&dir=desc").text)
    assert top[0] in ("1", "7")
    errors = client.get(url + "?verdict=error").text
    assert errors.count("<tr data-row") == 2 and "SMILES" in errors
    assert client.get(url + "?q=HRN-103").text.count("<tr data-row") == 1
    thumb = client.get(url + "/thumb/1.svg")
    assert thumb.status_code == 200 and thumb.headers["content-type"].startswith("image/svg")
    assert client.get(url + "/thumb/5.svg").status_code == 404           # the bad SMILES
    csv_text = client.get(url + "/download/portfolio.csv").text
    assert csv_text.startswith("row,id,name") and csv_text.count("\n") == 13
    xlsx = client.get(url + "/download/portfolio.xlsx")
    assert xlsx.content[:2] == b"PK"
    import io

    from openpyxl import load_workbook

    sheet = load_workbook(io.BytesIO(xlsx.content)).active
    assert sheet.max_row == 13
    assert "<html" in client.get(url + "/download/summary.html").text
    assert client.get(url + "/download/..%2fx").status_code == 404
    assert "cands.csv" in client.get("/").text                          # listed on home


def test_portfolio_bad_uploads_inline(client):
    def up(body, name):
        return client.post("/portfolio", data={"csrf_token": _tok(client)},
                           files={"file": (name, body, "text/csv")})

    r = up(b"id,structure\nA,CCN\n", "x.csv")
    assert r.status_code == 422 and 'id="portfolio-error"' in r.text and "smiles" in r.text
    r = up(b"PK\0\0binary", "x.xlsx")
    assert r.status_code == 422 and ".csv or .sdf" in r.text
    r = up(b"id,smiles\n", "../../etc/x.csv")
    assert r.status_code == 422 and "/etc" not in r.text.split('id="portfolio-error"')[1][:300]
    r = client.post("/portfolio", data={"csrf_token": _tok(client)})
    assert r.status_code == 422
    assert client.get("/p/nosuchjob12").status_code == 404
    assert client.post("/portfolio", files={"file": ("x.csv", b"smiles\nC\n")}).status_code == 403


def test_portfolio_row_limit(client, monkeypatch):
    from saltplan.web import jobs

    monkeypatch.setattr(jobs, "MAX_ROWS", 3)
    r = client.post("/portfolio", data={"csrf_token": _tok(client)},
                    files={"file": ("c.csv", PORTFOLIO.encode(), "text/csv")})
    assert r.status_code == 422 and "12 rows" in r.text and "saltplan batch" in r.text


def test_portfolio_stop(client):
    big = "id,smiles\n" + "".join(f"X{i},CN(C)CCc1ccc(Cl)cc1\n" for i in range(400))
    r = client.post("/portfolio", data={"csrf_token": _tok(client)},
                    files={"file": ("big.csv", big.encode(), "text/csv")}, follow_redirects=False)
    url = r.headers["location"]
    assert "Stop the run" in client.get(url).text
    client.post(url + "/stop", data={"csrf_token": _tok(client)})
    import time

    for _ in range(100):
        if "Stopped after" in client.get(url).text:
            break
        time.sleep(0.1)
    assert "Stopped after" in client.get(url).text
