"""Section 3 of the app: the program's options, the week day by day, swaps, charts and the
week-by-week table; every change goes through the session's safety check."""

from __future__ import annotations

import threading
from datetime import date
from typing import Any

import ipywidgets as w

from ..errors import InputError
from . import form_spec
from .common import esc, guarded
from .exercise_view import ExerciseView
from .program_view import ProgramView, progression_html
from .safety_view import ClearanceView
from .session import IMPACT_LABELS
from .wording import plain

#: A session-count control left to the planner.
AUTO = "auto"


class ProgramSection:
    """Program section of :class:`~prescribe.ui.app.ClinicApp` (a part of the app, not used alone)."""

    def _build_program_section(self) -> None:
        self.start_level = w.Dropdown(options=[(v, k) for k, v in IMPACT_LABELS.items()], value=None,
                                      description="Start level", style={"description_width": "90px"})
        self.start_level.add_class("pr-option-start_level")
        self.weeks = w.Text(value="", placeholder="weeks", description="Weeks",
                            continuous_update=False, layout=w.Layout(width="170px"))
        self.weeks.add_class("pr-option-weeks")
        self.start_date = w.DatePicker(description="Week 1 starts", style={"description_width": "100px"})
        self.start_date.add_class("pr-option-start_date")
        self.start_date.observe(lambda ch: self.on_start_date_change(ch["new"]), names="value")
        self.sessions: dict[str, w.Dropdown] = {}
        for kind in ("impact", "resistance", "balance"):
            dd = w.Dropdown(options=[("planner's choice", AUTO)] + [(str(n), n) for n in
                                                                   self.session.session_choices(kind)], value=AUTO,
                            description=f"{kind.capitalize()} sessions a week",
                            style={"description_width": "initial"}, layout=w.Layout(width="330px"))
            dd.add_class(f"pr-option-{kind}_sessions_per_week")
            self.sessions[kind] = dd
        # Each change carries its own new value: a redraw running meanwhile (the warm-up's) sets the
        # controls back to the program's options before this change is applied, and the
        # clinician's choice must not be lost to it.
        for control in (self.start_level, self.weeks, *self.sessions.values()):
            control.observe(lambda ch, c=control: self.on_option_change(c, ch["new"]), names="value")
        # The program day by day, the progression and the swap panel (program_view.py).
        self.program_view = ProgramView(self)
        swap = self.program_view.swap
        self.exercise_select, self.replacement_select = swap.exercise_select, swap.replacement_select
        self.swap_button, self.exclude_button = swap.swap_button, swap.exclude_button
        self.exercise_select.observe(lambda ch: self.on_exercise_chosen(), names="value")
        self.exercise_view = ExerciseView()  # the drawing of the chosen exercise and its replacement
        self.replacement_select.observe(lambda ch: self._show_drawing(), names="value")
        self.swap_button.on_click(lambda _b: self.on_swap())
        swap.confirm_button.on_click(lambda _b: self.on_confirm_swap())
        swap.cancel_button.on_click(lambda _b: swap.cancel())
        self.exclude_button.on_click(lambda _b: self.on_exclude())
        self.refusal = w.HTML("")
        self.refusal.add_class("pr-refusal")
        self._charts_lock = threading.Lock()
        self.chart_box = w.VBox([])
        self.chart_box.add_class("pr-charts")
        self.dose = w.HTML("")
        self.dose.add_class("pr-dose")
        self.week_table = w.HTML("", layout=w.Layout(max_height="420px", overflow="auto"))
        self.week_table.add_class("pr-week-table")
        self.clearance = ClearanceView(self)  # draft status and clearance (safety_view.py)
        self.program_section = self._section("3. Program", "pr-section-program", [
            self.clearance.widget, w.HBox([self.start_level, self.weeks, self.start_date]),
            w.HBox(list(self.sessions.values())),
            swap.widget, self.exercise_view.widget, self.refusal, self.program_view.widget, self.dose,
            self.chart_box, w.HTML("<h3>Week by week</h3>"), self.week_table])

    @guarded("Changing the program")
    def on_option_change(self, control: w.Widget | None = None, new: Any = None) -> None:
        """Rebuild the program with the options shown, ``control`` at its ``new`` value."""
        if self._syncing or self.session.record is None:
            return

        def value(widget):
            return new if widget is control else widget.value
        changes: dict[str, Any] = {}
        if value(self.start_level) is not None:
            changes["start_level"] = value(self.start_level)
        weeks = form_spec.convert_text(value(self.weeks), "integer")
        if weeks is not None:
            changes["weeks"] = weeks
        for kind, dd in self.sessions.items():
            # Back to "planner's choice" clears the option (None), rather than keeping the last number.
            changes[f"{kind}_sessions_per_week"] = None if value(dd) == AUTO else value(dd)
        self.program_view.swap.status.value = ""  # what the last swap changed no longer describes the page
        self.session.build(**changes)
        self.refresh(store=False)

    @guarded("Changing the start date")
    def on_start_date_change(self, new: date | None = None) -> None:
        if self._syncing or self.session.record is None:
            return
        self.session.set_start_date(new if new is not None else self.start_date.value)
        self.refresh(store=False)

    @guarded("Listing the replacements")
    def on_exercise_chosen(self) -> None:
        self._refresh_swap_candidates()

    @guarded("Swapping the exercise")
    def on_swap(self) -> None:
        """Ask for confirmation, saying what will change (a refused swap is said at once)."""
        self.program_view.swap.ask()
        self.refresh(store=False)

    @guarded("Swapping the exercise")
    def on_confirm_swap(self) -> None:
        self.program_view.swap.confirm()
        self.refresh(store=False)

    @guarded("Leaving the exercise out")
    def on_exclude(self) -> None:
        if not self.exercise_select.value:
            raise InputError.single("exercise", None, "an exercise chosen from the list")
        self.session.exclude(self.exercise_select.value)
        self.refresh(store=False)

    def _refresh_swap_candidates(self) -> None:
        self.program_view.swap.refresh_candidates()
        self._show_drawing()

    def _show_drawing(self) -> None:
        self.exercise_view.show(self.exercise_select.value, self.replacement_select.value)

    def _ensure_charts(self):
        with self._charts_lock:
            if self.charts is None:
                from .charts import ProgramCharts
                self.charts = ProgramCharts()
                self.chart_box.children = self.charts.figures
        return self.charts

    def _refresh_program(self) -> None:
        s = self.session
        if s.plan is not None or self.charts is not None:
            self._ensure_charts().update(s.chart_series())
        if s.refusal:
            self.refusal.value = f'<div class="pr-refusal-box" role="alert">{esc(plain(s.refusal))}</div>'
        elif s.program_note:
            self.refusal.value = f'<div class="pr-notice-box" role="status">{esc(plain(s.program_note))}</div>'
        else:
            self.refusal.value = ""
        self._syncing = True
        try:
            first_level = s.plan.weeks[0].impact_level if s.plan else None
            self.start_level.value = s.options.get("start_level", first_level)
            self.weeks.value = str(s.options.get("weeks", len(s.plan.weeks) if s.plan else ""))
            start = s.plan.start_date if s.plan is not None else None
            self.start_date.value = date.fromisoformat(start) if start else None
            for kind, dd in self.sessions.items():
                dd.value = s.options.get(f"{kind}_sessions_per_week", AUTO)
            self.program_view.swap.refresh_exercises()
        finally:
            self._syncing = False
        self._refresh_swap_candidates()
        self.program_view.refresh()
        self.clearance.refresh()
        figures = s.dose_figures()
        self.dose.value = ("<p>" + " &middot; ".join(f"{esc(k.replace('_', ' '))}: <b>{esc(v)}</b>"
                                                     for k, v in figures.items()) + "</p>") if figures else ""
        self.week_table.value = progression_html(s.plan)
