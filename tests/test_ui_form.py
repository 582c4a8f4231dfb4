"""The intake form and its logic without a browser: widgets built in Python, values set, buttons clicked."""

from __future__ import annotations

import html
import json
import re
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


# -- the version-2 fields -------------------------------------------------------------------

from prescribe.records import (BONE_METASTASES, COGNITION_LEVELS, MEDICATION_CLASSES,  # noqa: E402
                               MEDICATION_LABELS, MENOPAUSE_STATUSES, RECORD_SCHEMA, RECORD_V2_FIELDS,
                               SURGERY_LABELS, SURGERY_PROCEDURES, SURGERY_SIDE_LABELS, SURGERY_SIDES,
                               T_SCORE_SITES)
from prescribe.ui.wording import field_words  # noqa: E402

# An invented woman of 68, postmenopausal, on denosumab with the last injection 10 months ago,
# a left hip replacement 4 months ago (not yet cleared for impact), an anticoagulant, a T12
# vertebral fracture, treated breast cancer with metastases excluded, mild cognitive impairment,
# living alone with a carer who visits.
V2_RECORD = {
    "patient_id": "DEMO-V2-1", "age_years": 68, "sex": "female", "body_mass_kg": 62.0, "height_cm": 160.0,
    "t_scores": {"lumbar_spine": -2.2, "femoral_neck": -2.3}, "z_scores": {"lumbar_spine": -0.8, "total_hip": -1.1},
    "fractures": [{"site": "vertebra", "months_ago": 30.0, "low_trauma": True, "level": "T12"},
                  {"site": "wrist", "months_ago": 100.0, "low_trauma": False}],
    "falls_past_year": 1, "pain_score": 2, "record_version": 2, "display_name": "Maria",
    "menopause": "postmenopausal",
    "medications": [{"class": "denosumab", "months_on": 36.0, "months_since_last_dose": 10.0},
                    {"class": "anticoagulant", "months_on": 12.0, "months_since_last_dose": 0.0},
                    {"class": "aromatase_inhibitor"}],
    "cancer": {"active": False, "bone_metastases": "excluded"},
    "surgeries": [{"procedure": "hip_replacement", "side": "left", "months_ago": 4.0,
                   "surgeon_cleared_impact": False},
                  {"procedure": "vertebroplasty", "side": "none", "months_ago": 20.0,
                   "surgeon_cleared_impact": True}],
    "cognition": "mild", "lives_alone": True, "has_carer": False,
}


def test_every_version_2_field_is_on_the_form_from_the_records_metadata():
    specs = {s.key: s for s in form_spec.intake_fields()}
    on_form = {k.split(".")[0] for k in specs} | set(form_spec.ROW_LISTS)
    assert set(RECORD_V2_FIELDS) <= on_form
    for name in ("display_name", "menopause", "cognition", "lives_alone", "has_carer"):
        assert specs[name].label == FIELD_META[name]["label"] and specs[name].help == FIELD_META[name]["description"]
    # Z-scores beside the T-scores, their unit and typical range from the schema.
    keys = list(specs)
    for site in T_SCORE_SITES:
        assert keys.index(f"z_scores.{site}") == keys.index(f"t_scores.{site}") + 1
        node = RECORD_SCHEMA["$defs"]["ZScores"]["properties"][site]["anyOf"][0]
        assert specs[f"z_scores.{site}"].unit == "SD" and specs[f"z_scores.{site}"].label.endswith("Z-score")
        assert specs[f"z_scores.{site}"].allowed == f"a number from {node['minimum']} to {node['maximum']} (SD)"
    # Every list is the record's own vocabulary, in plain words (never a code with an underscore).
    rows = {s.key: s for lf in form_spec.ROW_LISTS for s in form_spec.row_fields(lf)}
    assert [v for _, v in rows["medications.class"].options] == list(MEDICATION_CLASSES)
    assert [w for w, _ in rows["medications.class"].options] == [MEDICATION_LABELS[c] for c in MEDICATION_CLASSES]
    assert [v for _, v in rows["surgeries.procedure"].options] == list(SURGERY_PROCEDURES)
    assert [w for w, _ in rows["surgeries.procedure"].options] == [SURGERY_LABELS[c] for c in SURGERY_PROCEDURES]
    assert [v for _, v in rows["surgeries.side"].options] == list(SURGERY_SIDES)
    assert rows["surgeries.side"].words("none") == SURGERY_SIDE_LABELS["none"]
    assert [v for _, v in specs["menopause"].options] == list(MENOPAUSE_STATUSES)
    assert [v for _, v in specs["cognition"].options] == list(COGNITION_LEVELS)
    assert [v for _, v in specs["cancer.bone_metastases"].options] == list(BONE_METASTASES)
    assert specs["cancer.active"].options == [("yes", True), ("no", False)]
    assert rows["fractures.level"].label == "Vertebral level"
    assert rows["surgeries.months_ago"].unit == "months" and rows["medications.months_since_last_dose"].unit == "months"
    for spec in [*specs.values(), *rows.values()]:
        assert not any("_" in words for words, _ in spec.options), spec.key


