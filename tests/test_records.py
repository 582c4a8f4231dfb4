"""The patient record contract (PRODUCT.md): bounds, vocabulary and messages at the boundary."""

from __future__ import annotations

import json

import pytest

from prescribe.errors import InputError
from prescribe.records import (CONDITIONS, FIELD_META, FRACTURE_SITES, PatientRecord, load_record,
                               parse_record, record_json_schema)

BASE = {
    "patient_id": "NTC-0001",
    "age_years": 64,
    "sex": "female",
    "body_mass_kg": 61.5,
    "height_cm": 162,
}


def problems(data):
    with pytest.raises(InputError) as info:
        parse_record(data)
    return {p.field: p for p in info.value.problems}, str(info.value)


def test_minimal_record_takes_documented_defaults():
    r = parse_record(BASE)
    assert r.fractures == [] and r.conditions == [] and r.falls_past_year == 0 and r.pain_score == 0
    assert r.t_scores.lowest() is None
    assert r.glucocorticoids is None


@pytest.mark.parametrize("field,low,high", [
    ("age_years", 18, 110), ("body_mass_kg", 25, 300), ("height_cm", 100, 230), ("pain_score", 0, 10),
])
def test_numeric_bounds_are_inclusive_and_named(field, low, high):
    # Bounds from the record contract in PRODUCT.md.
    parse_record({**BASE, field: low})
    parse_record({**BASE, field: high})
    for bad in (low - 1, high + 1):
        found, text = problems({**BASE, field: bad})
        assert field in found
        assert str(bad) in found[field].message and str(low) in found[field].allowed
        assert text.startswith(f"{field} must be")


def test_t_scores_range_and_lowest_site():
    r = parse_record({**BASE, "t_scores": {"lumbar_spine": -2.6, "femoral_neck": -1.8, "total_hip": -7}})
    assert r.t_scores.lowest() == ("total_hip", -7)
    found, _ = problems({**BASE, "t_scores": {"lumbar_spine": 5.1}})
    assert "t_scores.lumbar_spine" in found


def test_one_message_per_bad_field_naming_field_value_and_allowed():
    data = {**BASE, "age_years": 12, "sex": "f", "conditions": ["knee_osteoarthritis", "gout"],
            "fractures": [{"site": "toe", "months_ago": 3, "low_trauma": True}], "height_cm": None}
    found, text = problems(data)
    assert set(found) == {"age_years", "sex", "conditions[1]", "fractures[0].site", "height_cm"}
    assert found["age_years"].message == "age_years must be a whole number from 18 to 110 (years), not 12."
    assert "'gout'" in found["conditions[1]"].message and "knee_osteoarthritis" in found["conditions[1]"].allowed
    assert "vertebra" in found["fractures[0].site"].allowed
    assert text.startswith("5 fields are not valid")


def test_missing_and_unknown_fields():
    data = dict(BASE)
    del data["sex"]
    data["name"] = "should not be here"
    found, _ = problems(data)
    assert found["sex"].kind == "missing" and "is required" in found["sex"].message
    assert found["name"].kind == "unknown_field"


def test_wrong_types_are_refused_not_coerced():
    found, _ = problems({**BASE, "age_years": "64", "falls_past_year": 1.5})
    assert "age_years" in found and "falls_past_year" in found
    found, _ = problems({**BASE, "fractures": [{"site": "hip", "months_ago": 2, "low_trauma": "yes"}]})
    assert "fractures[0].low_trauma" in found


def test_duplicate_condition_is_refused():
    found, _ = problems({**BASE, "conditions": ["recent_surgery", "recent_surgery"]})
    assert "conditions" in found


def test_patient_id_limits():
    parse_record({**BASE, "patient_id": "x" * 64})
    for bad in ("", "x" * 65, " padded "):
        found, _ = problems({**BASE, "patient_id": bad})
        assert "patient_id" in found


def test_not_an_object():
    with pytest.raises(InputError, match="JSON object"):
        parse_record(["not", "a", "record"])


