"""The app's Resume control and save paths for a paused program, without a browser: set
values, click, assert.  Invented people.

After a fall the program is paused (Riebe D et al. 2015, Med Sci Sports Exerc
47(11):2473-2479: stop and refer before more exercise); it stays paused until a clinician
records the resumption with a reason, here through the same function as
``prescribe resume``.
"""

from __future__ import annotations

from datetime import date, timedelta

import pytest

from prescribe.plan_schema import parse_plan
from prescribe.sessions.records import parse_session
from prescribe.store import open_store
from prescribe.clinic.advice import adjust_person
from prescribe.ui import ClinicApp, ClinicSession
from session_support import person, plan_dict
from signin_support import give_passphrase, sign_in

PID = "UI-PAUSE-1"
REASON = "Assessed after the fall: no injury; cleared to continue (invented)"


@pytest.fixture
def app(tmp_db):
    start = date.today() - timedelta(days=7 * 6)  # today is in week 7
    with open_store(tmp_db) as store:
        store.save_patient(person(PID), None, "EP Seed (invented)", plan=plan_dict(PID, start=start))
        store.add_session(parse_session({"patient_id": PID, "session_date": date.today().isoformat(),
                                         "pain_during": 0, "fell_since_last": True}), "EP Seed (invented)")
        adjust_person(store, PID, today=date.today(), apply=True, clinician="EP Seed (invented)")
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    app.load_select.value = PID
    app.load_button.click()
    assert app.errors.last == ""
    return app


def _versions(tmp_db) -> list[int]:
    with open_store(tmp_db) as store:
        return [v["version"] for v in store.program_versions(PID)]


def test_the_paused_program_shows_resume_which_needs_a_signed_in_clinician_and_a_reason(app, tmp_db,
                                                                                        monkeypatch):
    monkeypatch.delenv("JUPYTERHUB_USER", raising=False)
    live = app.live
    live.open()
    assert "Paused from week 7" in live.status.value and live.resume_box.layout.display is None
    # A typed name proves nothing: nobody is signed in, so the resumption is refused beside its button.
    live.clinician.value = "Dr Ines Vale (invented)"
    live.resume_reason.value = REASON
    assert live.resume_button.click() is None
    assert "Nothing was saved" in live.resume_msg.value and "signed-in clinician" in live.resume_msg.value
    assert _versions(tmp_db) == [1, 2]
    # Signed in, a blank reason is still refused.
    give_passphrase(tmp_db, "Dr Ines Vale (invented)")
    sign_in(app, "Dr Ines Vale (invented)")
    live.resume_reason.value = "   "
    live.resume_button.click()
    assert "Nothing was saved" in live.resume_msg.value and "reason must be" in live.resume_msg.value
    assert _versions(tmp_db) == [1, 2]


def test_resume_records_it_and_the_page_shows_the_program_resumed(app, tmp_db):
    live = app.live
    live.open()
    give_passphrase(tmp_db, "Dr Ines Vale (invented)")
    sign_in(app, "Dr Ines Vale (invented)")
    live.resume_reason.value = REASON
    live.resume_button.click()
    assert app.errors.last == ""
    assert _versions(tmp_db) == [1, 2, 3]
    plan = app.session.plan
    assert app.session.saved_version == 3 and plan.paused is None and plan.resumed.reason == REASON
    assert "Resumed by Dr Ines Vale (invented)" in live.status.value and "Paused from" not in live.status.value
    assert live.resume_box.layout.display == "none" and live.resume_reason.value == ""
    assert "stored as program version 3" in live.advice_view.value
    # The advice no longer counts the fall from before the resumption (only later sessions count).
    live.advise_button.click()
    assert "Next step for week 7" in live.advice_view.value and "Stop and refer" not in live.advice_view.value
    assert "PAUSED" not in app.session.handout("html").decode("utf-8")


def test_the_apps_save_of_another_program_over_a_paused_one_is_refused(app, tmp_db):
    assert "PAUSED: Do not do these exercises" in app.session.handout("html").decode("utf-8")
    original = plan_dict(PID, start=date.today() - timedelta(days=7 * 6))
    app.session.plan = parse_plan(original)
    assert app.session.save("EP Rowan (invented)") is None
    assert "paused since" in app.session.notice and "Resume it in section 6" in app.session.notice
    assert _versions(tmp_db) == [1, 2]
