"""The session record (PRODUCT.md "Session record") and the 1RM estimates.  Invented people only."""

from __future__ import annotations

from datetime import date

import numpy as np
import pytest

from prescribe.errors import InputError
from prescribe.loading.one_rep_max import brzycki_1rm, epley_1rm, round_load
from prescribe.sessions.records import SYMPTOMS, check_session_dates, check_session_exercises, parse_session

GOOD = {"patient_id": "SES-0001", "session_date": "2026-06-03", "program_version": 1,
        "exercises": [{"exercise_id": "goblet_box_squat", "sets_done": 3, "reps_done": 10, "load_kg": 12.5, "rpe": 6},
                      {"exercise_id": "brisk_walking", "minutes_done": 15},
                      {"exercise_id": "heel_drop", "impacts_done": 30}],
        "session_rpe": 6.5, "pain_during": 2, "pain_next_morning": None, "symptoms": ["new_joint_pain"],
        "fell_since_last": False, "note": "Knee a little sore on the stairs."}


def test_a_full_record_reads_and_only_exercise_id_is_required_per_exercise():
    s = parse_session(GOOD)
    assert s.exercises[0].load_kg == 12.5 and s.exercises[1].reps_done is None
    minimal = parse_session({"patient_id": "SES-0001", "session_date": "2026-06-03", "pain_during": 0})
    assert minimal.symptoms == [] and minimal.fell_since_last is False and minimal.program_version is None


def test_symptom_vocabulary_is_the_documented_one():
    assert list(SYMPTOMS) == ["chest_pain", "dizziness", "unusual_breathlessness", "palpitations",
                              "new_back_pain", "new_joint_pain", "joint_swelling"]


@pytest.mark.parametrize("change,field,words", [
    ({"pain_during": 11}, "pain_during", "0 to 10"),
    ({"pain_during": -1}, "pain_during", "0 to 10"),
    ({"pain_next_morning": 10.5}, "pain_next_morning", "whole number"),
    ({"session_rpe": 10.5}, "session_rpe", "Borg CR10"),
    ({"symptoms": ["headache"]}, "symptoms[0]", "chest_pain"),
    ({"symptoms": ["dizziness", "dizziness"]}, "symptoms", "distinct"),
    ({"session_date": "2026-02-30"}, "session_date", "YYYY-MM-DD"),
    ({"fell_since_last": "no"}, "fell_since_last", "true or false"),
    ({"exercises": [{"reps_done": 3}]}, "exercises[0].exercise_id", "exercise id"),
    ({"exercises": [{"exercise_id": "x", "load_kg": -2}]}, "exercises[0].load_kg", "kg"),
    ({"exercises": [{"exercise_id": "x", "rpe": 11}]}, "exercises[0].rpe", "CR10"),
    ({"mood": "fine"}, "mood", "known field"),
])
def test_bad_fields_are_named_with_what_is_allowed(change, field, words):
    with pytest.raises(InputError) as info:
        parse_session({**GOOD, **change})
    problem = next(p for p in info.value.problems if p.field == field)
    assert words in problem.message, problem.message


def test_a_missing_pain_during_is_named():
    data = {k: v for k, v in GOOD.items() if k != "pain_during"}
    with pytest.raises(InputError, match="pain_during is required"):
        parse_session(data)


def test_session_date_not_in_the_future_nor_before_the_start():
    s = parse_session(GOOD)
    check_session_dates(s, "2026-06-01", today=date(2026, 6, 3))  # the same day is fine
    check_session_dates(s, "2026-06-03", today=date(2026, 6, 3))
    with pytest.raises(InputError, match="not in the future"):
        check_session_dates(s, "2026-06-01", today=date(2026, 6, 2))
    with pytest.raises(InputError, match="on or after the program's start_date 2026-06-04"):
        check_session_dates(s, "2026-06-04", today=date(2026, 6, 10))


def test_epley_and_brzycki_against_their_formulas():
    # Epley 1985 (from memory): 1RM = w(1 + r/30); Brzycki 1993, J Phys Educ Recreat Dance 64(1):88-90:
    # 1RM = w x 36/(37 - r).  100 kg x 10 reps: Epley 133.3 kg, Brzycki 133.3 kg (they meet near 10 reps).
    assert epley_1rm(100, 10) == pytest.approx(133.33, abs=0.01)
    assert brzycki_1rm(100, 10) == pytest.approx(133.33, abs=0.01)
    assert brzycki_1rm(20, 5) == pytest.approx(22.5, abs=0.01)
    assert epley_1rm(20, 5) == pytest.approx(23.33, abs=0.01)
    assert brzycki_1rm(50, 1) == epley_1rm(50, 1) == 50
    # outside the valid range (about 10 reps): no estimate
    assert np.isnan(brzycki_1rm(20, 11)) and np.isnan(epley_1rm(20, 0))
    arr = brzycki_1rm(np.array([20.0, 30.0]), np.array([5, 12]))
    assert arr.shape == (2,) and arr[0] == pytest.approx(22.5) and np.isnan(arr[1])
    assert round_load(21.3) == 21.5 and round_load(21.2) == 21.0


def test_an_exercise_outside_the_catalogue_or_the_program_is_named_with_the_programs_ids():
    from types import SimpleNamespace as NS  # the program's weeks, sessions and exercises (as a Plan has them)
    plan = NS(weeks=[NS(sessions=[NS(exercises=[NS(exercise_id="goblet_box_squat"),
                                                NS(exercise_id="brisk_walking")])])])
    catalogue = {"goblet_box_squat", "brisk_walking", "back_squat"}
    ok = parse_session({"patient_id": "SES-1", "session_date": "2026-03-02", "pain_during": 0,
                        "exercises": [{"exercise_id": "brisk_walking"}]})
    check_session_exercises(ok, plan, catalogue, 2)
    for wrong, words in (("moonwalk", "not in the exercise catalogue"), ("back_squat", "not in program version 2")):
        bad = parse_session({"patient_id": "SES-1", "session_date": "2026-03-02", "pain_during": 0,
                             "exercises": [{"exercise_id": "brisk_walking"}, {"exercise_id": wrong}]})
        with pytest.raises(InputError) as info:
            check_session_exercises(bad, plan, catalogue, 2)
        (problem,) = info.value.problems
        assert problem.field == "exercises[1].exercise_id" and problem.value == wrong
        assert words in problem.allowed and "brisk_walking, goblet_box_squat" in problem.allowed
