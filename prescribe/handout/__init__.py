"""Printable handouts: a plan as HTML and PDF for the person and their clinician.

Public interface::

    render_html(plan, audience="both", paper="a4", clinic=None) -> str
    render_pdf(plan, audience="both", paper="a4", clinic=None) -> bytes
    write_handout(plan, out_path, audience="both", paper="a4", clinic=None) -> Path
    charts.impacts_chart_svg(plan) -> str
    charts.intensity_chart_svg(plan) -> str

Every handout carries the standard cautions and defers to local guidelines and
licensed clinical judgment.

The renderer (Jinja2) loads on first use: the app's program view reads only the handout's
wording (``prescribe.handout.content``) when a page opens.
"""

from __future__ import annotations

import importlib

__all__ = ["AUDIENCES", "PAPERS", "charts", "render_html", "render_pdf", "write_handout"]

_FROM_RENDER = {"AUDIENCES", "PAPERS", "render_html", "render_pdf", "write_handout"}


def __getattr__(name: str):
    if name in _FROM_RENDER:
        return getattr(importlib.import_module(".render", __name__), name)
    if name in ("charts", "content", "pdf", "explain_figures", "sensor_chart"):
        return importlib.import_module(f".{name}", __name__)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
