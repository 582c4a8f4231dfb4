"""bqplot charts of a program: impact work per session, impact level and osteogenic index.

Built from explicit scales, axes and marks (no module-global state); ``update``
feeds new per-week arrays to the same marks, so the page redraws in place.
The weeks in the weak window after a step-up (resorption before formation, about
weeks 3 to 5 after a new or larger stimulus; Eriksen 1986, Endocr Rev 7:379) are
shaded behind the data as continuous bands.

Impacts count the landings of level 2-3 work; level 0-1 work is prescribed in minutes
(PRODUCT.md), so the first chart shows minutes for those weeks, on its own axis, rather
than "0 impacts".  Axes of counts have whole-number ticks, each shown once.
"""

from __future__ import annotations

import math

import bqplot as bq
import numpy as np

from .session import ChartSeries

#: Our chart colours (plain, high-contrast; chosen for print and for colour-blind readers).
INK = "#1f3b57"
ACCENT = "#b35c00"
SHADE = "#9aa5b1"
MINUTES = "#4f7d5c"


def whole_ticks(top: float, most: int = 6) -> list[int]:
    """Whole-number ticks from 0 to at least ``top``, at most ``most`` of them, each once.

    A chart whose values are all zero gets the ticks 0 and 1, never a repeated "1 1 1 0 0".
    """
    top = max(1.0, float(top))
    raw = top / (most - 1)
    magnitude = 10 ** math.floor(math.log10(raw)) if raw >= 1 else 1
    step = next(m * magnitude for m in (1, 2, 5, 10) if m * magnitude >= raw)
    step = max(1, int(step))
    n = int(math.ceil(top / step))
    return [i * step for i in range(n + 1)]


def band_outline(weeks: list[int], weak: list[bool]) -> tuple[np.ndarray, np.ndarray]:
    """A step outline that is 1 over each weak week (from half a week before to half after), else 0.

    Filled to the bottom, consecutive weak weeks make one continuous band, with no gaps.
    """
    xs: list[float] = []
    ys: list[float] = []
    for w, v in zip(weeks, weak):
        level = 1.0 if v else 0.0
        xs += [w - 0.5, w + 0.5]
        ys += [level, level]
    return np.asarray(xs, dtype=float), np.asarray(ys, dtype=float)


def weak_bands(weeks: list[int], weak: list[bool]) -> list[tuple[float, float]]:
    """(from, to) in week units of each continuous weak-window band."""
    bands: list[tuple[float, float]] = []
    for w, v in zip(weeks, weak):
        if not v:
            continue
        if bands and abs(bands[-1][1] - (w - 0.5)) < 1e-9:
            bands[-1] = (bands[-1][0], w + 0.5)
        else:
            bands.append((w - 0.5, w + 0.5))
    return bands


def set_points(mark, x, y) -> None:
    """Give ``mark`` new points without a moment where it has more weeks than values (the browser
    draws each change as it arrives and reports every point it cannot place): a growing mark gets
    its values first, a shrinking one its weeks first."""
    if len(x) >= len(mark.x):
        mark.y, mark.x = y, x
    else:
        mark.x, mark.y = x, y


def _shade_mark(x_scale: bq.LinearScale) -> bq.Lines:
    return bq.Lines(x=[], y=[], scales={"x": x_scale, "y": bq.LinearScale(min=0.0, max=1.0)}, colors=[SHADE],
                    fill="bottom", fill_colors=[SHADE], fill_opacities=[0.35], opacities=[0.0],
                    stroke_width=0, interpolation="linear")


