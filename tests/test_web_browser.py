"""The workbench in a real headless Chromium (Debian's ``chromium`` + ``chromedriver``,
driven by Selenium; nothing is downloaded: the driver and browser paths are given and
Selenium Manager is kept offline).

The server is the real one: ``create_app()`` in uvicorn on 127.0.0.1 and a free port, in a
thread of the test process. After every page the test checks, in the browser itself:

* no console error and no failed asset (script, style sheet, image);
* no request to any host but the test server (every request is seen in the performance
  log; the browser is also told that every other host does not resolve);
* no two visible elements overlap and nothing sticks out sideways at 1280 px width;
* every form control has a label.

A full-page screenshot of each page is written to ``tests/artifacts/workbench/``.
"""
from __future__ import annotations

import base64
import json
import os
import re
import shutil
import socket
import threading
import time
from pathlib import Path
from urllib.parse import urlsplit

import pytest

pytestmark = [pytest.mark.slow, pytest.mark.browser]

webdriver = pytest.importorskip("selenium.webdriver")
from selenium.common.exceptions import StaleElementReferenceException  # noqa: E402
from selenium.webdriver.chrome.service import Service  # noqa: E402
from selenium.webdriver.common.action_chains import ActionChains  # noqa: E402
from selenium.webdriver.common.by import By  # noqa: E402
from selenium.webdriver.common.keys import Keys  # noqa: E402
from selenium.webdriver.support.ui import Select, WebDriverWait  # noqa: E402

ARTIFACTS = Path(__file__).resolve().parent / "artifacts" / "workbench"
WIDTH = 1280
# an invented tertiary-amine test base (aliphatic amine pKa around 9-10, CRC Handbook range)
API = "CN(C)CCc1ccc(Cl)cc1"


def _which(*names: str) -> str | None:
    for name in names:
        found = shutil.which(name)
        if found:
            return found
    return None


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


# ------------------------------------------------------------------ fixtures
@pytest.fixture(scope="module")
def server(tmp_path_factory):
    import uvicorn

    from saltplan.web import create_app

    port = _free_port()
    app = create_app(jobs_root=tmp_path_factory.mktemp("jobs"))
    config = uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning",
                            access_log=False, lifespan="on")
    srv = uvicorn.Server(config)
    thread = threading.Thread(target=srv.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 20
    while not srv.started:
        if time.monotonic() > deadline or not thread.is_alive():
            pytest.fail("the workbench server did not start")
        time.sleep(0.05)
    yield f"http://127.0.0.1:{port}", app
    srv.should_exit = True
    thread.join(10)


@pytest.fixture(scope="module")
def browser(tmp_path_factory):
    chromium = _which("chromium", "chromium-browser")
    driver_path = _which("chromedriver")
    if not chromium or not driver_path:
        pytest.skip("Debian's 'chromium' and 'chromium-driver' are needed (.ci/run installs them)")
    os.environ["SE_OFFLINE"] = "true"            # Selenium Manager never fetches anything
    options = webdriver.ChromeOptions()
    options.binary_location = chromium
    profile = tmp_path_factory.mktemp("chromium-profile")
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                 f"--window-size={WIDTH},900", f"--user-data-dir={profile}",
                 "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--disable-extensions",
                 "--disable-default-apps", "--hide-scrollbars", "--mute-audio",
                 "--host-resolver-rules=MAP * ~NOTFOUND, EXCLUDE 127.0.0.1"):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    driver = webdriver.Chrome(service=Service(driver_path), options=options)
    driver.set_page_load_timeout(60)
    downloads = tmp_path_factory.mktemp("downloads")
    driver.execute_cdp_cmd("Page.setDownloadBehavior",
                           {"behavior": "allow", "downloadPath": str(downloads)})
    driver.downloads = downloads
    driver.get("about:blank")
    driver.get_log("performance")                # the browser's start-up, not a page's
    driver.get_log("browser")
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    yield driver
    driver.quit()