def test_a_version_2_record_round_trips_through_the_form_values():
    values = form_spec.form_values(V2_RECORD)
    assert values["z_scores.lumbar_spine"] == "-0.8" and values["z_scores.femoral_neck"] == ""
    assert values["display_name"] == "Maria" and values["menopause"] == "postmenopausal"
    assert values["cancer.active"] is False and values["cancer.bone_metastases"] == "excluded"
    assert values["lives_alone"] is True and values["has_carer"] is False and values["cognition"] == "mild"
    assert values["medications"][0] == {"class": "denosumab", "months_on": "36", "months_since_last_dose": "10"}
    assert values["medications"][2] == {"class": "aromatase_inhibitor", "months_on": "", "months_since_last_dose": ""}
    assert values["surgeries"][0] == {"procedure": "hip_replacement", "side": "left", "months_ago": "4",
                                      "surgeon_cleared_impact": False}
    assert values["fractures"][0]["level"] == "T12" and values["fractures"][1]["level"] == ""
    scalars = {k: v for k, v in values.items() if k not in form_spec.ROW_LISTS}
    data = form_spec.record_data(scalars, values["fractures"], [], False, medications=values["medications"],
                                 surgeries=values["surgeries"], record_version=V2_RECORD["record_version"])
    assert parse_record(data).model_dump(mode="json") == parse_record(V2_RECORD).model_dump(mode="json")


def test_menopause_and_a_vertebral_level_are_used_only_where_they_apply():
    values = form_spec.form_values(V2_RECORD)
    scalars = {k: v for k, v in values.items() if k not in form_spec.ROW_LISTS}
    as_man = form_spec.record_data({**scalars, "sex": "male"})
    assert "menopause" not in as_man and parse_record(as_man).menopause is None
    wrist = form_spec.record_data(scalars, [{"site": "wrist", "months_ago": "5", "low_trauma": True, "level": "T4"}])
    assert "level" not in wrist["fractures"][0]
    # A version-1 record (it said so) given a version-2 detail becomes version 2 rather than refused.
    v1 = form_spec.record_data({**scalars, "display_name": "Ann"}, record_version=1)
    assert "record_version" not in v1 and parse_record(v1).version == 2


def _enter_v2_person(app) -> None:
    intake = app.intake
    for key, value in {"patient_id": "DEMO-V2-1", "display_name": "Maria", "age_years": "68", "sex": "female",
                       "body_mass_kg": "62", "height_cm": "160", "t_scores.lumbar_spine": "-2.2",
                       "t_scores.femoral_neck": "-2.3", "z_scores.lumbar_spine": "-0.8",
                       "z_scores.total_hip": "-1.1", "falls_past_year": "1", "pain_score": "2"}.items():
        intake.inputs[key].value = value
    intake.inputs["menopause"].value = "postmenopausal"
    intake.inputs["cognition"].value = "mild"
    intake.inputs["lives_alone"].value = True
    intake.inputs["has_carer"].value = False
    intake.inputs["cancer.active"].value = False
    intake.inputs["cancer.bone_metastases"].value = "excluded"
    for medicine, on, last in (("denosumab", "36", "10"), ("anticoagulant", "12", "0"),
                               ("aromatase_inhibitor", "", "")):
        intake.add_buttons["medications"].click()
        row = intake.rows["medications"][-1]
        row["class"].value, row["months_on"].value, row["months_since_last_dose"].value = medicine, on, last
    intake.add_buttons["surgeries"].click()
    hip = intake.rows["surgeries"][-1]
    hip["procedure"].value, hip["side"].value, hip["months_ago"].value = "hip_replacement", "left", "4"
    intake.add_surgery("vertebroplasty", "none", "20", True)
    intake.add_fracture_button.click()
    fx = intake.fracture_rows[-1]
    fx["site"].value, fx["months_ago"].value, fx["level"].value = "vertebra", "30", "T12"
    intake.add_fracture("wrist", "100", False)


