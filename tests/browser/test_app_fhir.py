"""The record system in a real browser (HL7 FHIR R4 4.0.1; an invented person): a Bundle uploaded
fills the intake form with the boxes marked, and the saved program downloads as a Bundle.

No request leaves 127.0.0.1 (the conftest aborts and fails any other).  LOINC 38267-1 (DXA lumbar
spine T-score): OHDSI THEMIS table of LOINC long common names (2018); 29463-7 and 8302-2: the FHIR
R4 Vital Signs profile.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

from .conftest import open_app, shot, type_into

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from test_fhir import bundle, obs  # noqa: E402

pytestmark = pytest.mark.browser


def _wait_text(page, css: str, needle: str, timeout: int = 30_000) -> str:
    page.wait_for_function(
        "([css, needle]) => { const e = document.querySelector(css); return e && e.innerText.includes(needle); }",
        arg=[css, needle], timeout=timeout)
    return page.locator(css).first.inner_text()


def test_upload_a_bundle_then_download_the_program_bundle(app_page, app_server, tmp_path):
    page = app_page
    open_app(page, app_server)
    src = tmp_path / "oak-101.json"
    b = bundle(obs("t", "38267-1", -2.6))
    b["entry"][0]["resource"]["identifier"] = [{"value": "OAK-BR-7"}]
    src.write_text(json.dumps(b))
    with page.expect_file_chooser() as chooser:
        page.locator(".pr-fhir-upload").first.click()
    chooser.value.set_files(str(src))
    status = _wait_text(page, ".pr-fhir-import-status", "Brought in OAK-BR-7")
    assert "Observation/t" in status and "Check and screen" in status
    assert page.locator(".pr-intake-patient_id input").input_value() == "OAK-BR-7"
    assert page.locator(".pr-intake-t_scores-lumbar_spine input").input_value() == "-2.6"
    assert page.locator(".pr-from-fhir").count() >= 6          # the boxes the Bundle filled are marked
    assert page.locator(".pr-intake-timed_up_and_go_s.pr-from-fhir").count() == 0
    shot(page, "fhir-01-brought-in", of=".pr-section-person")
    # The clinician confirms as usual; the program is built and saved.
    page.locator(".pr-intake-submit").click()
    page.locator(".pr-flag").first.wait_for(state="visible", timeout=60_000)
    _wait_text(page, ".pr-week-table", "impacts per session", timeout=60_000)
    type_into(page, "pr-store-clinician", "AB")
    page.locator(".pr-store-save").click()
    _wait_text(page, ".pr-store-status", "Saved OAK-BR-7: program version 1")
    page.locator(".pr-fhir-send").click()
    link = page.locator("a.pr-fhir-bundle-link")
    link.wait_for(state="visible", timeout=60_000)
    with page.expect_download() as info:
        link.click()
    out = tmp_path / "bundle.json"
    info.value.save_as(out)
    sent = json.loads(out.read_text())
    assert sent["resourceType"] == "Bundle" and sent["type"] == "collection"
    from fhirclient.models.bundle import Bundle
    Bundle(sent, strict=True)                                   # FHIR R4 by fhirclient's models
    kinds = [e["resource"]["resourceType"] for e in sent["entry"]]
    assert {"Patient", "CarePlan", "Goal", "Provenance"} <= set(kinds)
    prov = next(e["resource"] for e in sent["entry"] if e["resource"]["resourceType"] == "Provenance")
    assert prov["agent"][0]["who"]["display"] == "AB"
    shot(page, "fhir-02-sent", of=".pr-section-store")
