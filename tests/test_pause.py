"""A pause binds; a recorded resumption lifts it (PRODUCT.md, third stage; docs/sessions.md).

After a fall the session advice is stop_and_refer: stop loading and refer for assessment
before more exercise (Riebe D et al. 2015, Updating ACSM's recommendations for exercise
preparticipation health screening, Med Sci Sports Exerc 47(11):2473-2479; a fall with new
pain may be a fracture: Han CS et al. 2023, Cochrane CD014461.pub2).  Keeping the program
paused until a clinician records the decision to go on is common practice.  Invented
people only.
"""

from __future__ import annotations

import json
from datetime import date, timedelta

import pytest

from prescribe.cli import main
from prescribe.errors import InputError, ProgramPaused
from prescribe.plan_schema import PlanResume, parse_plan
from prescribe.sessions.engine import assess
from prescribe.sessions.pause import REASON_MAX_CHARS, pause_caution
from prescribe.sessions.records import parse_session
from prescribe.store import open_store
from prescribe.clinic.advice import adjust_person, resume_person
from session_support import day_of, full_weeks, logged, person, plan_dict, program

PID = "PAUSE-CLI-1"
PERSON = {"patient_id": PID, "age_years": 62, "sex": "female", "body_mass_kg": 63.0, "height_cm": 162.0,
          "t_scores": {"lumbar_spine": -1.8, "femoral_neck": -1.7}, "fractures": [], "falls_past_year": 0,
          "timed_up_and_go_s": 7.6, "chair_stand_30s": 14, "tandem_stance_s": 10, "conditions": [], "pain_score": 1}
START = date.today() - timedelta(days=7 * 6)  # today is in week 7
REASON = "Assessed after the fall: no injury, balance unchanged; cleared to continue (invented)"


class _R:
    def __init__(self, code, out, err):
        self.code, self.out, self.err = code, out, err

    @property
    def json(self):
        assert self.code == 0, self.err
        return json.loads(self.out)


@pytest.fixture
def cli(capsys, tmp_db):
    def run(*args):
        capsys.readouterr()
        try:
            code = main([str(a) for a in args])
        except SystemExit as exc:
            code = exc.code
        out, err = capsys.readouterr()
        return _R(code, out, err)
    return run


def _session(tmp_path, name, day: date, **fields):
    data = {"patient_id": PID, "session_date": day.isoformat(), "pain_during": 1}
    data.update(fields)
    path = tmp_path / name
    path.write_text(json.dumps(data))
    return path


@pytest.fixture
def paused(cli, tmp_path, tmp_db):
    """A person whose program was paused after a fall: (person file, original plan file, folder)."""
    person_file = tmp_path / "person.json"
    person_file.write_text(json.dumps(PERSON))
    plan_file = tmp_path / "plan.json"
    plan_file.write_text(cli("plan", person_file, "--start-date", START.isoformat(), "--weeks", 26).out)
    assert cli("save", person_file, "--plan", plan_file, "--clinician", "EP Rowan (invented)").json[
        "program_version"] == 1
    fall_day = date.today() - timedelta(days=1)
    assert cli("session", "add", _session(tmp_path, "fall.json", fall_day, fell_since_last=True)).code == 0
    applied = cli("adjust", PID, "--apply", "--clinician", "EP Rowan (invented)").json
    assert applied["decision"] == "stop_and_refer" and applied["program_version"] == 2
    return person_file, plan_file, tmp_path, fall_day


def _versions(tmp_db) -> list[int]:
    with open_store(tmp_db) as store:
        return [v["version"] for v in store.program_versions(PID)]


# --------------------------------------------------------------------------------------
# the clinician's report: a re-save dropped the pause and the fall
# --------------------------------------------------------------------------------------

def test_riebe_2015_after_a_fall_resaving_the_plan_is_refused_and_the_fall_still_counts(cli, paused, tmp_db):
    person_file, plan_file, tmp, fall_day = paused
    # The re-save of the original plan used to store it unpaused (exit 0, no clearance).
    again = cli("save", person_file, "--plan", plan_file, "--clinician", "EP Rowan (invented)")
    assert again.code == 2, again.err
    assert f"paused since {date.today().isoformat()} from week 7" in again.err
    assert "A fall since the last session" in again.err and "prescribe resume" in again.err
    assert "Nothing was stored" in again.err
    assert _versions(tmp_db) == [1, 2]
    # A session logged during the pause (no red flag of its own): the fall that paused the
    # program still counts, so the advice stays stop_and_refer and names it.
    assert cli("session", "add", _session(tmp, "quiet.json", date.today())).code == 0
    advice = cli("adjust", PID).json
    assert advice["decision"] == "stop_and_refer"
    rules = [r["rule"] for r in advice["reasons"]]
    assert "session.fall" in rules and "session.paused" in rules
    fall = next(r for r in advice["reasons"] if r["rule"] == "session.fall")
    assert fall_day.isoformat() in fall["message"] and "Riebe" in fall["source"]


