"""The live-session panel: log what the person did today, see the advice, apply it.

For the exercise physiologist with the person in the room.  Open a saved person with a
saved program (section 1), then: "this week" shows the day's exercises with their
doses, pre-filled as prescribed; tick and correct what was done, enter pain, effort
and symptoms; "Log session" stores it and shows the next-step advice with its reasons
at once; "Apply" stores the adjusted program as a new version.  A paused program
(stop_and_refer applied) shows "Resume the program": the clinician writes why it may go
on and the resumption is recorded through the same function as ``prescribe resume``.
Bad entries get a message beside the field and nothing is saved.  Charts: planned against done and
pain and effort over the weeks, the weak windows shaded.

Widgets carry stable CSS classes (``pr-live-...``) for browser tests.
"""

from __future__ import annotations

import math
import threading
from contextlib import contextmanager
from datetime import date
from typing import Any

import ipywidgets as w

from ..errors import InputError, NotFoundError
from ..plan_schema import Plan, PlannedExercise, parse_day, program_week, start_day
from ..sessions.records import SYMPTOMS, parse_session
from .cautions_view import LIVE_CAUTIONS
from . import program_model as pm
from .common import ErrorArea, LazyPanel, LazySection, cautions_html, esc, guarded, set_options
from .identity import bind_name_field
from .program_model import readable_date, readable_time

#: The per-exercise entries, in the order shown: (record field, label, integer?).
EXERCISE_FIELDS = (("sets_done", "sets", True), ("reps_done", "reps", True), ("impacts_done", "impacts", True),
                   ("minutes_done", "min", False), ("load_kg", "kg", False), ("rpe", "CR10", False))
#: Planned field each entry is pre-filled from.
PLANNED_OF = {"sets_done": "sets", "reps_done": "reps", "impacts_done": "impacts", "minutes_done": "minutes",
              "load_kg": "load_kg"}
DECISION_TEXT = {"progress": "Progress", "hold": "Hold", "step_back": "Step back",
                 "stop_and_refer": "Stop and refer"}


def _number(text: str, whole: bool) -> Any:
    """Form text to a value for the record: blank is None; a number where it reads as one;
    anything else is passed on unchanged so validation names it."""
    text = (text or "").strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        return text
    if whole:
        return int(value) if value.is_integer() else value
    return value


