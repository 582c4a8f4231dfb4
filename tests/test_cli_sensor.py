"""`prescribe sensor --patient`: planned against delivered on an invented person, the summary
stored with the person and carried in the export/import bundle; bad files store nothing.

The person (SNS-0001, 64 kg) and the recordings are invented; the recordings are made here
with known impacts.  The weak window (weeks 3 to 5 after a step-up) is PRODUCT.md's
remodelling transient (Eriksen 1986, Endocr Rev 7:379).
"""

from __future__ import annotations

import json
from datetime import date, timedelta

import numpy as np
import pytest

from prescribe.cli import main
from prescribe.planning import build_plan
from prescribe.records import parse_record
from prescribe.screening import screen
from prescribe.sensor.compare import planned_by_date
from prescribe.sensor.readers import write_csv
from prescribe.store import open_store
from prescribe.store.api import HEAD_REVISION
from sensor_signals import recording

PERSON = {"patient_id": "SNS-0001", "age_years": 61, "sex": "female", "body_mass_kg": 64.0, "height_cm": 164.0,
          "t_scores": {"lumbar_spine": -1.8, "femoral_neck": -1.9}, "fractures": [], "falls_past_year": 0,
          "conditions": [], "pain_score": 0}
START = date(2026, 3, 2)  # a Monday


def run(capsys, *args):
    capsys.readouterr()
    try:
        code = main(list(args))
    except SystemExit as exc:
        code = exc.code
    out, err = capsys.readouterr()
    assert "Traceback" not in err
    return code, out, err


@pytest.fixture
def stored(tmp_db):
    """The invented person with a 26-week program starting Monday 2 March 2026."""
    record = parse_record(PERSON)
    screening = screen(record)
    plan = build_plan(record, screening).model_dump(mode="json")
    plan["start_date"] = START.isoformat()
    with open_store(tmp_db) as store:
        store.save_patient(record, screening, "AB")
        store.save_program(record.patient_id, plan, "AB", None)
    return plan


def _week_with_impacts(plan, weak: bool) -> dict:
    """A week with impact work that the plan itself labels (or not) as a weak window."""
    for w in plan["weeks"]:
        if any(s["impacts"] for s in w["sessions"]) and bool(w["weak_window"]) == weak:
            return w
    raise AssertionError("the plan has no such week")


def _three_days(tmp_path, monday: date, counts: tuple[int, int, int], peak_g=2.0):
    """Ten minutes at 09:00 UTC on Monday, Tuesday and Wednesday with counts[i] impacts each
    (2.0 g net: 2.2 BW at 64 kg by Neugebauer et al. 2014's running equation)."""
    parts_t, parts_a = [], []
    for i, n in enumerate(counts):
        day0 = (monday + timedelta(days=i)) - date(1970, 1, 1)
        start = day0.days * 86400 + 9 * 3600
        t, acc = recording(600, [peak_g] * n, [5.0 + 1.0 * k for k in range(n)], rate_hz=50, start_s=start,
                           noise_g=0.02, seed=i)
        parts_t.append(t)
        parts_a.append(acc)
    path = tmp_path / "three_days.csv"
    write_csv(path, np.concatenate(parts_t), np.concatenate(parts_a))
    return path


def test_planned_against_delivered_flags_extra_impacts_in_a_weak_window(stored, tmp_path, capsys, tmp_db):
    week = _week_with_impacts(stored, weak=True)
    monday = START + timedelta(days=7 * (week["week"] - 1))
    planned = {s["day"]: s["impacts"] for s in week["sessions"]}
    planned_oi = {s["day"]: s["osteogenic_index"] for s in week["sessions"]}
    mon_plan = planned.get(1, 0)
    path = _three_days(tmp_path, monday, (mon_plan + 15, 3, 0))
    code, out, err = run(capsys, "sensor", str(path), "--patient", "SNS-0001", "--clinician", "AB")
    assert code == 0, err
    s = json.loads(out)
    days = {d["date"]: d for d in s["days"]}
    mon, tue, wed = (days[(monday + timedelta(days=i)).isoformat()] for i in range(3))
    # Planned figures are the plan's own sessions on those weekdays.
    assert mon["planned_impacts"] == mon_plan and wed["planned_impacts"] == planned.get(3, 0)
    assert mon["planned_osteogenic_index"] == pytest.approx(planned_oi.get(1, 0.0), abs=0.01)
    assert mon["delivered_impacts"] == mon_plan + 15 and tue["delivered_impacts"] == 3
    assert mon["impacts_by_band"]["1.1-2.4"] == mon_plan + 15
    assert mon["week"] == week["week"] and mon["weak_window"] is True
    assert mon["beyond_plan"] is True and wed["beyond_plan"] is False
    assert mon["delivered_share"] == (round((mon_plan + 15) / mon_plan, 3) if mon_plan else None)
    flags = s["plan"]["flags"]
    attention = [f for f in flags if f["severity"] == "attention"]
    assert [f["date"] for f in attention] == [mon["date"]] + ([tue["date"]] if planned.get(2, 0) < 3 else [])
    assert "transiently weaker" in attention[0]["message"]
    total_planned = sum(planned.get(d, 0) for d in (1, 2, 3))
    assert s["planned_impacts"] == total_planned
    assert s["delivered_impacts"] == mon_plan + 15 + 3
    assert s["delivered_share"] == pytest.approx(round((mon_plan + 18) / total_planned, 3))
    assert s["stored"] is True and s["body_mass_kg"] == 64.0
    with open_store(tmp_db) as store:
        saved = store.sensor_summaries("SNS-0001")
    assert len(saved) == 1 and saved[0]["summary"]["delivered_impacts"] == mon_plan + 18


