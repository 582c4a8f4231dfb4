"""The app's large-print handout choice and the drawing beside the chosen exercise (no browser)."""

from __future__ import annotations

import base64
import html
import io
import re
from collections import Counter

import pytest
from pypdf import PdfReader

from prescribe.catalogue import default_catalogue
from test_ui_app import make_app, type_person


@pytest.fixture
def app(tmp_db):
    app = make_app(tmp_db)
    type_person(app)
    return app


def test_the_chosen_exercise_and_its_replacement_are_drawn_beside_the_list(app):
    ids = [i for i, _ in app.session.plan_exercises()]
    swappable = next(i for i in ids if app.session.swap_candidates(i))
    app.exercise_select.value = swappable
    shown = app.exercise_view.widget.value
    entry = default_catalogue().get(swappable)
    assert f'data-exercise="{swappable}"' in shown
    assert f"<title>{html.escape(entry.name)}: start and end position</title>" in shown
    assert shown.count('class="pose"') == 2  # the exercise and the one it would be swapped for
    replacement = app.replacement_select.value
    assert f'data-exercise="{replacement}"' in shown
    # Choosing another replacement redraws at once.
    others = [v for _, v in app.replacement_select.options if v != replacement]
    if others:
        app.replacement_select.value = others[0]
        assert f'data-exercise="{others[0]}"' in app.exercise_view.widget.value
    # Another exercise: its own drawing.
    other = next(i for i in ids if i != swappable)
    app.exercise_select.value = other
    assert f'data-exercise="{other}"' in app.exercise_view.widget.value


def test_an_exercise_outside_the_catalogue_says_it_has_no_drawing():
    from prescribe.ui.exercise_view import figure_html

    text = figure_html("clinic_custom_drill", "Exercise")
    assert "no drawing for clinic_custom_drill" in text and "<svg" not in text
    assert figure_html(None, "Exercise") == ""


def _body_pt(pdf: bytes) -> float:
    sizes: Counter = Counter()
    for page in PdfReader(io.BytesIO(pdf)).pages:
        def visit(text, cm, tm, _font, size):
            if text.strip():
                sizes[round(size * (tm[2] ** 2 + tm[3] ** 2) ** 0.5 * (cm[2] ** 2 + cm[3] ** 2) ** 0.5, 1)] += len(text)
        page.extract_text(visitor_text=visit)
    return sizes.most_common(1)[0][0]


def test_large_print_choice_gives_the_large_print_handout(app):
    app.audience.value = "person"
    app.large_print.value = True
    app.preview_button.click()
    assert "large-print" in html.unescape(app.preview.value)
    app.pdf_button.click()
    match = re.search(r'href="data:application/pdf;base64,([^"]+)"', app.download.value)
    assert match, app.errors.last
    assert _body_pt(base64.b64decode(match.group(1))) >= 14.0  # issue 19: body text at least 14 pt
    app.large_print.value = False
    app.pdf_button.click()
    match = re.search(r'href="data:application/pdf;base64,([^"]+)"', app.download.value)
    assert _body_pt(base64.b64decode(match.group(1))) < 14.0


def test_the_language_choice_beside_the_handout_gives_the_persons_pages_in_that_language(app):
    # PRODUCT.md, "The person's language": the app offers the same choice as --language.
    assert [v for _, v in app.language.options] == ["en", "es", "zh-Hans"] and app.language.value == "en"
    app.audience.value = "both"
    assert app.language_note.value == ""
    app.language.value = "es"
    assert "The Spanish text has not been reviewed by a qualified translator" in app.language_note.value
    app.preview_button.click()
    preview = html.unescape(app.preview.value)
    assert "Su plan de ejercicio para tener huesos fuertes" in preview
    assert "No qualified translator has reviewed the Spanish text yet" in preview  # the clinician's page
    app.html_button.click()
    match = re.search(r'download="([^"]+)" href="data:text/html;base64,([^"]+)"', app.download.value)
    assert match, app.errors.last
    assert match.group(1).endswith("-es.html")
    assert '<section class="person lang-es" lang="es"' in base64.b64decode(match.group(2)).decode("utf-8")
    app.language.value = "en"
    app.preview_button.click()
    assert "Your exercise plan for strong bones" in html.unescape(app.preview.value)
