"""``prescribe reassess``, ``prescribe progress`` and ``prescribe caseload outcomes`` through the real
entry point.  Invented people and clinic."""

from __future__ import annotations

import csv
import json
from datetime import date, timedelta

import pytest

from prescribe.store import open_store
from session_support import person, plan_dict
from conftest import run_cli

PID = "RT-CLI-1"


@pytest.fixture
def stored(tmp_db):
    start = date.today() - timedelta(days=7 * 14)
    with open_store(tmp_db) as s:
        s.save_patient(person(PID), None, "EP Cli", plan=plan_dict(PID, weeks=26, start=start))
    return tmp_db, start


def _write(tmp_path, name, data):
    path = tmp_path / name
    path.write_text(json.dumps(data))
    return str(path)


def test_reassess_prints_the_contract_and_stores_the_next_block(stored, tmp_path):
    db, start = stored
    f = _write(tmp_path, "r.json", {"patient_id": PID, "date": date.today().isoformat(), "timed_up_and_go_s": 6.2,
                                    "chair_stand_30s": 18, "tandem_stance_s": 10, "falls_since_last": 0,
                                    "pain_score": 0, "body_mass_kg": 66.0, "height_cm": 162.8,
                                    "t_scores": {"femoral_neck": -1.8}, "z_scores": {}, "note": "review"})
    proc = run_cli("reassess", f, "--clinician", "EP Cli")
    assert proc.returncode == 0, proc.stderr
    out = json.loads(proc.stdout)
    assert {"patient_id", "date", "measures", "flags", "decision", "reasons", "next_block", "cautions"} <= set(out)
    for m in out["measures"]:
        assert {"measure", "baseline", "previous", "now", "change", "mdc", "mdc_source", "verdict"} <= set(m)
        assert m["verdict"] in ("improved", "no real change", "worse")
    assert out["decision"] == "continue"
    nb = out["next_block"]
    assert nb["program_version"] == 2 and nb["start_level"] >= 1 and nb["weeks"] == 26
    with open_store(db) as s:
        assert s.latest_program_version(PID) == 2
    assert any("licensed clinician" in c for c in out["cautions"])


@pytest.mark.parametrize("fields, field, allowed", [
    ({"date": "2999-01-01"}, "date", "a date not in the future"),
    ({"date": "2020-01-01"}, "date", "on or after the program's start_date"),
    ({"patient_id": "NOBODY-1"}, "patient_id", "the id of a person in the store"),
    ({"chair_stand_30s": 150}, "chair_stand_30s", "a whole number from 0 to 100"),
    ({"falls_since_last": None}, "falls_since_last", "a whole number of falls"),
])
def test_bad_input_exits_2_naming_field_value_and_allowed_and_stores_nothing(stored, tmp_path, fields, field,
                                                                            allowed):
    db, _ = stored
    data = {"patient_id": PID, "date": date.today().isoformat(), "falls_since_last": 0, **fields}
    proc = run_cli("reassess", _write(tmp_path, "bad.json", data))
    assert proc.returncode == 2, proc.stdout
    assert field in proc.stderr and allowed in proc.stderr and "Traceback" not in proc.stderr
    with open_store(db) as s:
        assert s.retests(PID) == [] and s.latest_program_version(PID) == 1


