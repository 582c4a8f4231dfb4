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
    assert "session.pain_during_high" in live.advice_view.value and "Silbernagel" in live.advice_view.value
    assert live.apply_button.disabled is False
    live.apply_button.click()
    assert live.errors.last == "", live.errors.last
    assert app.session.saved_version == 2 and "program version 2" in live.status.value
    assert "stored as program version 2 (based on version 1)" in live.advice_view.value
    with open_store(tmp_db) as store:
        new = store.get_program(PID)
        assert new.based_on_version == 1 and new.adjustment.decision == "step_back"
        assert store.audit(PID)[-1]["clinician"] == "EP Rowan (invented)"
    live.advise_button.click()  # advice again with no new session: shown, but not applicable twice
    assert "already applies the advice" in live.advice_view.value and live.apply_button.disabled is True
    # the program section and the handout follow the new version
    assert app.session.plan.adjustment.decision == "step_back"
    assert b"week" in app.session.handout("html")
    # the charts: the logged pain in week 7, weak windows shaded
    charts = live.charts
    assert charts is not None and len(charts.figures) == 3
    pain = charts.pain.y[0]
    assert pain[6] == 7 and all(math.isnan(v) for i, v in enumerate(pain) if i != 6)
    assert list(charts.shades[0].y[:6]) == [0, 0, 1, 1, 1, 0]


def test_the_clinicians_name_is_typed_once_for_the_page(app):
    # Common practice: a form asks once for who is working. The save, live-session and template
    # fields follow each other, and the panels built when opened start from the name already typed.
    app.clinician.value = "PT Ash (invented)"
    app.live.open()
    assert app.live.clinician.value == "PT Ash (invented)"
    app.templates_view.widget.selected_index = 0  # opening the section builds it
    assert app.templates_view.clinician.value == "PT Ash (invented)"
    app.live.clinician.value = "PT Ash B (invented)"
    assert app.clinician.value == app.templates_view.clinician.value == "PT Ash B (invented)"
    app.clinician.value = ""  # emptied in one place, empty in all: no save under an old name
    assert app.live.clinician.value == app.templates_view.clinician.value == ""
