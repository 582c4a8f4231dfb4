"""Charts for printed handouts, drawn as plain inline SVG by our own code.

bqplot cannot export an image without a browser, so the handout draws its own:
dark marks on white, numbers on the axes, hatching (not colour) for the weak window
after each step-up, and ``<title>``/``<desc>`` for screen readers.  Every piece of
text is escaped.

The chart's title, the names of its scales and its legend are returned beside the
SVG (:class:`Chart`) and printed by the template as ordinary text: WeasyPrint lays
out SVG text one letter at a time, so a sentence inside an SVG costs as much as a
paragraph of the page, while the same words as HTML cost one line each.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from html import escape
from typing import Sequence

from ..plan_schema import Plan
from .content import WeekFacts, week_facts
from ..languages import N_
from .i18n import gettext as _, ngettext, percent, pgettext, sentence_space

WIDTH, HEIGHT = 760, 330
LEFT, RIGHT, TOP, BOTTOM = 66, 40, 32, 40
#: WenQuanYi Micro Hei (Debian's fonts-wqy-microhei) draws the Chinese pages' labels.
FONT = "DejaVu Sans, Liberation Sans, WenQuanYi Micro Hei, Arial, sans-serif"
INK, GRID, BAR = "#000000", "#bdbdbd", "#8c8c8c"
#: Tick-label size in SVG units: the chart prints about 140 mm wide (0.19 mm a unit), so
#: 20 units is about 10.5 pt, and the bold labels (18 units) about 9.5 pt.
TICK = 20
LABEL = 18


def _coerce(plan) -> Plan:
    if isinstance(plan, Plan):
        return plan
    from ..plan_schema import parse_plan
    return parse_plan(plan)


def _nice_max(value: float) -> tuple[float, float]:
    """An axis maximum at or above ``value`` and a tick step giving at most 6 ticks."""
    value = max(value, 1.0)
    for step in (1, 2, 5, 10, 20, 25, 50, 100, 200, 250, 500, 1000):
        top = math.ceil(value / step) * step
        if top / step <= 6:
            return float(top), float(step)
    step = 10 ** math.ceil(math.log10(value / 6))
    return float(math.ceil(value / step) * step), float(step)


def _week_tick_every(n: int) -> int:
    # At most about 8 labels: every text element costs layout time in the PDF.
    for k in (1, 2, 4, 8):
        if n / k <= 8:
            return k
    return math.ceil(n / 8)


def _text(x: float, y: float, text: str, size: int = TICK, anchor: str = "middle", weight: str = "normal") -> str:
    # Tick size, centred, normal weight and black ink are inherited from the <svg> element;
    # only other values are written: fewer attributes parse and cascade faster in the PDF.
    attrs = "".join((f' font-size="{size}"' if size != TICK else "",
                     f' text-anchor="{anchor}"' if anchor != "middle" else "",
                     f' font-weight="{weight}"' if weight != "normal" else ""))
    return f'<text x="{x:.1f}" y="{y:.1f}"{attrs}>{escape(text)}</text>'


def hatch(x0: float, y0: float, width: float, height: float, spacing: float = 8.0) -> str:
    """Diagonal hatching of a rectangle as one outlined path (no SVG pattern).

    One path of clipped segments draws the same in every renderer and much faster in
    WeasyPrint than a pattern fill.
    """
    segments = []
    d = spacing
    while d < width + height:
        u1, u2 = max(0.0, d - height), min(width, d)
        segments.append(f"M{x0 + u1:.1f},{y0 + height - (d - u1):.1f}L{x0 + u2:.1f},{y0 + height - (d - u2):.1f}")
        d += spacing
    return (f'<rect class="weak-window" x="{x0:.1f}" y="{y0:.1f}" width="{width:.1f}" height="{height:.1f}" '
            f'fill="#ffffff" stroke="#444444" stroke-width="1"/>'
            f'<path class="hatch" d="{"".join(segments)}" stroke="#444444" stroke-width="1.4" fill="none"/>')


def _runs(flags: Sequence[bool]) -> list[tuple[int, int]]:
    """(start, end) index runs where ``flags`` is true."""
    runs, start = [], None
    for i, flag in enumerate([*flags, False]):
        if flag and start is None:
            start = i
        elif not flag and start is not None:
            runs.append((start, i - 1))
            start = None
    return runs


def _span_text(facts: list[WeekFacts], runs: list[tuple[int, int]]) -> str:
    return pgettext("list", ", ").join(f"{facts[a].week}-{facts[b].week}" if a != b else f"{facts[a].week}"
                                       for a, b in runs)


@dataclass(frozen=True)
class Chart:
    """One chart: its title, the SVG, what its scales measure, and its legend.

    ``legend`` holds (swatch, label) pairs; a swatch is a small text-free SVG.
    """

    title: str
    svg: str
    scales: tuple[str, ...]
    legend: tuple[tuple[str, str], ...]


#: Smallest text in the large-print edition's charts [SVG units]: on a chart the full
#: width of the page (186 mm for 760 units) 20.5 units print at about 14.2 pt.  Larger
#: would push the left axis's "100%" out of the chart.
LARGE_PRINT_MIN_TEXT = 20.5
_FONT_SIZE = re.compile(r'font-size="(\d+(?:\.\d+)?)"')


def with_larger_text(chart: Chart, smallest: float = LARGE_PRINT_MIN_TEXT) -> Chart:
    """The same chart with no text inside its SVG smaller than ``smallest`` units."""
    svg = _FONT_SIZE.sub(lambda m: f'font-size="{max(float(m.group(1)), smallest):g}"', chart.svg)
    return Chart(chart.title, svg, chart.scales, chart.legend)


def swatch(body: str) -> str:
    """A 26 x 14 legend swatch as its own small SVG (shapes only, no text)."""
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="swatch" viewBox="0 0 26 14" width="26" '
            f'height="14" aria-hidden="true">{body}</svg>')


class _Frame:
    """The shared frame: week axis, weak-window hatching, step-up marks, legend items."""

    def __init__(self, facts: list[WeekFacts], chart_id: str, title: str, desc: str):
        self.facts, self.id, self.title = facts, chart_id, title
        self.n = len(facts)
        self.pw, self.ph = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
        self.band = self.pw / max(self.n, 1)
        self.parts = [
            f'<svg xmlns="http://www.w3.org/2000/svg" class="chart" viewBox="0 0 {WIDTH} {HEIGHT}" '
            f'width="100%" role="img" aria-labelledby="{chart_id}-title {chart_id}-desc" '
            f'font-family="{FONT}" font-size="{TICK}" text-anchor="middle" font-weight="normal" fill="{INK}">',
            f'<title id="{chart_id}-title">{escape(title)}</title>',
            f'<desc id="{chart_id}-desc">{escape(desc)}</desc>',
            f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>',
        ]

    def x(self, i: int) -> float:
        return LEFT + i * self.band

    def y(self, value: float, top: float) -> float:
        return TOP + self.ph * (1 - value / top)

    def weak_windows(self) -> None:
        for a, b in _runs([f.weak_window for f in self.facts]):
            x0, x1 = self.x(a), self.x(b + 1)
            self.parts.append(hatch(x0, TOP, x1 - x0, self.ph))
            label = _("hold")
            # The label's white box: about 0.6 em a letter (a wide CJK character counts two), at least 48.
            box = max(48.0, 0.6 * LABEL * sum(2 if ord(ch) > 0x2E80 else 1 for ch in label) + 4)
            if x1 - x0 >= box:
                self.parts.append(f'<rect x="{(x0 + x1) / 2 - box / 2:.1f}" y="{TOP + 3}" width="{box:g}" '
                                  f'height="23" fill="#ffffff"/>')
                self.parts.append(_text((x0 + x1) / 2, TOP + 20, label, size=LABEL, weight="bold"))

    def left_axis(self, top: float, step: float, fmt=lambda v: f"{v:g}") -> None:
        v, grid, labels = 0.0, [], []
        while v <= top + 1e-9:
            yy = self.y(v, top)
            grid.append(f"M{LEFT},{yy:.1f}H{LEFT + self.pw}")
            labels.append(_text(LEFT - 8, yy + 7, fmt(v), anchor="end"))
            v += step
        # All grid lines as one path: one element to parse and draw instead of one per line.
        self.parts.append(f'<path class="grid" d="{"".join(grid)}" stroke="{GRID}" stroke-width="0.8" '
                          f'fill="none"/>')
        self.parts.extend(labels)

    def week_axis(self) -> None:
        base = TOP + self.ph
        self.parts.append(f'<line x1="{LEFT}" y1="{base}" x2="{LEFT + self.pw}" y2="{base}" '
                          f'stroke="{INK}" stroke-width="1.5"/>')
        self.parts.append(f'<line x1="{LEFT}" y1="{TOP}" x2="{LEFT}" y2="{base}" stroke="{INK}" '
                          f'stroke-width="1.5"/>')
        every = _week_tick_every(self.n)
        ticks = []
        for i, f in enumerate(self.facts):
            if f.week == 1 or f.week % every == 0:
                cx = self.x(i) + self.band / 2
                ticks.append(f"M{cx:.1f},{base}V{base + 5}")
                self.parts.append(_text(cx, base + 26, str(f.week)))
        self.parts.append(f'<path class="ticks" d="{"".join(ticks)}" stroke="{INK}" fill="none"/>')

    def bars(self, values: Sequence[float], top: float) -> None:
        """A grey bar a week for each value above zero, all as one path (one element to parse and
        paint instead of one per week); nothing where no week has a value."""
        bar_w = self.band * 0.62
        bars = [f"M{self.x(i) + (self.band - bar_w) / 2:.1f},{TOP + self.ph:.0f}V{self.y(v, top):.1f}"
                f"h{bar_w:.1f}V{TOP + self.ph:.0f}Z" for i, v in enumerate(values) if v]
        if bars:
            self.parts.append(f'<path class="bars" d="{"".join(bars)}" fill="{BAR}" stroke="{INK}" '
                              f'stroke-width="0.8"/>')

    def step_marks(self) -> None:
        for i, f in enumerate(self.facts):
            if f.step_up:
                cx = self.x(i) + self.band / 2
                title = escape(_("step-up in week %(week)s") % {"week": f.week})
                self.parts.append(f'<path d="M{cx - 7:.1f},{TOP - 4} L{cx + 7:.1f},{TOP - 4} L{cx:.1f},'
                                  f'{TOP - 16} Z" fill="{INK}"><title>{title}</title></path>')

    def weak_legend(self) -> list[tuple[str, str]]:
        items = []
        if any(f.weak_window for f in self.facts):
            items.append((swatch(hatch(0, 0, 26, 14, spacing=6)),
                          _("hatched, \u201chold\u201d: bone briefly weaker (weeks 3-5 after a step-up)")))
        if any(f.step_up for f in self.facts):
            items.append((swatch(f'<path d="M6,14 L20,14 L13,2 Z" fill="{INK}"/>'), _("step-up in impact level")))
        return items

    def chart(self, scales: Sequence[str], legend: Sequence[tuple[str, str]]) -> Chart:
        return Chart(self.title, "".join(self.parts) + "</svg>", tuple(scales), tuple(legend))


def _describe_weeks(facts: list[WeekFacts]) -> str:
    weak = _runs([f.weak_window for f in facts])
    steps = [str(f.week) for f in facts if f.step_up]
    text = []
    if steps:
        text.append(ngettext("Step-ups in week %(weeks)s.", "Step-ups in week %(weeks)s.", len(steps))
                    % {"weeks": pgettext("list", ", ").join(steps)})
    if weak:
        text.append(_("Hold weeks (weak window): %(weeks)s.") % {"weeks": _span_text(facts, weak)})
    return sentence_space().join(text)


WEEK_SCALE = N_("Bottom: week of the program.")


def impacts_chart(plan) -> Chart:
    """Impacts per session (bars) and impact level (stepped line) week by week.

    Weeks in the weak window (weeks 3-5 after a step-up: Eriksen 1986, Endocr Rev
    7:379) are hatched and labelled, step-ups carry a triangle.
    """
    facts = week_facts(_coerce(plan))
    first, last = facts[0], facts[-1]
    desc = sentence_space().join(t for t in (_(
        "Impacts per session go from %(first)s in week %(first_week)s to %(last)s in week %(last_week)s, "
        "at most %(most)s; impact level from %(first_level)s to %(last_level)s on a scale of 0 to 3.") % {
            "first": first.impacts_per_session, "first_week": first.week, "last": last.impacts_per_session,
            "last_week": last.week, "most": max(f.impacts_per_session for f in facts),
            "first_level": first.impact_level, "last_level": last.impact_level}, _describe_weeks(facts)) if t)
    frame = _Frame(facts, "chart-impacts", _("Landings (impacts) per session, week by week"), desc)
    top, step = _nice_max(max(f.impacts_per_session for f in facts) * 1.05)
    frame.weak_windows()
    frame.left_axis(top, step)
    frame.bars([f.impacts_per_session for f in facts], top)
    # Impact level on the right-hand axis, 0-3, as a stepped line with square markers.
    for level in range(4):
        yy = frame.y(level, 3)
        frame.parts.append(_text(LEFT + frame.pw + 10, yy + 7, str(level), anchor="start"))
    frame.parts.append(f'<line x1="{LEFT + frame.pw}" y1="{TOP}" x2="{LEFT + frame.pw}" '
                       f'y2="{TOP + frame.ph}" stroke="{INK}" stroke-width="1.5"/>')
    points = []
    for i, f in enumerate(facts):
        yy = frame.y(f.impact_level, 3)
        points += [f"{frame.x(i):.1f},{yy:.1f}", f"{frame.x(i + 1):.1f},{yy:.1f}"]
    frame.parts.append(f'<polyline points="{" ".join(points)}" fill="none" stroke="#ffffff" '
                       f'stroke-width="6"/>')
    frame.parts.append(f'<polyline points="{" ".join(points)}" fill="none" stroke="{INK}" '
                       f'stroke-width="3" stroke-dasharray="9 4"/>')
    for i, f in enumerate(facts):
        if i == 0 or f.impact_level != facts[i - 1].impact_level:
            cx, yy = frame.x(i) + frame.band / 2, frame.y(f.impact_level, 3)
            frame.parts.append(f'<rect x="{cx - 5:.1f}" y="{yy - 5:.1f}" width="10" height="10" '
                               f'fill="#ffffff" stroke="{INK}" stroke-width="2"/>')
            frame.parts.append(_text(cx + 8, yy - 9, _("level %(level)s") % {"level": f.impact_level},
                                     size=LABEL, anchor="start", weight="bold"))
    frame.week_axis()
    frame.step_marks()
    return frame.chart(
        (_("Left: impacts per session."), _("Right: impact level (0-3)."), _(WEEK_SCALE)),
        [(swatch(f'<rect x="4" y="0" width="18" height="14" fill="{BAR}" stroke="{INK}"/>'),
          _("grey bar: impacts per session")),
         (swatch(f'<line x1="0" y1="7" x2="26" y2="7" stroke="{INK}" stroke-width="3" stroke-dasharray="9 4"/>'),
          _("dashed line: impact level (right-hand scale)")),
         *frame.weak_legend()])


def intensity_chart(plan) -> Chart:
    """Resistance intensity (% of one-repetition maximum) week by week.

    Weeks without a % 1RM load leave a gap; weak windows are hatched as on the
    impacts chart.
    """
    facts = week_facts(_coerce(plan))
    values = [f.resistance_pct_1rm for f in facts]
    known = [v for v in values if v is not None]
    if known:
        desc = sentence_space().join(t for t in (_(
            "Resistance load from %(first)s to %(last)s of the one-repetition maximum, highest %(most)s.") % {
                "first": percent(known[0]), "last": percent(known[-1]), "most": percent(max(known))},
            _describe_weeks(facts)) if t)
    else:
        desc = _("The strength exercises in this program are set by effort, not by a weight.")
    frame = _Frame(facts, "chart-intensity", _("Strength exercise load, week by week"), desc)
    frame.weak_windows()
    top = 100.0
    frame.left_axis(top, 20, fmt=percent)
    if not known:
        frame.parts.append(_text(LEFT + frame.pw / 2, TOP + frame.ph / 2,
                                 _("Strength work here is set by effort, not by a weight."), size=15))
    run: list[str] = []
    segments = []
    for i, v in enumerate([*values, None]):
        if v is not None:
            run.append(f"{frame.x(i) + frame.band / 2:.1f},{frame.y(v, top):.1f}")
        elif run:
            segments.append(run)
            run = []
    for seg in segments:
        frame.parts.append(f'<polyline points="{" ".join(seg)}" fill="none" stroke="{INK}" stroke-width="3"/>')
    # The weekly markers as one path of circles (two arcs each), drawn over the line.
    marks = []
    for i, v in enumerate(values):
        if v is None:
            continue
        cx, yy = frame.x(i) + frame.band / 2, frame.y(v, top)
        marks.append(f"M{cx - 4:.1f},{yy:.1f}a4,4 0 1,0 8,0a4,4 0 1,0 -8,0Z")
        if i == 0 or values[i - 1] != v:
            frame.parts.append(_text(cx, yy - 10, percent(v), size=LABEL, weight="bold"))
    if marks:
        frame.parts.append(f'<path class="marks" d="{"".join(marks)}" fill="#ffffff" stroke="{INK}" '
                           f'stroke-width="2"/>')
    frame.week_axis()
    frame.step_marks()
    return frame.chart(
        (_("Left: weight, as a %% of the most you could lift once.") % {}, _(WEEK_SCALE)),
        [(swatch(f'<line x1="0" y1="7" x2="26" y2="7" stroke="{INK}" stroke-width="3"/>'
                 f'<circle cx="13" cy="7" r="4" fill="#ffffff" stroke="{INK}" stroke-width="2"/>'),
          _("line with circles: how heavy")),
         *frame.weak_legend()])


def minutes_chart(plan) -> Chart:
    """Minutes of walking-type work (impact level 1) per session, week by week: the picture of a
    program that builds up in minutes, not in landings (bars only where there are minutes)."""
    facts = week_facts(_coerce(plan))
    values = [f.walking_minutes for f in facts]
    first, last = facts[0], facts[-1]
    desc = (_("Minutes of walking in one session go from %(first)s in week %(w1)s to %(last)s in week %(w2)s.")
            % {"first": f"{values[0]:g}", "w1": first.week, "last": f"{values[-1]:g}", "w2": last.week}
            + " " + _describe_weeks(facts))
    frame = _Frame(facts, "chart-minutes", _("Minutes of walking in one session, week by week"), desc)
    top, step = _nice_max(max(values) * 1.05)
    frame.weak_windows()
    frame.left_axis(top, step)
    frame.bars(values, top)
    frame.week_axis()
    frame.step_marks()
    return frame.chart(
        (_("Left: minutes of walking in one session."), _(WEEK_SCALE)),
        [(swatch(f'<rect x="4" y="0" width="18" height="14" fill="{BAR}" stroke="{INK}"/>'),
          _("grey bar: minutes of walking in one session")), *frame.weak_legend()])


def person_charts(plan) -> list[tuple[str, Chart]]:
    """The charts the person's pages print, each only where it has something to draw:
    ("impacts", ...) where there are landings, else ("minutes", ...) where there is walking-type
    work; ("intensity", ...) where a strength load is set as a share of 1RM."""
    facts = week_facts(_coerce(plan))
    out = []
    if any(f.impacts_per_session for f in facts):
        out.append(("impacts", impacts_chart(plan)))
    elif any(f.walking_minutes for f in facts):
        out.append(("minutes", minutes_chart(plan)))
    if any(f.resistance_pct_1rm is not None for f in facts):
        out.append(("intensity", intensity_chart(plan)))
    return out


def impacts_chart_svg(plan) -> str:
    """The impacts chart's SVG alone (see :func:`impacts_chart`)."""
    return impacts_chart(plan).svg


def intensity_chart_svg(plan) -> str:
    """The intensity chart's SVG alone (see :func:`intensity_chart`)."""
    return intensity_chart(plan).svg
