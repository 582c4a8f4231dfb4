"""The record system in the app without a browser (HL7 FHIR R4 4.0.1; invented people).

LOINC 38267-1 (DXA lumbar spine T-score): OHDSI THEMIS table of LOINC long common names (2018);
29463-7 and 8302-2: the FHIR R4 Vital Signs profile.
"""

from __future__ import annotations

import base64
import html
import json
import re

from prescribe.fhir.reader import read_bundle
from prescribe.ui import ClinicApp, ClinicSession
from prescribe.ui.fhir_view import FILLED_CLASS

from test_fhir import bundle, obs


def test_a_bundle_fills_the_form_marks_the_boxes_and_waits_for_the_clinician(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    data = json.dumps(bundle(obs("t", "38267-1", -2.6))).encode()
    app.fhir.upload.value = ({"name": "oak-101.json", "type": "application/json", "size": len(data),
                              "content": memoryview(data), "last_modified": __import__("datetime").datetime(2026, 12, 1)},)
    assert app.errors.last == "", app.errors.last
    inputs = app.intake.inputs
    assert inputs["patient_id"].value == "OAK-101" and inputs["sex"].value == "female"
    assert inputs["t_scores.lumbar_spine"].value == "-2.6" and inputs["body_mass_kg"].value == "61.5"
    marked = app.fhir.marked_keys()
    assert {"patient_id", "age_years", "sex", "body_mass_kg", "height_cm", "t_scores.lumbar_spine"} <= set(marked)
    assert "timed_up_and_go_s" not in marked          # not in the Bundle: not marked
    assert "t_scores.femoral_neck" not in marked      # another site of a score the Bundle gave
    status = html.unescape(app.fhir.import_status.value)
    assert "Observation/t" in status and "Check and screen" in status
    assert app.session.screening is None               # nothing screened until the clinician confirms
    app.submit_button.click()
    assert app.session.screening is not None and app.session.record.patient_id == "OAK-101"
    app.new_button.click()  # checked but never saved: asked first, nothing cleared yet
    assert "never saved" in app.discard_text.value and app.fhir.marked_keys() != []
    app.discard_button.click()
    assert app.fhir.marked_keys() == [] and app.session.record is None


def test_a_bad_bundle_shows_the_problem_and_fills_nothing(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    b = bundle()
    del b["entry"][0]["resource"]["birthDate"]
    app.fhir.bring_in(json.dumps(b).encode(), "nobirth.json")
    assert "Patient.birthDate (age_years) is missing" in app.errors.last
    assert app.intake.inputs["patient_id"].value == ""


def test_send_gives_the_bundle_of_the_saved_program(tmp_db):
    from test_ui_app import type_person
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    type_person(app)
    app.fhir.send_button.click()
    assert "saved program" in app.errors.last          # nothing saved yet: refused, named
    app.clinician.value = "Dr Invented"
    app.on_save()
    app.errors.clear()
    app.fhir.send_button.click()
    assert app.errors.last == "", app.errors.last
    href = re.search(r'href="data:application/fhir\+json;base64,([^"]+)"', app.fhir.send_link.value).group(1)
    b = json.loads(base64.b64decode(href))
    from fhirclient.models.bundle import Bundle
    Bundle(b, strict=True)                             # FHIR R4 by fhirclient's models
    care = next(e["resource"] for e in b["entry"] if e["resource"]["resourceType"] == "CarePlan")
    assert care["status"] in ("active", "draft") and care["activity"]
    assert read_bundle(b).record.patient_id == app.session.record.patient_id
