"""The app's "loads explained" panel without a browser: pick an exercise, read the pictures and words."""

from __future__ import annotations

import html
import re

import pytest

from prescribe.loading.explain import explain_exercise
from prescribe.ui import ClinicApp, ClinicSession

# An invented woman of 62, 64 kg, femoral-neck T-score -2.6 (osteoporosis: WHO 1994).
PERSON = {"patient_id": "DEMO-EXPLAIN-1", "age_years": "62", "sex": "female", "body_mass_kg": "64",
          "height_cm": "163", "t_scores.femoral_neck": "-2.6"}


@pytest.fixture
def app(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    return app


def _submit(app, person=PERSON):
    for key, value in person.items():
        app.intake.inputs[key].value = value
    app.submit_button.click()
    assert app.errors.last == "", app.errors.last


def test_panel_is_empty_until_a_program_exists(app):
    view = app.explain_view
    assert view.widget in app.program_section.children
    assert "pr-explain" in view.widget._dom_classes
    assert view.select.options == ()
    assert "Build a program" in view.status.value
    assert view.figures.value == ""


def test_panel_offers_the_program_and_explains_the_pick_for_this_person(app):
    _submit(app)
    view = app.explain_view
    program_ids = [i for i, _ in app.session.plan_exercises()]
    assert [v for _, v in view.select.options] == program_ids
    # Pick the hardest-hitting exercise of the program.
    hardest = max(program_ids, key=lambda i: explain_exercise(i)["peak_grf_bw"])
    view.select.value = hardest
    expected = explain_exercise(hardest, body_mass_kg=64, t_score=-2.6)
    assert view.result["exercise_id"] == hardest
    assert view.result["joint_contact_force_bw"] == expected["joint_contact_force_bw"]
    assert view.result["body_mass_given"] and view.result["t_score_given"]
    words = html.unescape(view.words.value)
    for sentence in expected["plain_words"]:
        assert sentence in words
    # Both pictures, drawn from the same data as the handout's.
    assert view.figures.value.count("<svg") >= 2
    assert 'class="chart pr-explain-stress-strain"' in view.figures.value
    assert 'class="chart pr-explain-bars"' in view.figures.value
    marker = f"{expected['peak_stress_mpa']['compression']:.0f} MPa"
    assert marker in view.figures.value
    assert f"{expected['joint_contact_force_n']:.0f} N" in view.numbers.value
    # The standard cautions stay in the one box on top of the page; the panel adds its own.
    assert "does not replace clinical judgment" in app.top_cautions.value
    assert "do not predict a fracture" in view.cautions.value


def test_choosing_another_exercise_redraws(app):
    _submit(app)
    view = app.explain_view
    options = [v for _, v in view.select.options]
    assert len(options) >= 2
    view.select.value = options[0]
    first = view.figures.value
    view.select.value = options[1]
    assert view.result["exercise_id"] == options[1]
    assert view.figures.value != first


def test_a_changed_program_keeps_the_choice_or_moves_to_one_still_there(app):
    _submit(app)
    view = app.explain_view
    chosen = view.select.options[-1][1]
    view.select.value = chosen
    app.on_option_change()  # a rebuild with the same options keeps the choice
    assert view.select.value == chosen
    app.on_new()
    assert view.select.options == () and view.result is None
    assert "Build a program" in view.status.value


def test_an_exercise_missing_from_the_catalogue_is_said_in_the_panel(app, monkeypatch):
    _submit(app)
    view = app.explain_view
    from prescribe.loading import explain as explain_module
    from prescribe.errors import InputError

    def refuse(exercise_id, **_kw):
        raise InputError.single("exercise_id", exercise_id, "an id from the catalogue")

    monkeypatch.setattr(explain_module, "explain_exercise", refuse)
    view.select.value = view.select.options[-1][1]
    view.show()
    assert view.result is None and view.figures.value == ""
    assert "cannot be explained" in view.status.value and "exercise_id" in view.status.value
    assert app.errors.last == ""  # the rest of the page is not disturbed
