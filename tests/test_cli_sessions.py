"""``prescribe plan --start-date``, ``save --plan``, ``session add|list`` and ``adjust``
(PRODUCT.md, second stage).  Invented people only; the rules' sources are named in
tests/test_sessions_rules.py."""

from __future__ import annotations

import json
from datetime import date, timedelta

import pytest

from conftest import run_cli
from prescribe.cli import main
from prescribe.store import open_store

PID = "SES-CLI-1"
PERSON = {"patient_id": PID, "age_years": 61, "sex": "female", "body_mass_kg": 64.0, "height_cm": 164.0,
          "t_scores": {"lumbar_spine": -1.8, "femoral_neck": -1.6}, "fractures": [], "falls_past_year": 0,
          "timed_up_and_go_s": 7.4, "chair_stand_30s": 15, "tandem_stance_s": 10, "conditions": [], "pain_score": 1}
START = date.today() - timedelta(days=7 * 6)  # today is in week 7


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


@pytest.fixture
def files(tmp_path, cli):
    person = tmp_path / "person.json"
    person.write_text(json.dumps(PERSON))
    plan = tmp_path / "plan.json"
    r = cli("plan", person, "--start-date", START.isoformat(), "--weeks", 26)
    plan.write_text(r.out)
    return person, plan, tmp_path


def _session(tmp_path, name="s.json", **fields):
    data = {"patient_id": PID, "session_date": date.today().isoformat(), "pain_during": 1}
    data.update(fields)
    path = tmp_path / name
    path.write_text(json.dumps(data))
    return path


def test_plan_records_the_start_date_and_defaults_to_today(cli, files, tmp_path):
    person, plan, _ = files
    assert json.loads(plan.read_text())["start_date"] == START.isoformat()
    assert cli("plan", person).json["start_date"] == date.today().isoformat()
    bad = cli("plan", person, "--start-date", "2026-02-30")
    assert bad.code == 2 and "--start-date" in bad.err and "YYYY-MM-DD" in bad.err


def test_save_plan_stores_the_next_version_and_refuses_an_unsafe_one(cli, files, tmp_db):
    person, plan, tmp = files
    first = cli("save", person, "--plan", plan, "--clinician", "EP Rowan (invented)").json
    assert first["program_version"] == 1 and first["screening_id"] == 1
    assert cli("save", person, "--plan", plan).json["program_version"] == 2
    data = json.loads(plan.read_text())
    data["weeks"][2]["impact_level"] = 3  # edited by hand above the screening's cap
    unsafe = tmp / "unsafe.json"
    unsafe.write_text(json.dumps(data))
    r = cli("save", person, "--plan", unsafe, "--clinician", "EP")
    assert r.code == 2 and "impact" in r.err and "week 3" in r.err and r.out == "", r.err
    other = dict(data, patient_id="SOMEONE-ELSE")
    unsafe.write_text(json.dumps(other))
    r = cli("save", person, "--plan", unsafe)
    assert r.code == 2 and "plan.patient_id" in r.err
    with open_store(tmp_db) as store:
        assert [v["version"] for v in store.program_versions(PID)] == [1, 2]
        assert len(store.screenings(PID)) == 2


def test_session_add_and_list_and_bad_input_stores_nothing(cli, files, tmp_db):
    person, plan, tmp = files
    cli("save", person, "--plan", plan, "--clinician", "EP").json
    out = cli("session", "add", _session(tmp, session_rpe=6, pain_next_morning=0,
                                          exercises=[{"exercise_id": "goblet_box_squat", "load_kg": 12,
                                                      "reps_done": 10, "sets_done": 3}]),
              "--clinician", "EP Rowan").json
    assert out["session_id"] == 1 and out["week"] == 7 and out["program_version"] == 1
    earlier = (START + timedelta(days=8)).isoformat()
    assert cli("session", "add", _session(tmp, "e.json", session_date=earlier)).json["week"] == 2
    bad = [
        (_session(tmp, "b1.json", patient_id="NOBODY-1"), "NOBODY-1"),
        (_session(tmp, "b2.json", program_version=9), "program_version"),
        (_session(tmp, "b3.json", session_date=(date.today() + timedelta(days=1)).isoformat()), "future"),
        (_session(tmp, "b4.json", session_date=(START - timedelta(days=1)).isoformat()), "start_date"),
        (_session(tmp, "b5.json", pain_during=12), "pain_during"),
        (_session(tmp, "b6.json", symptoms=["headache"]), "symptoms[0]"),
    ]
    for path, words in bad:
        r = cli("session", "add", path)
        assert r.code == 2 and words in r.err and "Traceback" not in r.err, (words, r.err)
    # An exercise the catalogue does not have, or one the program version does not hold: refused,
    # naming the exercise id and the program's ids, nothing stored.
    from prescribe.catalogue import default_catalogue
    planned = sorted({x["exercise_id"] for w in json.loads(plan.read_text())["weeks"] for s in w["sessions"]
                      for x in s["exercises"]})
    outside = next(e.exercise_id for e in default_catalogue().all() if e.exercise_id not in planned)
    for name, wrong in (("b7.json", "moonwalk"), ("b8.json", outside)):
        done = [{"exercise_id": planned[0]}, {"exercise_id": wrong}]
        r = cli("session", "add", _session(tmp, name, exercises=done))
        assert r.code == 2 and "exercises[1].exercise_id" in r.err and repr(wrong) in r.err, r.err
        assert all(i in r.err for i in planned) and "Traceback" not in r.err
    listed = cli("session", "list", PID).json
    assert [s["session_date"] for s in listed] == [earlier, date.today().isoformat()]  # oldest first
    assert listed[1]["exercises"][0]["load_kg"] == 12 and listed[1]["clinician"] == "EP Rowan"
    with open_store(tmp_db) as store:
        assert store.get_patient(PID).pain_score == 1  # the intake record is never changed
        logged = [a for a in store.audit(PID) if a["action"] == "session_logged"]
        assert [a["clinician"] for a in logged] == ["EP Rowan", "unnamed clinician (command line)"]
    r = cli("session", "list", "NOBODY-1")
    assert r.code == 2 and "NOBODY-1" in r.err