# ------------------------------------------------------------------ page checks
OVERLAPS = r"""
var sel = 'a,button,input,select,textarea,label,h1,h2,h3,legend,th,td,p,li,dt,dd,figure,img,svg,code,span.status';
var els = Array.prototype.filter.call(document.querySelectorAll(sel), function (e) {
  if (e.parentElement && e.parentElement.closest('svg')) return false;
  if (e.type === 'hidden' || e.classList.contains('skip')) return false;
  var r = e.getBoundingClientRect(), s = getComputedStyle(e);
  return r.width > 0 && r.height > 0 && s.visibility !== 'hidden' && s.display !== 'none';
});
function name(e) {
  return e.tagName.toLowerCase() + (e.id ? '#' + e.id : '') +
    (e.className && typeof e.className === 'string' ? '.' + e.className.split(' ')[0] : '') +
    ' "' + (e.textContent || e.value || '').trim().slice(0, 30) + '"';
}
var rects = els.map(function (e) { return e.getBoundingClientRect(); });
var out = [];
for (var i = 0; i < els.length && out.length < 10; i++) {
  for (var j = i + 1; j < els.length; j++) {
    var a = rects[i], b = rects[j];
    var w = Math.min(a.right, b.right) - Math.max(a.left, b.left);
    var h = Math.min(a.bottom, b.bottom) - Math.max(a.top, b.top);
    if (w > 2 && h > 2 && !els[i].contains(els[j]) && !els[j].contains(els[i])) {
      out.push(name(els[i]) + ' overlaps ' + name(els[j]));
      if (out.length >= 10) break;
    }
  }
}
var sw = document.documentElement.scrollWidth, cw = document.documentElement.clientWidth;
if (sw > cw + 1) out.push('page is ' + sw + ' px wide in a ' + cw + ' px window');
return out;
"""

UNLABELLED = r"""
return Array.prototype.filter.call(document.querySelectorAll('input,select,textarea'), function (e) {
  if (e.type === 'hidden') return false;
  return !(e.labels && e.labels.length) && !e.getAttribute('aria-label') &&
         !e.getAttribute('aria-labelledby');
}).map(function (e) { return e.name || e.id || e.outerHTML.slice(0, 60); });
"""


def _network(driver, base: str) -> tuple[list[str], list[str]]:
    """(requests to other hosts, failed assets) since the last call."""
    host = urlsplit(base).netloc
    outside, failed = [], []
    for entry in driver.get_log("performance"):
        msg = json.loads(entry["message"])["message"]
        params = msg.get("params", {})
        if msg.get("method") == "Network.requestWillBeSent":
            url = params.get("request", {}).get("url", "")
            if url.startswith(("data:", "blob:", "about:", "chrome:", "chrome-untrusted:")):
                continue                 # inline data and the browser's own pages
            if urlsplit(url).netloc != host:
                outside.append(url)
        elif msg.get("method") == "Network.responseReceived":
            resp = params.get("response", {})
            if params.get("type") in ("Script", "Stylesheet", "Image", "Font") and resp.get("status", 0) >= 400:
                failed.append(f"{resp.get('status')} {resp.get('url')}")
        elif msg.get("method") == "Network.loadingFailed" and params.get("type") in (
                "Script", "Stylesheet", "Image", "Font"):
            failed.append(f"{params.get('errorText')} ({params.get('type')})")
    return outside, failed


def _console_errors(driver, allowed=()) -> list[str]:
    out = []
    for entry in driver.get_log("browser"):
        if entry["level"] != "SEVERE":
            continue
        if any(re.search(a, entry["message"]) for a in allowed):
            continue
        out.append(entry["message"])
    return out


def check_page(driver, base: str, name: str, allowed_console=()) -> None:
    """The checks of the module docstring, and the screenshot."""
    shot = driver.execute_cdp_cmd("Page.captureScreenshot",
                                  {"format": "png", "captureBeyondViewport": True})
    (ARTIFACTS / f"{name}.png").write_bytes(base64.b64decode(shot["data"]))
    errors = _console_errors(driver, allowed_console)
    outside, failed = _network(driver, base)
    assert not errors, f"{name}: console errors {errors}"
    assert not outside, f"{name}: requests beyond the test server {outside}"
    assert not failed, f"{name}: assets that did not load {failed}"
    overlaps = driver.execute_script(OVERLAPS)
    assert not overlaps, f"{name}: layout problems at {WIDTH} px: {overlaps}"
    unlabelled = driver.execute_script(UNLABELLED)
    assert not unlabelled, f"{name}: form controls without a label: {unlabelled}"


def wait_for(driver, css: str, text: str | None = None, timeout: float = 30):
    def found(d):
        try:
            for el in d.find_elements(By.CSS_SELECTOR, css):
                if el.is_displayed() and (text is None or text in el.text):
                    return el
        except StaleElementReferenceException:
            return False
        return False

    return WebDriverWait(driver, timeout, poll_frequency=0.1).until(
        found, f"nothing matched {css!r}" + (f" with {text!r}" if text else ""))