def _show(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return f"{value:g}"
    return str(value)


class _ExerciseRow:
    def __init__(self, index: int, planned: PlannedExercise) -> None:
        self.exercise_id = planned.exercise_id
        self.done = w.Checkbox(value=True, description="", indent=False, layout=w.Layout(width="28px"))
        self.done.add_class("pr-live-done")
        label = planned.name or self.exercise_id
        dose = planned.intensity or ""
        if planned.load_note:
            dose += f" - {planned.load_note}"
        self.label = w.HTML(f"<b>{esc(label)}</b><br><small>{esc(dose)}</small>",
                            layout=w.Layout(width="260px"))
        self.inputs: dict[str, w.Text] = {}
        for key, short, _whole in EXERCISE_FIELDS:
            planned_value = getattr(planned, PLANNED_OF[key]) if key in PLANNED_OF else None
            if key == "impacts_done" and not planned_value:
                planned_value = None
            box = w.Text(value=_show(planned_value), placeholder=short, description=short,
                         layout=w.Layout(width="110px"), style={"description_width": "42px"})
            box.add_class(f"pr-live-{key.replace('_', '-')}")
            self.inputs[key] = box
        self.msg = w.HTML("")
        self.msg.add_class("pr-live-row-msg")
        self.widget = w.VBox([w.HBox([self.done, self.label, *self.inputs.values()]), self.msg])
        self.widget.add_class("pr-live-row")
        self.widget.add_class(f"pr-live-row-{index}")

    def data(self) -> dict | None:
        if not self.done.value:
            return None
        out: dict[str, Any] = {"exercise_id": self.exercise_id}
        for key, _short, whole in EXERCISE_FIELDS:
            value = _number(self.inputs[key].value, whole)
            if value is not None:
                out[key] = value
        return out


class SessionsView(LazyPanel):
    """The live-session panel over a :class:`ClinicApp` (its session, store and lock)."""

    def __init__(self, app) -> None:
        self.app = app
        self.lock = getattr(app, "lock", threading.RLock())
        self.errors = ErrorArea()
        self.rows: list[_ExerciseRow] = []
        self.advice: dict | None = None
        self._advice_for: tuple | None = None  # (person, program version) the advice shown was worked out for
        self._rows_key: tuple | None = None
        self._quieting = False
        self.charts = None
        self.section = LazySection("6. Live session: log, advise, adjust", "pr-section-sessions", self._build,
                                   after=self.refresh)

    # -- building ---------------------------------------------------------------------------
    def _build(self) -> list:
        """The panel's widgets (built the first time the section is opened)."""
        self.status = w.HTML("")
        self.status.add_class("pr-live-status")
        self.date = w.Text(value=date.today().isoformat(), description="Date", layout=w.Layout(width="220px"))
        self.date.add_class("pr-live-date")
        self.day = w.Dropdown(options=[], description="Session", layout=w.Layout(width="320px"))
        self.day.add_class("pr-live-day")
        self.day.observe(lambda _c: self._on_day(), names="value")
        self.date.observe(lambda _c: self._on_date(), names="value")
        self.rows_box = w.VBox([])
        self.rows_box.add_class("pr-live-rows")
        self.fields: dict[str, w.Widget] = {}
        self.msgs: dict[str, w.HTML] = {}
        self.fields["pain_during"] = self._text("Pain during (0-10)", "pain_during", "0")
        self.fields["pain_next_morning"] = self._text("Pain next morning (0-10)", "pain_next_morning", "")
        self.fields["session_rpe"] = self._text("Session effort (CR10 0-10)", "session_rpe", "")
        self.symptoms = {code: w.Checkbox(value=False, description=code.replace("_", " "), indent=False,
                                          tooltip=text, layout=w.Layout(width="200px"))
                         for code, text in SYMPTOMS.items()}
        for code, box in self.symptoms.items():
            box.add_class(f"pr-live-symptom-{code.replace('_', '-')}")
        self.fell = w.Checkbox(value=False, description="fell since the last session", indent=False)
        self.fell.add_class("pr-live-fell")
        self.note = w.Textarea(value="", placeholder="note (how it went, what was changed)",
                               layout=w.Layout(width="600px", height="50px"))
        self.note.add_class("pr-live-note")
        for key in ("symptoms", "fell_since_last", "note", "session_date", "exercises", "clinician"):
            self.msgs[key] = self._msg(key)
        self.clinician = w.Text(value="", description="Clinician *", placeholder="your name or initials")
        self.clinician.add_class("pr-live-clinician")
        bind_name_field(self.app.signed, self.clinician)  # the signed-in name, else typed here
        self.log_button = w.Button(description="Log session and advise", button_style="primary",
                                   layout=w.Layout(width="auto"))
        self.log_button.add_class("pr-live-log")
        self.log_button.on_click(lambda _b: self.on_log())
        self.advise_button = w.Button(description="Advise without logging", layout=w.Layout(width="auto"))
        self.advise_button.add_class("pr-live-advise")
        self.advise_button.on_click(lambda _b: self.on_advise())
        self.apply_button = w.Button(description="Apply the advice", button_style="warning", disabled=True,
                                     layout=w.Layout(width="auto"))
        self.apply_button.add_class("pr-live-apply")
        self.apply_button.on_click(lambda _b: self.on_apply())
        self.advice_view = w.HTML("")
        self.advice_view.add_class("pr-live-advice")
        # Resuming a paused program: shown only while the program is paused.
        self.resume_reason = w.Textarea(value="", placeholder="why the program may go on (required), e.g. "
                                        "assessed after the fall: no injury, cleared to continue",
                                        layout=w.Layout(width="600px", height="50px"))
        self.resume_reason.add_class("pr-live-resume-reason")
        self.resume_button = w.Button(description="Resume the program", button_style="danger",
                                      layout=w.Layout(width="190px", min_width="190px"))
        self.resume_button.add_class("pr-live-resume")
        self.resume_button.on_click(lambda _b: self.on_resume())
        self.resume_msg = w.HTML("")
        self.resume_msg.add_class("pr-live-resume-msg")
        self.resume_box = w.VBox([
            w.HTML("<b>This program is paused.</b> It stays paused until a clinician has assessed the person "
                   "and records here why it may go on (the reason is kept with the program and in the audit "
                   "log). Check the next step with Advise before the next session."),
            self.resume_reason, w.HBox([self.resume_button, self.resume_msg])], layout=w.Layout(display="none"))
        self.resume_box.add_class("pr-live-resume-box")
        self.log_status = w.HTML("")
        self.log_status.add_class("pr-live-log-status")
        self.chart_box = w.VBox([])
        self.chart_box.add_class("pr-live-charts")
        self.cautions = w.HTML(cautions_html(list(LIVE_CAUTIONS), "Cautions for this part"))
        self.cautions.add_class("pr-cautions-box")
        self.cautions.add_class("pr-live-cautions")
        return [
            self.errors.widget, self.status,
            w.HBox([self.date, self.day]), self.rows_box, self.msgs["exercises"],
            w.HBox([self.fields["pain_during"], self.fields["pain_next_morning"], self.fields["session_rpe"]]),
            w.HTML("<b>Symptoms today</b> (any of these: stop and assess)"),
            w.GridBox(list(self.symptoms.values()), layout=w.Layout(grid_template_columns="repeat(4, 210px)")),
            self.msgs["symptoms"], w.HBox([self.fell, self.msgs["fell_since_last"]]),
            self.note, self.msgs["note"], self.msgs["session_date"],
            w.HBox([self.clinician, self.msgs["clinician"]]),
            w.HBox([self.log_button, self.advise_button, self.apply_button]), self.log_status,
            self.advice_view, self.resume_box, self.chart_box, self.cautions]

    def _msg(self, key: str) -> w.HTML:
        box = w.HTML("")
        box.add_class("pr-msg")
        box.add_class(f"pr-live-msg-{key.replace('_', '-')}")
        self.msgs[key] = box
        return box

    def _text(self, label: str, key: str, value: str) -> w.Widget:
        box = w.Text(value=value, description=label, layout=w.Layout(width="300px"),
                     style={"description_width": "170px"})
        box.add_class(f"pr-live-{key.replace('_', '-')}")
        msg = self._msg(key)
        self._inputs = getattr(self, "_inputs", {})
        self._inputs[key] = box
        return w.VBox([box, msg])

    def _input(self, key: str) -> w.Text:
        return self._inputs[key]

    # -- state --------------------------------------------------------------------------------
    @property
    def patient_id(self) -> str | None:
        rec = self.app.session.record
        return rec.patient_id if rec is not None else None

    def _ready(self) -> bool:
        s = self.app.session
        # The program in force: an earlier version reopened is read, not logged against.
        return (s.record is not None and s.plan is not None and s.saved_version is not None
                and getattr(s, "opened_version", None) is None)

    def _plan(self) -> Plan:
        return self.app.session.plan

    def current_week(self) -> int:
        plan = self._plan()
        try:
            day = parse_day(self.date.value.strip(), "session_date")
        except InputError:
            day = date.today()
        return min(max(program_week(start_day(plan), day), 1), len(plan.weeks))

    def refresh(self) -> None:
        """Follow the app's person and program (called by the app after every change).

        The panel is built when it is opened, or here as soon as a saved program is open."""
        if not self.section.built:
            if self._ready():
                with self.lock:
                    self.section.open()  # builds, then comes back here through ``after``
            return
        if not self._ready():
            self.status.value = ("<p><i>Open a saved person with a saved program (section 1, or save it in "
                                 "section 5) to log sessions here.</i></p>")
            self.rows_box.children = []
            self.rows = []
            self._rows_key = None  # the next person (or the same one reopened) gets their rows built
            with self._quiet():
                self.day.options = []
            self._clear_advice()
            self.resume_box.layout.display = "none"
            return
        if self._advice_for != (self.patient_id, self.app.session.saved_version):
            self._clear_advice()  # advice worked out for another person or version is not shown beside this one
        plan = self._plan()
        week = self.current_week()
        wk = plan.weeks[week - 1]
        paused, resumed = plan.paused, plan.resumed
        self.resume_box.layout.display = None if paused else "none"
        self.status.value = (f"<p><b>{esc(self.patient_id)}</b>: program version {self.app.session.saved_version}, "
                             f"started {esc(readable_date(start_day(plan).isoformat()))}; "
                             f"<b>this week: week {week}</b> of {len(plan.weeks)} "
                             f"({esc(wk.phase)})."
                             + (f' <span class="pr-msg pr-live-paused">Paused from week {paused.from_week} '
                                f'(since {esc(readable_time(paused.since))}): {esc(paused.reason)}</span>'
                                if paused else "")
                             + (f' <span class="pr-live-resumed">Resumed by {esc(resumed.by)} on '
                                f'{esc(readable_time(resumed.at))}: {esc(resumed.reason)}</span>'
                                if resumed and not paused else "") + "</p>")
        # The days as the program's week view names them ("Monday, 7 Dec: impact work and strength").
        days = pm.week_days(plan, week)
        options = [(d.heading, d.day) for d in days]
        today = parse_day(self.date.value, "date").isoweekday() if self._date_ok() else None
        with self._quiet():  # one build of the rows below, not one for each step of the list's change
            set_options(self.day, options, fallback=today)
        self._build_rows()
        self._refresh_charts()

    @contextmanager
    def _quiet(self):
        """Changes of the day list inside this block do not rebuild the rows (the caller does, once)."""
        self._quieting = True
        try:
            yield
        finally:
            self._quieting = False

    def _date_ok(self) -> bool:
        try:
            parse_day(self.date.value.strip(), "date")
            return True
        except InputError:
            return False

    def _on_date(self) -> None:
        if self._ready() and self._date_ok():
            self.refresh()
            weekday = parse_day(self.date.value, "date").isoweekday()
            if weekday in [v for _, v in self.day.options] and self.day.value != weekday:
                self.day.value = weekday  # the session of the date typed, where that day has one

    def _on_day(self) -> None:
        if self._ready() and not self._quieting:
            self._build_rows()

    def _build_rows(self, force: bool = False) -> None:
        key = (self.patient_id, self.app.session.saved_version, self.current_week(), self.day.value)
        if not force and key == getattr(self, "_rows_key", None):
            return  # keep what the clinician has typed
        self._rows_key = key
        plan = self._plan()
        wk = plan.weeks[self.current_week() - 1]
        exercises = [x for s in wk.sessions if s.day == self.day.value for x in s.exercises]
        self.rows = [_ExerciseRow(i, x) for i, x in enumerate(exercises)]
        self.rows_box.children = [r.widget for r in self.rows]

    # -- entering -------------------------------------------------------------------------------
    def data(self) -> dict:
        """The session record as typed (not yet validated)."""
        exercises = [d for d in (r.data() for r in self.rows) if d is not None]
        return {"patient_id": self.patient_id, "session_date": self.date.value.strip(),
                "program_version": self.app.session.saved_version, "exercises": exercises,
                "session_rpe": _number(self._input("session_rpe").value, False),
                "pain_during": _number(self._input("pain_during").value, True),
                "pain_next_morning": _number(self._input("pain_next_morning").value, True),
                "symptoms": [c for c, box in self.symptoms.items() if box.value],
                "fell_since_last": bool(self.fell.value), "note": self.note.value}

    def _clear_messages(self) -> None:
        for box in self.msgs.values():
            box.value = ""
        for r in self.rows:
            r.msg.value = ""

    def _show_problems(self, problems) -> None:
        for p in problems:
            field = p.field
            if field.startswith("exercises["):
                try:
                    i = int(field[len("exercises["):field.index("]")])
                except ValueError:
                    i = -1
                done = [r for r in self.rows if r.done.value]
                if 0 <= i < len(done):
                    done[i].msg.value = f'<span class="pr-msg">{esc(p.message)}</span>'
                    continue
            key = field.split("[")[0].split(".")[0]
            box = self.msgs.get(key) or self.msgs["session_date"]
            box.value = f'<span class="pr-msg">{esc(p.message)}</span>'

    def _clear_advice(self) -> None:
        """No advice on the page: it was for other entries, another person or another version."""
        self.advice = None
        self._advice_for = None
        self.advice_view.value = ""
        self.apply_button.disabled = True

    def _entries(self):
        """The session as entered, validated (a parse_session record); None with each problem shown
        beside its field (and no advice left on the page from earlier entries)."""
        try:
            return parse_session(self.data())
        except InputError as exc:
            self._show_problems(exc.problems)
            self._clear_advice()
            return None

    @guarded("Logging the session")
    def on_log(self) -> bool:
        self._clear_messages()
        self.log_status.value = ""
        if not self._ready():
            raise InputError.single("person", None, "a saved person with a saved program (open one first)")
        who = self.clinician.value.strip()
        if not who:
            self._clear_advice()
            self.msgs["clinician"].value = '<span class="pr-msg">Enter your name or initials: every session ' \
                                           'records who logged it. Nothing was saved.</span>'
            return False
        record = self._entries()
        if record is None:
            self.log_status.value = ('<span class="pr-msg">Nothing was saved: correct the entries marked '
                                     'beside the fields.</span>')
            return False
        try:
            out = self.app.session.store.add_session(record, who)
        except InputError as exc:
            self._show_problems(exc.problems)
            self._clear_advice()
            self.log_status.value = ('<span class="pr-msg">Nothing was saved: correct the entries marked '
                                     'beside the fields.</span>')
            return False
        self.log_status.value = (f"<span>Session {out['session_id']} logged for week {out['week']} "
                                 f"({esc(readable_date(record.session_date))}). The form is ready for the next "
                                 "session.</span>")
        self._advise()
        self._reset_entries()  # logged: these entries are in the store now, never counted twice
        return True

    def _reset_entries(self) -> None:
        """The form as for a new session: this day's exercises as prescribed, no pain, symptom or note."""
        self._input("pain_during").value = "0"
        self._input("pain_next_morning").value = ""
        self._input("session_rpe").value = ""
        for box in self.symptoms.values():
            box.value = False
        self.fell.value = False
        self.note.value = ""
        self._build_rows(force=True)

    @guarded("Working out the advice")
    def on_advise(self) -> bool:
        """The advice from the entries on the form as if they were logged; nothing is stored, and
        advice from entries not logged cannot be applied."""
        self._clear_messages()
        self.log_status.value = ""
        if not self._ready():
            raise InputError.single("person", None, "a saved person with a saved program (open one first)")
        record = self._entries()
        if record is None:
            self.log_status.value = ('<span class="pr-msg">No advice: correct the entries marked beside the '
                                     'fields.</span>')
            return False
        try:
            self._advise(draft=record)
        except InputError as exc:  # a date the session could not have (in the future, before the start)
            self._show_problems(exc.problems)
            self._clear_advice()
            self.log_status.value = ('<span class="pr-msg">No advice: correct the entries marked beside the '
                                     'fields.</span>')
            return False
        return True

    def _advise(self, draft=None) -> None:
        from ..clinic.advice import adjust_person
        day = parse_day(self.date.value.strip(), "date") if self._date_ok() else date.today()
        self.advice = adjust_person(self.app.session.store, self.patient_id, today=min(day, date.today()),
                                    draft=draft)
        self.advice["from_entries"] = draft is not None
        self._advice_for = (self.patient_id, self.app.session.saved_version)
        self.advice_view.value = advice_html(self.advice)
        self.apply_button.disabled = bool(draft is not None or self.advice.get("already_applied")
                                          or not self.advice.get("changes_program", True))
        self._refresh_charts()

    @guarded("Applying the advice")
    def on_apply(self) -> int | None:
        from ..clinic.advice import adjust_person
        if self.advice is None:
            raise InputError.single("advice", None, "advice worked out first (log a session or press Advise)")
        if self.advice.get("from_entries"):
            raise InputError.single("advice", "from entries not logged", "advice from a logged session (press "
                                    "Log session and advise first)")
        if not self.advice.get("changes_program", True):
            self.apply_button.disabled = True
            self.advice_view.value = (advice_html(self.advice) + '<p class="pr-live-nothing">Nothing to apply: the '
                                      f'advice keeps program version {self.app.session.saved_version} as it is; '
                                      'no new version was stored.</p>')
            return None
        who = self.clinician.value.strip()
        if not who:
            self.msgs["clinician"].value = ('<span class="pr-msg">Enter your name or initials: the change is '
                                            'recorded with who applied it. Nothing was saved.</span>')
            return None
        day = date.fromisoformat(self.advice["as_of"])
        out = adjust_person(self.app.session.store, self.patient_id, today=day, apply=True, clinician=who)
        version = out["program_version"]
        self.app.session.load(self.patient_id)  # the program section and the handout follow the new version
        self._clear_advice()
        self.advice_view.value = (advice_html(out) +
                                  f'<p class="pr-live-applied"><b>Applied</b>: stored as program version {version} '
                                  f'(based on version {out["based_on_version"]}) by {esc(who)}.</p>')
        self._advice_for = (self.patient_id, version)  # the note stays beside the version it made
        refresh = getattr(self.app, "refresh", None)
        if refresh is not None:
            refresh()
        else:
            self.refresh()
        return version

    @guarded("Recording the resumption")
    def on_resume(self) -> int | None:
        """Record the resumption of the paused program (the reason is required) under the signed-in
        clinician (the hub login, or a passphrase sign-in; never a typed name); the same function as
        ``prescribe resume``.  Returns the new program version, or None."""
        from ..clinic.advice import resume_person
        if not self._ready():
            raise InputError.single("person", None, "a saved person with a saved program (open one first)")
        self.resume_msg.value = ""
        try:
            who = self.app.signed.who("resume")
            out = resume_person(self.app.session.store, self.patient_id, clinician=who,
                                reason=self.resume_reason.value)
        except InputError as exc:
            self.resume_msg.value = ('<span class="pr-msg">Nothing was saved: '
                                     + esc("; ".join(p.message for p in exc.problems) or str(exc)) + "</span>")
            return None
        version = out["program_version"]
        self.app.session.load(self.patient_id)  # the program section and the handout follow the new version
        self.resume_reason.value = ""
        self._clear_advice()
        self.advice_view.value = (f'<p class="pr-live-resumed-note"><b>Resumed</b>: stored as program version '
                                  f'{version} (based on version {out["based_on_version"]}, paused since '
                                  f'{esc(readable_time(out["paused_since"]))}) by {esc(out["resumed_by"])}. Reason: '
                                  f'{esc(out["reason"])}. Press Advise for the next step before the next '
                                  f'session.</p>')
        self._advice_for = (self.patient_id, version)  # the note stays beside the version it made
        refresh = getattr(self.app, "refresh", None)
        if refresh is not None:
            refresh()
        else:
            self.refresh()
        return version

    # -- charts -----------------------------------------------------------------------------------
    def series(self):
        """Planned against done per week (prescribe.sessions.progress), with the weak windows the
        program itself marks (every window after every new or larger stimulus, from the domain's
        one reading of a plan's windows), and nothing "done" yet for the weeks still to come."""
        from ..sessions.progress import weekly_progress
        from ..stimulus import weak_weeks
        if not self._ready():
            return None
        try:
            sessions = self.app.session.store.logged_sessions(self.patient_id)
        except NotFoundError:
            sessions = []
        plan = self._plan()
        p = weekly_progress(plan, sessions)
        weak = weak_weeks(plan.weeks)
        p.weak_window = [w in weak for w in p.week]
        now = self.current_week()
        for name in ("impacts_done", "minutes_done", "load_done_kg"):
            values = getattr(p, name)
            setattr(p, name, [v if w <= now else math.nan for w, v in zip(p.week, values)])
        return p

    def _refresh_charts(self) -> None:
        series = self.series()
        if series is None:
            return
        if self.charts is None:
            self.charts = SessionCharts()
            self.chart_box.children = self.charts.figures
        self.charts.update(series)


def advice_html(advice: dict) -> str:
    """The advice as the panel shows it: the decision, its reasons with sources, what changes
    (exercises by name, dates and times as the app writes them; no rule ids)."""
    from .wording import dates_in_words, label, plain
    decision = advice["decision"]
    reasons = "".join(f"<li>{esc(plain(r['message']))} <small>(source: {esc(r['source'])})</small></li>"
                      for r in advice["reasons"])
    changes = "".join(f"<li>{esc(plain(c))}</li>" for c in advice["changes"])
    loads = "".join(f"<li>{esc(label(e))}: about {esc(v['kg'])} kg estimated 1RM ({esc(v['method'])})</li>"
                    for e, v in advice.get("estimated_1rm", {}).items() if v.get("kg"))
    entries = ('<p class="pr-live-from-entries"><i>Advice from the entries above, not logged: nothing was '
               "stored, and it cannot be applied. Log the session to keep it and apply the advice.</i></p>"
               if advice.get("from_entries") else "")
    unchanged = ('<p class="pr-live-unchanged">The advice keeps the program as it is: there is nothing to '
                 "apply.</p>" if not advice.get("changes_program", True) and not advice.get("from_entries") else "")
    already = advice.get("already_applied")
    return (f'<div class="pr-live-decision pr-live-decision-{decision.replace("_", "-")}">'
            f'<p><b>Next step for week {advice["week"]}: {esc(DECISION_TEXT.get(decision, decision))}</b></p>'
            + entries + f"<p>Why:</p><ul>{reasons}</ul><p>What the adjusted program changes:</p><ul>{changes}</ul>"
            + (f"<p>Working loads:</p><ul>{loads}</ul>" if loads else "") + unchanged
            + (f'<p class="pr-live-already">{esc(dates_in_words(already))}.</p>' if already else "") + "</div>")


class SessionCharts:
    """Three bqplot figures over :class:`prescribe.sessions.progress.WeeklyProgress`: impacts
    planned and done; minutes planned and done with the top load lifted; pain and effort.

    The weak windows the program marks (weeks 3-5 after each new or larger stimulus;
    Eriksen 1986, Endocr Rev 7:379) are shaded as continuous bands.  Weeks still to come show
    what is planned and nothing done.  No legend box over the data: each title says which
    mark is which.  Every value scale has a full domain and whole-number ticks where it
    counts; the kilogram axis is drawn only when the program or the sessions have a load.
    """

    def __init__(self) -> None:
        import bqplot as bq
        from .charts import ACCENT, INK, SHADE, _shade_mark
        self.bq = bq
        self.x = bq.LinearScale()
        self.shades = []

        def shade():
            mark = _shade_mark(self.x)
            self.shades.append(mark)
            return mark

        def axis_x():
            return bq.Axis(scale=self.x, label="week", tick_format="d")

        margin = {"top": 50, "bottom": 45, "left": 60, "right": 60}
        self.y_imp = bq.LinearScale(min=0.0, max=1.0)
        self.impacts_axis = bq.Axis(scale=self.y_imp, side="left", label="impacts", tick_format="d",
                                    tick_values=[0, 1])
        self.impacts = bq.Bars(x=[], y=[], scales={"x": self.x, "y": self.y_imp}, type="grouped",
                               colors=["#c9d3dd", INK], padding=0.2)
        self.impacts_figure = bq.Figure(
            title="Impacts a week: planned (light bars), done (dark bars); shaded: weak window",
            marks=[shade(), self.impacts], axes=[axis_x(), self.impacts_axis],
            fig_margin=margin, layout={"width": "100%", "height": "250px"})
        self.impacts_figure.add_class("pr-live-chart-impacts")
        self.y_min = bq.LinearScale(min=0.0, max=1.0)
        self.y_kg = bq.LinearScale(min=0.0, max=1.0)
        self.minutes_axis = bq.Axis(scale=self.y_min, side="left", label="minutes", tick_format="d",
                                    tick_values=[0, 1])
        self.kg_axis = bq.Axis(scale=self.y_kg, side="right", label="kg", color=ACCENT, tick_format="d",
                               tick_values=[0, 1])
        self.minutes = _DottedLines(bq, self.x, self.y_min, ["#9aa5b1", INK], "circle")
        self.loads = _DottedLines(bq, self.x, self.y_kg, ["#e0b080", ACCENT], "square", line_style="dashed")
        self.dose_figure = bq.Figure(
            title="Minutes a week: planned (grey), done (dark); top load (right, kg): planned (light orange), "
                  "lifted (orange)",
            marks=[shade(), *self.minutes.marks, *self.loads.marks],
            axes=[axis_x(), self.minutes_axis],
            fig_margin=margin, layout={"width": "100%", "height": "250px"})
        self.dose_figure.add_class("pr-live-chart-dose")
        self.y_pain = bq.LinearScale(min=0.0, max=10.0)
        self.pain = _DottedLines(bq, self.x, self.y_pain, ["#a4161a", "#e07a7a", INK], "circle")
        self.pain_figure = bq.Figure(
            title="Pain during (red), pain next morning (pink) and effort (dark), 0-10, by week; shaded: weak window",
            marks=[shade(), *self.pain.marks],
            axes=[axis_x(), bq.Axis(scale=self.y_pain, side="left", label="0-10", tick_format="d",
                                    tick_values=list(range(0, 11, 2)))],
            fig_margin=margin, layout={"width": "100%", "height": "250px"})
        self.pain_figure.add_class("pr-live-chart-pain")

    @property
    def figures(self) -> list:
        return [self.impacts_figure, self.dose_figure, self.pain_figure]

    def update(self, p) -> None:
        import numpy as np
        from .charts import band_outline, set_points, whole_ticks

        def top(*series) -> float:
            values = [float(v) for s in series for v in s if v is not None and not math.isnan(float(v))]
            return max(values, default=0.0)

        x = np.asarray(p.week, dtype=float)
        if len(x):
            self.x.min, self.x.max = float(x.min()) - 0.5, float(x.max()) + 0.5
        sx, sy = band_outline(list(p.week), list(p.weak_window))
        for mark in self.shades:
            set_points(mark, sx, sy)
        ticks = whole_ticks(top(p.impacts_planned, p.impacts_done))
        self.y_imp.max, self.impacts_axis.tick_values = float(ticks[-1]) * 1.05, ticks
        # A bar of a week still to come is empty (height 0), never a NaN the browser cannot draw.
        set_points(self.impacts, x, np.nan_to_num(np.asarray([p.impacts_planned, p.impacts_done], dtype=float)))
        ticks = whole_ticks(top(p.minutes_planned, p.minutes_done))
        self.y_min.max, self.minutes_axis.tick_values = float(ticks[-1]) * 1.05, ticks
        self.minutes.update(x, [p.minutes_planned, p.minutes_done])
        heaviest = top(p.load_planned_kg, p.load_done_kg)
        ticks = whole_ticks(heaviest)
        self.y_kg.max, self.kg_axis.tick_values = float(ticks[-1]) * 1.05, ticks
        # No kilogram axis where nothing is lifted or planned in kg (an axis made invisible still
        # makes the browser place it, and it cannot: the axis is left out of the figure instead).
        axes = [a for a in self.dose_figure.axes if a is not self.kg_axis] + ([self.kg_axis] if heaviest > 0 else [])
        if list(self.dose_figure.axes) != axes:
            self.dose_figure.axes = axes
        self.loads.update(x, [p.load_planned_kg, p.load_done_kg])
        self.pain.update(x, [p.pain_during, p.pain_next_morning, p.session_rpe])


class _DottedLines:
    """Lines with a dot at each week that has a value.  A week without one (no session, a week
    still to come) is a gap in its line and has no dot; a series with no value at all is not
    drawn.  The browser reports every point it cannot place (a dot or a path at a missing
    value, or a dot whose week arrives before its value), so each series is its own line,
    dots are drawn from the weeks with values only, and a growing set of dots gets its values
    before its weeks (a shrinking one its weeks first)."""

    def __init__(self, bq, x_scale, y_scale, colors: list[str], marker: str, **line_style) -> None:
        self.lines = [bq.Lines(x=[], y=[], scales={"x": x_scale, "y": y_scale}, colors=[c], **line_style)
                      for c in colors]
        self.dots = [bq.Scatter(x=[], y=[], scales={"x": x_scale, "y": y_scale}, colors=[c], marker=marker,
                                default_size=28, stroke=c, display_names=False) for c in colors]

    @property
    def marks(self) -> list:
        return [*self.lines, *self.dots]

    def values(self, weeks) -> "np.ndarray":
        """The values each line draws at ``weeks``, one row a series (NaN where a week has none)."""
        import numpy as np
        out = np.full((len(self.lines), len(weeks)), np.nan)
        for i, line in enumerate(self.lines):
            at = {float(w): v for w, v in zip(line.x, line.y)}
            out[i] = [at.get(float(w), np.nan) for w in weeks]
        return out

    def update(self, x, series: list[list[float]]) -> None:
        import numpy as np
        from .charts import set_points
        x = np.asarray(x, dtype=float)
        for line, dot, values in zip(self.lines, self.dots, series):
            y = np.asarray(values, dtype=float)
            keep = np.isfinite(y)
            line.visible = bool(keep.any())
            # The line runs from its first week with a value to its last (the browser places a
            # line's end at its last point, which must have a value); gaps inside stay gaps.
            ends = np.flatnonzero(keep)
            span = slice(ends[0], ends[-1] + 1) if len(ends) else slice(0, 0)
            set_points(line, x[span], y[span])
            set_points(dot, x[keep], y[keep])

