"""The program on screen: a week day by day, the progression at a glance, and swaps with a confirmation.

Laid out from :mod:`prescribe.ui.program_model` (the words and figures, no widgets).  The
swap panel asks the session for its candidates (the one candidate list, with the safety
check's limits) and for the swap itself; it adds a confirmation that says what will change,
keeps the chosen entries in the lists, and says what changed afterwards.
"""

from __future__ import annotations

import copy
import html
from typing import Any

import ipywidgets as w

from ..errors import InputError
from ..handout.content import review_weeks
from ..stimulus import week_stages, weekly_osteogenic_index
from . import program_model as pm
from .common import own_layout, set_options
from .wording import exercise_names, plain

CSS = """
<style>
.pr-days { display: flex; flex-wrap: wrap; gap: 8px; }
.pr-day { border: 1px solid #ccd; border-radius: 4px; padding: 4px 8px; min-width: 320px; flex: 1 1 45%; }
.pr-day h4 { margin: 2px 0 4px 0; font-size: 14px; color: #1f3b57; }
.pr-day table { border-collapse: collapse; font-size: 13px; width: 100%; }
.pr-day td, .pr-day th { border-bottom: 1px solid #e3e6ea; padding: 2px 4px; text-align: left; vertical-align: top; }
.pr-supervised { font-weight: bold; color: #7a2e00; }
.pr-why { font-size: 85%; line-height: 1.35; min-width: 16em; max-width: 32em; }
.pr-why-line { margin-bottom: 3px; }
.pr-why-sources li { line-height: 1.3; }
.pr-why-source { color: #4a4f55; font-size: 90%; }
.pr-stage-weak { background: #e6e9ed; }
.pr-swap-confirm-box { background: #fff; border: 2px solid #1f3b57; padding: 4px 10px; margin: 4px 0; }
</style>
"""


def _esc(value: Any) -> str:
    return html.escape(str(value), quote=True)


#: The heading of each kind of reason, as the clinician's pages print it.
WHY_WORDS = {"chosen": "Chosen", "dose": "This dose", "week": "This week", "": "Because"}


def why_html(line: pm.ExerciseLine) -> str:
    """The reasons of one line, then their sources behind a "Sources" toggle (long citations would
    crowd the week's table; the clinician's pages print the same reasons numbered)."""
    if not line.why:
        return "<i>no reasons kept (a plan made before reasons were kept: rebuild it)</i>"
    reasons = "".join(f'<div class="pr-why-line"><b>{_esc(WHY_WORDS.get(about, "Because"))}:</b> {_esc(reason)}</div>'
                      for about, reason, _source in line.why)
    sources = "".join(f"<li>{_esc(source)}</li>" for source in dict.fromkeys(src for _a, _r, src in line.why))
    return (f'{reasons}<details class="pr-why-sources"><summary>Sources</summary><ul>{sources}</ul></details>')


def days_html(days: list[pm.DayPlan]) -> str:
    if not days:
        return "<p><i>No program yet: check the person's details first.</i></p>"
    out = []
    for day in days:
        rows = "".join(
            f"<tr><td><b>{_esc(line.name)}</b></td><td>{_esc(line.dose)}</td><td>{_esc(line.load)}</td>"
            f"<td>{_esc(line.level)}</td><td>"
            + ('<span class="pr-supervised">supervised</span>' if line.supervised else "on own") + "</td>"
            + f'<td class="pr-why">{why_html(line)}</td></tr>'
            for line in day.lines)
        out.append(f'<div class="pr-day"><h4>{_esc(day.heading)}</h4><table><thead><tr><th>Exercise</th>'
                   f"<th>Dose</th><th>Load</th><th>Impact level</th><th>Supervision</th><th>Why</th></tr></thead>"
                   f"<tbody>{rows}</tbody></table></div>")
    return '<div class="pr-days">' + "".join(out) + "</div>"


