"""The clinic lead's section in a real browser: list, a bad value named beside its field,
a draft saved and approved by a second, signed-in clinician, compared with charts that
draw, and the caseload what-if.

Approving rests on who is signed in, never on a typed name: a refusal is shown beside the
button pressed (it used to appear about 10,000 px above it, at the top of the page), and a
name without its passphrase approves nothing (retyping another name used to approve at
once).  The clinic and people are invented.  The four-eyes rule is common practice in
clinical governance (published_facts J).
"""

from __future__ import annotations

import pytest

from .conftest import axis_ticks, choose, console_errors, open_app, shot, sign_in, sign_out, type_into

pytestmark = pytest.mark.browser

LEAD_A, LEAD_B = "Lead Ada (invented)", "Lead Bo (invented)"


def _wait_text(page, css: str, needle: str, timeout: int = 60_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def _beside(page, message_css: str, button_css: str, within_px: float = 250) -> float:
    """How far (vertically, in px) the message is from the button it answers; asserted near."""
    message = page.locator(message_css).first.bounding_box()
    button = page.locator(button_css).first.bounding_box()
    assert message is not None and button is not None
    gap = abs((message["y"] + message["height"] / 2) - (button["y"] + button["height"] / 2))
    assert gap < within_px, f"the message is {gap:.0f} px from its button"
    return gap


def _open_section(page) -> None:
    page.locator(".pr-section-templates .jupyter-widget-Collapse-header").first.click()
    _wait_text(page, ".pr-tpl-list", "Standard graded program")


def test_clinic_lead_reviews_a_template(app_page, app_server):
    page = app_page
    errors = console_errors(page)
    open_app(page, app_server)
    _open_section(page)
    choose(page, "pr-tpl-select", "Standard graded program (standard, version 1): approved, shipped with the tool")
    page.locator(".pr-tpl-open").click()
    _wait_text(page, ".pr-tpl-doc-status", "read-only")
    form = page.locator(".pr-tpl-form").inner_text()
    assert "impact.impacts_step" not in form and "Landings added a week until the level's target" in form
    assert "TOML" not in form and "Rules folder" not in page.locator(".pr-section-templates").inner_text()

    # Nobody signed in: saving a draft is refused beside the buttons, nothing saved.
    page.locator(".pr-tpl-save").click()
    _wait_text(page, ".pr-tpl-status", "signed-in clinician")
    _beside(page, ".pr-tpl-status", ".pr-tpl-save")

    # A bad value is named beside its field, in the form's words; nothing is saved.
    sign_in(page, app_server, LEAD_A)
    _wait_text(page, ".pr-template-role", LEAD_A)
    type_into(page, "pr-tpl-field-impact-impacts_step", "lots")
    page.locator(".pr-tpl-save").click()
    msg = _wait_text(page, ".pr-tpl-msg-impact-impacts_step", "This value")
    assert "whole number from 0 to 100" in msg and "impact.impacts_step" not in msg
    shot(page, "30-template-bad-value", of=".pr-section-templates")

    # Corrected, saved as a draft by the signed-in Lead A.
    type_into(page, "pr-tpl-field-impact-impacts_step", "10")
    type_into(page, "pr-tpl-field-impact-impacts_target_level2", "40")
    page.locator(".pr-tpl-save").click()
    _wait_text(page, ".pr-tpl-status", f"by {LEAD_A}")

    # The author's approval is refused beside the button, not at the top of the page.
    page.locator(".pr-tpl-approve").click()
    _wait_text(page, ".pr-tpl-status", "never its author")
    _beside(page, ".pr-tpl-status .pr-error-box", ".pr-tpl-approve")
    assert page.locator(".pr-error .pr-error-box").count() == 0

    # Lead B approves, signed in as themself.
    sign_out(page)
    sign_in(page, app_server, LEAD_B)
    page.locator(".pr-tpl-approve").click()
    _wait_text(page, ".pr-tpl-status", f"by {LEAD_B}")
    _wait_text(page, ".pr-tpl-list", LEAD_B)
    shot(page, "31-template-approved", of=".pr-section-templates")

    # Compare with the shipped standard over the panel: table and differing field in words.
    choose(page, "pr-tpl-compare-a", "Standard graded program (standard, version 1): approved, shipped with the tool")
    choose(page, "pr-tpl-compare-b", "Standard graded program (clinic_standard, version 1): approved, the clinic's own")
    page.locator(".pr-tpl-compare").click()
    table = _wait_text(page, ".pr-tpl-compare-table", "PANEL-20")
    assert "weeks to full volume, A" in table and "weeks_to_full_volume" not in table
    fields = _wait_text(page, ".pr-tpl-compare-fields", "Full volume a session at moderate impact")
    assert "impacts_target_level2" not in fields
    page.locator(".pr-tpl-chart-oi").wait_for(state="visible")
    # Both charts draw their bars (they were blank: bar scales without a maximum, about 200 console
    # errors), with whole-number ticks on the impacts axis.
    for chart, least in ((".pr-tpl-chart-oi", 40), (".pr-tpl-chart-impacts", 1)):  # 20 people, A and B
        page.wait_for_function("([css, least]) => Array.from(document.querySelectorAll(css + ' rect.bar'))"
                               ".filter(r => parseFloat(r.getAttribute('height')) > 0).length >= least",
                               arg=[chart, least])
    ticks = axis_ticks(page, ".pr-tpl-chart-impacts", "impacts")
    assert ticks and len(ticks) == len(set(ticks)) and all(t.isdigit() for t in ticks), ticks
    page.locator(".pr-tpl-compare-charts").screenshot(path=str(shot(page, "32-template-compare",
                                                                    of=".pr-section-templates").with_name(
                                                                        "32b-template-compare-charts.png")))
    assert not [e for e in errors if "attribute" in e or "NaN" in e], errors[:5]

    # The caseload what-if runs to the end of its progress bar.
    choose(page, "pr-tpl-whatif-template",
           "Standard graded program (clinic_standard, version 1): approved, the clinic's own")
    page.locator(".pr-tpl-whatif").click()
    _wait_text(page, ".pr-tpl-whatif-table", "people would change")


def test_a_typed_name_never_approves_and_refusals_are_beside_the_button(app_page, app_server):
    from prescribe.store import open_store

    with open_store(str(app_server.db_path)) as store:
        store.add_template("osteo_start_br", {"title": "Osteopenia start (invented clinic)"}, LEAD_A)
    page = app_page
    open_app(page, app_server)
    _open_section(page)
    label = "Osteopenia start (invented clinic) (osteo_start_br, version 1), by " + LEAD_A
    choose(page, "pr-template-drafts", label)

    # Nobody signed in: refused beside the Approve button, the draft stays a draft.
    page.locator(".pr-template-approve").click()
    refusal = _wait_text(page, ".pr-template-status", "Not approved")
    assert "signed-in clinician" in refusal
    gap = _beside(page, ".pr-template-status .pr-error-box", ".pr-template-approve")
    shot(page, "33-approve-refused-beside-button", of=".pr-section-templates")

    # Lead B's name typed with another clinician's passphrase signs nobody in.
    sign_in(page, app_server, LEAD_A)       # sets Lead A's passphrase (and signs Lead A in)
    sign_out(page)
    from signin_support import give_passphrase
    give_passphrase(str(app_server.db_path), LEAD_B)
    page.locator(".pr-signin-name input").first.fill(LEAD_B)
    page.locator(".pr-signin-passphrase input").first.fill("not Lead B's passphrase at all")
    page.locator(".pr-signin-button").click()
    _wait_text(page, ".pr-signin-message", "does not match")
    page.locator(".pr-template-approve").click()
    _wait_text(page, ".pr-template-status", "signed-in clinician")
    with open_store(str(app_server.db_path)) as store:
        assert store.get_template("osteo_start_br", 1)["status"] == "draft"

    # The author, signed in, is refused (four eyes), beside the button; Lead B signed in approves.
    sign_in(page, app_server, LEAD_A)
    page.locator(".pr-template-approve").click()
    _wait_text(page, ".pr-template-status", "never its author")
    _beside(page, ".pr-template-status .pr-error-box", ".pr-template-approve")
    sign_out(page)
    sign_in(page, app_server, LEAD_B)
    page.locator(".pr-template-approve").click()
    _wait_text(page, ".pr-template-status", f"as {LEAD_B}")
    with open_store(str(app_server.db_path)) as store:
        row = store.get_template("osteo_start_br", 1)
    assert row["status"] == "approved" and row["approved_by"] == LEAD_B and gap < 250
