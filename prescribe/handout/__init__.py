"""Printable handouts: a plan as HTML and PDF for the person and their clinician.

Public interface::

    render_html(plan, audience="both", paper="a4", clinic=None) -> str
    render_pdf(plan, audience="both", paper="a4", clinic=None) -> bytes
    write_handout(plan, out_path, audience="both", paper="a4", clinic=None) -> Path
    charts.impacts_chart_svg(plan) -> str
    charts.intensity_chart_svg(plan) -> str

Every handout carries the standard cautions and defers to local guidelines and
licensed clinical judgment.
"""

from . import charts
from .render import AUDIENCES, PAPERS, render_html, render_pdf, write_handout

__all__ = ["AUDIENCES", "PAPERS", "charts", "render_html", "render_pdf", "write_handout"]
