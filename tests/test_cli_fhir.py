"""``prescribe fhir import|export`` through the real entry point (HL7 FHIR R4 4.0.1; invented people).

LOINC 29463-7 (body weight) and 8302-2 (body height): the FHIR R4 Vital Signs profile; 38267-1
(DXA lumbar spine T-score): OHDSI THEMIS table of LOINC long common names (2018).
"""

from __future__ import annotations

import base64
import json

from test_fhir import PID, bundle, obs


def _write(tmp_path, name, data) -> str:
    path = tmp_path / name
    path.write_text(json.dumps(data) if not isinstance(data, str) else data)
    return str(path)


def test_import_prints_the_record_and_the_provenance_on_stderr(cli, tmp_path):
    src = _write(tmp_path, "b.json", bundle(obs("t", "38267-1", -2.6)))
    r = cli("fhir", "import", src, "--as-of", "2026-12-05")
    assert r.returncode == 0, r.stderr
    record = json.loads(r.stdout)
    assert record["age_years"] == 75 and record["t_scores"]["lumbar_spine"] == -2.6
    report = json.loads(r.stderr.strip().splitlines()[-1])["fhir_import"]
    assert {"field": "t_scores.lumbar_spine", "resource": "Observation/t"}.items() <= \
        next(p for p in report["provenance"] if p["field"] == "t_scores.lumbar_spine").items()


def test_import_writes_a_patient_file_the_other_commands_read(cli, tmp_path):
    src = _write(tmp_path, "b.json", bundle())
    out = tmp_path / "person.json"
    r = cli("fhir", "import", src, "--out", str(out), "--as-of", "2026-12-05")
    assert r.returncode == 0, r.stderr
    screened = cli("screen", str(out))
    assert screened.returncode == 0, screened.stderr
    assert json.loads(screened.stdout)["patient_id"] == "OAK-101"


def test_bad_input_exits_2_naming_the_field(cli, tmp_path):
    b = bundle()
    del b["entry"][0]["resource"]["birthDate"]
    r = cli("fhir", "import", _write(tmp_path, "nobirth.json", b))
    assert r.returncode == 2 and "Patient.birthDate (age_years) is missing" in r.stderr
    r = cli("fhir", "import", _write(tmp_path, "notfhir.json", {"hello": "world"}))
    assert r.returncode == 2 and "resourceType" in r.stderr and "Traceback" not in r.stderr
    r5 = bundle()
    r5["meta"] = {"fhirVersion": "5.0.0"}
    r = cli("fhir", "import", _write(tmp_path, "r5.json", r5))
    assert r.returncode == 2 and "5.0.0" in r.stderr and "R4" in r.stderr
    r = cli("fhir", "import", _write(tmp_path, "broken.json", '{"resourceType": "Bundle", '))
    assert r.returncode == 2 and "line 1" in r.stderr
    dup = json.dumps(bundle()).replace('"birthDate": "1951-03-09"', '"birthDate": "1951-03-09", "birthDate": "1950-01-01"')
    r = cli("fhir", "import", _write(tmp_path, "dup.json", dup))
    assert r.returncode == 2 and "'birthDate' given twice" in r.stderr


def test_bulk_import_writes_the_caseload_that_screen_batch_reads(cli, tmp_path):
    from test_fhir import _person_lines
    lines = [json.dumps(r) for i in range(1, 6) for r in _person_lines(i)]
    lines.insert(3, "not json at all")
    src = _write(tmp_path, "export.ndjson", "\n".join(lines) + "\n")
    out = tmp_path / "caseload.csv"
    r = cli("fhir", "import", src, "--out", str(out), "--as-of", "2026-12-05")
    assert r.returncode == 2, r.stderr          # bad input named; everyone else written
    summary = json.loads(r.stdout)
    assert summary["written"] == 5 and summary["broken_lines"][0]["line"] == 4
    assert "export.ndjson line 4 not read" in r.stderr and "5 written" in r.stderr
    screened = cli("screen", "--batch", str(out), "--out", str(tmp_path / "results.csv"))
    assert screened.returncode == 0, screened.stderr
    r = cli("fhir", "import", src, "--out", str(tmp_path / "x.json"))
    assert r.returncode == 2 and "--out" in r.stderr and "CASELOAD.csv" in r.stderr


