"""The one check of an identifier's characters (prescribe/identifiers.py), and every place that
reads an identifier calls it: patient ids (record, batch CSV, session), exercise ids of a session,
clinician names, template names.

Why: a NUL or an invisible Unicode direction mark can make two different ids look the same or
reorder what a reader sees (the "Trojan Source" bidi attack, Boucher & Anderson 2021, USENIX
Security; Unicode Technical Report #36, Unicode Security Considerations); common practice
for identifiers is to refuse them.
"""

from __future__ import annotations

import pytest

from prescribe.errors import InputError
from prescribe.identifiers import check_identifier, identifier_problem, refused_characters

#: Each kind of refused character, one per row: NUL, another control character, the bidi
#: embeddings/overrides U+202A-U+202E, the isolates U+2066-U+2069, the marks U+200E/U+200F.
REFUSED = ["\x00", "\x1b", "\t", "\u202a", "\u202b", "\u202c", "\u202d", "\u202e",
           "\u2066", "\u2067", "\u2068", "\u2069", "\u200e", "\u200f", "\u2028", "\ufeff"]


@pytest.mark.parametrize("ch", REFUSED, ids=lambda c: f"U+{ord(c):04X}")
def test_control_and_direction_characters_are_refused_naming_the_code_point(ch):
    text = f"NTC-{ch}0042"
    problem = identifier_problem(text)
    assert problem and f"U+{ord(ch):04X}" in problem and "direction" in problem
    with pytest.raises(InputError) as info:
        check_identifier(text, "patient_id")
    (p,) = info.value.problems
    assert p.field == "patient_id" and p.value == text and "control characters" in p.allowed


@pytest.mark.parametrize("text", ["NTC-0042", "Dr. Ana Müller-Ørsted", "李 医生", "ELM_0101.a", "مريض-12"])
def test_ordinary_text_in_any_script_passes(text):
    assert identifier_problem(text) is None and refused_characters(text) == []
    assert check_identifier(text, "clinician") == text


def test_each_character_is_named_once():
    assert refused_characters("\u202eA\u202eB\x00") == ["U+202E RIGHT-TO-LEFT OVERRIDE", "U+0000 NUL"]


# -- every place an identifier is read ---------------------------------------------------------

BASE = {"patient_id": "NTC-0042", "age_years": 70, "sex": "female", "body_mass_kg": 60.0, "height_cm": 160.0}


@pytest.mark.parametrize("ch", ["\x00", "\u202e", "\u2066", "\u200f"], ids=lambda c: f"U+{ord(c):04X}")
def test_every_identifier_reader_refuses_them(ch, monkeypatch):
    from prescribe.clinic.template_library import parse_ref
    from prescribe.planning.templates import template_problems
    from prescribe.records import parse_record
    from prescribe.sessions.records import parse_session
    from prescribe.settings import current_clinician

    monkeypatch.delenv("JUPYTERHUB_USER", raising=False)
    bad = f"NTC{ch}0042"
    with pytest.raises(InputError) as info:                       # the patient record
        parse_record({**BASE, "patient_id": bad})
    assert info.value.problems[0].field == "patient_id"
    session = {"patient_id": "NTC-0042", "session_date": "2026-03-02", "pain_during": 0}
    for data, field in (({**session, "patient_id": bad}, "patient_id"),  # a session's person and exercise
                        ({**session, "exercises": [{"exercise_id": f"lunge{ch}"}]}, "exercises[0].exercise_id")):
        with pytest.raises(InputError) as info:
            parse_session(data)
        assert info.value.problems[0].field == field and "direction" in info.value.problems[0].allowed
    with pytest.raises(InputError) as info:                       # a clinician's name
        current_clinician(f"EP Rowan{ch}")
    assert info.value.problems[0].field == "clinician" and "direction" in info.value.problems[0].allowed
    with pytest.raises(InputError) as info:                       # a template reference
        parse_ref(f"clinic{ch}std@2", "--template")
    assert info.value.problems[0].field == "--template" and "direction" in info.value.problems[0].allowed
    problems = [p for p in template_problems({"name": f"clinic{ch}std"}) if p.field == "name"]
    assert problems and "direction" in problems[0].allowed        # a template (program) document's name


def test_the_store_refuses_them_in_a_clinicians_name(tmp_path, monkeypatch):
    from prescribe.records import parse_record
    from prescribe.screening import screen
    from prescribe.store import open_store

    monkeypatch.delenv("JUPYTERHUB_USER", raising=False)
    record = parse_record(BASE)
    with open_store(str(tmp_path / "s.db")) as store:
        with pytest.raises(InputError) as info:
            store.save_patient(record, screen(record), clinician="EP\u202eRowan")
        assert info.value.problems[0].field == "clinician"
        assert store.list_patients() == []