def _type(el, text: str) -> None:
    el.clear()
    el.send_keys(text)


def _download(driver, link_text: str, suffix: str, timeout: float = 30) -> str:
    before = set(driver.downloads.iterdir())
    driver.find_element(By.LINK_TEXT, link_text).click()
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        new = [p for p in set(driver.downloads.iterdir()) - before
               if p.name.endswith(suffix)]
        if new:
            time.sleep(0.2)
            return new[0].read_text(encoding="utf-8")
        time.sleep(0.1)
    pytest.fail(f"no *{suffix} arrived in the download folder after clicking {link_text!r}")


# a document answered 422 on purpose (the inline error page) is logged by Chromium
REFUSED_DOCUMENT = r"status of 422"


# ------------------------------------------------------------------ the tests
def test_keyboard_reaches_every_field_of_new_compound(browser, server):
    base, _app = server
    browser.get(base + "/new")
    keys = ActionChains(browser)
    order = []
    for _ in range(12):
        keys.send_keys(Keys.TAB).perform()
        active = browser.switch_to.active_element
        order.append(active.get_attribute("id") or active.get_attribute("class")
                     or active.tag_name)
    assert order[0] == "skip"                                  # skip link first
    fields = [f for f in order if f in ("name", "structure", "file")]
    assert fields[:3] == ["name", "structure", "file"], order
    check_page(browser, base, "00-new-compound")


def test_whole_loop_structure_to_decision_record(browser, server):
    base, _app = server
    # 1. a bad SMILES: inline message on the same page, text kept
    browser.get(base + "/new")
    _type(browser.find_element(By.ID, "structure"), "C1CC((")
    browser.find_element(By.CSS_SELECTOR, "form.stack button[type=submit]").click()
    err = wait_for(browser, "#structure-error")
    assert "SMILES" in err.text
    assert browser.find_element(By.ID, "structure").get_attribute("value") == "C1CC(("
    assert browser.find_element(By.TAG_NAME, "h1").text == "New compound"
    check_page(browser, base, "01-new-compound-bad-smiles", allowed_console=[REFUSED_DOCUMENT])

    # 2. paste a good SMILES, submitted from the keyboard
    _type(browser.find_element(By.ID, "name"), "HRN-101")
    _type(browser.find_element(By.ID, "structure"), API)
    browser.find_element(By.CSS_SELECTOR, "form.stack button[type=submit]").send_keys(Keys.ENTER)
    wait_for(browser, "h1", "HRN-101")
    assert re.search(r"/c/c[0-9]+$", browser.current_url)
    sites = wait_for(browser, "#sp-sites h3")
    assert re.search(r"N1: .*amine \(base\), pKa [0-9]+\.[0-9]{2}", sites.text), sites.text
    assert browser.find_element(By.CSS_SELECTOR, "#sp-structure svg").is_displayed()
    check_page(browser, base, "02-compound")
    compound = browser.current_url

    # 3. a measured pKa replaces the estimate, in place (no page load)
    marker = browser.execute_script("window.__sp_same_page = 1; return 1")
    _type(browser.find_element(By.ID, "pka"), "base=7.10")
    browser.find_element(By.CSS_SELECTOR, "form.inputs button[type=submit]").click()
    wait_for(browser, "#sp-sites h3", "pKa 7.10")
    assert browser.execute_script("return window.__sp_same_page") == marker
    assert "measured" in browser.find_element(By.CSS_SELECTOR, "#sp-sites h3").text
    check_page(browser, base, "03-compound-measured-pka")

    # 4. the screen designer: over budget shown before anything is saved
    browser.find_element(By.LINK_TEXT, "Design the screen").click()
    wait_for(browser, "h1", "Screen design")
    budget = browser.find_element(By.ID, "budget_mg")
    _type(budget, "2")
    budget.send_keys(Keys.TAB)
    err = wait_for(browser, "#screen-error")
    assert "budget" in err.text.lower()
    status = browser.execute_async_script(
        "var done = arguments[arguments.length - 1];"
        "fetch(arguments[0]).then(function (r) { done(r.status); });",
        compound + "/download/worksheet.csv")
    assert status == 404                                    # nothing was saved
    check_page(browser, base, "04-screen-over-budget",
               allowed_console=[r"worksheet\.csv.*404"])
    budget = browser.find_element(By.ID, "budget_mg")
    _type(budget, "800")
    budget.send_keys(Keys.TAB)
    wait_for(browser, "#screen-area .sp-plate")
    assert not browser.find_elements(By.ID, "screen-error")
    worksheet = _download(browser, "worksheet (CSV)", ".csv")
    assert worksheet.startswith("well,") and worksheet.count("\n") > 4
    check_page(browser, base, "05-screen-plate")

    # 5. results: several wells, each saving itself; a bad value is refused inline
    browser.find_element(By.LINK_TEXT, "Enter results").click()
    wait_for(browser, "h1", "Results for")
    forms = browser.find_elements(By.CSS_SELECTOR, "form.well")
    assert len(forms) >= 6
    ids = [f.get_attribute("id") for f in forms]
    for fid, mp in zip(ids[:3], ("181", "176", "169"), strict=True):
        _type(browser.find_element(By.ID, f"{fid}-form_label"), "A")
        _type(browser.find_element(By.ID, f"{fid}-melting_onset_c"), mp)
        _type(browser.find_element(By.ID, f"{fid}-stoichiometry_found"), "1:1")
        Select(browser.find_element(By.ID, f"{fid}-outcome")).select_by_visible_text("crystalline")
        wait_for(browser, f"#{fid} .status", "saved (version 1)")
    bad = ids[3]
    _type(browser.find_element(By.ID, f"{bad}-melting_onset_c"), "hot")
    Select(browser.find_element(By.ID, f"{bad}-outcome")).select_by_visible_text("crystalline")
    err = wait_for(browser, f"#{bad}-error")
    assert "melting_onset_c" in err.text or "number" in err.text, err.text
    assert browser.find_element(By.ID, f"{bad}-melting_onset_c").get_attribute("value") == "hot"
    check_page(browser, base, "06-results")
    browser.refresh()                                         # the saves were kept
    wait_for(browser, f"#{ids[0]} .status", "version 1")
    assert browser.find_element(By.ID, f"{ids[0]}-melting_onset_c").get_attribute("value") == "181"

    # 6. the decision and its record
    browser.find_element(By.LINK_TEXT, "Go to the decision").click()
    lead = wait_for(browser, "#lead").text
    assert lead and lead != "none"
    assert browser.find_elements(By.XPATH, "//h2[text()='Open questions']")
    check_page(browser, base, "07-decision")
    record = _download(browser, "Markdown", ".md")
    assert record.lstrip().startswith("#") and lead.split("/")[0] in record
    html_record = _download(browser, "HTML", ".html")
    assert "<html" in html_record and lead.split("/")[0] in html_record