def test_a_version_2_person_typed_into_the_widgets_is_screened_and_reopens_with_every_box(app, tmp_db):
    _enter_v2_person(app)
    # The level box shows on the vertebral row only; menopause shows for a woman.
    assert app.intake.fracture_rows[0]["level"].layout.display is None
    assert app.intake.fracture_rows[1]["level"].layout.display == "none"
    assert app.intake.row_boxes["menopause"].layout.display is None
    assert app.on_submit() is True, app.session.problems
    assert app.session.record.model_dump(mode="json") == parse_record(V2_RECORD).model_dump(mode="json")
    # Denosumab 10 months after the last injection: refer without delay (Tsourdi E et al. 2017,
    # ECTS position statement, Bone 105:11-17: injections not delayed by more than 4 weeks).
    s = app.session.screening
    assert s.refer and "medication.denosumab_overdue" in [f.rule for f in s.flags]
    shown = app.screening_view.value
    assert "Denosumab more than 7 months after the last injection" in shown
    assert "Holds until a clinician records the clearance." in shown
    assert "surgeon_cleared_impact" not in shown and "Surgeries - surgeon cleared impact" in shown
    # Saved, then reopened in another app over the same store: every box is filled back.
    app.clinician.value = "AB"
    app.save_button.click()
    from prescribe.ui import ClinicApp, ClinicSession
    other = ClinicApp(ClinicSession(store_url=tmp_db))
    other.load_select.value = "DEMO-V2-1"
    other.load_button.click()
    assert other.errors.last == ""
    i = other.intake
    assert i.inputs["display_name"].value == "Maria" and i.inputs["z_scores.total_hip"].value == "-1.1"
    assert i.inputs["menopause"].value == "postmenopausal" and i.row_boxes["menopause"].layout.display is None
    assert (i.inputs["cognition"].value, i.inputs["lives_alone"].value, i.inputs["has_carer"].value) == \
        ("mild", True, False)
    assert (i.inputs["cancer.active"].value, i.inputs["cancer.bone_metastases"].value) == (False, "excluded")
    assert [(r["class"].value, r["months_on"].value, r["months_since_last_dose"].value)
            for r in i.rows["medications"]] == [("denosumab", "36", "10"), ("anticoagulant", "12", "0"),
                                                ("aromatase_inhibitor", "", "")]
    assert [(r["procedure"].value, r["side"].value, r["months_ago"].value, r["surgeon_cleared_impact"].value)
            for r in i.rows["surgeries"]] == [("hip_replacement", "left", "4", False),
                                              ("vertebroplasty", "none", "20", True)]
    assert [(r["site"].value, r["level"].value) for r in i.fracture_rows] == [("vertebra", "T12"), ("wrist", "")]
    assert parse_record(i.data()).model_dump(mode="json") == parse_record(V2_RECORD).model_dump(mode="json")
    # A new person empties every new box.
    other.new_button.click()
    assert i.inputs["display_name"].value == "" and i.inputs["cancer.active"].value is None
    assert i.rows == {"fractures": [], "medications": [], "surgeries": []}
    assert i.row_boxes["menopause"].layout.display == "none"


def test_menopause_shows_for_women_only_and_is_never_sent_for_a_man(app):
    fill(app, patient_id="DEMO-M", age_years="70", sex="female", body_mass_kg="80", height_cm="175")
    app.intake.inputs["menopause"].value = "postmenopausal"
    app.intake.inputs["sex"].value = "male"
    assert app.intake.row_boxes["menopause"].layout.display == "none"
    assert "menopause" not in app.intake.data()
    assert app.on_submit() is True and app.session.record.menopause is None
    # Hiding one row never hides another (the rows' layouts are their own).
    assert app.intake.row_boxes["cognition"].layout.display is None