class ProgramCharts:
    """Two figures that follow a :class:`ChartSeries`."""

    def __init__(self) -> None:
        self.x = bq.LinearScale()
        # Figure 1: impact work per session, by week: impacts (level 2-3) or minutes (level 0-1).
        self.y_impacts = y_impacts = bq.LinearScale(min=0.0, max=1.0)
        self.y_minutes = y_minutes = bq.LinearScale(min=0.0, max=1.0)
        self.shade1 = _shade_mark(self.x)
        self.impact_bars = bq.Bars(x=[], y=[], scales={"x": self.x, "y": y_impacts}, colors=[INK], padding=0.3,
                                   tooltip=bq.Tooltip(fields=["x", "y"], labels=["week", "impacts"]))
        self.minute_bars = bq.Bars(x=[], y=[], scales={"x": self.x, "y": y_minutes}, colors=[MINUTES], padding=0.3,
                                   tooltip=bq.Tooltip(fields=["x", "y"], labels=["week", "minutes"]))
        self.impacts_axis = bq.Axis(scale=y_impacts, side="left", label="impacts per session", tick_format="d",
                                    tick_values=[0, 1], color=INK)
        self.minutes_axis = bq.Axis(scale=y_minutes, side="right", label="minutes per session", tick_format="d",
                                    tick_values=[0, 1], color=MINUTES)
        self.impacts_figure = bq.Figure(
            title="Impact work per session: impacts (dark) where they apply, minutes of walking-type work (green)",
            marks=[self.shade1, self.minute_bars, self.impact_bars],
            axes=[bq.Axis(scale=self.x, label="week", tick_format="d"), self.impacts_axis, self.minutes_axis],
            fig_margin={"top": 40, "bottom": 45, "left": 60, "right": 60},
            layout={"width": "100%", "height": "260px"},
        )
        self.impacts_figure.add_class("pr-chart-impacts")

        # Figure 2: impact level (left axis) and weekly osteogenic index (right axis).  No legend
        # box over the data: the title and the axes' colours say which line is which.
        y_level = bq.LinearScale(min=0.0, max=3.0)
        self.y_oi = y_oi = bq.LinearScale(min=0.0, max=1.0)
        self.shade2 = _shade_mark(self.x)
        self.level_line = bq.Lines(x=[], y=[], scales={"x": self.x, "y": y_level}, colors=[INK],
                                   interpolation="step-after", stroke_width=3, labels=["impact level"])
        self.oi_line = bq.Lines(x=[], y=[], scales={"x": self.x, "y": y_oi}, colors=[ACCENT], marker="circle",
                                marker_size=24, labels=["weekly osteogenic index"])
        self.level_figure = bq.Figure(
            title="Impact level (dark steps, left) and weekly osteogenic index (orange dots, right); "
                  "shaded: weak window",
            marks=[self.shade2, self.level_line, self.oi_line],
            axes=[bq.Axis(scale=self.x, label="week", tick_format="d"),
                  bq.Axis(scale=y_level, side="left", label="impact level", tick_format="d",
                          tick_values=[0, 1, 2, 3], color=INK),
                  bq.Axis(scale=y_oi, side="right", label="osteogenic index", color=ACCENT)],
            fig_margin={"top": 40, "bottom": 45, "left": 55, "right": 65},
            layout={"width": "100%", "height": "300px"},
        )
        self.level_figure.add_class("pr-chart-level")

    @property
    def figures(self) -> list[bq.Figure]:
        return [self.impacts_figure, self.level_figure]

    def update(self, series: ChartSeries) -> None:
        """Redraw both figures from ``series`` (empty series clear them)."""
        weeks = np.asarray(series.week, dtype=float)
        sx, sy = band_outline(list(series.week), list(series.weak_window))
        impacts = np.asarray(series.impacts_per_session, dtype=float)
        minutes = np.asarray(series.impact_minutes or [0.0] * len(weeks), dtype=float)
        # Minutes only where impacts do not apply that week.
        minutes = np.where(impacts > 0, 0.0, minutes) if len(minutes) == len(impacts) else np.zeros(len(weeks))
        if len(weeks):
            self.x.min, self.x.max = float(weeks.min()) - 0.5, float(weeks.max()) + 0.5
            ticks = whole_ticks(impacts.max(initial=0.0))
            self.y_impacts.max = float(ticks[-1]) * 1.1
            self.impacts_axis.tick_values = ticks
            mticks = whole_ticks(minutes.max(initial=0.0))
            self.y_minutes.max = float(mticks[-1]) * 1.1
            self.minutes_axis.tick_values = mticks
            # An axis whose work does not occur in this program is not drawn (no "0 impacts" axis).
            self.impacts_axis.visible = bool(impacts.max(initial=0.0) > 0)
            self.minutes_axis.visible = bool(minutes.max(initial=0.0) > 0)
            self.y_oi.max = max(1.0, float(max(series.osteogenic_index, default=0.0)) * 1.15)
        for mark, x, y in ((self.shade1, sx, sy), (self.shade2, sx, sy),
                           (self.impact_bars, weeks, impacts), (self.minute_bars, weeks, minutes),
                           (self.level_line, weeks, np.asarray(series.impact_level, dtype=float)),
                           (self.oi_line, weeks, np.asarray(series.osteogenic_index, dtype=float))):
            set_points(mark, x, y)
