"""A paused program in the browser: the live-session section shows the pause and a Resume
control; the resumption needs a reason, is recorded (who, when, why) and the page then
shows the program resumed.  Invented people.

After a fall the advice is stop_and_refer (Riebe D et al. 2015, Med Sci Sports Exerc
47(11):2473-2479); the program stays paused until a clinician records the resumption.
"""

from __future__ import annotations

import sys
from datetime import date, timedelta
from pathlib import Path

from prescribe.sessions.records import parse_session
from prescribe.store import open_store
from prescribe.clinic.advice import adjust_person

from .conftest import open_app, shot, sign_in, type_into

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from session_support import person, plan_dict  # noqa: E402

PID = "PAUSE-BR-1"
REASON = "Assessed after the fall: no injury; cleared to continue (invented)"


def _wait_text(page, css: str, text: str, timeout: int = 30_000) -> None:
    page.wait_for_function(
        "([css, text]) => Array.from(document.querySelectorAll(css)).some(e => e.innerText.includes(text))",
        arg=[css, text], timeout=timeout)


def test_resume_a_paused_program_with_a_reason(app_page, app_server):
    start = date.today() - timedelta(days=7 * 6)  # today is in week 7
    with open_store(str(app_server.db_path)) as store:  # a program paused after a fall, through the store
        store.save_patient(person(PID), None, "EP Seed (invented)", plan=plan_dict(PID, start=start))
        store.add_session(parse_session({"patient_id": PID, "session_date": date.today().isoformat(),
                                         "pain_during": 0, "fell_since_last": True}), "EP Seed (invented)")
        adjust_person(store, PID, today=date.today(), apply=True, clinician="EP Seed (invented)")
    page = app_page
    open_app(page, app_server)
    page.locator(".pr-load-select select").select_option(PID)
    page.locator(".pr-load-button").click()
    _wait_text(page, ".pr-live-paused", "Paused from week 7")
    page.locator(".pr-live-resume").wait_for(state="visible")
    # A typed name proves nothing: nobody signed in, refused beside the button, nothing stored.
    type_into(page, "pr-live-clinician", "Dr Ines Vale (invented)")
    reason = page.locator(".pr-live-resume-reason textarea").first
    reason.fill(REASON)
    reason.press("Tab")
    page.locator(".pr-live-resume").click()
    _wait_text(page, ".pr-live-resume-msg", "signed-in clinician")
    with open_store(str(app_server.db_path)) as store:
        assert [v["version"] for v in store.program_versions(PID)] == [1, 2]
    # Signed in, but no reason: refused beside the button, nothing stored.
    sign_in(page, app_server, "Dr Ines Vale (invented)")
    reason.fill("")
    reason.press("Tab")
    page.locator(".pr-live-resume").click()
    _wait_text(page, ".pr-live-resume-msg", "reason must be")
    with open_store(str(app_server.db_path)) as store:
        assert [v["version"] for v in store.program_versions(PID)] == [1, 2]
    reason.fill(REASON)
    reason.press("Tab")
    shot(page, "pause-01-paused", of=".pr-section-sessions")
    page.locator(".pr-live-resume").click()
    _wait_text(page, ".pr-live-status", "Resumed by Dr Ines Vale (invented)")
    _wait_text(page, ".pr-live-advice", "stored as program version 3")
    page.locator(".pr-live-resume-box").wait_for(state="hidden")
    assert page.locator(".pr-live-paused").count() == 0
    shot(page, "pause-02-resumed", of=".pr-section-sessions")
    with open_store(str(app_server.db_path)) as store:
        plan = store.get_program(PID)
        audit = store.audit(PID)[-1]
    assert plan.paused is None and plan.resumed.reason == REASON
    assert plan.resumed.by == "Dr Ines Vale (invented)"
    assert audit["action"] == "program_resumed" and audit["detail"]["reason"] == REASON
