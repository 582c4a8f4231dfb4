"""A version-2 person typed into the form in a real browser: medicines, an operation, the
menopause, the handout's name; screened, the referral and its reasons on the page in words.

An invented woman of 68, postmenopausal, on denosumab with the last injection 10 months ago
and a left hip replacement 4 months ago.  Screenshots go to test-artifacts/browser/.
"""

from __future__ import annotations

import re

import pytest

from prescribe.records import (BONE_METASTASES, COGNITION_LEVELS, FIELD_META, MEDICATION_CLASSES,
                               RECORD_SCHEMA, SURGERY_PROCEDURES)

from .conftest import open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-V2-WEB"


def _choose_words(page, css_class: str, words: str) -> None:
    """Pick a list entry by the words it shows (ipywidgets may show spaces as non-breaking)."""
    select = page.locator(f".{css_class} select").first
    select.wait_for(state="visible")
    options = select.locator("option").all_inner_texts()
    label = next(o for o in options if o.replace("\xa0", " ") == words)
    select.select_option(label=label)


def _wait_text(page, css: str, needle: str, timeout: int = 60_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text().replace("\xa0", " ")


def _codes() -> set[str]:
    """Names the page must not show: record field names (nested too) and vocabulary codes."""
    names = set(FIELD_META)
    for definition in RECORD_SCHEMA.get("$defs", {}).values():
        names |= set(definition.get("properties", {}))
    names |= set(MEDICATION_CLASSES) | set(SURGERY_PROCEDURES) | set(COGNITION_LEVELS) | set(BONE_METASTASES)
    return {n for n in names if "_" in n}


def test_a_version_2_person_is_typed_screened_and_referred_in_plain_words(app_page, app_server):
    page = app_page
    page.set_viewport_size({"width": 1280, "height": 2800})  # the whole form in one screenshot
    open_app(page, app_server)
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-display_name", "Rosa")
    type_into(page, "pr-intake-age_years", "68")
    _choose_words(page, "pr-intake-sex", "female")
    # Menopause appears once the person is a woman.
    _choose_words(page, "pr-intake-menopause", "postmenopausal")
    type_into(page, "pr-intake-body_mass_kg", "62")
    type_into(page, "pr-intake-height_cm", "160")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.3")
    type_into(page, "pr-intake-z_scores-femoral_neck", "-0.9")
    page.locator(".pr-intake-add-medication").click()
    _choose_words(page, "pr-intake-medication-0-class", "Denosumab")
    type_into(page, "pr-intake-medication-0-months_on", "36")
    type_into(page, "pr-intake-medication-0-months_since_last_dose", "10")
    page.locator(".pr-intake-add-surgery").click()
    _choose_words(page, "pr-intake-surgery-0-procedure", "Hip replacement")
    _choose_words(page, "pr-intake-surgery-0-side", "left")
    type_into(page, "pr-intake-surgery-0-months_ago", "4")
    _choose_words(page, "pr-intake-lives_alone", "no")
    shot(page, "60-intake-v2-typed", of=".pr-section-person")
    page.locator(".pr-intake-submit").click()

    # The referral and the reasons, in words, each with its source.
    screening = _wait_text(page, ".pr-screening", "Denosumab more than 7 months after the last injection")
    assert re.search(r"Clinician clearance needed before loading\s+YES", screening)
    assert "Hip replacement" in screening and "Holds until a clinician records the clearance." in screening
    assert "refer to the prescriber without delay" in screening and "Source: Tsourdi" in screening
    assert "Surgeries - surgeon cleared impact" in screening
    assert re.search(r"Highest impact level allowed\s+1 - low impact", screening)
    page.locator(".pr-screening").first.scroll_into_view_if_needed()
    shot(page, "61-screening-v2-referred", of=".pr-screening")

    # No field name, no vocabulary code anywhere in the visible page.
    text = page.evaluate("() => document.querySelector('.pr-app').innerText").replace("\xa0", " ")
    found = sorted(set(re.findall(r"[a-z][a-z0-9]*(?:_[a-z0-9]+)+", text)) & _codes())
    assert found == []