def test_load_record_file_errors(tmp_path):
    bad_json = tmp_path / "bad.json"
    bad_json.write_text('{"patient_id": "A",', encoding="utf-8")
    with pytest.raises(InputError, match="well-formed JSON"):
        load_record(bad_json)
    with pytest.raises(InputError, match="existing, readable file"):
        load_record(tmp_path / "missing.json")
    good = tmp_path / "good.json"
    good.write_text(json.dumps(BASE), encoding="utf-8")
    assert load_record(good).patient_id == "NTC-0001"


def test_schema_carries_vocabularies_units_and_bounds():
    schema = record_json_schema()
    assert set(schema["required"]) == {"patient_id", "age_years", "sex", "body_mass_kg", "height_cm"}
    assert schema["properties"]["age_years"]["minimum"] == 18
    assert schema["properties"]["body_mass_kg"]["unit"] == "kg"
    assert set(schema["x-condition-codes"]) == set(CONDITIONS)
    assert set(schema["x-fracture-sites"]) == set(FRACTURE_SITES)
    # Every condition code of PRODUCT.md exists from the start.
    for code in ("uncontrolled_hypertension", "recent_surgery", "knee_osteoarthritis", "hip_osteoarthritis",
                 "hip_replacement", "pelvic_floor_dysfunction", "peripheral_neuropathy", "thoracic_kyphosis"):
        assert code in CONDITIONS


def test_field_meta_is_read_from_the_model():
    assert FIELD_META["age_years"]["minimum"] == 18 and FIELD_META["age_years"]["maximum"] == 110
    assert FIELD_META["timed_up_and_go_s"]["unit"] == "s"
    assert FIELD_META["patient_id"]["required"] and not FIELD_META["pain_score"]["required"]
    assert set(FIELD_META) == set(PatientRecord.model_fields)


def test_prescribe_schema_prints_the_version_2_record_and_an_independent_validator_agrees(cli):
    # The printed schema is the version-2 contract (PRODUCT.md "The patient record, version 2"):
    # every new field, its vocabulary as the enum, and the short words the form shows.
    from jsonschema import Draft202012Validator

    from prescribe.records import MEDICATION_CLASSES, MEDICATION_LABELS, RECORD_V2_FIELDS, SURGERY_PROCEDURES
    res = cli("schema")
    assert res.returncode == 0, res.stderr
    schema = json.loads(res.stdout)
    assert schema["$comment"] == "schema version 2"
    assert set(RECORD_V2_FIELDS) | {"record_version"} <= set(schema["properties"])
    medicine = schema["$defs"]["Medication"]["properties"]["class"]
    assert medicine["enum"] == list(MEDICATION_CLASSES) and medicine["choice_labels"] == MEDICATION_LABELS
    assert schema["$defs"]["Surgery"]["properties"]["procedure"]["enum"] == list(SURGERY_PROCEDURES)
    v2 = {**BASE, "record_version": 2, "display_name": "Rosa", "z_scores": {"femoral_neck": -1.0},
          "menopause": "perimenopausal", "medications": [{"class": "denosumab", "months_since_last_dose": 8}],
          "cancer": {"active": True, "bone_metastases": "unknown"},
          "surgeries": [{"procedure": "knee_replacement", "side": "right", "months_ago": 6}],
          "fractures": [{"site": "vertebra", "months_ago": 12, "low_trauma": True, "level": "L1"}],
          "cognition": "moderate", "lives_alone": False, "has_carer": True}
    validator = Draft202012Validator(schema)
    assert list(validator.iter_errors(v2)) == []
    assert parse_record(v2).version == 2
    for bad in ({"medications": [{"class": "aspirin"}]}, {"fractures": [{"site": "vertebra", "months_ago": 1,
                                                                         "low_trauma": True, "level": "T13"}]},
                {"cancer": {"bone_metastases": "present"}}, {"record_version": 3}):
        assert list(validator.iter_errors({**v2, **bad})), bad
        with pytest.raises(InputError):
            parse_record({**v2, **bad})