def _review_words(plan: Any) -> dict[int, str | None]:
    """Review week -> its first day in words, counted from the start date (the handout's dates)."""
    return dict(review_weeks(plan))


def _review_cell(week: int, dates: dict[int, str | None], word: str = "review") -> str:
    when = dates.get(week)
    text = f"week {week}" if word == "week" else word
    return f"{text} (from {when})" if when else text


def progression_html(plan: Any) -> str:
    """One row a week: level, impact work (impacts, or minutes where impacts do not apply),
    strength phase and load, weak window, review."""
    if plan is None:
        return "<p><i>Nothing yet.</i></p>"
    rows = []
    dates = _review_words(plan)
    weeks = sorted(plan.weeks, key=lambda w: w.week)
    for wk, stage in zip(weeks, week_stages(weeks)):
        weak = stage.weak
        oi = weekly_osteogenic_index(wk)
        rows.append(
            f'<tr class="{"pr-stage-weak" if weak else ""}"><td>{wk.week}</td><td>{_esc(pm.level_words(wk.impact_level))}</td>'
            f"<td>{_esc(pm.impact_work_words(wk))}</td><td>{_esc(pm.strength_words(wk))}</td>"
            f"<td>{'weak window: hold' if weak else ''}</td><td>{_esc(_review_cell(wk.week, dates)) if wk.reassessment else ''}</td>"
            f"<td>{float(oi):.1f}</td></tr>")
    return ('<table class="pr-table pr-weeks"><thead><tr><th>Week</th><th>Impact level</th>'
            "<th>Impact work (impacts per session, or minutes)</th><th>Strength phase and load</th>"
            "<th>Weak window</th><th>Review</th><th>Weekly osteogenic index</th></tr></thead><tbody>"
            + "".join(rows) + "</tbody></table>")


def stages_html(plan: Any) -> str:
    """The progression at a glance: a few rows of consecutive weeks with the same work."""
    if plan is None:
        return ""
    dates = _review_words(plan)
    rows = "".join(
        f'<tr class="{"pr-stage-weak" if r.weak_window else ""}"><td>{_esc(r.weeks)}</td><td>{_esc(r.level)}</td>'
        f"<td>{_esc(r.impact_work)}</td><td>{_esc(r.strength)}</td>"
        f"<td>{'weak window: hold, add nothing' if r.weak_window else ''}</td>"
        f"<td>{_esc(', '.join(_review_cell(w, dates, 'week') for w in r.reviews))}</td></tr>"
        for r in pm.progression(plan))
    return ('<table class="pr-table pr-stage-table"><thead><tr><th>Weeks</th><th>Impact level</th><th>Impact work</th>'
            "<th>Strength</th><th>Weak window</th><th>Reviews</th></tr></thead><tbody>" + rows + "</tbody></table>")