@pytest.mark.parametrize("setup, box, expected", [
    (lambda i: setattr(i.inputs["display_name"], "value", "M" * 81), "display_name",
     "Name on the handout must be text of 1 to 80 characters without leading or trailing spaces"),
    (lambda i: setattr(i.inputs["z_scores.femoral_neck"], "value", "-9"), "z_scores.femoral_neck",
     "Z scores - femoral neck must be a number from -7 to 5 (SD), not -9."),
    (lambda i: i.add_medication("denosumab", "12", "-1"), "medications",
     "Medications (row 1) - months since last dose must be a number from 0 to 1200 (months), not -1."),
    (lambda i: i.add_medication(None, "12", ""), "medications",
     "Medications (row 1) - class is required: one of 'Denosumab', 'Bisphosphonate'"),
    (lambda i: i.add_surgery("knee_replacement", "right", "soon"), "surgeries",
     "Surgeries (row 1) - months ago must be a number from 0 to 1200 (months), not 'soon'."),
    (lambda i: i.add_surgery(None, "right", "3"), "surgeries",
     "Surgeries (row 1) - procedure is required: one of 'Hip replacement', 'Knee replacement'"),
    (lambda i: i.add_fracture("vertebra", "3", True, "T13"), "fractures",
     "Fractures (row 1) - level must be a vertebra from C1-C7, T1-T12 or L1-L5 (e.g. 'T12'), not 'T13'."),
    (lambda i: setattr(i.inputs["cancer.bone_metastases"], "value", "unknown"), "cancer.active",
     "Cancer - active is required: yes or no."),
])
def test_bad_input_on_a_new_field_shows_the_records_message_beside_it(app, setup, box, expected):
    fill(app, patient_id="DEMO-BAD-2", age_years="60", sex="female", body_mass_kg="60", height_cm="160")
    setup(app.intake)
    assert app.on_submit() is False and app.session.record is None
    shown = html.unescape(app.intake.messages[box].value)
    assert expected in shown
    assert not re.search(r"[a-z]+_[a-z_]+", shown.split(" must ")[-1].split(" is required")[-1]), shown
    assert sum(bool(m.value) for m in app.intake.messages.values()) == 1  # beside that box only


@pytest.mark.parametrize("bad, box", [
    ({"menopause": "postmenopausal", "sex": "male"}, "menopause"),
    ({"cognition": "confused"}, "cognition"),
    ({"lives_alone": "often"}, "lives_alone"),
    ({"has_carer": 3}, "has_carer"),
    ({"cancer": {"active": True, "bone_metastases": "maybe"}}, "cancer.bone_metastases"),
    ({"medications": [{"class": "aspirin"}]}, "medications"),
    ({"surgeries": [{"procedure": "hip_replacement", "side": "up", "months_ago": 2}]}, "surgeries"),
    ({"z_scores": {"total_hip": 9}}, "z_scores.total_hip"),
])
def test_the_records_message_on_every_new_field_lands_beside_its_box(app, bad, box):
    # Lists and yes/no boxes cannot be given a bad value by typing; a record that has one
    # (a file, another door) still shows the record's message at that box, in the form's words.
    base = {"patient_id": "DEMO-BAD-3", "age_years": 60, "sex": "female", "body_mass_kg": 60, "height_cm": 160}
    from prescribe.errors import InputError
    with pytest.raises(InputError) as err:
        parse_record({**base, **bad})
    problems = {p.field: p.message for p in err.value.problems}
    assert len(problems) == 1
    app.intake.show_problems(problems)
    [(field, message)] = problems.items()
    shown = html.unescape(app.intake.messages[box].value)
    assert shown == field_words(form_spec.plain_choices(field, message)) != ""
    assert str(FIELD_META[field.split("[")[0].split(".")[0]]["label"]) in shown
    for code in ("aromatase_inhibitor", "hip_replacement", "sedative_hypnotic"):
        assert code not in shown
