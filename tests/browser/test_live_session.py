"""The live session in the browser: open a saved person, log a session (a bad entry first),
see the advice with its reasons, apply it with one click, see the charts.  Invented people.

The decision itself is checked against its sources in tests/test_sessions_rules.py;
here the clinician's path through the page is checked end to end.
"""

from __future__ import annotations

import sys
from datetime import date, timedelta
from pathlib import Path

from prescribe.store import open_store

from .conftest import open_app, shot, type_into

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from session_support import person, plan_dict  # noqa: E402

PID = "LIVE-BR-1"


def _wait_text(page, css: str, text: str, timeout: int = 30_000) -> None:
    page.wait_for_function(
        "([css, text]) => Array.from(document.querySelectorAll(css)).some(e => e.innerText.includes(text))",
        arg=[css, text], timeout=timeout)


def test_log_advise_apply_and_chart(app_page, app_server):
    start = date.today() - timedelta(days=7 * 6)  # today is in week 7
    with open_store(str(app_server.db_path)) as store:
        store.save_patient(person(PID), None, "EP Seed (invented)", plan=plan_dict(PID, start=start))
    page = app_page
    open_app(page, app_server)
    page.locator(".pr-load-select select").select_option(PID)
    page.locator(".pr-load-button").click()
    _wait_text(page, ".pr-live-status", "this week: week 7")
    page.locator(".pr-live-row").first.wait_for(state="visible")
    # a bad entry: a message beside the field, nothing saved
    type_into(page, "pr-live-clinician", "EP Rowan (invented)")
    type_into(page, "pr-live-pain-during", "12")
    page.locator(".pr-live-log").click()
    _wait_text(page, ".pr-live-msg-pain-during", "pain_during must be a whole number from 0 to 10")
    with open_store(str(app_server.db_path)) as store:
        assert store.sessions(PID) == []
    # a real session with dizziness: stop and refer, with its reason and source
    type_into(page, "pr-live-pain-during", "2")
    page.locator(".pr-live-symptom-dizziness input").check()
    page.locator(".pr-live-log").click()
    _wait_text(page, ".pr-live-advice", "Next step for week 7: Stop and refer")
    _wait_text(page, ".pr-live-advice", "Riebe")
    shot(page, "live-01-advice", of=".pr-section-sessions")
    page.locator(".pr-live-apply").click()
    _wait_text(page, ".pr-live-advice", "stored as program version 2 (based on version 1)")
    _wait_text(page, ".pr-live-status", "program version 2")
    # the charts show the logged week; the cautions are on the panel
    page.locator(".pr-live-chart-pain svg").first.wait_for(state="visible")
    assert page.locator(".pr-live-charts .bqplot").count() == 3
    _wait_text(page, ".pr-section-sessions .pr-cautions", "stop the session and assess")
    _wait_text(page, ".pr-cautions-always", "does not replace clinical judgment")  # the one box on top
    shot(page, "live-02-applied", of=".pr-section-sessions")
    with open_store(str(app_server.db_path)) as store:
        assert len(store.sessions(PID)) == 1
        assert store.get_program(PID).paused.from_week == 7
        assert store.audit(PID)[-1]["clinician"] == "EP Rowan (invented)"
