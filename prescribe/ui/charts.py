"""bqplot charts of a program: impacts per session, impact level and osteogenic index.

Built from explicit scales, axes and marks (no module-global state); ``update``
feeds new per-week arrays to the same marks, so the page redraws in place.
The weeks in the weak window after a step-up (resorption before formation, about
weeks 3 to 5 after a new or larger stimulus; Eriksen 1986, Endocr Rev 7:379) are
shaded behind the data.
"""

from __future__ import annotations

import bqplot as bq
import numpy as np

from .session import ChartSeries

#: Our chart colours (plain, high-contrast; chosen for print and for colour-blind readers).
INK = "#1f3b57"
ACCENT = "#b35c00"
SHADE = "#9aa5b1"


def _shade(series: ChartSeries) -> tuple[np.ndarray, np.ndarray]:
    x = np.asarray(series.week, dtype=float)
    y = np.asarray([1.0 if w else 0.0 for w in series.weak_window])
    return x, y


def _headroom(top: float) -> float:
    return max(1.0, float(top) * 1.15)


class ProgramCharts:
    """Two figures that follow a :class:`ChartSeries`."""

    def __init__(self) -> None:
        self.x = bq.LinearScale()
        # Figure 1: impacts per session, by week.
        self.y_impacts = y_impacts = bq.LinearScale(min=0.0, max=1.0)
        shade_scale1 = bq.LinearScale(min=0.0, max=1.0)
        self.shade1 = bq.Bars(x=[], y=[], scales={"x": self.x, "y": shade_scale1}, colors=[SHADE],
                              opacities=[0.35], padding=0.0, stroke=None)
        self.impact_bars = bq.Bars(x=[], y=[], scales={"x": self.x, "y": y_impacts}, colors=[INK], padding=0.3,
                                   tooltip=bq.Tooltip(fields=["x", "y"], labels=["week", "impacts"]))
        self.impacts_figure = bq.Figure(
            title="Impacts per session",
            marks=[self.shade1, self.impact_bars],
            axes=[bq.Axis(scale=self.x, label="week", tick_format="d"),
                  bq.Axis(scale=y_impacts, side="left", label="impacts", tick_format="d")],
            fig_margin={"top": 40, "bottom": 45, "left": 55, "right": 55},
            layout={"width": "100%", "height": "260px"},
        )
        self.impacts_figure.add_class("pr-chart-impacts")

        # Figure 2: impact level (left axis) and weekly osteogenic index (right axis).
        y_level = bq.LinearScale(min=0.0, max=3.0)
        self.y_oi = y_oi = bq.LinearScale(min=0.0, max=1.0)
        shade_scale2 = bq.LinearScale(min=0.0, max=1.0)
        self.shade2 = bq.Bars(x=[], y=[], scales={"x": self.x, "y": shade_scale2}, colors=[SHADE],
                              opacities=[0.35], padding=0.0, stroke=None)
        self.level_line = bq.Lines(x=[], y=[], scales={"x": self.x, "y": y_level}, colors=[INK],
                                   interpolation="step-after", stroke_width=3, labels=["impact level"],
                                   display_legend=True)
        self.oi_line = bq.Lines(x=[], y=[], scales={"x": self.x, "y": y_oi}, colors=[ACCENT], marker="circle",
                                marker_size=24, labels=["weekly osteogenic index"], display_legend=True)
        self.level_figure = bq.Figure(
            title="Impact level and osteogenic index (shaded: weak window after a step-up)",
            marks=[self.shade2, self.level_line, self.oi_line],
            axes=[bq.Axis(scale=self.x, label="week", tick_format="d"),
                  bq.Axis(scale=y_level, side="left", label="impact level", tick_format="d",
                          num_ticks=4),
                  bq.Axis(scale=y_oi, side="right", label="osteogenic index",
                          color=ACCENT)],
            fig_margin={"top": 40, "bottom": 45, "left": 55, "right": 65},
            legend_location="top-left",
            layout={"width": "100%", "height": "300px"},
        )
        self.level_figure.add_class("pr-chart-level")

    @property
    def figures(self) -> list[bq.Figure]:
        return [self.impacts_figure, self.level_figure]

    def update(self, series: ChartSeries) -> None:
        """Redraw both figures from ``series`` (empty series clear them)."""
        weeks = np.asarray(series.week, dtype=float)
        sx, sy = _shade(series)
        if len(weeks):
            self.x.min, self.x.max = float(weeks.min()) - 0.5, float(weeks.max()) + 0.5
            # Headroom above the highest value so bars and markers are not cut at the top.
            self.y_impacts.max = _headroom(max(series.impacts_per_session, default=0))
            self.y_oi.max = _headroom(max(series.osteogenic_index, default=0.0))
        for mark, y in ((self.shade1, sy), (self.shade2, sy),
                        (self.impact_bars, np.asarray(series.impacts_per_session, dtype=float)),
                        (self.level_line, np.asarray(series.impact_level, dtype=float)),
                        (self.oi_line, np.asarray(series.osteogenic_index, dtype=float))):
            x = sx if mark in (self.shade1, self.shade2) else weeks
            with mark.hold_sync():
                mark.x, mark.y = x, y