class SwapPanel:
    """Choose an exercise of the program and a replacement; confirm; see what changed."""

    def __init__(self, app) -> None:
        self.app = app
        self.pending: tuple[str, str] | None = None
        self.exercise_select = w.Dropdown(options=[], description="Exercise", layout=w.Layout(width="360px"))
        self.exercise_select.add_class("pr-exercise-select")
        self.replacement_select = w.Dropdown(options=[], description="Swap for", layout=w.Layout(width="460px"))
        self.replacement_select.add_class("pr-replacement-select")
        self.swap_button = w.Button(description="Swap...", layout=w.Layout(width="auto"),
                                    tooltip="shows what will change; nothing changes until you confirm")
        self.swap_button.add_class("pr-swap-button")
        self.exclude_button = w.Button(description="Leave out", layout=w.Layout(width="auto"))
        self.exclude_button.add_class("pr-exclude-button")
        self.confirm_text = w.HTML("")
        self.confirm_text.add_class("pr-swap-preview")
        self.confirm_button = w.Button(description="Confirm swap", button_style="primary", layout=w.Layout(width="auto"))
        self.confirm_button.add_class("pr-swap-confirm")
        self.cancel_button = w.Button(description="Cancel", layout=w.Layout(width="auto"))
        self.cancel_button.add_class("pr-swap-cancel")
        self.confirm_box = own_layout(w.VBox([self.confirm_text, w.HBox([self.confirm_button, self.cancel_button])],
                                             layout=w.Layout(display="none")))  # shown while a swap waits
        self.confirm_box.add_class("pr-swap-confirm-area")
        self.status = w.HTML("")
        self.status.add_class("pr-swap-status")
        self.widget = w.VBox([w.HBox([self.exercise_select, self.replacement_select, self.swap_button,
                                      self.exclude_button]), self.confirm_box, self.status])
        self.widget.add_class("pr-swap-panel")
        self._after_swap: str | None = None  # the exercise to show chosen after a swap: the new one
        self._refreshing = False
        for select in (self.exercise_select, self.replacement_select):
            select.observe(lambda _ch: self._choice_changed(), names="value")

    def _choice_changed(self) -> None:
        # A confirmation is for the pair it describes: another choice withdraws it.
        if (not self._refreshing and self.pending is not None
                and (self.exercise_select.value, self.replacement_select.value) != self.pending):
            self.cancel()

    # -- lists -----------------------------------------------------------------------------
    def refresh_exercises(self, prefer: str | None = None) -> None:
        """The program's exercises by name; keeps the chosen one (or ``prefer``) selected."""
        s = self.app.session
        exercises = s.plan_exercises()
        keep = prefer or self._after_swap or self.exercise_select.value
        self._after_swap = None
        ids = [i for i, _ in exercises]
        self._refreshing = True
        try:
            options = [(f"{n} (level {self._level(i)})", i) for i, n in exercises]
            if list(self.exercise_select.options) != options:
                self.exercise_select.options = options
            self.exercise_select.value = keep if keep in ids else (ids[0] if ids else None)
        finally:
            self._refreshing = False

    def _level(self, exercise_id: str) -> int:
        for wk in self.app.session.plan.weeks:
            for sess in wk.sessions:
                for x in sess.exercises:
                    if x.exercise_id == exercise_id:
                        return x.impact_level
        return 0

    def refresh_candidates(self, prefer: str | None = None) -> None:
        """The session's candidates by name, level and force; keeps the chosen one selected."""
        current = self.exercise_select.value
        candidates = self.app.session.swap_candidates(current) if current else []
        entries = self._entries()
        in_program = set(pm.exercise_ids(self.app.session.plan)) if self.app.session.plan is not None else set()
        # Exercises not yet in the program first: a swap into one the program already has is refused
        # (it would merge the two), so such an entry is never the one chosen by default.
        candidates = sorted(candidates, key=lambda c: c[0] in in_program)
        options = []
        for cid, name in candidates:
            e = entries.get(cid)
            detail = (f" (level {pm.level_words(e.impact_level)}; about {e.peak_grf_bw:g} x body weight)"
                      if e is not None else "")
            options.append((f"{name}{detail}" + (" - already in the program" if cid in in_program else ""), cid))
        keep = prefer or self.replacement_select.value
        free = [cid for cid, _ in candidates if cid not in in_program]
        ids = [cid for _, cid in options]
        self._refreshing = True
        try:
            if list(self.replacement_select.options) != options:
                self.replacement_select.options = options
            # The clinician's pick stays; otherwise the first exercise not yet in the program.
            self.replacement_select.value = keep if keep in ids else (free[0] if free else (ids[0] if ids else None))
        finally:
            self._refreshing = False

    @staticmethod
    def _entries() -> dict:
        try:
            from ..catalogue import default_catalogue
        except ImportError:
            return {}
        return {e.exercise_id: e for e in default_catalogue().all()}

    # -- the swap ------------------------------------------------------------------------------
    def ask(self) -> bool:
        """Show what the chosen swap will change and ask for confirmation; a swap the session
        refuses is said at once (nothing changes)."""
        old, new = self.exercise_select.value, self.replacement_select.value
        if not old or not new:
            raise InputError.single("swap", None, "an exercise and a replacement chosen from the lists")
        s = self.app.session
        self.status.value = ""
        trial = copy.copy(s)
        trial.swaps = list(s.swaps)
        if not trial.swap(old, new):  # the session's own checks, on a copy: nothing changes here
            self.cancel()
            s.refusal = trial.refusal
            return False
        s.refusal = None
        entry = self._entries().get(new)
        lines = pm.swap_preview(s.plan, old, entry) if entry is not None else []
        self.pending = (old, new)
        self.confirm_text.value = ('<div class="pr-swap-confirm-box" role="dialog"><b>Confirm this swap?</b><ul>'
                                   + "".join(f"<li>{_esc(plain(x))}</li>" for x in lines) + "</ul></div>")
        self.confirm_box.layout.display = "flex"
        return True

    def confirm(self) -> bool:
        """Make the swap asked about; say what changed."""
        if self.pending is None:
            raise InputError.single("swap", None, "a swap asked for first (choose, then press Swap...)")
        old, new = self.pending
        if (self.exercise_select.value, self.replacement_select.value) != (old, new):
            self.cancel()
            raise InputError.single("swap", None, "the swap shown for confirmation (the choice changed: "
                                    "press Swap... again)")
        s = self.app.session
        before = s.plan
        self.cancel()
        if not s.swap(old, new):
            return False
        self.status.value = ('<div class="pr-notice-box" role="status">'
                             + _esc(pm.swap_result(before, s.plan, old, new, exercise_names())) + "</div>")
        self._after_swap = new
        return True

    def cancel(self) -> None:
        self.pending = None
        self.confirm_text.value = ""
        self.confirm_box.layout.display = "none"