def test_adjust_prints_the_decision_and_apply_stores_a_version_based_on_the_old(cli, files, tmp_db):
    person, plan, tmp = files
    cli("save", person, "--plan", plan, "--clinician", "EP").json
    cli("session", "add", _session(tmp, symptoms=["dizziness"]), "--clinician", "EP Rowan").json
    advice = cli("adjust", PID).json
    assert {"patient_id", "week", "decision", "reasons", "changes", "cautions"} <= set(advice)
    assert advice["decision"] == "stop_and_refer" and advice["week"] == 7 and "program_version" not in advice
    assert advice["reasons"][0]["rule"] == "session.red_flag_cardiac" and advice["reasons"][0]["source"]
    r = cli("adjust", PID, "--apply")
    assert r.code == 2 and "--clinician" in r.err
    applied = cli("adjust", PID, "--apply", "--clinician", "EP Rowan (invented)", "--out", tmp / "new.json").json
    assert applied["program_version"] == 2 and applied["based_on_version"] == 1
    new = json.loads((tmp / "new.json").read_text())
    assert new["based_on_version"] == 1 and new["adjustment"]["decision"] == "stop_and_refer"
    assert new["paused"]["from_week"] == 7 and new["start_date"] == START.isoformat()
    with open_store(tmp_db) as store:
        stored = store.get_program(PID)
        assert stored.adjustment.reasons[0]["rule"] == "session.red_flag_cardiac"
        versions = store.program_versions(PID)
        assert versions[-1]["based_on_version"] == 1 and versions[-1]["clinician"] == "EP Rowan (invented)"
        entry = store.audit(PID)[-1]
        assert entry["action"] == "program_adjusted" and entry["detail"]["decision"] == "stop_and_refer"
    again = cli("adjust", PID)
    assert "already applies the advice" in again.json["already_applied"]
    r = cli("adjust", PID, "--apply", "--clinician", "EP Rowan (invented)")  # a second click, same sessions
    assert r.code == 2 and "log a session before adjusting again" in r.err
    with open_store(tmp_db) as store:
        assert len(store.program_versions(PID)) == 2
    r = cli("adjust", "NOBODY-1")
    assert r.code == 2 and "NOBODY-1" in r.err


def test_export_and_import_carry_the_sessions(cli, files, tmp_db, tmp_path, monkeypatch):
    person, plan, tmp = files
    cli("save", person, "--plan", plan, "--clinician", "EP").json
    cli("session", "add", _session(tmp, note="felt strong"), "--clinician", "EP Rowan").json
    bundle = cli("export", PID).json
    assert len(bundle["sessions"]) == 1 and bundle["sessions"][0]["session"]["note"] == "felt strong"
    path = tmp / "bundle.json"
    path.write_text(json.dumps(bundle))
    monkeypatch.setenv("PRESCRIBE_DB", str(tmp_path / "other.db"))
    assert cli("import", path).json["sessions"] == 1
    assert cli("export", PID).json == bundle
    # an older bundle without sessions still imports
    old = {k: v for k, v in bundle.items() if k != "sessions"}
    old["person"] = {**old["person"], "patient_id": "SES-OLD-1", "record": {**old["person"]["record"],
                                                                             "patient_id": "SES-OLD-1"}}
    old["screenings"], old["programs"], old["audit"] = [], [], []
    path.write_text(json.dumps(old))
    assert cli("import", path).json["status"] == "imported"
    bad = json.loads(json.dumps(bundle))
    bad["person"]["patient_id"] = "SES-BAD-1"
    bad["person"]["record"]["patient_id"] = "SES-BAD-1"
    bad["sessions"][0]["session"]["pain_during"] = 11
    path.write_text(json.dumps(bad))
    r = cli("import", path)
    assert r.code == 2 and "sessions[0].session.pain_during" in r.err


def test_the_installed_command_session_add_prints_session_id_and_week(files, tmp_db):
    person, plan, tmp = files
    assert run_cli("save", str(person), "--plan", str(plan)).returncode == 0
    r = run_cli("session", "add", str(_session(tmp)), "--clinician", "EP")
    assert r.returncode == 0, r.stderr
    out = json.loads(r.stdout)
    assert out["session_id"] == 1 and out["week"] == 7
