"""The loads explained, drawn: a stress-strain picture and a bar picture as inline SVG.

The points come from :mod:`prescribe.loading.explain` (tested there as data); this module only
draws them, in dark marks on white with numbers on the axes, ``<title>``/``<desc>`` for
screen readers and every piece of text escaped.  The handout's clinician page and the
app's explanation panel show the same SVG.

:func:`plan_explanations` picks the program's hardest exercise of each kind (impact,
strength, balance) and explains it for the plan's person.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from html import escape
from typing import Any

from ..loading.explain import explain_exercise, force_bars, stress_strain_picture

WIDTH, HEIGHT = 760, 360
LEFT, RIGHT, TOP, BOTTOM = 92, 30, 30, 72
FONT = "DejaVu Sans, Liberation Sans, Arial, sans-serif"
INK, GRID, FILL, LIGHT = "#000000", "#bdbdbd", "#8c8c8c", "#d9d9d9"
TICK = 26

#: Plan exercise categories grouped into the kinds the clinician page explains.
KINDS: tuple[tuple[str, tuple[str, ...], str], ...] = (
    ("impact", ("impact",), "Impact"),
    ("resistance", ("resistance",), "Strength"),
    ("balance", ("balance", "posture", "back_extensor"), "Balance and posture"),
)


@dataclass(frozen=True)
class Figure:
    """One picture: title, SVG, and a legend of (swatch SVG, label) pairs printed as text."""

    title: str
    svg: str
    legend: tuple[tuple[str, str], ...]


def _text(x: float, y: float, text: str, size: int = TICK, anchor: str = "middle", weight: str = "normal") -> str:
    attrs = "".join((f' font-size="{size}"' if size != TICK else "",
                     f' text-anchor="{anchor}"' if anchor != "middle" else "",
                     f' font-weight="{weight}"' if weight != "normal" else ""))
    return f'<text x="{x:.1f}" y="{y:.1f}"{attrs}>{escape(text)}</text>'


def _open(svg_id: str, css: str, title: str, desc: str) -> list[str]:
    return [f'<svg xmlns="http://www.w3.org/2000/svg" class="chart {css}" viewBox="0 0 {WIDTH} {HEIGHT}" '
            f'width="100%" role="img" aria-labelledby="{svg_id}-title {svg_id}-desc" font-family="{FONT}" '
            f'font-size="{TICK}" text-anchor="middle" fill="{INK}">',
            f'<title id="{svg_id}-title">{escape(title)}</title>',
            f'<desc id="{svg_id}-desc">{escape(desc)}</desc>',
            f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>']


def _swatch(body: str) -> str:
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="swatch" viewBox="0 0 26 14" width="26" '
            f'height="14" aria-hidden="true">{body}</svg>')


def _nice(value: float, ticks: int = 5) -> tuple[float, float]:
    """An axis top at or above ``value`` and a round step giving at most ``ticks`` steps."""
    value = max(value, 1e-9)
    raw = value / ticks
    mag = 10 ** math.floor(math.log10(raw))
    for m in (1, 2, 2.5, 5, 10):
        step = m * mag
        if value / step <= ticks:
            return math.ceil(value / step - 1e-9) * step, step
    return math.ceil(value / (10 * mag)) * 10 * mag, 10 * mag


def _fmt(v: float) -> str:
    return f"{v:.2f}".rstrip("0").rstrip(".") if abs(v) < 10 else f"{v:.0f}"


def stress_strain_svg(picture: dict[str, Any], svg_id: str = "explain-ss") -> Figure:
    """Draw :func:`prescribe.loading.explain.stress_strain_picture`: two curves and the exercise's marker."""
    healthy, person = picture["curves"]["healthy"], picture["curves"]["this_person"]
    marker = picture["marker"]
    x_top, x_step = _nice(max(healthy["strain_pct"] + person["strain_pct"]) * 1.08)
    y_top, y_step = _nice(max(healthy["stress_mpa"]) * 1.05)
    pw, ph = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM

    def px(e: float) -> float:
        return LEFT + pw * e / x_top

    def py(s: float) -> float:
        return TOP + ph * (1 - s / y_top)

    desc = (f"Stress against strain of {picture['labels']['healthy']} (stiffer, breaks at "
            f"{healthy['ultimate_mpa']:.0f} MPa) and {picture['labels']['this_person']} (breaks at "
            f"{person['ultimate_mpa']:.0f} MPa). Both rise in a straight line from zero, bend over in a short "
            f"plastic region and then break. The exercise loads the bone to {marker['stress_mpa']:.0f} MPa.")
    parts = _open(svg_id, "pr-explain-stress-strain", picture["title"], desc)
    grid, labels = [], []
    v = 0.0
    while v <= y_top + 1e-9:
        grid.append(f"M{LEFT},{py(v):.1f}H{LEFT + pw}")
        labels.append(_text(LEFT - 8, py(v) + 7, _fmt(v), anchor="end"))
        v += y_step
    v = 0.0
    while v <= x_top + 1e-9:
        labels.append(_text(px(v), TOP + ph + 30, _fmt(v)))
        v += x_step
    parts.append(f'<path class="grid" d="{"".join(grid)}" stroke="{GRID}" stroke-width="0.8" fill="none"/>')
    parts += labels
    parts.append(f'<path d="M{LEFT},{TOP}V{TOP + ph}H{LEFT + pw}" stroke="{INK}" stroke-width="1.5" fill="none"/>')
    parts.append(_text(LEFT + pw / 2, HEIGHT - 8, "strain (%)", size=24))
    parts.append(_text(22, TOP + ph / 2, "stress (MPa)", size=24).replace(
        "<text ", f'<text transform="rotate(-90 22 {TOP + ph / 2:.1f})" ', 1))
    for key, dash, width in (("healthy", "", 3), ("this_person", ' stroke-dasharray="10 5"', 3)):
        curve = picture["curves"][key]
        pts = " ".join(f"{px(e):.1f},{py(s):.1f}" for e, s in zip(curve["strain_pct"], curve["stress_mpa"]))
        parts.append(f'<polyline class="pr-curve-{key}" points="{pts}" fill="none" stroke="{INK}" '
                     f'stroke-width="{width}"{dash}/>')
        # A cross where the bone breaks.
        e_u, s_u = curve["strain_pct"][-2], curve["stress_mpa"][-2]
        parts.append(f'<path d="M{px(e_u) - 7:.1f},{py(s_u) - 7:.1f}l14,14M{px(e_u) - 7:.1f},{py(s_u) + 7:.1f}'
                     f'l14,-14" stroke="{INK}" stroke-width="2.5"/>')
    mx, my = px(marker["strain_pct"]), py(marker["stress_mpa"])
    parts.append(f'<path d="M{LEFT},{my:.1f}H{mx:.1f}" stroke="{INK}" stroke-width="1" stroke-dasharray="3 3"/>')
    parts.append(f'<circle class="pr-explain-marker" cx="{mx:.1f}" cy="{my:.1f}" r="8" fill="{FILL}" '
                 f'stroke="{INK}" stroke-width="2.5"/>')
    parts.append(_text(mx + 14, my - 10, f"{marker['stress_mpa']:.0f} MPa", size=24, anchor="start", weight="bold"))
    parts.append("</svg>")
    legend = (
        (_swatch(f'<line x1="0" y1="7" x2="26" y2="7" stroke="{INK}" stroke-width="3"/>'),
         f"solid line: {picture['labels']['healthy']}"),
        (_swatch(f'<line x1="0" y1="7" x2="26" y2="7" stroke="{INK}" stroke-width="3" stroke-dasharray="8 4"/>'),
         f"dashed line: {picture['labels']['this_person']}"),
        (_swatch(f'<circle cx="13" cy="7" r="5" fill="{FILL}" stroke="{INK}" stroke-width="2"/>'),
         f"circle: {marker['label']}"),
        (_swatch(f'<path d="M8,1l10,12M8,13l10,-12" stroke="{INK}" stroke-width="2"/>'), "cross: the bone breaks"),
    )
    return Figure(picture["title"], "".join(parts), legend)


