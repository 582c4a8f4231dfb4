"""The app in a real browser: the page opens offline and bad input is caught at the form."""

from __future__ import annotations

import sqlite3

import pytest

from .conftest import choose, open_app, shot, type_into

pytestmark = pytest.mark.browser


def _stored_ids(db_path) -> set[str]:
    """Every patient id anywhere in the store (empty when the store has no tables yet)."""
    if not db_path.exists():
        return set()
    con = sqlite3.connect(db_path)
    try:
        tables = [r[0] for r in con.execute("select name from sqlite_master where type='table'")]
        found: set[str] = set()
        for table in tables:
            cols = [r[1] for r in con.execute(f"pragma table_info('{table}')")]
            if "patient_id" in cols:
                found |= {r[0] for r in con.execute(f"select patient_id from '{table}'")}
        return found
    finally:
        con.close()


def test_bad_input_shows_the_fields_message_and_saves_nothing(app_page, app_server):
    page = app_page
    open_app(page, app_server)
    shot(page, "01-intake-empty")
    type_into(page, "pr-intake-patient_id", "DEMO-BAD-1")
    type_into(page, "pr-intake-age_years", "12")          # below the record's minimum of 18
    choose(page, "pr-intake-sex", "female")
    type_into(page, "pr-intake-body_mass_kg", "61")
    # height left empty: a required field
    page.locator(".pr-intake-submit").click()
    age_msg = page.locator(".pr-msg-age_years")
    age_msg.wait_for(state="visible")
    page.wait_for_function("document.querySelector('.pr-msg-age_years').innerText.length > 0")
    assert "Age must be a whole number from 18 to 110 (years), not 12." in age_msg.inner_text()
    assert "Height is required" in page.locator(".pr-msg-height_cm").inner_text()
    assert page.locator(".pr-msg-body_mass_kg").inner_text().strip() == ""
    # Nothing screened, nothing saved.
    assert "Check the person's details" in page.locator(".pr-screening").inner_text()
    shot(page, "02-intake-bad-input", of=".pr-section-person")
    # Saving is not offered until the details are checked: sections 3 to 5 wait for a person.
    assert page.locator(".pr-store-save").count() == 0
    assert "appear once the person's details are checked" in page.locator(".pr-work-sections").inner_text()
    assert "DEMO-BAD-1" not in _stored_ids(app_server.db_path)
