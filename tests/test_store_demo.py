"""The demo seed: invented people, screened, stored once however often it runs."""

from __future__ import annotations

import json

from prescribe.demo import DEMO_CLINIC, DEMO_CLINICIAN, DEMO_RECORDS, main, seed
from prescribe.records import parse_record
from prescribe.screening import screen
from prescribe.store import open_store


def test_demo_records_are_valid_varied_and_pseudonymous():
    records = [parse_record(d) for d in DEMO_RECORDS]
    assert [r.patient_id for r in records] == [f"DEMO-{i:04d}" for i in range(1, 6)]
    assert "(demo)" in DEMO_CLINIC.name and "555-01" in DEMO_CLINIC.contact and "invented" in DEMO_CLINICIAN
    results = {r.patient_id: screen(r) for r in records}
    # WHO categories from the lowest T-score (WHO Study Group 1994, Technical Report Series 843):
    # -1.9 is osteopenia; -3.1 with a fragility fracture is severe (established) osteoporosis.
    assert results["DEMO-0001"].bone_density_category == "osteopenia"
    assert results["DEMO-0002"].bone_density_category == "severe_osteoporosis"
    assert any(f.rule.startswith("fractures.vertebral") for f in results["DEMO-0002"].flags)
    # Two falls in a year and a Timed Up and Go of 14 s (at risk from 12 s: CDC STEADI TUG form).
    assert results["DEMO-0003"].falls_risk and not results["DEMO-0001"].falls_risk
    # 7.5 mg/day prednisolone for 18 months: more than 3 months at 5 mg/day or more (Kanis et al. 2011,
    # Osteoporos Int 22:809-816) is a glucocorticoid risk.
    assert any("glucocorticoid" in f.rule for f in results["DEMO-0004"].flags)
    assert {"knee_osteoarthritis", "pelvic_floor_dysfunction"} <= set(records[4].conditions)


def test_seeding_twice_adds_nothing_twice(tmp_path):
    with open_store(str(tmp_path / "demo.db")) as store:
        first = seed(store)
        assert [p["person"] for p in first] == ["created"] * 5
        audit_after_first = len(store.audit())
        second = seed(store)
        assert [p["person"] for p in second] == ["already present"] * 5
        assert len(store.audit()) == audit_after_first
        people = store.list_patients()
        assert sorted(p["patient_id"] for p in people) == [d["patient_id"] for d in DEMO_RECORDS]
        for person in people:
            assert len(store.screenings(person["patient_id"])) == 1
            versions = store.program_versions(person["patient_id"])
            planned = next(p for p in first if p["patient_id"] == person["patient_id"])
            if planned.get("program") == "created":
                assert [(v["version"], v["clinician"]) for v in versions] == [(1, DEMO_CLINICIAN)]
                plan = store.get_program(person["patient_id"])
                assert plan.patient_id == person["patient_id"] and plan.cautions


def test_demo_command_prints_json_with_cautions(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("PRESCRIBE_DB", str(tmp_path / "demo.db"))
    assert main([]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["clinic"]["name"] == DEMO_CLINIC.name and len(out["people"]) == 5
    assert any("invented" in c for c in out["cautions"])
    assert main([]) == 0


def test_demo_refuses_a_foreign_file_cleanly(tmp_path, capsys):
    bad = tmp_path / "bad.db"
    bad.write_bytes(b"not a database at all" * 100)
    assert main(["--db", str(bad)]) == 1
    assert "not a prescribe store" in capsys.readouterr().err