def force_bars_svg(bars: list[dict[str, Any]], title: str, svg_id: str = "explain-bars") -> Figure:
    """Draw :func:`prescribe.loading.explain.force_bars`: one bar each, in body weights, newtons written on top."""
    pw, ph = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM - 40
    top, step = _nice(max(b["bw"] for b in bars) * 1.12)
    band = pw / len(bars)

    def py(v: float) -> float:
        return TOP + 40 + ph * (1 - v / top)

    desc = "; ".join(f"{b['label']}: {b['bw']:.1f} times body weight ({b['n']:.0f} N)" for b in bars) + "."
    parts = _open(svg_id, "pr-explain-bars", title, desc)
    grid, labels = [], []
    v = 0.0
    while v <= top + 1e-9:
        grid.append(f"M{LEFT},{py(v):.1f}H{LEFT + pw}")
        labels.append(_text(LEFT - 8, py(v) + 7, _fmt(v), anchor="end"))
        v += step
    parts.append(f'<path class="grid" d="{"".join(grid)}" stroke="{GRID}" stroke-width="0.8" fill="none"/>')
    parts += labels
    parts.append(_text(22, TOP + 20 + ph / 2, "times body weight", size=24).replace(
        "<text ", f'<text transform="rotate(-90 22 {TOP + 20 + ph / 2:.1f})" ', 1))
    fills = {"body_weight": LIGHT, "ground_force": FILL, "ground_force_per_leg": FILL,
             "muscle_force": "#ffffff", "joint_contact_force": "#4d4d4d"}
    for i, b in enumerate(bars):
        x0 = LEFT + i * band + band * 0.18
        w = band * 0.64
        y0 = py(b["bw"])
        hatch = ' stroke-dasharray="6 3"' if b["key"] == "muscle_force" else ""
        parts.append(f'<rect class="pr-bar-{b["key"]}" x="{x0:.1f}" y="{y0:.1f}" width="{w:.1f}" '
                     f'height="{py(0) - y0:.1f}" fill="{fills.get(b["key"], FILL)}" stroke="{INK}" '
                     f'stroke-width="2"{hatch}/>')
        parts.append(_text(x0 + w / 2, y0 - 30, f"{_fmt(b['bw'])} BW", size=24, weight="bold"))
        parts.append(_text(x0 + w / 2, y0 - 6, f"{b['n']:.0f} N", size=21))
        words = b["label"].split(", ")
        size = 21 if len(bars) <= 4 else 18
        for j, line in enumerate(words[:2]):
            parts.append(_text(x0 + w / 2, py(0) + 26 + 23 * j, line, size=size))
    parts.append(f'<path d="M{LEFT},{TOP + 40}V{py(0):.1f}H{LEFT + pw}" stroke="{INK}" stroke-width="1.5" fill="none"/>')
    parts.append("</svg>")
    legend = ((_swatch(f'<rect x="4" y="0" width="18" height="14" fill="#4d4d4d" stroke="{INK}"/>'),
               "dark bar: force in the hip joint (ground force through the leg plus the muscles' pull)"),
              (_swatch(f'<rect x="4" y="0" width="18" height="14" fill="#ffffff" stroke="{INK}" '
                       f'stroke-dasharray="4 2"/>'), "dashed bar: the muscles' pull"))
    return Figure(title, "".join(parts), legend)