def test_adjust_apply_while_paused_keeps_the_same_pause(cli, paused, tmp_db):
    _, _, tmp, fall_day = paused
    assert cli("session", "add", _session(tmp, "dizzy.json", date.today(), symptoms=["dizziness"])).code == 0
    out = cli("adjust", PID, "--apply", "--clinician", "EP Rowan (invented)").json
    assert out["decision"] == "stop_and_refer" and out["program_version"] == 3
    with open_store(tmp_db) as store:
        first, again = store.get_program(PID, 2).paused, store.get_program(PID, 3).paused
    # Same pause: from the same week and day, counting from the fall; the reason names both flags.
    assert again.since == first.since and again.from_week == first.from_week == 7
    assert again.counts_from == fall_day.isoformat()
    assert "fall" in again.reason and "Warning symptoms" in again.reason


def test_import_of_a_bundle_that_would_replace_a_paused_program_is_refused(cli, paused, tmp_db, tmp_path):
    _, plan_file, tmp, _ = paused
    bundle_file = tmp / "bundle.json"
    assert cli("export", PID, "--out", bundle_file).code == 0
    bundle = json.loads(bundle_file.read_text())
    latest = bundle["programs"][-1]
    bundle["programs"].append({**latest, "version": latest["version"] + 1, "based_on_version": latest["version"],
                               "plan": json.loads(plan_file.read_text())})  # the original, unpaused plan
    changed = tmp / "changed.json"
    changed.write_text(json.dumps(bundle))
    result = cli("import", changed)
    assert result.code == 2 and "paused since" in result.err and "prescribe resume" in result.err
    assert _versions(tmp_db) == [1, 2]
    # The same bundle again is still just "unchanged".
    assert cli("import", bundle_file).json["status"] == "unchanged"


# --------------------------------------------------------------------------------------
# prescribe resume
# --------------------------------------------------------------------------------------

def test_resume_records_who_when_why_and_lifts_the_pause(cli, paused, tmp_db):
    person_file, plan_file, tmp, fall_day = paused
    out = cli("resume", PID, "--clinician", "Dr Ines Vale (invented)", "--reason", REASON).json
    assert out["patient_id"] == PID and out["program_version"] == 3 and out["based_on_version"] == 2
    assert out["resumed_by"] == "Dr Ines Vale (invented)" and out["reason"] == REASON
    assert out["resumed_at"][:10] == date.today().isoformat() and out["paused_from_week"] == 7
    assert any("does not replace clinical judgment" in c for c in out["cautions"])
    with open_store(tmp_db) as store:
        plan = store.get_program(PID, 3)
        audit = [a for a in store.audit(PID) if a["action"] == "program_resumed"]
    assert plan.paused is None and plan.resumed.by == "Dr Ines Vale (invented)" and plan.resumed.reason == REASON
    assert plan.resumed.paused_version == 2 and plan.based_on_version == 2 and plan.adjustment is None
    assert pause_caution(7) not in plan.cautions
    assert len(audit) == 1 and audit[0]["clinician"] == "Dr Ines Vale (invented)"
    assert audit[0]["detail"]["reason"] == REASON and audit[0]["detail"]["paused_version"] == 2
    # After the resumption only sessions after it count: the fall before it no longer does.
    advice = cli("adjust", PID).json
    assert advice["decision"] != "stop_and_refer"
    assert not {"session.fall", "session.paused"} & {r["rule"] for r in advice["reasons"]}
    # The original plan may be saved again now.
    assert cli("save", person_file, "--plan", plan_file, "--clinician", "EP Rowan (invented)").json[
        "program_version"] == 4
    assert cli("adjust", PID).json["decision"] != "stop_and_refer"
    # A fall logged after the resumption counts again (Riebe 2015).
    assert cli("session", "add", _session(tmp, "fall2.json", date.today(), fell_since_last=True)).code == 0
    assert cli("adjust", PID).json["decision"] == "stop_and_refer"


@pytest.mark.parametrize("args, field", [
    (["--clinician", "EP (invented)", "--reason", "   "], "--reason"),
    (["--clinician", "EP (invented)", "--reason", "x" * (REASON_MAX_CHARS + 1)], "--reason"),
    (["--clinician", "EP (invented)"], "--reason"),
    (["--reason", REASON], "--clinician"),
])
def test_resume_bad_input_exits_2_naming_the_field_and_stores_nothing(cli, paused, tmp_db, args, field, monkeypatch):
    monkeypatch.delenv("JUPYTERHUB_USER", raising=False)
    result = cli("resume", PID, *args)
    assert result.code == 2 and f"{field} must be" in result.err, result.err
    assert _versions(tmp_db) == [1, 2]


