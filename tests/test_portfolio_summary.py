"""The portfolio summary page: one row per compound, sortable and filterable offline.

Runs the real planner on structures of the invented demo programme
(``saltplan/demo/programme.yaml``); no published values are checked here, only that what
each row shows is what the batch table holds.
"""
from __future__ import annotations

import base64
import csv
import hashlib
import re

from saltplan.batch.run import run_batch
from saltplan.demo import load_programme


def _page(tmp_path, extra_rows=()):
    src = tmp_path / "candidates.csv"
    rows = [(c.code, c.role, c.smiles) for c in load_programme()] + list(extra_rows)
    with src.open("w", encoding="utf-8", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(["id", "name", "smiles"])
        w.writerows(rows)
    run_batch(src, tmp_path / "out.csv", summary=tmp_path / "summary.html")
    table = list(csv.DictReader((tmp_path / "out.csv").open(encoding="utf-8")))
    return (tmp_path / "summary.html").read_text(encoding="utf-8"), table


def test_one_row_per_compound_with_the_batch_values(tmp_path):
    html, table = _page(tmp_path, extra_rows=[("BAD-1", "unreadable", "C1CC(")])
    body = html.split('<table id="sp-compounds">', 1)[1].split("</table>", 1)[0]
    rows = re.findall(r'<tr data-row="(\d+)" data-verdict="([^"]+)">', body)
    assert [int(r) for r, _v in rows] == [int(t["row"]) for t in table]
    assert [v for _r, v in rows] == [t["verdict"] or "error" for t in table]
    for t in table:
        if t["most_basic_pka"]:
            assert f'data-key="{float(t["most_basic_pka"])}"' in body
    assert "BAD-1" in body and "error" in body
    # the subtitle names the input file, not the in-memory table
    assert "Input <code>candidates.csv</code>" in html


def test_script_allowed_only_by_its_hash_and_verdict_filter_lists_verdicts(tmp_path):
    html, table = _page(tmp_path)
    script = re.search(r"<script>(.*?)</script>", html, re.S).group(1)
    digest = base64.b64encode(hashlib.sha256(script.encode("utf-8")).digest()).decode()
    assert f"script-src 'sha256-{digest}'" in html          # CSP lets this script, nothing else
    assert html.count("<script") == 1
    options = re.findall(r'<option value="([^"]*)">', html)
    assert options == ["", *sorted({t["verdict"] for t in table})]


def test_margin_plot_has_labelled_axes_with_units(tmp_path):
    html, _ = _page(tmp_path)
    plot = re.search(r'<svg[^>]*aria-label="most basic pKa against the ΔpKa margin[^"]*"', html)
    assert plot is not None
    # axis labels are drawn as paths; the caption states the same quantities and units
    assert "Most basic pKa [pKa units] against the ΔpKa margin" in html