def explanation_figures(result: dict[str, Any], prefix: str = "explain") -> tuple[Figure, Figure]:
    """Both pictures of one :func:`prescribe.loading.explain.explain_exercise` result."""
    ss = stress_strain_svg(stress_strain_picture(result), svg_id=f"{prefix}-ss")
    bars = force_bars_svg(force_bars(result), f"{result['name']}: forces side by side", svg_id=f"{prefix}-bars")
    return ss, bars


@dataclass(frozen=True)
class Explained:
    """One explained exercise of a plan, for the clinician page."""

    kind: str
    kind_label: str
    result: dict[str, Any]
    stress_strain: Figure
    bars: Figure


def plan_explanations(plan: Any, body_mass_kg: float | None = None, t_score: float | None = None,
                      catalogue=None) -> list[Explained]:
    """The hardest exercise of each kind in ``plan`` (highest hip contact force), explained.

    Body mass comes from ``body_mass_kg``, else the plan (field ``body_mass_kg`` when the
    planner records it), else the documented default; the T-score from ``t_score``, else
    the screening's lowest T-score, else the default (both flagged in the assumptions).
    Exercises missing from the catalogue are skipped.
    """
    from ..catalogue import default_catalogue

    cat = catalogue or default_catalogue()
    mass = body_mass_kg if body_mass_kg is not None else plan.body_mass_kg
    if t_score is None and getattr(plan, "screening", None) is not None:
        t_score = plan.screening.lowest_t_score
    seen: dict[str, str] = {}
    for week in plan.weeks:
        for session in week.sessions:
            for ex in session.exercises:
                seen.setdefault(ex.exercise_id, ex.category)
    out: list[Explained] = []
    for kind, categories, label in KINDS:
        ids = [i for i, c in seen.items() if c in categories and i in cat]
        if not ids:
            continue
        results = [explain_exercise(i, body_mass_kg=mass, t_score=t_score, catalogue=cat) for i in ids]
        hardest = max(results, key=lambda r: (r["joint_contact_force_bw"], r["peak_grf_bw"]))
        ss, bars = explanation_figures(hardest, prefix=f"explain-{kind}")
        out.append(Explained(kind, label, hardest, ss, bars))
    return out
