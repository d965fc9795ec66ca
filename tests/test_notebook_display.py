"""Plan, screen design and selection objects display their HTML report inline (Jupyter's
``_repr_html_`` protocol, IPython display documentation)."""
from __future__ import annotations

import pytest


@pytest.fixture(scope="module")
def objects():
    from saltplan.plan.planner import plan_salts
    from saltplan.screen.design import design_screen

    # diphenhydramine (a tertiary-amine base of MW 255)
    plan = plan_salts("CN(C)CCOC(c1ccccc1)c1ccccc1", name="DPH-demo", dose_mg=10)
    design = design_screen(plan, api_budget_mg=500)
    return plan, design


def test_plan_and_screen_render_inline(objects):
    plan, design = objects
    for obj in objects:
        html = obj._repr_html_()
        assert "DPH-demo" in html
        assert "<html" not in html.lower()        # a fragment, not a whole page
        assert "<script" not in html.lower()
    assert "A1" in design._repr_html_()


def test_selection_renders_inline(objects, tmp_path):
    from saltplan.demo.results import make_demo_results
    from saltplan.select.evaluate import evaluate_results

    _, design = objects
    results = tmp_path / "results.csv"
    results.write_text(make_demo_results(design), encoding="utf-8")
    selection = evaluate_results(design, results)
    html = selection._repr_html_()
    assert "INVENTED" in html.upper()
