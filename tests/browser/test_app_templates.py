"""The clinic lead's section in a real browser: list, a bad value named beside its field,
a draft saved, approved by a second clinician, compared with charts, and the caseload what-if.

The clinic and people are invented.  The four-eyes rule is common practice in clinical
governance (published_facts J).
"""

from __future__ import annotations

import pytest

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser


def _wait_text(page, css: str, needle: str, timeout: int = 60_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def test_clinic_lead_reviews_a_template(app_page, app_server):
    page = app_page
    open_app(page, app_server)
    # Open the section (it loads nothing until then).
    page.locator(".pr-section-templates .jupyter-widget-Collapse-header").first.click()
    _wait_text(page, ".pr-tpl-list", "standard@1")
    choose(page, "pr-tpl-select", "standard@1 (approved, shipped)")
    page.locator(".pr-tpl-open").click()
    _wait_text(page, ".pr-tpl-doc-status", "read-only")

    # A bad value is named beside its field; nothing is saved.
    type_into(page, "pr-tpl-clinician", "Lead A")
    type_into(page, "pr-tpl-field-impact-impacts_step", "lots")
    page.locator(".pr-tpl-save").click()
    msg = _wait_text(page, ".pr-tpl-msg-impact-impacts_step", "impact.impacts_step")
    assert "whole number from 0 to 100" in msg
    shot(page, "30-template-bad-value", of=".pr-section-templates")

    # Corrected, saved as a draft by Lead A.
    type_into(page, "pr-tpl-field-impact-impacts_step", "10")
    type_into(page, "pr-tpl-field-impact-impacts_target_level2", "40")
    page.locator(".pr-tpl-save").click()
    _wait_text(page, ".pr-tpl-status", "Saved clinic_standard@1 as a draft by Lead A")

    # The author's approval is refused; a second clinician approves.
    page.locator(".pr-tpl-approve").click()
    _wait_text(page, ".pr-tpl-error", "never its author")
    type_into(page, "pr-tpl-clinician", "Lead B")
    page.locator(".pr-tpl-approve").click()
    _wait_text(page, ".pr-tpl-status", "Approved clinic_standard@1 by Lead B")
    _wait_text(page, ".pr-tpl-list", "Lead B")
    shot(page, "31-template-approved", of=".pr-section-templates")

    # Compare with the shipped standard over the panel: table, differing field, charts.
    choose(page, "pr-tpl-compare-a", "standard@1 (approved, shipped)")
    choose(page, "pr-tpl-compare-b", "clinic_standard@1 (approved, clinic)")
    page.locator(".pr-tpl-compare").click()
    _wait_text(page, ".pr-tpl-compare-table", "PANEL-20")
    _wait_text(page, ".pr-tpl-compare-fields", "impact.impacts_target_level2")
    page.locator(".pr-tpl-chart-oi").wait_for(state="visible")
    shot(page, "32-template-compare", of=".pr-section-templates")

    # The caseload what-if runs to the end of its progress bar (an empty store: nobody changes).
    choose(page, "pr-tpl-whatif-template", "clinic_standard@1 (approved, clinic)")
    page.locator(".pr-tpl-whatif").click()
    _wait_text(page, ".pr-tpl-whatif-table", "people would change")
