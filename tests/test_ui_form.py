"""The intake form and its logic without a browser: widgets built in Python, values set, buttons clicked."""

from __future__ import annotations

import html
import json
import subprocess
import sys
from pathlib import Path

import pytest

from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.records import CONDITIONS, FIELD_META, parse_record
from prescribe.ui import form_spec, notebook_json

ROOT = Path(__file__).resolve().parents[1]


def test_session_and_form_spec_do_not_import_widgets():
    # Layering (STYLE.md): only prescribe.ui's views import ipywidgets or bqplot.
    code = ("import sys, prescribe.ui.session, prescribe.ui.form_spec, prescribe.ui;"
            "print('ipywidgets' in sys.modules or 'bqplot' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_form_fields_come_from_the_records_metadata():
    specs = {s.key: s for s in form_spec.intake_fields()}
    for name in form_spec.SCALAR_FIELDS:
        meta = FIELD_META[name]
        assert specs[name].label == meta["label"]
        assert specs[name].unit == meta["unit"]
        assert specs[name].help == meta["description"]
        assert specs[name].required == meta["required"]
    assert specs["sex"].kind == "choice" and specs["sex"].choices == ("female", "male")
    assert specs["t_scores.femoral_neck"].unit == "SD"
    assert specs["glucocorticoids.mg_per_day"].unit == "mg/day"
    assert "typically 40-95" in specs["age_years"].placeholder and "years" in specs["age_years"].placeholder
    assert [c for c, _ in form_spec.condition_choices()] == list(CONDITIONS)


@pytest.mark.parametrize("text, kind, expected", [
    ("67", "integer", 67), (" 61.5 ", "number", 61.5), ("61,5", "number", 61.5), ("", "number", None),
    ("abc", "integer", "abc"), ("12.5", "integer", 12.5), ("70.0", "integer", 70), ("x", "number", "x"),
])
def test_convert_text_keeps_what_it_cannot_read_for_the_record_to_report(text, kind, expected):
    assert form_spec.convert_text(text, kind) == expected


def test_record_data_round_trips_through_the_form_values():
    record = {"patient_id": "DEMO-7", "age_years": 71, "sex": "female", "body_mass_kg": 58.5, "height_cm": 158.0,
              "t_scores": {"lumbar_spine": -2.8, "femoral_neck": -2.1}, "falls_past_year": 1,
              "glucocorticoids": {"mg_per_day": 5.0, "months": 4.0}, "pain_score": 2}
    values = form_spec.form_values(record)
    assert values["age_years"] == "71" and values["body_mass_kg"] == "58.5" and values["t_scores.total_hip"] == ""
    data = form_spec.record_data(values, [{"site": "wrist", "months_ago": "30", "low_trauma": True}],
                                 ["knee_osteoarthritis"], glucocorticoids_taken=True)
    parsed = parse_record(data)
    assert parsed.t_scores.lumbar_spine == -2.8 and parsed.t_scores.total_hip is None
    assert parsed.glucocorticoids.mg_per_day == 5.0
    assert parsed.fractures[0].site == "wrist" and parsed.fractures[0].months_ago == 30.0
    assert parsed.conditions == ["knee_osteoarthritis"]


def test_notebook_is_thin_cleared_and_the_same_as_the_packaged_one():
    nb = json.loads((ROOT / "apps" / "clinic.ipynb").read_text())
    assert nb == notebook_json()
    assert all(c["outputs"] == [] and c["execution_count"] is None for c in nb["cells"])
    assert nb["cells"][-1]["source"].strip() == "ClinicApp.from_environment().widget"


# -- the widgets ----------------------------------------------------------------------------

@pytest.fixture
def app(tmp_db):
    from prescribe.ui import ClinicApp, ClinicSession
    return ClinicApp(ClinicSession(store_url=tmp_db))


def fill(app, **values):
    for key, value in values.items():
        app.intake.inputs[key.replace("__", ".")].value = value


def test_the_standard_cautions_are_in_one_always_visible_box_and_every_section_has_its_own(app):
    # One box, kept on screen while the page scrolls (sticky), holds the standard cautions...
    boxes = [c for c in app.widget.children if "pr-cautions-box" in getattr(c, "_dom_classes", ())]
    assert len(boxes) == 1 and "pr-cautions-always" in boxes[0]._dom_classes
    for caution in STANDARD_CAUTIONS:
        assert caution.split(":")[0] in boxes[0].value
    assert ".pr-cautions-always { position: sticky" in app.widget.children[0].value
    # ...and every section keeps a place for its own.
    sections = [app.person_section, app.screening_section, app.program_section, app.handout_section,
                app.store_section]
    for section in sections:
        own = [c for c in section.children if "pr-section-cautions" in c._dom_classes]
        assert len(own) == 1, section._dom_classes


def test_bad_input_puts_each_message_beside_its_field_and_changes_nothing(app):
    fill(app, patient_id="DEMO-BAD", age_years="12", sex="female", body_mass_kg="61")
    assert app.on_submit() is False
    # The record's own message, with the field named by its label (the value and the range word for word).
    assert app.intake.messages["age_years"].value == "Age must be a whole number from 18 to 110 (years), not 12."
    assert "Height is required: a number from 100 to 230 (cm)." in app.intake.messages["height_cm"].value
    assert app.intake.messages["body_mass_kg"].value == ""
    assert app.session.record is None and app.session.screening is None
    assert "2 fields to correct" in app.intake_status.value
    # Correcting the field clears its message.
    fill(app, age_years="abc")
    app.on_submit()
    assert "not 'abc'" in html.unescape(app.intake.messages["age_years"].value)


def test_nested_and_list_fields_report_beside_their_boxes(app):
    fill(app, patient_id="DEMO-N", age_years="70", sex="male", body_mass_kg="80", height_cm="175",
         t_scores__femoral_neck="-9")
    app.intake.gluco_taken.value = True
    fill(app, glucocorticoids__mg_per_day="5")
    app.intake.add_fracture("hip", "-3", True)
    assert app.on_submit() is False
    assert "T scores - femoral neck must be a number from -7 to 5" in app.intake.messages["t_scores.femoral_neck"].value
    assert "Glucocorticoids - months is required" in app.intake.messages["glucocorticoids.months"].value
    assert "Fractures (row 1) - months ago must be a number from 0 to 1200" in app.intake.messages["fractures"].value


def test_a_failing_callback_shows_a_readable_message_instead_of_vanishing(app, monkeypatch):
    def broken(_data):
        raise ZeroDivisionError("division by zero")
    monkeypatch.setattr(app.session, "submit", broken)
    app.submit_button.click()
    assert "Checking the details failed (ZeroDivisionError: division by zero)" in app.errors.last
    assert "pr-error-box" in app.errors.widget.value


def test_saving_without_a_checked_record_is_refused_with_a_message(app):
    app.save_button.click()
    assert "record" in app.errors.last and "Check and screen" in app.errors.last
