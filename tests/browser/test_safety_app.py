"""The safety check in a real browser: a refused swap, and a draft cleared by a signed-in clinician.

The person is invented: a woman of 79 with two falls last year and a Timed Up and Go of
14 s (at or above 12 s: at risk of falling, CDC STEADI), whom the screening refers to a
clinician before loading.  The rules themselves are checked against their sources in
tests/test_safety.py; here the checks are on what the page shows.
"""

from __future__ import annotations

import pytest

from prescribe.catalogue import default_catalogue

from .conftest import choose, open_app, shot, sign_in, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-SAFE-1"


def _wait_text(page, css: str, needle: str, timeout: int = 30_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def _name(exercise_id: str) -> str:
    return default_catalogue().get(exercise_id).name


def _choose_named(page, css_class: str, exercise_id: str) -> None:
    """Pick the entry of an exercise list that names ``exercise_id`` (the lists show names, never ids)."""
    page.wait_for_function(  # the list follows the other choice after a round trip
        "([css, name]) => Array.from(document.querySelectorAll('.' + css + ' select option'))"
        ".some(o => o.text.replace(/\u00a0/g, ' ').startsWith(name + ' ('))", arg=[css_class, _name(exercise_id)])
    options = page.locator(f".{css_class} select option").all_inner_texts()
    label = next(o for o in options if o.replace("\xa0", " ").startswith(_name(exercise_id) + " ("))
    page.locator(f".{css_class} select").select_option(label=label)


def _preview_shows(page, needle: str, present: bool) -> None:
    """Preview the handout and wait until its page does (or, once redrawn, does not) hold ``needle``."""
    page.locator(".pr-handout-preview").click()
    page.wait_for_function(
        """([needle, present]) => {
             const f = document.querySelector('iframe.pr-handout-iframe');
             if (!f) return false;
             const doc = f.getAttribute('srcdoc') || '';
             return doc.includes('Clinician page') && doc.includes(needle) === present;
           }""", arg=[needle, present], timeout=60_000)


def test_refused_swap_and_clearance_of_a_draft(app_page, app_server):
    page = app_page
    open_app(page, app_server)
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "79")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "62")
    type_into(page, "pr-intake-height_cm", "158")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.0")
    type_into(page, "pr-intake-falls_past_year", "2")
    type_into(page, "pr-intake-timed_up_and_go_s", "14")
    page.locator(".pr-intake-submit").click()

    # A referred person: the program is a draft, said plainly, with the clearance control.
    status = _wait_text(page, ".pr-draft-status", "DRAFT")
    assert "Do not start this program" in status
    page.locator(".pr-clearance-record").wait_for(state="visible")
    _wait_text(page, ".pr-week-table", "impacts per session")
    shot(page, "30-draft-program", of=".pr-section-program")

    # A calf raise swapped for a back squat: refused in plain words, the program kept.
    table_before = page.locator(".pr-week-table").inner_text()
    _choose_named(page, "pr-exercise-select", "calf_raise")
    _choose_named(page, "pr-replacement-select", "back_squat")
    page.locator(".pr-swap-button").click()
    refusal = _wait_text(page, ".pr-refusal", "Refused")
    assert _name("back_squat") in refusal and "back_squat" not in refusal and "Allowed:" in refusal and "previous program is kept" in refusal
    assert page.locator(".pr-week-table").inner_text() == table_before
    options = page.locator(".pr-exercise-select select").inner_text().replace("\xa0", " ")
    assert _name("calf_raise") in options
    shot(page, "31-swap-refused", of=".pr-section-program")

    # The draft's handout says DRAFT; once a clinician records the clearance it does not.
    _preview_shows(page, "DRAFT: do not start this program", True)
    # A clearance vouches for the person: nobody signed in, it is refused beside its button.
    page.locator(".pr-clearance-record").click()
    refused = _wait_text(page, ".pr-clearance-msg", "Not cleared")
    assert "signed-in clinician" in refused and "typed name proves nothing" in refused
    assert "DRAFT" in page.locator(".pr-draft-status").inner_text()
    sign_in(page, app_server, "Dr A. Example")
    _wait_text(page, ".pr-clearance-who", "Dr A. Example")
    page.locator(".pr-clearance-record").click()
    cleared = _wait_text(page, ".pr-draft-status", "Cleared by Dr A. Example")
    assert "DRAFT" not in cleared
    page.locator(".pr-clearance-record").wait_for(state="hidden")
    _preview_shows(page, "DRAFT: do not start this program", False)
    shot(page, "32-cleared", of=".pr-section-program")
