"""In a real browser: the language choice beside the handout gives a Spanish PDF.

PRODUCT.md, "The person's language": the app offers the same choice as `prescribe handout
--language`.  The downloaded PDF's text (pdftotext) is Spanish on the person's pages and
English on the clinician's, which says that no qualified translator has reviewed the text.
The person is invented.
"""

from __future__ import annotations

import subprocess

import pytest

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-E2E-ES"


def test_a_spanish_pdf_from_the_handout_section(app_page, app_server, tmp_path):
    page = app_page
    open_app(page, app_server)
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "70")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "60")
    type_into(page, "pr-intake-height_cm", "158")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.6")
    page.locator(".pr-intake-submit").click()
    page.locator(".pr-handout-make-pdf").wait_for(state="visible", timeout=60_000)

    # The language choice sits beside the handout's other choices.
    choose(page, "pr-handout-language", "Spanish (Español)")
    choose(page, "pr-handout-audience", "for the person and the clinician")
    page.locator(".pr-handout-make-pdf").click()
    link = page.locator("a.pr-download-pdf")
    link.wait_for(state="visible", timeout=90_000)
    shot(page, "32-spanish-handout-ready", of=".pr-section-handout")
    assert link.get_attribute("download") == f"handout-{PERSON}-es.pdf"
    with page.expect_download() as info:
        link.click()
    pdf = tmp_path / "es.pdf"
    info.value.save_as(pdf)
    assert pdf.read_bytes().startswith(b"%PDF")
    text = subprocess.run(["pdftotext", "-enc", "UTF-8", str(pdf), "-"], capture_output=True,
                          check=True).stdout.decode("utf-8")
    person, clinician = text.split("Clinician page", 1)
    assert "Su plan de ejercicio para tener huesos fuertes" in person and "Pare y pida consejo" in person
    assert "página 1 de" in person and "Your exercise plan" not in person
    assert "Person's pages: Spanish (es)." in clinician
    assert "No qualified translator has reviewed the Spanish text yet" in " ".join(clinician.split())
