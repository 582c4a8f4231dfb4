"""The whole visit in a real browser: intake -> flags -> program -> live change -> PDF -> save -> reload.

The person is invented.  The checks are on what the page shows; the clinical numbers
themselves are checked against their sources in the screening and planner tests.
"""

from __future__ import annotations

import subprocess

import pytest

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser

PERSON = "DEMO-E2E-1"

LEVEL_LINE_JS = """() => {
  const fig = document.querySelector('.pr-chart-level');
  if (!fig) return '';
  return Array.from(fig.querySelectorAll('path')).map(p => p.getAttribute('d') || '').join('|');
}"""


def _wait_text(page, css: str, needle: str, timeout: int = 30_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def test_new_person_to_printed_program_saved_and_reopened(app_page, app_server, context, tmp_path):
    page = app_page
    open_app(page, app_server)

    # 1. Intake typed in: an invented woman of 62 with a femoral-neck T-score of -2.6.
    type_into(page, "pr-intake-patient_id", PERSON)
    type_into(page, "pr-intake-age_years", "62")
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "64")
    type_into(page, "pr-intake-height_cm", "163")
    type_into(page, "pr-intake-t_scores-femoral_neck", "-2.6")
    shot(page, "10-intake-typed")
    page.locator(".pr-intake-submit").click()

    # 2. The flags appear, each with its source; the cautions are on the page.
    page.locator(".pr-flag").first.wait_for(state="visible")
    glance = page.locator(".pr-glance").inner_text()
    # WHO 1994 (Technical Report Series 843): a T-score of -2.5 or below is osteoporosis.
    assert "osteoporosis" in glance
    assert "Source:" in page.locator(".pr-flags").inner_text()
    assert "does not replace clinical judgment" in page.locator(".pr-cautions-always").inner_text()
    shot(page, "11-screening-flags", of=".pr-section-screening")

    # 3. The program is built: the week table and the charts are drawn.
    _wait_text(page, ".pr-week-table", "impacts per session")
    page.wait_for_function(f"({LEVEL_LINE_JS})().length > 20")
    before = page.evaluate(LEVEL_LINE_JS)
    shot(page, "12-program-built", of=".pr-section-program")
    # Beside each line of the week, why it is there, at this dose, this week, with its sources.
    days = _wait_text(page, ".pr-days", "Chosen:")
    assert "This dose:" in days and "This week:" in days
    page.locator(".pr-why-sources summary").first.click()
    sources = page.locator(".pr-why-sources").first.locator("li")
    sources.first.wait_for(state="visible")
    assert sources.count() >= 1 and all(len(t.strip()) > 10 for t in sources.all_inner_texts())
    shot(page, "12b-why-beside-each-line", of=".pr-days")

    # 4. Changing the start level redraws the chart.
    choose(page, "pr-option-start_level", "2 - moderate impact")
    page.wait_for_function(f"(before) => ({LEVEL_LINE_JS})() !== before", arg=before)
    assert page.locator(".pr-refusal").inner_text().strip() == ""
    shot(page, "13-start-level-changed", of=".pr-section-program")

    # A start level above the screening's cap is refused with the reason shown.
    choose(page, "pr-option-start_level", "3 - high impact")
    reason = _wait_text(page, ".pr-refusal", "Refused")
    assert "above what the screening allows" in reason  # plain words (docs/safety.md)
    shot(page, "14-unsafe-change-refused", of=".pr-section-program")

    # 5. The handout: preview, then a PDF that is a real PDF.
    page.locator(".pr-handout-preview").click()
    page.locator("iframe.pr-handout-iframe").wait_for(state="attached")
    page.locator(".pr-handout-make-pdf").click()
    link = page.locator("a.pr-download-pdf")
    link.wait_for(state="visible", timeout=60_000)
    with page.expect_download() as info:
        link.click()
    pdf = tmp_path / "handout.pdf"
    info.value.save_as(pdf)
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and len(data) > 5_000
    text = subprocess.run(["pdftotext", str(pdf), "-"], capture_output=True, text=True, check=True).stdout
    assert PERSON in text
    shot(page, "15-handout-ready", of=".pr-section-handout")

    # 6. Saved with a version number and visible history.
    type_into(page, "pr-store-clinician", "AB")
    page.locator(".pr-store-save").click()
    _wait_text(page, ".pr-store-status", f"Saved {PERSON}: program version 1")
    _wait_text(page, ".pr-store-history", "AB")
    shot(page, "16-saved", of=".pr-section-store")
    page.close()

    # 7. A fresh page (a new kernel) reopens the person with their program and history.
    page2 = context.new_page()
    open_app(page2, app_server)
    page2.locator(".pr-load-select select").select_option(PERSON)
    page2.locator(".pr-load-button").click()
    _wait_text(page2, ".pr-intake-status", f"Opened {PERSON}")
    assert page2.locator(".pr-intake-patient_id input").input_value() == PERSON
    assert page2.locator(".pr-intake-age_years input").input_value() == "62"
    assert page2.locator(".pr-intake-t_scores-femoral_neck input").input_value() == "-2.6"
    _wait_text(page2, ".pr-week-table", "impacts per session")
    _wait_text(page2, ".pr-store-history", "AB")
    shot(page2, "17-reopened", of=".pr-app")
