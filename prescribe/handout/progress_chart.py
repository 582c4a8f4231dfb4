"""The progress letter's small charts: one measure over time, as inline SVG drawn by our own code.

A line through the measured values (baseline first), a band of plus and minus the measure's
minimal detectable change around the baseline (a change inside it is not a real change), and
the values printed at the points.  Only measures with at least two values get a chart.
"""

from __future__ import annotations

from datetime import date
from html import escape

from .charts import FONT, GRID, INK

WIDTH, HEIGHT = 300, 110
LEFT, RIGHT, TOP, BOTTOM = 16, 16, 22, 26
BAND = "#e0e0e0"


def _fmt(v: float) -> str:
    return f"{v:g}" if abs(v) >= 10 or float(v).is_integer() else f"{v:.1f}"


def _day(d: date) -> str:
    """A day under a chart: ``5 Dec 2026``."""
    return f"{d.day} {d.strftime('%b %Y')}"


def measure_svg(label: str, unit: str, points: list[tuple[str, float]], baseline: float, mdc: float,
                bounds: tuple[float | None, float | None] = (None, None)) -> str | None:
    """The chart of one measure: ``points`` (date text, value), oldest first; None with fewer than two.

    ``bounds``: the measure's own limits (the record's field bounds), so the band never shows
    a pain below 0 or a tandem stance past the test's 10 s.
    """
    if len(points) < 2:
        return None
    days = [date.fromisoformat(d) for d, _ in points]
    values = [float(v) for _, v in points]
    band_lo, band_hi = baseline - mdc, baseline + mdc
    if bounds[0] is not None:
        band_lo = max(band_lo, bounds[0])
    if bounds[1] is not None:
        band_hi = min(band_hi, bounds[1])
    lo = min(*values, band_lo)
    hi = max(*values, band_hi)
    pad = (hi - lo) * 0.12 or 1.0
    lo, hi = lo - pad, hi + pad
    span_days = max((days[-1] - days[0]).days, 1)
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM

    def x(d: date) -> float:
        return LEFT + plot_w * (d - days[0]).days / span_days

    def y(v: float) -> float:
        return TOP + plot_h * (1 - (v - lo) / (hi - lo))

    desc = escape(f"{label} over time: " + ", ".join(f"{d} {_fmt(v)} {unit}" for d, v in points)
                  + f"; shaded: baseline plus or minus the minimal detectable change ({_fmt(mdc)} {unit})")
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="chart measure-chart" viewBox="0 0 {WIDTH} {HEIGHT}" '
             f'role="img" aria-label="{desc}" font-family="{FONT}" font-size="13" fill="{INK}">',
             f'<title>{desc}</title>',
             f'<rect x="{LEFT}" y="{y(band_hi):.1f}" width="{plot_w}" '
             f'height="{max(y(band_lo) - y(band_hi), 0.5):.1f}" fill="{BAND}"/>',
             f'<line x1="{LEFT}" y1="{TOP + plot_h}" x2="{LEFT + plot_w}" y2="{TOP + plot_h}" stroke="{GRID}"/>',
             f'<line x1="{LEFT}" y1="{TOP}" x2="{LEFT}" y2="{TOP + plot_h}" stroke="{GRID}"/>']
    pts = " ".join(f"{x(d):.1f},{y(v):.1f}" for d, v in zip(days, values))
    parts.append(f'<polyline points="{pts}" fill="none" stroke="{INK}" stroke-width="1.6"/>')
    for i, (d, v) in enumerate(zip(days, values)):
        parts.append(f'<circle cx="{x(d):.1f}" cy="{y(v):.1f}" r="3" fill="{INK}"/>')
        anchor = "start" if i == 0 else "end" if i == len(values) - 1 else "middle"
        parts.append(f'<text x="{x(d):.1f}" y="{y(v) - 6:.1f}" text-anchor="{anchor}">{escape(_fmt(v))}</text>')
    parts.append(f'<text x="{LEFT}" y="{HEIGHT - 6}" text-anchor="start">{escape(_day(days[0]))}</text>')
    parts.append(f'<text x="{LEFT + plot_w}" y="{HEIGHT - 6}" text-anchor="end">'
                 f'{escape(_day(days[-1]))}</text>')
    parts.append("</svg>")
    return "".join(parts)
