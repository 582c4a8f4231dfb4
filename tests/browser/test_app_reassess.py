"""The retest section and the lead's outcomes chart in a real browser: a saved person opened, a
retest typed into the form made from the retest's field metadata, compared, stored with its next
block, the measures over time drawn, the letter offered for download.  Invented people only."""

from __future__ import annotations

import base64
import sys
from datetime import date, timedelta
from pathlib import Path

import pytest

from prescribe.store import open_store

from .conftest import open_app, shot, type_into

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from session_support import person, plan_dict  # noqa: E402

pytestmark = pytest.mark.browser

PID = "RETEST-BR-1"


def _wait_text(page, css: str, text: str, timeout: int = 60_000) -> None:
    page.wait_for_function(
        "([css, text]) => Array.from(document.querySelectorAll(css)).some(e => e.innerText.includes(text))",
        arg=[css, text], timeout=timeout)


def test_retest_compare_apply_charts_letter_and_outcomes(app_page, app_server):
    start = date.today() - timedelta(days=7 * 14)
    with open_store(str(app_server.db_path)) as store:
        store.save_patient(person(PID), None, "EP Seed (invented)", plan=plan_dict(PID, start=start))
    page = app_page
    open_app(page, app_server)
    page.locator(".pr-load-select select").select_option(PID)
    page.locator(".pr-load-button").click()
    page.locator(".pr-section-retest").get_by_text("9. Retest, outcome and next block").click()
    page.locator(".pr-retest-compare").wait_for(state="visible", timeout=60_000)
    _wait_text(page, ".pr-retest-history", "No retest stored")
    type_into(page, "pr-retest-falls-since-last", "0")
    type_into(page, "pr-retest-timed-up-and-go-s", "6.0")
    type_into(page, "pr-retest-chair-stand-30s", "19")
    page.locator(".pr-retest-compare").click()
    _wait_text(page, ".pr-retest-result", "Decision: continue")
    _wait_text(page, ".pr-retest-result", "to be stored as program version 2")
    with open_store(str(app_server.db_path)) as store:
        assert store.retests(PID) == []
    type_into(page, "pr-retest-clinician", "EP Rowan (invented)")
    page.locator(".pr-retest-apply").click()
    _wait_text(page, ".pr-retest-result", "next block stored as program version 2")
    # two measures with two values each: two line charts, none empty
    page.wait_for_function("() => document.querySelectorAll('.pr-retest-chart').length === 2", timeout=60_000)
    page.wait_for_function("() => document.querySelectorAll('.pr-retest-chart .curve path.line').length === 2",
                           timeout=60_000)
    assert "does not replace clinical judgment" in page.locator(".pr-cautions-always").inner_text()
    shot(page, "retest-01-stored", of=".pr-section-retest")
    page.locator(".pr-retest-letter").click()
    page.locator(".pr-download-letter").wait_for(state="attached", timeout=120_000)
    href = page.locator(".pr-download-letter").get_attribute("href")
    assert base64.b64decode(href.split(",", 1)[1])[:5] == b"%PDF-"
    with open_store(str(app_server.db_path)) as store:
        assert store.latest_program_version(PID) == 2 and len(store.retests(PID)) == 1
    page.locator(".pr-section-outcomes").get_by_text("10. Clinic outcomes").click()
    _wait_text(page, ".pr-outcomes-table", "Timed Up and Go")
    page.wait_for_function("() => document.querySelectorAll('.pr-outcomes-chart rect.bar').length >= 1",
                           timeout=60_000)
    shot(page, "retest-02-outcomes", of=".pr-section-outcomes")
