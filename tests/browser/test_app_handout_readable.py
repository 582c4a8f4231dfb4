"""In a real browser: the drawing beside the chosen exercise, and the large-print handout choice.

The person is invented.  Large print is measured in the downloaded PDF itself (pypdf's
text visitor: the size each run of text is drawn at): body text at least 14 pt (issue 19).
"""

from __future__ import annotations

import io
from collections import Counter

import pytest

from prescribe.catalogue import default_catalogue
from pypdf import PdfReader

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-E2E-LP"


def _id_of(label: str) -> str:
    """The exercise a list entry "Name (level N)" shows (ipywidgets shows spaces as no-break spaces)."""
    name = label.replace("\xa0", " ").rsplit(" (", 1)[0]
    return next(e.exercise_id for e in default_catalogue().all() if e.name == name)


def _body_pt(data: bytes) -> float:
    sizes: Counter = Counter()
    for page in PdfReader(io.BytesIO(data)).pages:
        def visit(text, cm, tm, _font, size):
            if text.strip():
                sizes[round(size * (tm[2] ** 2 + tm[3] ** 2) ** 0.5 * (cm[2] ** 2 + cm[3] ** 2) ** 0.5, 1)] += len(text)
        page.extract_text(visitor_text=visit)
    return sizes.most_common(1)[0][0]


def test_drawing_beside_the_exercise_and_a_large_print_pdf(app_page, app_server, tmp_path):
    page = app_page
    open_app(page, app_server)
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "68")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "63")
    type_into(page, "pr-intake-height_cm", "160")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-1.8")
    page.locator(".pr-intake-submit").click()

    # The drawing of the exercise chosen in the program section, start and end.
    drawing = page.locator(".pr-exercise-drawing .pr-pose svg.pose").first
    drawing.wait_for(state="visible", timeout=60_000)
    box = drawing.bounding_box()
    assert box and box["width"] >= 200 and box["height"] >= 60
    first = page.locator(".pr-exercise-drawing .pr-pose").first.get_attribute("data-exercise")
    # The list shows "Name (level N)": no ids on the page.
    assert _id_of(page.locator(".pr-exercise-select select").input_value()) == first
    assert "Start" in page.locator(".pr-exercise-drawing").inner_text()
    shot(page, "30-exercise-drawing", of=".pr-section-program")
    # Another exercise: its own drawing replaces the first.
    options = page.locator(".pr-exercise-select select option").evaluate_all("os => os.map(o => o.value)")
    other_label = next(v for v in options if _id_of(v) != first)
    other = _id_of(other_label)
    page.locator(".pr-exercise-select select").select_option(other_label)
    page.wait_for_function(
        "(id) => { const f = document.querySelector('.pr-exercise-drawing .pr-pose');"
        " return f && f.getAttribute('data-exercise') === id; }", arg=other)

    # The large-print choice beside the handout controls, then the PDF.
    choose(page, "pr-handout-audience", "for the person")
    page.locator(".pr-handout-large-print input").check()
    page.locator(".pr-handout-make-pdf").click()
    link = page.locator("a.pr-download-pdf")
    link.wait_for(state="visible", timeout=90_000)
    shot(page, "31-large-print-ready", of=".pr-section-handout")
    with page.expect_download() as info:
        link.click()
    pdf = tmp_path / "large.pdf"
    info.value.save_as(pdf)
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF")
    assert _body_pt(data) >= 14.0
