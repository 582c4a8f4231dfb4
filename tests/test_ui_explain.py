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
    app.start_new()  # a new person (the page's New person asks first about unsaved work)
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


def test_a_pick_made_while_the_page_refreshes_in_the_background_is_what_the_panel_shows(app):
    """The page refreshes from background threads (warm-up, a page taking a preheated kernel)
    while the clinician's pick arrives in the kernel's own thread: the pick stays, and the
    words, pictures and figures all describe the exercise the list shows."""
    import threading

    _submit(app)
    view = app.explain_view
    ids = [v for _, v in view.select.options]
    assert len(ids) >= 2
    stop = threading.Event()

    def refresher():
        while not stop.is_set():
            app.refresh(store=False)

    import sys

    threads = [threading.Thread(target=refresher) for _ in range(2)]
    interval = sys.getswitchinterval()
    sys.setswitchinterval(1e-6)  # switch threads as often as possible: the race shows in a few picks
    for t in threads:
        t.start()
    try:
        for n in range(60):
            pick = ids[n % len(ids)]
            view.select.value = pick
            assert view.select.value == pick  # a refresh of the same program leaves the pick alone
    finally:
        stop.set()
        for t in threads:
            t.join()
        sys.setswitchinterval(interval)
    shown = view.select.value
    assert shown == ids[59 % len(ids)]
    assert view.result["exercise_id"] == shown
    expected = explain_exercise(shown, body_mass_kg=64, t_score=-2.6)
    words = html.unescape(view.words.value)
    assert all(sentence in words for sentence in expected["plain_words"])
    assert f"{expected['joint_contact_force_n']:.0f} N" in view.numbers.value


def test_a_refresh_does_not_set_the_list_back_over_a_pick_that_arrived_while_it_ran(app):
    """The pick lands between the refresh reading the choice and writing the list (the order
    that once set a clinician's pick back to the first exercise on the page)."""
    _submit(app)
    view = app.explain_view
    ids = [v for _, v in view.select.options]
    first, last = ids[0], ids[-1]
    assert view.select.value == first
    pending = {"pick": last}

    class PickArrivesMidway(type(view.select)):
        def __setattr__(self, name, value):
            if name in ("options", "value") and pending.get("pick"):
                pick = pending.pop("pick")
                super().__setattr__("value", pick)  # the clinician's pick, from the browser
            super().__setattr__(name, value)

    view.select.__class__ = PickArrivesMidway
    try:
        app.refresh(store=False)
        if pending.get("pick"):  # the refresh wrote neither list nor choice: the pick comes after it
            view.select.value = pending.pop("pick")
    finally:
        view.select.__class__ = PickArrivesMidway.__mro__[1]
    assert view.select.value == last
    assert view.result["exercise_id"] == last
