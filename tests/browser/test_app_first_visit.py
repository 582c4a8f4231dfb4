"""A first visit in a real browser: a new person to a reviewed program, in plain words.

The clinic's settings are asked for once; an invented person is typed in; the program is
reviewed week by week (this week's exercises and doses on screen), a swap is confirmed
after the page says what will change, unsafe or merging changes are refused in plain
words, and no internal name (a record field name or an exercise id) reaches the page.
Screenshots of each step go to test-artifacts/browser/.
"""

from __future__ import annotations

import re

import pytest

from prescribe.catalogue import default_catalogue
from prescribe.records import FIELD_META, RECORD_SCHEMA

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-FV-1"
CLINIC = "Hillside Bone Clinic (invented)"
PHONE = "555-0142"


def _wait_text(page, css: str, needle: str, timeout: int = 30_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def _nbsp(text: str) -> str:
    """ipywidgets shows dropdown labels with non-breaking spaces."""
    return text.replace("\xa0", " ")


def _choose_named(page, css_class: str, name: str) -> None:
    """Pick the entry of an exercise list that starts with ``name`` (the lists show names with details)."""
    page.wait_for_function(  # the list follows the other choice after a round trip
        "([css, name]) => Array.from(document.querySelectorAll('.' + css + ' select option'))"
        ".some(o => o.text.replace(/\u00a0/g, ' ').startsWith(name + ' ('))", arg=[css_class, name])
    options = page.locator(f".{css_class} select option").all_inner_texts()
    label = next(o for o in options if _nbsp(o).startswith(name + " ("))
    page.locator(f".{css_class} select").select_option(label=label)


def _internal_names() -> set[str]:
    """Every snake_case name the page must not show: the record's field names (nested ones
    too) and the catalogue's exercise ids."""
    names = set(FIELD_META)
    for definition in RECORD_SCHEMA.get("$defs", {}).values():
        names |= set(definition.get("properties", {}))
    names |= {e.exercise_id for e in default_catalogue().all()}
    names |= {"start_level", "max_impact_level", "impacts_per_session", "resistance_intensity_pct_1rm",
              "weekly_osteogenic_index", "based_on_version", "weak_window", "impact_level"}
    return {n for n in names if "_" in n}


def _visible_internal_names(page) -> list[str]:
    text = _nbsp(page.evaluate("() => document.querySelector('.pr-app').innerText"))
    words = set(re.findall(r"[a-z][a-z0-9]*(?:_[a-z0-9]+)+", text))
    return sorted(words & _internal_names())


def test_new_person_to_a_reviewed_program_in_plain_words(app_page, app_server):
    page = app_page
    open_app(page, app_server)

    # 0. No clinic name yet: the app asks once; a phone is required.
    page.locator(".pr-clinic-name input").wait_for(state="visible")
    shot(page, "40-clinic-asked", of=".pr-clinic-settings")
    type_into(page, "pr-clinic-name", CLINIC)
    type_into(page, "pr-clinic-contact", PHONE)
    page.locator(".pr-clinic-save").click()
    _wait_text(page, ".pr-clinic-status", f"handouts will show {CLINIC}")
    page.locator(".pr-clinic-name input").wait_for(state="hidden")

    # 1. The intake, labelled as the baseline; an invented woman of 62, femoral-neck T-score -2.6.
    assert "baseline" in page.locator(".pr-section-person").inner_text()
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "62")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "64")
    type_into(page, "pr-intake-height_cm", "163")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.6")
    page.locator(".pr-intake-submit").click()

    # 2. This week day by day: exercises by name with their doses, loads and supervision.
    days = _wait_text(page, ".pr-program-days", "Supervision")
    assert "Monday" in days and re.search(r"\d+ sets x \d+ reps", days) and re.search(r"\d+ minutes", days)
    assert "effort (RPE" in days
    assert "Week 1" in _nbsp(page.locator(".pr-program-week select").inner_text())
    stages = page.locator(".pr-progression").inner_text()
    assert "weak window" in stages and "impacts per session" in stages
    # The cautions: one box always on screen.
    assert "does not replace clinical judgment" in page.locator(".pr-cautions-always").inner_text()
    shot(page, "41-this-week", of=".pr-program-view")

    # A later week, with impacts.
    options = page.locator(".pr-program-week select option").all_inner_texts()
    page.locator(".pr-program-week select").select_option(label=options[13])
    _wait_text(page, ".pr-program-days", "impacts")
    shot(page, "42-week-14", of=".pr-program-view")

    # 3. A swap: the page says what will change; confirmed, it says what changed.
    exercise = _nbsp(page.locator(".pr-exercise-select select option").first.inner_text()).split(" (level")[0]
    page.locator(".pr-swap-button").click()
    preview = _wait_text(page, ".pr-swap-preview", "Confirm this swap?")
    assert f"{exercise} is replaced by" in preview and "dose stays as prescribed" in preview
    shot(page, "43-swap-asked", of=".pr-section-program")
    page.locator(".pr-swap-confirm").click()
    status = _wait_text(page, ".pr-swap-status", "Swapped:")
    assert f"now replaces {exercise}" in status
    new = status.split("Swapped: ")[1].split(" now replaces")[0]
    # The list keeps the swapped-in exercise chosen, not the first entry.
    page.wait_for_function(
        "(name) => { const s = document.querySelector('.pr-exercise-select select');"
        " return s && s.selectedIndex >= 0 && s.options[s.selectedIndex].text.replace(/\u00a0/g, ' ')"
        ".startsWith(name + ' (level'); }", arg=new)
    shot(page, "44-swap-done", of=".pr-section-program")

    # 4. Refusals in plain words: a swap into an exercise the program already has (never merged)...
    in_program = [_nbsp(o).split(" (level")[0]
                  for o in page.locator(".pr-exercise-select select option").all_inner_texts()]
    names = {e.name: e for e in default_catalogue().all()}
    old, new = next((a, b) for a in in_program for b in in_program
                    if a != b and names[a].category == names[b].category == "resistance")
    _choose_named(page, "pr-exercise-select", old)
    _choose_named(page, "pr-replacement-select", new)
    page.locator(".pr-swap-button").click()
    merged = _wait_text(page, ".pr-refusal", "already in the program")
    assert merged.startswith(f"{new} is already in the program") and "_" not in merged
    assert page.locator(".pr-swap-confirm").is_hidden()
    shot(page, "45a-merge-refused", of=".pr-section-program")
    # ...and a start level above what the screening allows.
    choose(page, "pr-option-start_level", "3 - high impact")
    reason = _wait_text(page, ".pr-refusal", "above what the screening allows")
    assert "_" not in reason and "Start level 3" in reason and "previous program is kept" in reason
    shot(page, "45-refused-in-words", of=".pr-section-program")

    # 5. The history keeps a note written with the save, with a readable date.
    type_into(page, "pr-store-clinician", "AB")
    type_into(page, "pr-store-note", "First program (invented)")
    page.locator(".pr-store-save").click()
    history = _wait_text(page, ".pr-store-history", "First program (invented)")
    assert not re.search(r"\d{4}-\d{2}-\d{2}T", history)
    shot(page, "46-saved-with-note", of=".pr-section-store")

    # 6. The handout names the clinic and its phone.
    page.locator(".pr-handout-preview").click()
    frame = page.frame_locator("iframe.pr-handout-iframe")
    frame.locator("body").wait_for(state="attached")
    doc = frame.locator("body").inner_text()
    assert CLINIC in doc and PHONE in doc
    shot(page, "47-handout-with-clinic", of=".pr-section-handout")

    # 7. No record field name or exercise id anywhere in the page's visible text.
    found = _visible_internal_names(page)
    where = page.evaluate(
        "(names) => Array.from(document.querySelectorAll('.pr-app [class*=\"pr-\"]'))"
        ".filter(e => names.some(n => e.innerText && e.innerText.includes(n)) && e.children.length < 50)"
        ".map(e => e.className + ': ' + e.innerText.slice(0, 300))", found)
    assert found == [], where[-5:]
