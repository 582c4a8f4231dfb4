"""The next step for a stored person (prescribe.clinic.advice): advice from a session not stored
yet (the app's "advise without logging") and whether the advice changes the program at all.
Invented people only.

The decisions themselves are checked against their sources in tests/test_sessions_rules.py;
here: a new back pain and pain 6/10 entered but not logged change the advice (a red flag: stop
and refer; Riebe D et al. 2015, Med Sci Sports Exerc 47(11):2473-2479), nothing is stored from
them, and advice that keeps the program as written is said to change nothing.
"""

from __future__ import annotations

from datetime import date, timedelta

import pytest

from prescribe.clinic.advice import adjust_person
from prescribe.errors import InputError
from prescribe.sessions.records import parse_session
from prescribe.store import open_store
from session_support import full_weeks, person, plan_dict

PID = "ADV-1"
START = date.today() - timedelta(days=7 * 6)  # today is in week 7


@pytest.fixture
def store(tmp_db):
    with open_store(tmp_db) as s:
        plan = plan_dict(PID, start=START)
        s.save_patient(person(PID), None, "EP Seed (invented)", plan=plan)
        for ls in full_weeks([5, 6], plan, pid=PID, start=START):  # every planned session done, no pain
            s.add_session(ls.record, "EP Seed (invented)")
        yield s


def test_entries_not_logged_change_the_advice_and_nothing_is_stored(store):
    stored_only = adjust_person(store, PID, today=date.today())
    assert stored_only["decision"] == "progress"
    draft = parse_session({"patient_id": PID, "session_date": date.today().isoformat(), "pain_during": 6,
                           "symptoms": ["new_back_pain"]})
    before = len(store.sessions(PID))
    advice = adjust_person(store, PID, today=date.today(), draft=draft)
    assert advice["decision"] == "stop_and_refer"
    assert "session.red_flag_back_pain" in [r["rule"] for r in advice["reasons"]]
    assert len(store.sessions(PID)) == before and [v["version"] for v in store.program_versions(PID)] == [1]


def test_advice_from_entries_not_logged_is_never_applied_and_their_date_is_checked(store):
    draft = parse_session({"patient_id": PID, "session_date": date.today().isoformat(), "pain_during": 0})
    with pytest.raises(InputError, match="log the session first"):
        adjust_person(store, PID, today=date.today(), draft=draft, apply=True, clinician="EP (invented)")
    future = parse_session({"patient_id": PID, "session_date": (date.today() + timedelta(days=2)).isoformat(),
                            "pain_during": 0})
    with pytest.raises(InputError, match="session_date must be a date not in the future"):
        adjust_person(store, PID, today=date.today(), draft=future)
    other = parse_session({"patient_id": "SOMEONE-ELSE", "session_date": date.today().isoformat(), "pain_during": 0})
    with pytest.raises(InputError, match="patient_id"):
        adjust_person(store, PID, today=date.today(), draft=other)
    assert [v["version"] for v in store.program_versions(PID)] == [1]


def test_progress_as_written_changes_nothing_and_a_step_back_does(store):
    progress = adjust_person(store, PID, today=date.today())
    assert progress["decision"] == "progress" and progress["changes"] == \
        [c for c in progress["changes"] if "as planned" in c]
    assert progress["changes_program"] is False
    draft = parse_session({"patient_id": PID, "session_date": date.today().isoformat(), "pain_during": 7})
    step_back = adjust_person(store, PID, today=date.today(), draft=draft)
    assert step_back["decision"] == "step_back" and step_back["changes_program"] is True
