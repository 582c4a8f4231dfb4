"""Retests in the store (revision 0008), on SQLite and PostgreSQL: stored with the updated record,
its screening and the next block in one transaction; the intake values stay the baseline; a
paused program is never replaced; bundles carry retests.  Invented people only."""

from __future__ import annotations

import json
from datetime import date, timedelta

import pytest
from sqlalchemy import create_engine, text

from prescribe.clinic.reassess import reassess_person
from prescribe.errors import ConflictError, InputError, ProgramPaused
from prescribe.outcomes.retest import parse_retest
from prescribe.store import HEAD_REVISION, open_store
from prescribe.plan_schema import PlanPause
from session_support import person, plan_dict

PID = "RT-STORE-1"


def _store(where, weeks_ago=13):
    s = open_store(where)
    start = date.today() - timedelta(days=7 * weeks_ago)
    s.save_patient(person(PID), None, "EP One", plan=plan_dict(PID, weeks=26, start=start))
    return s, start


def _retest(day, **fields):
    data = {"patient_id": PID, "date": day.isoformat(), "falls_since_last": 0}
    data.update(fields)
    return parse_retest(data)


def test_a_retest_is_stored_with_the_record_the_screening_and_the_next_block(new_db):
    s, start = _store(new_db())
    with s:
        out = reassess_person(s, _retest(date.today() - timedelta(days=14), timed_up_and_go_s=6.0,
                                         chair_stand_30s=18, height_cm=162.5), clinician="EP One")
        assert out["decision"] == "continue"
        assert out["next_block"]["program_version"] == 2 == s.latest_program_version(PID)
        assert s.get_program(PID).block.after_retest == out["date"]
        assert s.get_patient(PID).timed_up_and_go_s == 6.0      # the record's current value
        assert s.record_version(PID) == 2
        rows = s.retests(PID)
        assert rows[0]["previous"]["timed_up_and_go_s"] == 7.5  # the intake value is kept
        assert rows[0]["program_version"] == 2 and rows[0]["verdicts"]["timed_up_and_go_s"] == "improved"
        # a second retest compares with the intake baseline and with the first retest
        out2 = reassess_person(s, _retest(date.today(), timed_up_and_go_s=7.4), clinician="EP One")
        tug = next(m for m in out2["measures"] if m["measure"] == "timed_up_and_go_s")
        assert (tug["baseline"], tug["previous"], tug["now"]) == (7.5, 6.0, 7.4)
        assert tug["verdict"] == "no real change" and tug["verdict_since_previous"] == "worse"
        assert out2["decision"] == "hold" and out2["next_block"] is None
        assert s.latest_program_version(PID) == 2               # hold: nothing replaced
        assert [a["action"] for a in s.audit(PID)].count("retest_saved") == 2
        assert s.retest_verdicts() == [(PID, "standard", json.dumps(
            {m["measure"]: m["verdict"] for m in out2["measures"]}))]


def test_a_retest_before_the_last_one_is_refused_and_nothing_is_stored(new_db):
    s, start = _store(new_db())
    with s:
        reassess_person(s, _retest(date.today()), clinician="EP One")
        with pytest.raises(InputError, match="date must be a date on or after the last stored retest"):
            reassess_person(s, _retest(date.today() - timedelta(days=3)), clinician="EP One")
        assert len(s.retests(PID)) == 1


def test_a_paused_program_is_not_replaced(new_db):
    s, start = _store(new_db())
    with s:
        plan = s.get_program(PID).model_copy(update={"paused": PlanPause(
            from_week=3, since=(start + timedelta(days=15)).isoformat(), reason="dizziness")})
        s.save_program(PID, plan, "EP One", 1)
        out = reassess_person(s, _retest(date.today()), clinician="EP One")
        assert out["decision"] == "hold" and out["next_block"] is None
        assert any("paused since" in r["message"] for r in out["reasons"])
        assert s.latest_program_version(PID) == 2
        # the store itself refuses a next block over a paused program with its one pause check
        # (docs/sessions.md: a paused program binds at every door), storing nothing
        from prescribe.clinic.reassess import assess_retest
        res = assess_retest(s, _retest(date.today()))
        before = (s.retests(PID), s.record_version(PID), s.latest_program_version(PID), len(s.audit(PID)))
        with pytest.raises(ProgramPaused) as refused:
            s.save_retest(_retest(date.today()).model_dump(mode="json"), res["_record"], res["_screening"], "EP One",
                          previous={}, result={"decision": "continue"},
                          based_on_record_version=res["_based_on_record_version"], plan=plan_dict(PID), based_on_version=2)
        assert refused.value.exit_code == 2 and refused.value.version == 2
        assert refused.value.pause["reason"] == "dizziness"
        assert (s.retests(PID), s.record_version(PID), s.latest_program_version(PID), len(s.audit(PID))) == before
        # the same words as the program door's refusal, only the door named differently
        with pytest.raises(ProgramPaused) as program_door:
            s.save_program(PID, plan_dict(PID), "EP One", 2)
        def words(err):
            return str(err.value).split(": refused: ", 1)[1]
        assert words(refused) == words(program_door)
        assert str(refused.value).startswith("store: the next block after the retest of ")