def test_a_plan_without_start_date_is_dated_from_its_save_and_says_so(tmp_db, tmp_path, capsys):
    record = parse_record({**PERSON, "patient_id": "SNS-0002"})
    screening = screen(record)
    plan = build_plan(record, screening).model_dump(mode="json")
    plan.pop("start_date", None)
    with open_store(tmp_db) as store:
        store.save_patient(record, screening, "AB")
        store.save_program("SNS-0002", plan, "AB", None)
        saved_day = date.fromisoformat(store.program_created("SNS-0002")[:10])
    path = _three_days(tmp_path, saved_day, (5, 0, 0))
    code, out, err = run(capsys, "sensor", str(path), "--patient", "SNS-0002", "--no-store")
    assert code == 0, err
    s = json.loads(out)
    assert s["plan"]["start_date"] == saved_day.isoformat()
    assert any("no start_date" in n for n in s["notes"]) and "no start_date" in err
    assert s["stored"] is False
    with open_store(tmp_db) as store:
        assert store.sensor_summaries("SNS-0002") == []


def test_planned_days_follow_the_weekday_of_each_session():
    # Week N runs from start_date + 7(N-1) days (PRODUCT.md); day 1 = Monday.
    from types import SimpleNamespace as NS  # a plan's weeks and sessions, as the typed Plan has them

    def session(day, impacts, oi):
        return NS(day=day, kind="impact", impacts=impacts, osteogenic_index=oi, exercises=[])

    plan = NS(weeks=[NS(week=1, weak_window=None, sessions=[session(1, 20, 10.0), session(3, 30, 12.0)]),
                     NS(week=2, weak_window=None, sessions=[session(1, 40, 14.0)])])
    by_date = planned_by_date(plan, date(2026, 3, 4))  # a Wednesday start
    assert by_date["2026-03-04"]["planned_impacts"] == 30  # Wednesday of week 1
    assert by_date["2026-03-09"]["planned_impacts"] == 20  # the Monday inside week 1 (4-10 March)
    assert by_date["2026-03-16"]["planned_impacts"] == 40  # week 2 runs 11-17 March


def test_a_bad_file_stores_nothing(stored, tmp_path, capsys, tmp_db):
    path = tmp_path / "bad.csv"
    path.write_text("time_s,x_g,y_g,z_g\n0,0,0,1\n0.01,0,0,250\n0.02,0,0,1\n")
    code, out, err = run(capsys, "sensor", str(path), "--patient", "SNS-0001")
    assert code == 2 and "at most 100 g" in err and out == ""
    with open_store(tmp_db) as store:
        assert store.sensor_summaries("SNS-0001") == []
        assert not [a for a in store.audit("SNS-0001") if a["action"] == "sensor_summary_saved"]


def test_an_unknown_person_exits_2(stored, tmp_path, capsys):
    path = _three_days(tmp_path, START, (1, 0, 0))
    code, _, err = run(capsys, "sensor", str(path), "--patient", "NOBODY")
    assert code == 2 and "NOBODY" in err


def test_summaries_travel_in_the_bundle_and_older_bundles_still_import(stored, tmp_path, capsys, tmp_db):
    path = _three_days(tmp_path, START, (4, 0, 2))
    assert run(capsys, "sensor", str(path), "--patient", "SNS-0001")[0] == 0
    code, out, err = run(capsys, "export", "SNS-0001")
    assert code == 0, err
    bundle = json.loads(out)
    assert len(bundle["sensor_summaries"]) == 1
    assert bundle["sensor_summaries"][0]["summary"]["impacts"] == 6
    other = tmp_path / "other.db"
    (tmp_path / "b.json").write_text(out)
    code, out2, err = run(capsys, "import", str(tmp_path / "b.json"), "--db", str(other))
    assert code == 0, err
    assert json.loads(out2)["sensor_summaries"] == 1
    with open_store(str(other)) as store:
        assert store.export_patient("SNS-0001")["sensor_summaries"] == bundle["sensor_summaries"]
    # A bundle written before sensor summaries existed has no such key: it still imports.
    old = {k: v for k, v in bundle.items() if k != "sensor_summaries"}
    (tmp_path / "old.json").write_text(json.dumps(old))
    code, out3, err = run(capsys, "import", str(tmp_path / "old.json"), "--db", str(tmp_path / "third.db"))
    assert code == 0, err
    assert json.loads(out3)["sensor_summaries"] == 0


