"""Finding people and their program versions in a real browser, without losing work.

- A search finds a saved person by part of their id or of the name on their handout (there
  was no search: a long list to scroll).
- Opening another person while the page holds unsaved work asks first (it used to discard
  the work without a word); *Keep working* keeps it, *Discard and continue* opens the other.
- Any earlier program version can be opened again and saved as the next version (there was
  no way back).
- The replacement offered first for a swap is never an exercise already in the program (a
  swap into one is refused: it would merge the two).

Invented people only.
"""

from __future__ import annotations

import sys
from datetime import date, timedelta
from pathlib import Path

import pytest

from prescribe.store import open_store

from .conftest import open_app, shot, type_into

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from session_support import person, plan_dict  # noqa: E402

pytestmark = pytest.mark.browser

FIRST, SECOND = "PEOPLE-BR-1", "PEOPLE-BR-2"


def _wait_text(page, css: str, text: str, timeout: int = 30_000) -> str:
    page.wait_for_function(
        "([css, text]) => Array.from(document.querySelectorAll(css)).some(e => e.innerText.includes(text))",
        arg=[css, text], timeout=timeout)
    return page.locator(css).first.inner_text()


def _options(page, css: str) -> list[str]:
    return [o.replace("\xa0", " ") for o in page.locator(f"{css} select option").all_inner_texts()]


def _find(page, text: str, expect: list[str]) -> None:
    type_into(page, "pr-person-search", text)
    page.wait_for_function("(want) => Array.from(document.querySelectorAll('.pr-load-select select option'))"
                           ".map(o => o.text.replace(/\u00a0/g, ' ')).join('|') === want.join('|')", arg=expect)


def test_find_open_versions_and_never_lose_work(app_page, app_server):
    start = date.today() - timedelta(days=7)
    with open_store(str(app_server.db_path)) as store:
        store.save_patient(person(FIRST), None, "PT Seed (invented)", plan=plan_dict(FIRST, start=start))
        store.save_program(FIRST, plan_dict(FIRST, weeks=20, start=start), "PT Seed (invented)", 1,
                           note="shorter block (invented)")
        store.save_patient(person(SECOND, record_version=2, display_name="Marta Quill (invented)"), None,
                           "PT Seed (invented)", plan=plan_dict(SECOND, start=start))
    page = app_page
    open_app(page, app_server)

    # Found by the name on the handout, and by part of an id.
    _find(page, "quill", [SECOND])
    _find(page, "br-1", [FIRST])
    _find(page, "nobody-like-this", ["- nobody matches -"])
    _find(page, "quill", [SECOND])
    page.locator(".pr-load-button").click()
    _wait_text(page, ".pr-intake-status", f"Opened {SECOND}")

    # The replacement offered first is never already in the program, whichever exercise is chosen.
    in_program = {o.split(" (level")[0] for o in _options(page, ".pr-exercise-select")}
    for i, label in enumerate(_options(page, ".pr-exercise-select")):
        page.locator(".pr-exercise-select select").select_option(index=i)
        page.wait_for_function("(name) => { const s = document.querySelector('.pr-replacement-select select');"
                               " const e = document.querySelector('.pr-exercise-select select');"
                               " return e.options[e.selectedIndex].text.replace(/\u00a0/g, ' ') === name"
                               " && s.options.length > 0; }", arg=label, timeout=30_000)
        page.wait_for_timeout(300)
        chosen = page.evaluate("() => { const s = document.querySelector('.pr-replacement-select select');"
                               " return s.selectedIndex >= 0 ? s.options[s.selectedIndex].text : ''; }")
        chosen = chosen.replace("\xa0", " ").split(" (level")[0]
        free = [o.split(" (level")[0] for o in _options(page, ".pr-replacement-select")
                if o.split(" (level")[0] not in in_program]
        assert chosen not in in_program or not free, (label, chosen)

    # A change not saved: opening another person asks first, and Keep working keeps it.
    page.locator(".pr-option-start_level select").select_option(index=0)
    _wait_text(page, ".pr-program-days", "Supervision")
    _find(page, "br-1", [FIRST])
    page.locator(".pr-load-button").click()
    question = _wait_text(page, ".pr-unsaved-question", "Not saved yet")
    assert SECOND in question and f"Open {FIRST} anyway" in question
    assert page.locator(".pr-intake-patient_id input").first.input_value() == SECOND
    shot(page, "people-01-asked-before-losing-work", of=".pr-section-person")
    page.locator(".pr-unsaved-keep").click()
    page.locator(".pr-unsaved-discard").wait_for(state="hidden")
    assert page.locator(".pr-intake-patient_id input").first.input_value() == SECOND
    page.locator(".pr-load-button").click()
    _wait_text(page, ".pr-unsaved-question", "Not saved yet")
    page.locator(".pr-unsaved-discard").click()
    _wait_text(page, ".pr-intake-status", f"Opened {FIRST}")
    with open_store(str(app_server.db_path)) as store:
        assert [v["version"] for v in store.program_versions(SECOND)] == [1]  # the discarded change

    # An earlier version opened again: read it, then save it as the next version.
    page.wait_for_function("() => document.querySelector('.pr-option-weeks input').value === '20'")
    version_1 = next(i for i, o in enumerate(_options(page, ".pr-version-select")) if o.startswith("Version 1,"))
    page.locator(".pr-version-select select").select_option(index=version_1)
    page.locator(".pr-version-open").click()
    _wait_text(page, ".pr-version-status", "On the page: program version 1")
    page.wait_for_function("() => document.querySelector('.pr-option-weeks input').value === '26'")
    assert page.locator(".pr-history-shown").first.inner_text().startswith("1")
    shot(page, "people-02-earlier-version", of=".pr-section-store")
    type_into(page, "pr-store-clinician", "PT Ash (invented)")
    type_into(page, "pr-store-note", "back to the longer block (invented)")
    page.locator(".pr-store-save").click()
    _wait_text(page, ".pr-store-status", "program version 3")
    page.wait_for_function("() => document.querySelector('.pr-version-status').innerText.trim() === ''")
    with open_store(str(app_server.db_path)) as store:
        versions = store.program_versions(FIRST)
        plan = store.get_program(FIRST)
    assert [v["version"] for v in versions] == [1, 2, 3] and versions[-1]["based_on_version"] == 2
    assert len(plan.weeks) == 26