def test_progress_letter_and_caseload_outcomes(stored, tmp_path):
    f = _write(tmp_path, "r.json", {"patient_id": PID, "date": date.today().isoformat(), "falls_since_last": 1,
                                    "timed_up_and_go_s": 9.2, "chair_stand_30s": 15})
    proc = run_cli("reassess", f, "--clinician", "EP Cli")
    assert proc.returncode == 0, proc.stderr
    out = json.loads(proc.stdout)
    assert out["decision"] == "hold" and out["next_block"] is None
    env = {"PRESCRIBE_CLINIC_NAME": "Larkfield Bone Clinic", "PRESCRIBE_CLINIC_CONTACT": "0161 496 0000"}
    html_out = tmp_path / "letter.html"
    proc = run_cli("progress", PID, "--out", str(html_out), env=env)
    assert proc.returncode == 0, proc.stderr
    text = html_out.read_text()
    assert "Larkfield Bone Clinic" in text and "Timed Up and Go" in text and "<svg" in text
    assert "held at its current levels" in text and "1 fall" in text
    pdf_out = tmp_path / "letter.pdf"
    proc = run_cli("progress", PID, "--out", str(pdf_out), env=env)
    assert proc.returncode == 0, proc.stderr
    assert json.loads(proc.stdout)["pages"] in (1, 2) and pdf_out.read_bytes()[:5] == b"%PDF-"
    bad = run_cli("progress", PID, "--out", str(tmp_path / "letter.docx"))
    assert bad.returncode == 2 and "--out" in bad.stderr
    csv_out = tmp_path / "o.csv"
    proc = run_cli("caseload", "outcomes", "--out", str(csv_out))
    assert proc.returncode == 0, proc.stderr
    rows = list(csv.DictReader(csv_out.open()))
    tug = [r for r in rows if r["measure"] == "timed_up_and_go_s"]
    assert {r["template"] for r in tug} == {"(all)", "standard"}
    assert all(r["worse"] == "1" and r["people"] == "1" for r in tug)   # 7.5 -> 9.2 s: 1.7 s slower


def test_progress_without_a_retest_exits_2(stored, tmp_path):
    proc = run_cli("progress", PID, "--out", str(tmp_path / "l.pdf"))
    assert proc.returncode == 2 and "at least one stored retest" in proc.stderr


def test_a_next_block_over_a_program_paused_meanwhile_exits_2_with_the_stores_words(stored, tmp_path, capsys,
                                                                                     monkeypatch):
    """A colleague logs a fall and applies the session advice (the program pauses) while this retest's
    next block is being worked out: the store's one pause check refuses the block, the command exits
    2 with the words every door uses, and nothing of the retest is stored (docs/sessions.md: a paused
    program stays paused until a clinician records the resumption)."""
    from prescribe.cli import main
    from prescribe.clinic import reassess
    from prescribe.clinic.advice import adjust_person
    from prescribe.sessions.records import parse_session

    db, _ = stored
    real = reassess.assess_retest

    def assess_while_a_colleague_pauses(store, retest, **kw):
        out = real(store, retest, **kw)
        assert out["decision"] == "continue" and out["_plan"] is not None   # a next block was built
        with open_store(db) as other:                                      # the colleague's own connection
            other.add_session(parse_session({"patient_id": PID, "session_date": date.today().isoformat(),
                                             "pain_during": 0, "fell_since_last": True}), "EP Other (invented)")
            advice = adjust_person(other, PID, today=date.today(), apply=True, clinician="EP Other (invented)")
            assert advice["decision"] == "stop_and_refer" and other.get_program(PID).paused
        return out

    monkeypatch.setattr(reassess, "assess_retest", assess_while_a_colleague_pauses)
    with open_store(db) as s:
        record_version = s.record_version(PID)
    f = _write(tmp_path, "r.json", {"patient_id": PID, "date": date.today().isoformat(), "falls_since_last": 0,
                                    "timed_up_and_go_s": 6.4, "chair_stand_30s": 17})
    capsys.readouterr()
    code = main(["reassess", f, "--clinician", "EP Cli", "--db", db])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert "store: the next block after the retest of" in err
    assert f"the program of {PID!r} (version 2) has been paused since" in err and "Nothing was stored" in err
    assert f"prescribe resume {PID} --clinician NAME --reason TEXT" in err and "Traceback" not in err
    with open_store(db) as s:
        assert s.retests(PID) == [] and s.record_version(PID) == record_version
        assert s.latest_program_version(PID) == 2 and s.get_program(PID).paused   # the pause, not a block
        # the same refusal as the program door's for the same paused program
        from prescribe.errors import ProgramPaused
        with pytest.raises(ProgramPaused) as program_door:
            s.save_program(PID, plan_dict(PID), "EP Cli", 2)
    assert str(program_door.value).split(": refused: ", 1)[1] in err