def test_export_of_a_saved_program_with_the_handout(cli, tmp_path):
    import sys
    sys.path.insert(0, str(__import__("pathlib").Path(__file__).parent))
    from handout_fixtures import DEMO_RECORD, planner_plan
    from prescribe.records import parse_record
    from prescribe.screening import screen
    from prescribe.store import open_store

    db = str(tmp_path / "s.db")
    record = parse_record(DEMO_RECORD)
    with open_store(db) as store:
        store.save_patient(record, screen(record), "Dr Invented", based_on_version=0)
        store.save_program(record.patient_id, planner_plan(8).model_dump(mode="json"), "Dr Invented", None)
    out = tmp_path / "bundle.json"
    r = cli("fhir", "export", record.patient_id, "--db", db, "--out", str(out), "--with-handout",
            "--clinician", "Dr Invented", env={"JUPYTERHUB_USER": ""})
    assert r.returncode == 0, r.stderr
    b = json.loads(out.read_text())
    doc = next(e["resource"] for e in b["entry"] if e["resource"]["resourceType"] == "DocumentReference")
    assert base64.b64decode(doc["content"][0]["attachment"]["data"]).startswith(b"%PDF")
    prov = next(e["resource"] for e in b["entry"] if e["resource"]["resourceType"] == "Provenance")
    assert prov["agent"][0]["who"]["display"] == "Dr Invented"
    back = cli("fhir", "import", str(out))
    assert back.returncode == 0, back.stderr
    got = json.loads(back.stdout)
    assert (got["patient_id"], got["age_years"], got["body_mass_kg"]) == (
        record.patient_id, record.age_years, record.body_mass_kg)
    r = cli("fhir", "export", "NOBODY-1", "--db", db)
    assert r.returncode != 0 and "NOBODY-1" in r.stderr


def test_each_bad_bundle_exits_2_naming_the_problem(cli, tmp_path):
    """The bad-input cases of a Bundle, through the entry point (HL7 FHIR R4 4.0.1)."""
    cases = {
        # not FHIR: no resourceType
        "notfhir.json": ({"entry": [{"resource": {"id": "p1"}}]}, ["resourceType", "not FHIR"]),
        # the wrong FHIR version: an R5 resource type (MedicationUsage replaced MedicationStatement)
        "r5type.json": ({**bundle(), "entry": bundle()["entry"] + [{"resource": {
            "resourceType": "MedicationUsage", "id": "u", "status": "recorded"}}]},
            ["MedicationUsage is a FHIR R5 resource", "R4 (4.0.1)"]),
        # a resource of the wrong type: a lone Patient instead of a Bundle
        "patient.json": ({"resourceType": "Patient", "id": "p1", "gender": "female"},
                         ["resourceType must be 'Bundle'", "'Patient'"]),
        # a code system no mapping reads (UK Read v2, from memory)
        "readv2.json": (bundle({"resourceType": "Condition", "id": "r", "subject": {"reference": PID},
                                "code": {"coding": [{"system": "http://read.info/readv2", "code": "N331."}]}}),
                        ["Condition/r.code.coding", "http://read.info/readv2|N331."]),
        # two Patient resources for the person that disagree on the birth date
        "twobirths.json": (bundle({"resourceType": "Patient", "id": "p1", "identifier": [{"value": "OAK-101"}],
                                   "birthDate": "1952-03-09", "gender": "female"}),
                           ["Patient.birthDate (age_years)", "1951-03-09", "1952-03-09"]),
    }
    for name, (data, words) in cases.items():
        r = cli("fhir", "import", _write(tmp_path, name, data), "--as-of", "2026-12-05")
        assert r.returncode == 2, (name, r.stderr)
        assert all(w in r.stderr for w in words), (name, r.stderr)
        assert "Traceback" not in r.stderr and r.stdout == "", name


def test_ten_megabytes_of_ndjson_with_one_broken_line_exits_2_naming_it(cli, tmp_path):
    from test_fhir import _person_lines
    src = tmp_path / "big.ndjson"
    people = 0
    with open(src, "w") as fh:
        while fh.tell() < 10 * 1024 * 1024:
            people += 1
            for r in _person_lines(people):
                fh.write(json.dumps(r) + "\n")
            if people == 1000:
                fh.write('{"resourceType": "Observation", "id": "cut\n')    # line 4001
    out = tmp_path / "caseload.csv"
    r = cli("fhir", "import", str(src), "--out", str(out), "--as-of", "2026-12-05")
    assert r.returncode == 2
    assert "big.ndjson line 4001 not read" in r.stderr and f"{people} written" in r.stderr
    summary = json.loads(r.stdout)
    assert summary["broken_line_count"] == 1 and summary["written"] == people
    assert sum(1 for _ in open(out, encoding="utf-8")) == people + 1      # the rest was read: header + everyone
