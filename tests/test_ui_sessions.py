"""The live-session panel without a browser: set values, click, assert.  Invented people.

The rules' decisions are tested against their sources in tests/test_sessions_rules.py;
here: the panel pre-fills the day's exercises, refuses bad entries beside the field
without saving, shows the advice with its reasons at once, applies it with one click
(the program section and the handout follow the new version), draws the charts and
shows the cautions.
"""

from __future__ import annotations

import math
from datetime import date, timedelta

import pytest

from prescribe.store import open_store
from prescribe.ui import ClinicApp, ClinicSession
from session_support import person, plan_dict

PID = "UI-LIVE-1"


@pytest.fixture
def app(tmp_db):
    start = date.today() - timedelta(days=7 * 6)  # today is in week 7
    with open_store(tmp_db) as store:
        store.save_patient(person(PID), None, "EP Seed (invented)", plan=plan_dict(PID, start=start))
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    app.load_select.value = PID
    app.load_button.click()
    assert app.errors.last == ""
    return app


def test_without_a_saved_person_the_panel_says_what_to_do(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    assert not app.live.section.built  # nothing to log yet: the section waits to be opened
    app.live.open()
    assert "Open a saved person" in app.live.status.value and app.live.rows == []
    # The standard cautions stay in the box on top of the page; the panel shows its own.
    assert "does not replace clinical judgment" in app.top_cautions.value
    assert "stop the session and assess" in app.live.cautions.value


def test_this_week_shows_the_days_exercises_prefilled_as_prescribed(app):
    live = app.live
    assert "this week: week 7" in live.status.value
    plan = app.session.plan.model_dump(mode="json")
    live.day.value = 2  # the resistance day
    week7 = [x for s in plan["weeks"][6]["sessions"] if s["day"] == 2 for x in s["exercises"]]
    assert [r.exercise_id for r in live.rows] == [x["exercise_id"] for x in week7]
    first = live.rows[0]
    assert first.inputs["sets_done"].value == str(week7[0]["sets"])
    assert first.inputs["reps_done"].value == str(week7[0]["reps"])


def test_a_bad_entry_gets_a_message_beside_it_and_nothing_is_saved(app, tmp_db):
    live = app.live
    live.clinician.value = "EP Rowan (invented)"
    live._input("pain_during").value = "eleven"
    live.rows[0].inputs["minutes_done"].value = "-3"
    assert live.log_button.click() is None
    assert "pain_during must be" in live.msgs["pain_during"].value
    assert "minutes_done must be" in live.rows[0].msg.value
    assert "Nothing was saved" in live.log_status.value
    live._input("pain_during").value = "2"
    live.rows[0].inputs["minutes_done"].value = "20"
    live.date.value = (date.today() + timedelta(days=2)).isoformat()
    live.log_button.click()
    assert "not in the future" in live.msgs["session_date"].value
    live.clinician.value = ""
    live.date.value = date.today().isoformat()
    live.log_button.click()
    assert "name or initials" in live.msgs["clinician"].value
    with open_store(tmp_db) as store:
        assert store.sessions(PID) == []
        assert store.get_patient(PID).pain_score == 0  # the intake record is never touched


def test_log_shows_the_advice_at_once_and_apply_stores_the_new_version(app, tmp_db):
    live = app.live
    live.clinician.value = "EP Rowan (invented)"
    live._input("pain_during").value = "7"  # above 5/10: step back (Silbernagel et al. 2007, zones from memory)
    live.log_button.click()
    assert live.errors.last == "", live.errors.last
    assert "Session 1 logged for week 7" in live.log_status.value
    assert "Next step for week 7: Step back" in live.advice_view.value
    assert "Silbernagel" in live.advice_view.value  # each reason with its source
    assert "session.pain_during_high" not in live.advice_view.value  # never the rule's id
    assert live.apply_button.disabled is False
    live.apply_button.click()
    assert live.errors.last == "", live.errors.last
    assert app.session.saved_version == 2 and "program version 2" in live.status.value
    assert "stored as program version 2 (based on version 1)" in live.advice_view.value
    with open_store(tmp_db) as store:
        new = store.get_program(PID)
        assert new.based_on_version == 1 and new.adjustment.decision == "step_back"
        assert store.audit(PID)[-1]["clinician"] == "EP Rowan (invented)"
    # Logged: the form is ready for the next session (the logged entries are never counted twice).
    assert live._input("pain_during").value == "0"
    live.advise_button.click()  # advice from the form's entries: shown, never applicable
    assert "not logged" in live.advice_view.value and live.apply_button.disabled is True
    # the program section and the handout follow the new version
    assert app.session.plan.adjustment.decision == "step_back"
    assert b"week" in app.session.handout("html")
    # the charts: the logged pain in week 7, weak windows shaded
    charts = live.charts
    assert charts is not None and len(charts.figures) == 3
    pain = charts.pain.values(range(1, 27))[0]
    assert pain[6] == 7 and all(math.isnan(v) for i, v in enumerate(pain) if i != 6)
    assert list(charts.pain.dots[0].x) == [7]  # a dot where there is a value, none at the gaps
    assert list(charts.shades[0].y[0:12:2]) == [0, 0, 1, 1, 1, 0]  # one outline point each side of a week


def test_a_name_typed_in_one_section_never_fills_another(app):
    # Each clinician field is typed where it is used: a name typed for a save does not become the
    # name a session is logged under (nor the other way round).
    app.clinician.value = "PT Ash (invented)"
    app.live.open()
    assert app.live.clinician.value == ""
    app.live.clinician.value = "PT Birch (invented)"
    assert app.clinician.value == "PT Ash (invented)"
    app.retest_panel.open()
    assert app.retest_panel.clinician.value == ""


def test_a_signed_in_clinician_fills_every_clinician_field_until_signed_out(app, tmp_db):
    from signin_support import give_passphrase, sign_in
    give_passphrase(tmp_db, "PT Cedar (invented)")
    app.live.open()
    sign_in(app, "PT Cedar (invented)")
    assert app.clinician.value == app.live.clinician.value == "PT Cedar (invented)"
    assert app.clinician.disabled and app.live.clinician.disabled
    app.signin.out_button.click()
    assert app.signed.name == "" and app.clinician.value == "" and not app.clinician.disabled


def test_the_days_rows_are_built_again_when_the_same_person_is_reopened(app):
    live = app.live
    rows = [r.exercise_id for r in live.rows]
    assert rows
    app.on_new()  # nothing unsaved: a new person at once; the panel has nothing to log against
    assert live.rows == [] and live.rows_box.children == ()
    app.load_select.value = PID
    app.load_button.click()
    assert [r.exercise_id for r in live.rows] == rows and len(live.rows_box.children) == len(rows)


def test_the_session_list_names_the_days_as_the_week_view_does(app):
    from prescribe.ui import program_model as pm
    live = app.live
    week = live.current_week()
    headings = [d.heading for d in pm.week_days(app.session.plan, week)]
    assert [label for label, _ in live.day.options] == headings
    assert all(label.split(",")[0] in ("Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday",
                                       "Sunday") for label in headings)


def test_advise_reads_the_form_and_stale_advice_is_cleared(app, tmp_db):
    # A new back pain is a red flag: stop and refer (Riebe D et al. 2015, Med Sci Sports Exerc 47(11):2473-2479).
    live = app.live
    live._input("pain_during").value = "6"
    live.symptoms["new_back_pain"].value = True
    live.advise_button.click()
    assert live.errors.last == "", live.errors.last
    assert "Stop and refer" in live.advice_view.value and live.apply_button.disabled
    with open_store(tmp_db) as store:
        assert store.sessions(PID) == []
    live._input("pain_during").value = "12"
    live.advise_button.click()
    assert live.advice_view.value == "" and live.advice is None and live.apply_button.disabled
    assert "from 0 to 10" in live.msgs["pain_during"].value


def test_advice_that_changes_nothing_stores_no_version(app, tmp_db):
    from session_support import full_weeks
    with open_store(tmp_db) as store:
        plan = store.get_program(PID)
        start = date.fromisoformat(plan.start_date)
        for ls in full_weeks([5, 6], plan, pid=PID, start=start):
            store.add_session(ls.record, "EP Seed (invented)")
    live = app.live
    live.clinician.value = "EP Rowan (invented)"
    live.log_button.click()
    assert "Progress" in live.advice_view.value and live.advice["changes_program"] is False
    assert live.apply_button.disabled
    assert live.on_apply() is None and "Nothing to apply" in live.advice_view.value
    with open_store(tmp_db) as store:
        assert [v["version"] for v in store.program_versions(PID)] == [1]


def test_the_charts_shade_every_window_the_program_marks_and_show_nothing_done_ahead(app):
    live = app.live
    series = live.series()
    plan = app.session.plan
    # The planner's own windows (every new or larger stimulus), not only weeks 3-5 after the first.
    assert [w for w, weak in zip(series.week, series.weak_window) if weak] == \
        [w.week for w in plan.weeks if w.weak_window]
    assert max(w for w, weak in zip(series.week, series.weak_window) if weak) > 5
    now = live.current_week()
    assert all(math.isnan(v) for w, v in zip(series.week, series.minutes_done) if w > now)
    assert all(not math.isnan(v) for w, v in zip(series.week, series.minutes_done) if w <= now)
    charts = live.charts
    assert list(charts.minutes.dots[1].x) == list(range(1, now + 1))  # no "done 0" dots in weeks to come
    assert charts.kg_axis not in charts.dose_figure.axes  # nothing in kg: no kilogram axis without ticks