def test_a_store_at_revision_0002_opens_keeps_its_rows_and_takes_summaries(tmp_path):
    import sqlite3

    from test_store import _alembic_upgrade
    path = tmp_path / "old.db"
    _alembic_upgrade(path, "0002")
    record = parse_record({**PERSON, "patient_id": "OLD-S"})
    conn = sqlite3.connect(path)
    conn.execute("INSERT INTO people VALUES ('OLD-S', ?, '2025-01-01T00:00:00+00:00', '2025-01-01T00:00:00+00:00')",
                 (json.dumps(record.model_dump(mode="json")),))
    conn.commit()
    conn.close()
    with open_store(str(path)) as store:
        assert store.revision() == HEAD_REVISION
        assert store.get_patient("OLD-S") == record
        assert store.sensor_summaries("OLD-S") == []
        sid = store.add_sensor_summary("OLD-S", {"file": "x.csv", "days": [], "start": None, "end": None})
        assert store.sensor_summaries("OLD-S")[0]["sensor_summary_id"] == sid


def test_the_clinician_page_of_the_handout_shows_planned_against_delivered(stored, tmp_path, capsys):
    week = _week_with_impacts(stored, weak=True)
    monday = START + timedelta(days=7 * (week["week"] - 1))
    mon_plan = sum(x["impacts"] for x in week["sessions"] if x["day"] == 1)
    path = _three_days(tmp_path, monday, (mon_plan + 15, 0, 5))
    code, out, err = run(capsys, "sensor", str(path), "--patient", "SNS-0001", "--no-store")
    assert code == 0, err
    summary_file = tmp_path / "summary.json"
    summary_file.write_text(out)
    plan_file = tmp_path / "plan.json"
    plan_file.write_text(json.dumps(stored))
    html_out = tmp_path / "handout.html"
    code, _, err = run(capsys, "handout", str(plan_file), "--out", str(html_out), "--sensor", str(summary_file))
    assert code == 0, err
    doc = html_out.read_text()
    clinician = doc[doc.index('aria-label="Clinician page"'):]
    assert "Worn sensor: planned and delivered" in clinician and "sensor-chart" in clinician
    assert f"{monday.isoformat()}: planned {mon_plan}, delivered {mon_plan + 15}" in clinician
    assert "Beyond the plan inside a weak window" in clinician
    # Without --sensor the chart is absent; a recording of another person is refused.
    code, _, _ = run(capsys, "handout", str(plan_file), "--out", str(tmp_path / "plain.html"))
    assert "Worn sensor" not in (tmp_path / "plain.html").read_text()
    other = json.loads(out)
    other["patient_id"] = "SOMEONE-ELSE"
    (tmp_path / "other.json").write_text(json.dumps(other))
    code, _, err = run(capsys, "handout", str(plan_file), "--out", str(tmp_path / "x.html"), "--sensor",
                       str(tmp_path / "other.json"))
    assert code == 2 and "SNS-0001" in err
    pdf_out = tmp_path / "handout.pdf"
    code, _, err = run(capsys, "handout", str(plan_file), "--out", str(pdf_out), "--audience", "clinician",
                       "--sensor", str(summary_file))
    assert code == 0 and pdf_out.read_bytes()[:5] == b"%PDF-"


def test_a_wrist_recording_is_not_set_against_the_plan(stored, tmp_path, capsys):
    path = _three_days(tmp_path, START, (5, 0, 0))
    code, out, err = run(capsys, "sensor", str(path), "--patient", "SNS-0001", "--site", "wrist", "--no-store")
    assert code == 0, err
    s = json.loads(out)
    assert s["plan"] is None and s["days"][0]["osteogenic_index"] is None
    assert any("needs a recording at the hip" in n for n in s["notes"])


def test_the_table_shows_the_share_and_the_flags(stored, tmp_path, capsys):
    week = _week_with_impacts(stored, weak=True)
    monday = START + timedelta(days=7 * (week["week"] - 1))
    mon_plan = sum(x["impacts"] for x in week["sessions"] if x["day"] == 1)
    path = _three_days(tmp_path, monday, (mon_plan + 10, 0, 0))
    code, out, err = run(capsys, "sensor", str(path), "--patient", "SNS-0001", "--no-store", "--table")
    assert code == 0, err
    assert f"ATTENTION {monday.isoformat()}" in out and "planned impacts" in out
    assert "does not replace clinical judgment" in out