def test_two_tabs_saving_one_well(browser, server):
    base, _app = server
    browser.get(base + "/new")
    _type(browser.find_element(By.ID, "name"), "HRN-102")
    _type(browser.find_element(By.ID, "structure"), API)
    browser.find_element(By.CSS_SELECTOR, "form.stack button[type=submit]").click()
    wait_for(browser, "h1", "HRN-102")
    compound = browser.current_url
    browser.get(compound + "/screen")
    budget = browser.find_element(By.ID, "budget_mg")
    _type(budget, "800")
    budget.send_keys(Keys.TAB)
    wait_for(browser, "#screen-area .sp-plate")
    first = browser.current_window_handle
    browser.get(compound + "/results")
    fid = browser.find_element(By.CSS_SELECTOR, "form.well").get_attribute("id")
    browser.switch_to.new_window("tab")
    second = browser.current_window_handle
    browser.get(compound + "/results")
    wait_for(browser, f"#{fid}")

    browser.switch_to.window(first)                          # tab 1 saves first
    Select(browser.find_element(By.ID, f"{fid}-outcome")).select_by_visible_text("crystalline")
    wait_for(browser, f"#{fid} .status", "saved (version 1)")

    browser.switch_to.window(second)                         # tab 2 still at version 0
    _type(browser.find_element(By.ID, f"{fid}-notes"), "from tab two")
    Select(browser.find_element(By.ID, f"{fid}-outcome")).select_by_visible_text("oil")
    err = wait_for(browser, f"#{fid}-error")
    assert "saved elsewhere" in err.text and "nothing was overwritten" in err.text
    assert browser.find_element(By.ID, f"{fid}-notes").get_attribute("value") == "from tab two"
    check_page(browser, base, "08-results-conflict")
    browser.close()

    browser.switch_to.window(first)
    browser.refresh()
    wait_for(browser, f"#{fid} .status", "version 1")
    chosen = Select(browser.find_element(By.ID, f"{fid}-outcome")).first_selected_option.text
    assert chosen == "crystalline"                            # tab 1's save kept