def test_a_record_changed_meanwhile_is_a_conflict(new_db):
    s, _ = _store(new_db())
    with s:
        from prescribe.clinic.reassess import assess_retest
        res = assess_retest(s, _retest(date.today()))
        s.save_patient(person(PID, pain_score=2), None, "EP Two")
        with pytest.raises(ConflictError, match="nothing was stored"):
            s.save_retest(_retest(date.today()).model_dump(mode="json"), res["_record"], res["_screening"], "EP One",
                          previous=res["_previous"], result={"decision": "hold"},
                          based_on_record_version=res["_based_on_record_version"])
        assert s.retests(PID) == []


def test_bundles_carry_retests(new_db):
    s, _ = _store(new_db("a"))
    with s:
        reassess_person(s, _retest(date.today(), chair_stand_30s=17), clinician="EP One")
        bundle = s.export_patient(PID)
    assert len(bundle["retests"]) == 1 and bundle["retests"][0]["retest"]["chair_stand_30s"] == 17
    with open_store(new_db("b")) as t:
        assert t.import_bundle(bundle)["retests"] == 1
        assert t.export_patient(PID) == bundle | {"tool_version": bundle["tool_version"]}
        assert t.retests(PID)[0]["previous"]["chair_stand_30s"] == 15
    broken = json.loads(json.dumps(bundle))
    broken["retests"][0]["retest"]["tandem_stance_s"] = 30
    with open_store(new_db("c")) as u, pytest.raises(InputError, match=r"retests\[0\]\.retest\.tandem_stance_s"):
        u.import_bundle(broken)


def test_a_store_at_revision_0006_upgrades_and_keeps_its_rows(new_db):
    from test_store import _alembic_upgrade
    where = new_db("old")
    _alembic_upgrade(where, "0006")
    engine = create_engine(where if "://" in where else f"sqlite:///{where}")
    rec = json.dumps(person(PID).model_dump(mode="json"))
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO people (patient_id, record_json, created, updated, record_version) VALUES "
                          "(:p, :rec, '2026-01-01T00:00:00+00:00', '2026-01-01T00:00:00+00:00', 1)"),
                     {"p": PID, "rec": rec})
    engine.dispose()
    with open_store(where) as s:
        assert s.revision() == HEAD_REVISION and int(HEAD_REVISION) >= 8  # 0008 or a later revision
        assert s.get_patient(PID) == person(PID)
        assert s.retests(PID) == []


