"""The HTML report in a real headless Chromium: loads cleanly, offline, every figure drawn.

Needs Debian's ``chromium`` (``.ci/run`` installs it when missing); skipped with a reason
otherwise. The report itself carries no script: the measuring script is injected into a
temporary copy only (and that copy's Content-Security-Policy tag is removed so the
measurement sees every request the page would make).
"""
from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest
import report_fixtures as fx

pytestmark = [pytest.mark.slow, pytest.mark.browser]

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-extensions", "--disable-default-apps", "--mute-audio",
         "--hide-scrollbars"]

CHECK_HEAD = """<script>
window.__sp_errors = [];
window.addEventListener('error', function (e) {
  window.__sp_errors.push(String(e.message || (e.target && (e.target.src || e.target.href)) || e));
}, true);
</script>"""

CHECK_BODY = """<script>
window.addEventListener('load', function () {
  var figs = Array.prototype.slice.call(document.querySelectorAll('svg, img'))
    .filter(function (el) { return !el.parentElement.closest('svg'); })
    .map(function (el) {
      var r = el.getBoundingClientRect();
      return {tag: el.tagName.toLowerCase(), cls: el.getAttribute('class') || '',
              w: r.width, h: r.height};
    });
  var res = performance.getEntriesByType('resource').map(function (r) { return r.name; });
  var pre = document.createElement('pre');
  pre.id = 'selfcheck';
  pre.textContent = JSON.stringify({figures: figs, resources: res,
                                    errors: window.__sp_errors,
                                    sections: document.querySelectorAll('section').length});
  document.body.appendChild(pre);
});
</script>"""


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return "/usr/bin/chromium" if os.access("/usr/bin/chromium", os.X_OK) else None


@pytest.fixture(scope="module")
def chromium():
    path = _chromium()
    if path is None:
        pytest.skip("headless Chromium not found (install Debian's 'chromium'; .ci/run does)")
    return path


def _run(chromium: str, tmp: Path, *args: str) -> subprocess.CompletedProcess:
    profile = tmp / f"profile-{len(list(tmp.glob('profile-*')))}"
    cmd = [chromium, *FLAGS, f"--user-data-dir={profile}", "--enable-logging=stderr",
           "--v=0", *args]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=120)


def _instrumented(html: str) -> str:
    html = re.sub(r'<meta http-equiv="Content-Security-Policy"[^>]*>', "", html)
    html = html.replace("<head>", "<head>\n" + CHECK_HEAD, 1)
    return html.replace("</body>", CHECK_BODY + "\n</body>", 1)


def _measure(chromium: str, tmp: Path, html: str, name: str) -> tuple[dict, str]:
    page = tmp / name
    page.write_text(_instrumented(html), encoding="utf-8")
    proc = _run(chromium, tmp, "--virtual-time-budget=5000", "--window-size=1280,2000",
                "--dump-dom", page.as_uri())
    m = re.search(r'<pre id="selfcheck">(.*?)</pre>', proc.stdout, re.S)
    assert m, f"self-check missing; chromium exit {proc.returncode}: {proc.stderr[-2000:]}"
    import html as _html

    return json.loads(_html.unescape(m.group(1))), proc.stderr


def _console_lines(stderr: str) -> list[str]:
    return [line for line in stderr.splitlines() if "CONSOLE" in line]


@pytest.fixture(scope="module")
def report_html():
    from saltplan.reports import render_plan_html

    plan = _real_plan_or_fixture()
    screen = fx.screen_dict(plan)
    return render_plan_html(plan, screen)


def _real_plan_or_fixture() -> dict:
    """The real planner's dict when it runs here, else the hand-made one."""
    try:
        from saltplan.plan.planner import plan_salts

        return plan_salts(fx.SMILES, name="TST-7 (test compound)", dose_mg=100,
                          measured={13: 5.2}).to_dict()
    except ImportError:
        return fx.plan_dict()


def test_report_loads_offline_without_errors(chromium, tmp_path, report_html):
    check, stderr = _measure(chromium, tmp_path, report_html, "report-check.html")
    assert check["errors"] == []
    assert _console_lines(stderr) == []
    external = [r for r in check["resources"] if not r.startswith(("file:", "data:"))]
    assert external == [] and check["resources"] == []
    assert check["sections"] >= 8
    figures = check["figures"]
    assert any("sp-structure" in f["cls"] for f in figures)
    assert sum("sp-chart" in f["cls"] for f in figures) >= 2
    for f in figures:
        assert f["w"] > 0 and f["h"] > 0, f


def test_checker_detects_an_external_request(chromium, tmp_path, report_html):
    # negative control: the same measurement must see a request the page makes
    bad = report_html.replace("</section>", '<img src="http://127.0.0.1:9/probe.png" '
                              'alt="probe"></section>', 1)
    check, _ = _measure(chromium, tmp_path, bad, "report-bad.html")
    seen = check["resources"] + check["errors"]
    assert any("127.0.0.1:9" in s for s in seen) or any(
        f["tag"] == "img" for f in check["figures"])
    assert any("127.0.0.1:9" in s for s in seen), check


def test_report_screenshot(chromium, tmp_path, report_html):
    page = tmp_path / "report.html"
    page.write_text(report_html, encoding="utf-8")     # the report as shipped (CSP on)
    shot = tmp_path / "report.png"
    proc = _run(chromium, tmp_path, "--window-size=1280,2000", f"--screenshot={shot}",
                page.as_uri())
    assert shot.exists(), proc.stderr[-2000:]
    assert _console_lines(proc.stderr) == []            # CSP violations would show here
    from PIL import Image

    with Image.open(shot) as im:
        assert im.size == (1280, 2000)
        grey = im.convert("L")
        lo, hi = grey.getextrema()
        assert hi - lo > 100                             # not a blank page
        colours = grey.resize((64, 100)).getcolors(maxcolors=100000)
        assert colours is not None and len(colours) > 20