class ProgramView:
    """This week (or a chosen week) day by day, and the progression at a glance."""

    def __init__(self, app) -> None:
        self.app = app
        self.week_select = w.Dropdown(options=[], description="Week", layout=w.Layout(width="260px"))
        self.week_select.add_class("pr-program-week")
        self.week_select.observe(lambda _ch: self._show_week(), names="value")
        self.days = w.HTML("")
        self.days.add_class("pr-program-days")
        self.stages = w.HTML("")
        self.stages.add_class("pr-progression")
        self.swap = SwapPanel(app)
        self.widget = w.VBox([w.HTML(CSS), w.HTML("<h3>The program week by week, as the person will do it</h3>"),
                              self.week_select, self.days,
                              w.HTML("<h3>The progression at a glance</h3>"), self.stages])
        self.widget.add_class("pr-program-view")
        self._plan_shown = None

    def refresh(self) -> None:
        s = self.app.session
        plan = s.plan
        if plan is None:
            self.week_select.options = []
            self.days.value = pm_days_empty()
            self.stages.value = ""
            self._plan_shown = None
            return
        this = pm.current_week(plan)
        keep = self.week_select.value if self._plan_shown is not None else None
        # "This week" only where the program has a start date; otherwise week 1 comes first.
        mark = " (this week)" if getattr(plan, "start_date", None) else " (first week)"
        options = [(f"Week {wk.week}" + (mark if wk.week == this else ""), wk.week) for wk in plan.weeks]
        self._plan_shown = plan
        if not set_options(self.week_select, options, fallback=this) and keep is None:
            self.week_select.value = this  # a new program with the same weeks opens on this week
        self._show_week()
        self.stages.value = stages_html(plan)

    def _show_week(self) -> None:
        s = self.app.session
        if s.plan is None or self.week_select.value is None:
            self.days.value = pm_days_empty()
            return
        self.days.value = days_html(pm.week_days(s.plan, self.week_select.value))


def pm_days_empty() -> str:
    return "<p><i>No program yet: check the person's details first.</i></p>"
