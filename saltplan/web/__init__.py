"""A browser workbench for saltplan: ``saltplan serve`` (Starlette app served by uvicorn).

Pages are Jinja2 templates in ``templates/``; the plan itself is drawn by the report
templates (``saltplan.reports``), so a page shows exactly what the HTML report shows.
Front-end libraries are vendored in ``static/`` (built by ``scripts/build_web_assets.sh``);
nothing is loaded from a network at run time.
"""
from __future__ import annotations

from .app import create_app

__all__ = ["create_app"]
