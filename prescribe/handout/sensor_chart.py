"""The clinician's page chart of a worn-sensor recording: planned against delivered impacts
per day and per program week, as inline SVG drawn by our own code.

Dark bars are delivered, light bars planned; days and weeks inside a weak window after a
step-up carry a hatched band under their pair.  Text is escaped; the title and legend are
printed by the template as HTML (see :mod:`prescribe.handout.charts`).
"""

from __future__ import annotations

from dataclasses import dataclass
from html import escape

from .charts import FONT, GRID, INK, TICK, _nice_max, hatch

WIDTH, HEIGHT = 760, 260
LEFT, RIGHT, TOP, BOTTOM = 66, 20, 20, 46
PLANNED, DELIVERED = "#bdbdbd", "#000000"


@dataclass(frozen=True)
class SensorChart:
    """One chart: its SVG and the words printed beside it."""

    title: str
    svg: str
    summary: str


def _bars(labels: list[str], planned: list[int], delivered: list[int], weak: list[bool], desc: str) -> str:
    n = max(len(labels), 1)
    top, step = _nice_max(max([1, *planned, *delivered]))
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    slot = plot_w / n
    bar = min(slot * 0.36, 40.0)

    def y(v: float) -> float:
        return TOP + plot_h * (1 - v / top)

    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" class="chart sensor-chart" viewBox="0 0 {WIDTH} {HEIGHT}" '
             f'role="img" font-family="{FONT}" font-size="{TICK}" text-anchor="middle">',
             f"<title>Planned and delivered impacts</title><desc>{escape(desc)}</desc>"]
    tick = 0.0
    while tick <= top + 1e-9:
        parts.append(f'<line x1="{LEFT}" x2="{WIDTH - RIGHT}" y1="{y(tick):.1f}" y2="{y(tick):.1f}" stroke="{GRID}"/>')
        parts.append(f'<text x="{LEFT - 8}" y="{y(tick) + 6:.1f}" text-anchor="end">{int(tick)}</text>')
        tick += step
    every = max(1, n // 10)
    for i, label in enumerate(labels):
        x0 = LEFT + i * slot
        if weak[i]:
            parts.append(hatch(x0 + 2, TOP + plot_h + 2, slot - 4, 8))
        cx = x0 + slot / 2
        for value, colour, dx in ((planned[i], PLANNED, -bar), (delivered[i], DELIVERED, 0.0)):
            parts.append(f'<rect x="{cx + dx:.1f}" y="{y(value):.1f}" width="{bar:.1f}" '
                         f'height="{max(y(0) - y(value), 0):.1f}" fill="{colour}" stroke="{INK}" stroke-width="1"/>')
        if i % every == 0:
            parts.append(f'<text x="{cx:.1f}" y="{HEIGHT - 14}">{escape(label)}</text>')
    parts.append(f'<line x1="{LEFT}" x2="{WIDTH - RIGHT}" y1="{y(0):.1f}" y2="{y(0):.1f}" stroke="{INK}"/>')
    parts.append("</svg>")
    return "".join(parts)


def sensor_charts(summary: dict | None) -> list[SensorChart]:
    """The day and week charts of a stored summary with a plan comparison ([] when none)."""
    plan = (summary or {}).get("plan") or {}
    days = plan.get("days") or []
    if not days:
        return []
    out = []
    labels = [d["date"][5:] for d in days]
    out.append(SensorChart(
        "Impacts of 2 BW or more per day: planned (light) and delivered (dark)",
        _bars(labels, [d["planned_impacts"] for d in days], [d["delivered_impacts"] for d in days],
              [bool(d.get("weak_window")) for d in days],
              "; ".join(f'{d["date"]}: planned {d["planned_impacts"]}, delivered {d["delivered_impacts"]}'
                        for d in days)),
        _share_text(summary, plan)))
    weeks = plan.get("weeks") or []
    if weeks:
        out.append(SensorChart(
            "Per program week",
            _bars([f'wk {w["week"]}' for w in weeks], [w["planned_impacts"] for w in weeks],
                  [w["delivered_impacts"] for w in weeks], [bool(w.get("weak_window")) for w in weeks],
                  "; ".join(f'week {w["week"]}: planned {w["planned_impacts"]}, delivered {w["delivered_impacts"]}'
                            for w in weeks)),
            ""))
    return out


def _share_text(summary: dict, plan: dict) -> str:
    share = plan.get("delivered_share")
    text = (f'Recording {summary.get("file")}, {summary.get("start", "")[:10]} to {(summary.get("end") or "")[:10]}, '
            f'wear {summary.get("wear_time_h")} h. Delivered {plan.get("delivered_impacts")} of '
            f'{plan.get("planned_impacts")} planned impacts')
    text += f" ({share:.0%})." if isinstance(share, (int, float)) else "."
    flagged = [f for f in plan.get("flags") or [] if f.get("severity") == "attention"]
    if flagged:
        text += " Beyond the plan inside a weak window on " + ", ".join(f["date"] for f in flagged) + "."
    return text
