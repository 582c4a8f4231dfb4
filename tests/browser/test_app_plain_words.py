"""No internal name reaches the page, in a real browser, with every section in use: a saved person
with a logged session and its advice, a paused-then-resumed program, the clinic lead's templates
shown, compared and run over the caseload.

Internal names are what the code calls things: record field names, exercise ids, the ids of
screening, safety and session rules, template keys, the comparison's metric names, raw ISO
timestamps, the rule set's version, and server-side things (a rules folder, a TOML file).
The page says them in the clinician's words, with times as the app writes them
("5 Dec 2026, 13:46").  Invented people only.
"""

from __future__ import annotations

import re
import sys
from datetime import date, timedelta
from pathlib import Path

import pytest

from prescribe.catalogue import default_catalogue
from prescribe.planning.templates import template_fields
from prescribe.planning.templates.review import COMPARED_FIGURES
from prescribe.records import FIELD_META, RECORD_SCHEMA
from prescribe.safety import RULES
from prescribe.screening import load_rules
from prescribe.sessions.records import parse_session
from prescribe.sessions.rules import default_rules
from prescribe.store import open_store

from .conftest import open_app, shot, sign_in, type_into

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from session_support import person, plan_dict  # noqa: E402

pytestmark = pytest.mark.browser

PID = "WORDS-BR-1"


def _internal_names() -> set[str]:
    names = set(FIELD_META)
    for definition in RECORD_SCHEMA.get("$defs", {}).values():
        names |= set(definition.get("properties", {}))
    names |= {e.exercise_id for e in default_catalogue().all()}
    names |= {r.rule_id for r in RULES} | {r.id for r in default_rules().rules} | {r.id for r in load_rules().rules}
    names |= {f.path for f in template_fields()} | {f.key for f in template_fields()} | set(COMPARED_FIGURES)
    return {n for n in names if "_" in n or "." in n}


def _wait_text(page, css: str, text: str, timeout: int = 60_000) -> str:
    page.wait_for_function(
        "([css, text]) => Array.from(document.querySelectorAll(css)).some(e => e.innerText.includes(text))",
        arg=[css, text], timeout=timeout)
    return page.locator(css).first.inner_text()


def test_every_section_in_plain_words(app_page, app_server):
    today = date.today()
    with open_store(str(app_server.db_path)) as store:
        store.save_patient(person(PID),
                           None, "EP Seed (invented)", plan=plan_dict(PID, start=today - timedelta(days=42)))
        store.add_session(parse_session({"patient_id": PID, "session_date": today.isoformat(), "pain_during": 0,
                                         "fell_since_last": True}), "EP Seed (invented)")
    page = app_page
    open_app(page, app_server)
    page.locator(".pr-load-select select").select_option(PID)
    page.locator(".pr-load-button").click()
    _wait_text(page, ".pr-live-status", PID)

    # The advice after a fall: stop and refer, applied (the program paused), then resumed by a
    # signed-in clinician; every step's words stay on the page.
    page.locator(".pr-live-advise").click()
    _wait_text(page, ".pr-live-advice", "Stop and refer")
    type_into(page, "pr-live-clinician", "EP Rowan (invented)")
    page.locator(".pr-live-advise").click()
    sign_in(page, app_server, "Dr Ines Vale (invented)")
    with open_store(str(app_server.db_path)) as store:
        from prescribe.clinic.advice import adjust_person
        adjust_person(store, PID, today=today, apply=True, clinician="EP Rowan (invented)")
    page.locator(".pr-load-button").click()  # opened again: the paused version
    _wait_text(page, ".pr-live-paused", "Paused from week 7")
    reason = page.locator(".pr-live-resume-reason textarea").first
    reason.fill("Assessed after the fall: no injury (invented)")
    reason.press("Tab")
    page.locator(".pr-live-resume").click()
    _wait_text(page, ".pr-live-status", "Resumed by Dr Ines Vale (invented) on")
    page.locator(".pr-live-advise").click()
    _wait_text(page, ".pr-live-advice", "Next step for week 7")

    # The clinic lead's section: a template shown, two compared, the caseload what-if run.
    page.locator(".pr-section-templates .jupyter-widget-Collapse-header").first.click()
    _wait_text(page, ".pr-tpl-list", "Standard graded program")
    page.locator(".pr-tpl-open").click()
    _wait_text(page, ".pr-tpl-doc-status", "read-only")
    page.locator(".pr-tpl-compare").click()
    _wait_text(page, ".pr-tpl-compare-table", "PANEL-20")
    page.locator(".pr-tpl-whatif").click()
    _wait_text(page, ".pr-tpl-whatif-table", "people would change")
    shot(page, "words-01-templates", of=".pr-section-templates")

    text = page.evaluate("() => document.querySelector('.pr-app').innerText").replace("\xa0", " ")
    words = set(re.findall(r"[a-z][a-z0-9]*(?:[_.][a-z0-9]+)+", text))
    found = sorted(words & _internal_names())
    assert found == [], found
    assert not re.search(r"\d{4}-\d{2}-\d{2}T\d{2}:\d{2}", text), re.findall(r".{40}\d{4}-\d{2}-\d{2}T.{20}", text)
    assert not re.search(r"\b\d{4}-\d{2}-\d{2}\b", text), re.findall(r".{40}\b\d{4}-\d{2}-\d{2}\b.{10}", text)
    for phrase in ("Rule set", "TOML", "Rules folder", "[rule"):
        assert phrase not in text, phrase