def test_bad_results_file_is_an_inline_message(browser, server, tmp_path):
    base, app = server
    browser.get(base + "/new")
    _type(browser.find_element(By.ID, "structure"), API)
    browser.find_element(By.CSS_SELECTOR, "form.stack button[type=submit]").click()
    wait_for(browser, "#sp-sites h3")
    compound = browser.current_url
    browser.get(compound + "/screen")
    budget = browser.find_element(By.ID, "budget_mg")
    _type(budget, "800")
    budget.send_keys(Keys.TAB)
    wait_for(browser, "#screen-area .sp-plate")
    browser.get(compound + "/results")
    bad = tmp_path / "results.csv"
    bad.write_text("well,outcome\nZ99,crystalline\n", encoding="utf-8")
    browser.find_element(By.ID, "results-file").send_keys(str(bad))
    browser.find_element(By.XPATH, "//button[text()='Upload results']").click()
    err = wait_for(browser, "#upload-error")
    assert "Z99" in err.text
    check_page(browser, base, "09-results-bad-file", allowed_console=[REFUSED_DOCUMENT])


def test_portfolio_upload_progress_and_table(browser, server, tmp_path):
    base, _app = server
    # invented candidates; benzoic acid 4.20 and pyridine 5.23 (CRC Handbook) among them
    smiles = ["CN(C)CCc1ccc(Cl)cc1", "OC(=O)c1ccccc1", "c1ccncc1", "CCCC", "C1CC(("]
    body = "id,name,smiles\n" + "".join(f"HRN-{200 + i},cand {i},{smiles[i % 5]}\n"
                                        for i in range(60))
    src = tmp_path / "candidates.csv"
    src.write_text(body, encoding="utf-8")
    browser.get(base + "/portfolio")
    check_page(browser, base, "10-portfolio-upload")
    browser.find_element(By.ID, "portfolio-file").send_keys(str(src))
    browser.find_element(By.XPATH, "//button[text()='Plan the portfolio']").click()
    bar = wait_for(browser, "#job-bar")                      # the progress bar is shown
    assert bar.tag_name == "progress"
    job_url = browser.current_url
    check_page(browser, base, "11-portfolio-running")
    browser.get(base + "/")                                   # leave ...
    wait_for(browser, "a", "candidates.csv").click()          # ... and come back
    assert browser.current_url == job_url
    wait_for(browser, "#job-done", "All 60 rows planned", timeout=120)
    rows = browser.find_elements(By.CSS_SELECTOR, "table.portfolio tbody tr")
    assert len(rows) == 50                                    # the first page
    WebDriverWait(browser, 20).until(lambda d: d.execute_script(
        "return Array.prototype.every.call(document.querySelectorAll('table.portfolio img'),"
        " function (i) { return i.getBoundingClientRect().top > innerHeight ||"
        " (i.complete && i.naturalWidth > 0); })"))
    check_page(browser, base, "12-portfolio-table")
    browser.find_element(By.LINK_TEXT, "most basic pKa").click()
    wait_for(browser, "th[aria-sort=ascending]", "most basic pKa")
    browser.find_element(By.LINK_TEXT, "most basic pKa").click()
    wait_for(browser, "th[aria-sort=descending]", "most basic pKa")
    first = browser.find_elements(By.CSS_SELECTOR, "table.portfolio tbody tr td")[2].text
    assert first.startswith("HRN-2") and int(first[4:]) % 5 == 0        # the amine first
    Select(browser.find_element(By.ID, "verdict")).select_by_visible_text("error")
    wait_for(browser, "#table-count", "12 of 60 rows")
    check_page(browser, base, "13-portfolio-filtered")
    table = _download(browser, "table (CSV)", ".csv")
    assert table.startswith("row,id,name") and table.count("\n") == 61
    xlsx = _download_bytes(browser, "table (XLSX)", ".xlsx")
    assert xlsx[:2] == b"PK"


def _download_bytes(driver, link_text: str, suffix: str, timeout: float = 30) -> bytes:
    before = set(driver.downloads.iterdir())
    driver.find_element(By.LINK_TEXT, link_text).click()
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        new = [p for p in set(driver.downloads.iterdir()) - before if p.name.endswith(suffix)]
        if new:
            time.sleep(0.2)
            return new[0].read_bytes()
        time.sleep(0.1)
    pytest.fail(f"no *{suffix} arrived after clicking {link_text!r}")
