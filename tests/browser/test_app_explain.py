"""The loads explained in a real browser: pick an exercise of the program, see the pictures and words.

The person is invented.  The numbers are checked against their sources in
tests/test_explain.py; here the check is that the page shows them.
"""

from __future__ import annotations

import pytest

from prescribe.catalogue import default_catalogue
from prescribe.loading.explain import explain_exercise

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-E2E-EXPLAIN"


def test_pick_an_exercise_and_see_what_the_bone_feels(app_page, app_server):
    page = app_page
    open_app(page, app_server)
    # An invented woman of 66, 58 kg, femoral-neck T-score -2.4 (osteopenia: WHO 1994).
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "66")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "58")
    type_into(page, "pr-intake-height_cm", "160")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.4")
    page.locator(".pr-intake-submit").click()

    # The panel fills in once the program is built: the first exercise is explained.
    panel = page.locator(".pr-explain")
    page.locator(".pr-explain-figures svg.pr-explain-stress-strain").wait_for(state="visible", timeout=60_000)
    assert page.locator(".pr-explain-figures svg.pr-explain-bars").count() == 1
    assert "times your body weight" in page.locator(".pr-explain-words").inner_text()
    # The panel's own caution; the standard ones stay in the one box on top of the page.
    assert "do not predict a fracture" in panel.inner_text()
    assert "does not replace clinical judgment" in page.locator(".pr-cautions-always").inner_text()

    # Pick another exercise of the program: the words and the pictures follow it.
    select = page.locator(".pr-explain-select select")
    values = select.locator("option").evaluate_all("opts => opts.map(o => o.textContent)")
    assert len(values) >= 2
    label = values[-1]
    # The list shows names only (no ids on the page): find the exercise by its name.
    # (ipywidgets shows spaces in option labels as no-break spaces).
    name = label.replace("\xa0", " ")
    exercise_id = next(e.exercise_id for e in default_catalogue().all() if e.name == name)
    expected = explain_exercise(exercise_id, body_mass_kg=58, t_score=-2.4)
    select.select_option(label=label)
    # The widgets update one after another: wait for the last one (the key figures).
    page.wait_for_function(
        "([needle]) => document.querySelector('.pr-explain-figures-numbers').innerText.includes(needle)",
        arg=[f"{expected['joint_contact_force_n']:.0f} N"], timeout=30_000)
    words = page.locator(".pr-explain-words").inner_text()
    assert expected["plain_words"][0] in words and expected["plain_words"][1] in words
    numbers = page.locator(".pr-explain-figures-numbers").inner_text()
    assert f"{expected['joint_contact_force_n']:.0f} N" in numbers
    # The marker on the stress-strain picture carries the exercise's peak stress.
    marker_text = f"{expected['peak_stress_mpa']['compression']:.0f} MPa"
    assert marker_text in page.locator(".pr-explain-figures svg.pr-explain-stress-strain").text_content()
    assert page.locator(".pr-explain-figures circle.pr-explain-marker").count() == 1
    shot(page, "30-loads-explained", of=".pr-explain")