def test_resume_refuses_an_unknown_person_no_program_and_a_program_not_paused(cli, paused, tmp_db, tmp_path):
    unknown = cli("resume", "NOBODY-9", "--clinician", "EP", "--reason", REASON)
    assert unknown.code == 2 and "patient_id must be" in unknown.err and "NOBODY-9" in unknown.err
    bare = tmp_path / "bare.json"
    bare.write_text(json.dumps({**PERSON, "patient_id": "PAUSE-BARE"}))
    assert cli("save", bare).code == 0
    none = cli("resume", "PAUSE-BARE", "--clinician", "EP", "--reason", REASON)
    assert none.code == 2 and "no stored program" in none.err
    assert cli("resume", PID, "--clinician", "EP", "--reason", REASON).code == 0
    twice = cli("resume", PID, "--clinician", "EP", "--reason", REASON)
    assert twice.code == 2 and "not paused" in twice.err and "a paused program" in twice.err
    assert _versions(tmp_db) == [1, 2, 3]


def test_resume_under_the_hub_records_the_login(cli, paused, tmp_db, monkeypatch):
    monkeypatch.setenv("JUPYTERHUB_USER", "ivale")
    assert cli("resume", PID, "--reason", REASON).json["resumed_by"] == "ivale"
    other = cli("resume", PID, "--clinician", "someone else", "--reason", REASON)
    assert other.code == 2 and "clinician" in other.err


# --------------------------------------------------------------------------------------
# the store: one check every door shares (SQLite and PostgreSQL)
# --------------------------------------------------------------------------------------

def _paused_store(url: str, pid: str = "PAUSE-STORE-1"):
    start = date.today() - timedelta(days=7 * 6)
    store = open_store(url)
    store.save_patient(person(pid), None, "EP Seed (invented)", plan=plan_dict(pid, start=start))
    store.add_session(parse_session({"patient_id": pid, "session_date": date.today().isoformat(),
                                     "pain_during": 0, "fell_since_last": True}), "EP Seed (invented)")
    adjust_person(store, pid, today=date.today(), apply=True, clinician="EP Seed (invented)")
    return store, pid, plan_dict(pid, start=start)


def test_every_store_door_refuses_to_replace_a_paused_program(new_db):
    store, pid, original = _paused_store(new_db())
    try:
        before = store.export_patient(pid)
        with pytest.raises(ProgramPaused) as err:
            store.save_program(pid, original, "EP (invented)", based_on_version=2)
        assert isinstance(err.value, InputError) and err.value.exit_code == 2
        assert err.value.pause["from_week"] == 7 and "prescribe resume" in str(err.value)
        with pytest.raises(ProgramPaused):  # the record and the plan in one transaction: neither stored
            store.save_patient(person(pid, pain_score=2), None, "EP (invented)", plan=original)
        bundle = store.export_patient(pid)
        bundle["programs"].append({**bundle["programs"][-1], "version": 3, "based_on_version": 2,
                                   "plan": original})
        with pytest.raises(ProgramPaused):
            store.import_bundle(bundle)
        assert store.export_patient(pid) == before
        # Keeping the same pause is not replacing it: the stored paused plan saved again is allowed.
        assert store.save_program(pid, store.get_program(pid), "EP (invented)", based_on_version=2) == 3
        out = resume_person(store, pid, clinician="EP (invented)", reason=REASON)
        assert out["program_version"] == 4 and store.get_program(pid).paused is None
        assert store.save_program(pid, original, "EP (invented)", based_on_version=4) == 5
    finally:
        store.close()


# --------------------------------------------------------------------------------------
# the engine: which sessions count while paused and after the resumption
# --------------------------------------------------------------------------------------

def test_riebe_2015_red_flags_keep_counting_while_paused_and_only_later_ones_after_resumption():
    plan = program()
    sessions = full_weeks([6], plan)
    sessions[-1] = logged(6, 5, sid=9, fell_since_last=True)
    paused = assess(plan, sessions, today=day_of(7), program_version=1).program
    assert paused.paused.counts_from == day_of(6, 5).isoformat()
    # Two quiet sessions logged against the paused version (2): the fall still counts.
    later = sessions + [logged(7, 1, sid=10, version=2), logged(8, 0, sid=11, version=2)]
    advice = assess(paused, later, today=day_of(8), program_version=2)
    assert advice.decision == "stop_and_refer"
    assert {"session.fall", "session.paused"} <= {r["rule"] for r in advice.reasons}
    # Resumed (version 3 lifts the paused version 2): sessions of version 2 or before no longer count.
    resumed = paused.model_copy(update={"paused": None, "resumed": PlanResume(
        by="Dr I. Vale (invented)", at=day_of(8).isoformat() + "T09:00:00+00:00", reason=REASON, paused_version=2)})
    after = assess(resumed, later, today=day_of(8), program_version=3)
    assert after.decision != "stop_and_refer" and "session.fall" not in {r["rule"] for r in after.reasons}
    # The same when the plan saved after the resumption does not carry it: the store says so.
    plain = resumed.model_copy(update={"resumed": None})
    assert assess(plain, later, today=day_of(8), program_version=4, counts_after_version=2).decision != \
        "stop_and_refer"
    fell_again = later + [logged(8, 2, sid=12, version=4, fell_since_last=True)]
    assert assess(plain, fell_again, today=day_of(8), program_version=4,
                  counts_after_version=2).decision == "stop_and_refer"