def test_caseload_outcomes_count_each_person_once_by_the_latest_retest(new_db):
    """The latest retest is the one of the latest date, and of the later id on the same day, whatever
    order the rows were written in; measures the data file does not know are left out; a person
    without a template counts under "(none recorded)".  Counts worked out by hand (common practice:
    one person, one count)."""
    from prescribe.clinic.caseload import outcomes
    from prescribe.store import models as m
    rows = [  # (person, date, template, verdicts), in the order they are written
        ("OC-A", "2026-03-01", "standard", {"timed_up_and_go_s": "improved"}),
        ("OC-A", "2026-06-01", "standard", {"timed_up_and_go_s": "worse"}),               # A: latest date
        ("OC-B", "2026-05-01", "standard", {"chair_stand_30s": "worse"}),
        ("OC-B", "2026-05-01", "standard", {"chair_stand_30s": "improved"}),             # B: same day, later id
        ("OC-C", "2026-09-01", "gentle", {"pain_score": "worse", "timed_up_and_go_s": "no real change"}),
        ("OC-C", "2026-02-01", "gentle", {"pain_score": "improved"}),                    # C: written later, earlier
        ("OC-D", "2026-04-01", None, {"timed_up_and_go_s": "no real change", "grip_kg": "improved"}),
    ]
    with open_store(new_db()) as s:
        for pid in ("OC-A", "OC-B", "OC-C", "OC-D"):
            s.save_patient(person(pid), None, "EP One")
        with s._write() as conn:
            for pid, day, template, verdicts in rows:
                conn.execute(m.retests.insert().values(
                    patient_id=pid, retest_date=day, created="2026-10-01T09:00:00+00:00", clinician="EP One",
                    retest_json="{}", previous_json="{}", result_json="{}", decision="continue", template=template,
                    verdicts_json=json.dumps(verdicts), program_version=None))
        assert sorted(s.retest_verdicts()) == [
            ("OC-A", "standard", json.dumps(rows[1][3])), ("OC-B", "standard", json.dumps(rows[3][3])),
            ("OC-C", "gentle", json.dumps(rows[4][3])), ("OC-D", None, json.dumps(rows[6][3]))]
        out = outcomes(s)
    counts = {(r["template"], r["measure"]): (r["improved"], r["no real change"], r["worse"], r["people"])
              for r in out["rows"]}
    assert out["people"] == 4
    assert counts == {
        ("(all)", "timed_up_and_go_s"): (0, 2, 1, 3), ("standard", "timed_up_and_go_s"): (0, 0, 1, 1),
        ("gentle", "timed_up_and_go_s"): (0, 1, 0, 1), ("(none recorded)", "timed_up_and_go_s"): (0, 1, 0, 1),
        ("(all)", "chair_stand_30s"): (1, 0, 0, 1), ("standard", "chair_stand_30s"): (1, 0, 0, 1),
        ("(all)", "pain_score"): (0, 0, 1, 1), ("gentle", "pain_score"): (0, 0, 1, 1)}
    assert [r["measure"] for r in out["rows"]][:4] == ["timed_up_and_go_s"] * 4   # the data file's order first
    assert out["rows"][0]["template"] == "(all)"


def test_the_stored_program_read_for_a_retest_shares_repeated_entries_and_says_the_same():
    """The store reads a stored program version with each repeated session and exercise entry
    validated once and shared (plan_schema.parse_plan(share=True)): the same plan as the usual parse, the same safety findings,
    an entry that differs in one figure kept as its own, and a broken entry refused with the usual
    message."""
    from prescribe.errors import PlanFileError
    from prescribe.plan_schema import parse_plan
    from prescribe.safety import check_program

    plan = plan_dict(PID, weeks=26)
    changed = plan["weeks"][9]["sessions"][0]["exercises"][0]
    changed["notes"] = changed["notes"] + " Keep the knees soft."          # one entry differs in its text
    plain = parse_plan(plan)
    shared = parse_plan(plan, share=True)
    assert shared.model_dump(mode="json") == plain.model_dump(mode="json")
    entries = [x for w in shared.weeks for s in w.sessions for x in s.exercises]
    distinct = {repr(x) for w in plan["weeks"] for s in w["sessions"] for x in s["exercises"]}
    assert len({id(x) for x in entries}) == len(distinct) < len(entries) / 3
    assert shared.weeks[9].sessions[0].exercises[0].notes.endswith("Keep the knees soft.")
    assert shared.weeks[10].sessions[0].exercises[0].notes == plain.weeks[10].sessions[0].exercises[0].notes
    # a record with two falls and a slow Timed Up and Go (falls risk: AGS/BGS 2011, from memory) that
    # the program was not built for: the same findings, in the same order
    fallen = person(PID, falls_past_year=2, timed_up_and_go_s=14.5)
    found = [(v.rule, v.week, v.exercise_id) for v in check_program(plain, record=fallen)]
    assert found and [(v.rule, v.week, v.exercise_id) for v in check_program(shared, record=fallen)] == found
    broken = plan_dict(PID, weeks=26)
    broken["weeks"][3]["sessions"][1]["exercises"][0]["impact_level"] = 7
    with pytest.raises(PlanFileError, match=r"weeks\[3\]\.sessions\[1\]\.exercises\[0\]\.impact_level"):
        parse_plan(broken, share=True)
