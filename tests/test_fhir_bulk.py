"""Bulk FHIR R4 NDJSON -> the caseload CSV: the same rows as each person's Bundle read on its own.

Sources named beside the checks:
- HL7 FHIR R4, version 4.0.1 (2019): Bundle, MedicationStatement.medication[x] (a CodeableConcept or
  a Reference to a Medication, ``#id`` for a contained resource), Medication.code; the FHIR Bulk
  Data Access IG (HL7, 2021): one resource a line, ``Patient/id`` references, per-type files.
- LOINC 38264-8 (DXA hip T-score) and 38267-1 (DXA lumbar spine T-score), as listed with their long
  common names in the OHDSI THEMIS convention table "negative value_as_number" (ratified 2018);
  29463-7 body weight and 8302-2 body height from the FHIR R4 Vital Signs profile.
- ATC M05BX04 denosumab and H02AB06 prednisolone: WHO ATC/DDD Index (from memory, as marked in
  prescribe/data/fhir/medicines.csv).
Every person here is invented.
"""

from __future__ import annotations

import csv
import json
import random
import tempfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from prescribe.errors import InputError
from prescribe.fhir import codes as C
from prescribe.fhir.bulk import bulk_to_caseload
from prescribe.fhir.reader import read_bundle
from prescribe.fhir.writer import program_bundle
from prescribe.screening.batch_io import RECORD_COLUMNS, read_batch_csv, write_batch_csv

from test_fhir import AS_OF, _person_lines, _round_trip_plan, obs, v2_records


# ---------------------------------------------------------------------------
# The same people read in bulk and one Bundle at a time
# ---------------------------------------------------------------------------

def _as_bulk(bundle: dict) -> tuple[str, list[dict]]:
    """A person's Bundle as a bulk export gives it: ``Patient/id`` references instead of the
    Bundle's urn:uuid fullUrls; returns the Patient's id and the resources."""
    patient = next(e for e in bundle["entry"] if e["resource"]["resourceType"] == "Patient")
    urn, pid = patient["fullUrl"], patient["resource"]["id"]
    text = json.dumps([e["resource"] for e in bundle["entry"]]).replace(f'"{urn}"', f'"Patient/{pid}"')
    return pid, json.loads(text)


def _by_reference(resources: list[dict], medicines: dict[str, dict]) -> list[dict]:
    """Each MedicationStatement names its medicine by a reference to a shared Medication resource
    (one a code, in ``medicines``) instead of a CodeableConcept."""
    out = []
    for r in resources:
        concept = r.get("medicationCodeableConcept")
        if r["resourceType"] == "MedicationStatement" and concept:
            code = concept["coding"][0]["code"]
            med = medicines.setdefault(code, {"resourceType": "Medication", "id": f"med-{code}", "code": concept})
            r = {k: v for k, v in r.items() if k != "medicationCodeableConcept"}
            r["medicationReference"] = {"reference": f"Medication/{med['id']}"}
        out.append(r)
    return out


def _rows(path: Path) -> list[list[str]]:
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    assert rows[0] == list(RECORD_COLUMNS)
    return sorted(rows[1:])


def _compare(people: list[tuple[str, list[dict]]], medicines: list[dict], rng: random.Random,
             chunk_lines: int = 7, chunk_people: int = 3) -> tuple[dict, dict[str, dict[str, str]]]:
    """Read ``people`` one Bundle at a time and as one shuffled NDJSON export; assert the caseload
    rows and the people refused are the same; return the bulk summary and its rows by patient_id."""
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        records, refused = [], set()
        for pid, resources in people:
            bundle = {"resourceType": "Bundle", "type": "collection",
                      "entry": [{"resource": r} for r in [*resources, *medicines]]}
            try:
                records.append(read_bundle(bundle, as_of=AS_OF).record)
            except InputError:
                refused.add(f"Patient/{pid}")
        write_batch_csv(records, tmp / "single.csv", with_display_name=True)
        lines = [json.dumps(r) for _pid, resources in people for r in resources]
        lines += [json.dumps(m) for m in medicines]
        rng.shuffle(lines)                      # a person's resources anywhere in the file
        (tmp / "export.ndjson").write_text("\n".join(lines) + "\n")
        summary = bulk_to_caseload(tmp / "export.ndjson", tmp / "bulk.csv", as_of=AS_OF,
                                   chunk_lines=chunk_lines, chunk_people=chunk_people)
        assert summary.broken_count == 0, summary.broken_lines
        assert {p["person"] for p in summary.people_left_out} == refused
        assert _rows(tmp / "bulk.csv") == _rows(tmp / "single.csv")
        assert summary.written == len(records)
        with open(tmp / "bulk.csv", newline="", encoding="utf-8") as fh:
            rows = {row["patient_id"]: row for row in csv.DictReader(fh)}
        return summary.as_dict(), rows


COUNTS = {"examples": 0, "people": 0, "by_reference": 0, "medications": 0, "fractures": 0, "surgeries": 0,
          "cancer": 0, "glucocorticoids": 0, "z_scores": 0, "chunks_over_one": 0}


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(records=st.lists(v2_records(), min_size=1, max_size=6, unique_by=lambda r: r.patient_id),
       by_reference=st.booleans(), seed=st.integers(0, 2**32 - 1))
def test_a_bulk_export_gives_the_rows_of_each_bundle_read_on_its_own(records, by_reference, seed):
    """Random version-2 records, exported as Bundles, read back one Bundle at a time and as one
    shuffled NDJSON export (small chunks, so a person's lines land in several chunks): the same
    caseload rows, cell for cell; medicines named by reference to a Medication elsewhere in the
    export in half the examples."""
    plan = _round_trip_plan()
    medicines: dict[str, dict] = {}
    people = []
    for record in records:
        b = program_bundle(plan.model_copy(update={"patient_id": record.patient_id}), record, "Dr Invented",
                           as_of=AS_OF)
        pid, resources = _as_bulk(b)
        people.append((pid, _by_reference(resources, medicines) if by_reference else resources))
    _summary, rows = _compare(people, list(medicines.values()), random.Random(seed))
    # The medicines were read (by reference or not), not left out on both sides alike.
    assert sum(bool(row["medications"]) for row in rows.values()) == sum(bool(r.medications) for r in records)
    COUNTS["examples"] += 1
    COUNTS["people"] += len(records)
    COUNTS["by_reference"] += bool(by_reference and medicines)
    COUNTS["chunks_over_one"] += len(records) > 3
    for r in records:
        for key in ("medications", "fractures", "surgeries"):
            COUNTS[key] += bool(getattr(r, key))
        COUNTS["cancer"] += r.cancer is not None
        COUNTS["glucocorticoids"] += r.glucocorticoids is not None
        COUNTS["z_scores"] += any(v is not None for v in r.z_scores.model_dump().values())


def test_the_bulk_comparison_reached_every_kind_of_field():
    """The drawn exports reached each case often enough (the property runs here when run alone)."""
    if COUNTS["examples"] == 0:
        test_a_bulk_export_gives_the_rows_of_each_bundle_read_on_its_own()
    n = COUNTS["people"]
    assert COUNTS["examples"] >= 20 and n >= 40
    assert COUNTS["by_reference"] >= COUNTS["examples"] // 5
    assert COUNTS["chunks_over_one"] >= COUNTS["examples"] // 5
    for key in ("medications", "fractures", "surgeries", "cancer", "glucocorticoids", "z_scores"):
        assert COUNTS[key] >= n // 6, (key, COUNTS)


def test_people_refused_on_their_own_are_left_out_of_the_bulk_the_same_way():
    """Hand-made edge cases, each read one Bundle at a time and in bulk: a patient_id with spaces
    around it (the record refuses it; a caseload cell would be read stripped), a T-score outside the
    record's range, a missing body weight, a valueBoolean given as text, and a medicine named by a
    reference to a Medication elsewhere in the export."""
    people = [("p1", _person_lines(1)), ("p2", _person_lines(2))]
    spaced = _person_lines(3)
    spaced[0]["identifier"] = [{"value": " OAK-0003 "}]
    people.append(("p3", spaced))
    out_of_range = _person_lines(4)
    out_of_range.append(obs("t4x", "38267-1", -9.5, subject="Patient/p4"))   # T-score bounds: the record's
    people.append(("p4", out_of_range))
    people.append(("p5", [r for r in _person_lines(5) if r["id"] != "w5"]))   # no body weight
    text_bool = _person_lines(6)
    text_bool.append({"resourceType": "Observation", "id": "la6", "status": "final", "subject": {"reference": "Patient/p6"},
                      "code": {"coding": [{"system": C.LOCAL, "code": "lives-alone"}]}, "valueBoolean": "true"})
    people.append(("p6", text_bool))
    by_ref = _person_lines(7)
    by_ref.append({"resourceType": "MedicationStatement", "id": "ms7", "status": "active",
                   "subject": {"reference": "Patient/p7"}, "medicationReference": {"reference": "Medication/dmab"},
                   "effectivePeriod": {"start": "2025-12-05"}})
    people.append(("p7", by_ref))
    denosumab = {"resourceType": "Medication", "id": "dmab",
                 "code": {"coding": [{"system": C.ATC, "code": "M05BX04"}]}}     # ATC M05BX04: denosumab
    with pytest.raises(InputError) as exc:       # read on its own, p6's text is refused at its element
        read_bundle({"resourceType": "Bundle", "type": "collection", "entry": [{"resource": r} for r in text_bool]},
                    as_of=AS_OF)
    assert "Observation/la6.valueBoolean" in str(exc.value)
    people = [p for p in people if p[0] != "p6"]
    summary, rows = _compare(people, [denosumab], random.Random(7), chunk_lines=5, chunk_people=2)
    assert rows["OAK-0007"]["medications"] == "denosumab:12:"           # 2025-12-05 to 2026-12-05
    assert summary["written"] == 3        # p1, p2 and p7 (its medicine found by reference)
    why = {p["person"]: p["why"] for p in summary["people_left_out"]}
    assert "Patient/p3 (patient_id)" in why["Patient/p3"] and "OAK-0003" in why["Patient/p3"]
    assert "Observation/t4x (t_scores.lumbar_spine)" in why["Patient/p4"] and "-9.5" in why["Patient/p4"]
    assert "Observation 29463-7 (body weight) (body_mass_kg) is missing" in why["Patient/p5"]


def test_a_value_of_the_wrong_json_type_is_a_broken_line_in_bulk(tmp_path):
    """FHIR R4 valueBoolean is a JSON boolean: the text "true" names its line; the person's other
    lines are read."""
    lines = [json.dumps(r) for r in _person_lines(6)]
    lines.append(json.dumps({"resourceType": "Observation", "id": "la6", "status": "final",
                             "subject": {"reference": "Patient/p6"},
                             "code": {"coding": [{"system": C.LOCAL, "code": "lives-alone"}]}, "valueBoolean": "true"}))
    (tmp_path / "e.ndjson").write_text("\n".join(lines) + "\n")
    summary = bulk_to_caseload(tmp_path / "e.ndjson", tmp_path / "c.csv", as_of=AS_OF)
    assert summary.written == 1 and summary.broken_count == 1 and summary.broken_lines[0]["line"] == 5
    assert "Observation/la6.valueBoolean" in summary.broken_lines[0]["problem"]


# ---------------------------------------------------------------------------
# Bulk: NDJSON -> caseload CSV
# ---------------------------------------------------------------------------

def test_mixed_ndjson_becomes_the_caseload_csv_and_a_broken_line_is_named(tmp_path):
    lines = [json.dumps(r) for i in range(1, 41) for r in _person_lines(i)]
    lines.insert(17, '{"resourceType": "Observation", "id": "cut')        # a broken line: number 18
    lines.append(json.dumps(obs("orphan", "38267-1", -2.0, subject="Patient/nobody")))
    src = tmp_path / "export.ndjson"
    src.write_text("\n".join(lines) + "\n")
    out = tmp_path / "caseload.csv"
    summary = bulk_to_caseload(src, out, as_of=AS_OF, chunk_lines=7, chunk_people=6)
    assert summary.written == 40 and summary.broken_count == 1
    assert summary.broken_lines[0]["line"] == 18 and summary.broken_lines[0]["file"] == "export.ndjson"
    assert [p["person"] for p in summary.people_left_out] == ["Patient/nobody"]
    with open(out, newline="") as fh:
        header = next(csv.reader(fh))
    assert tuple(header) == RECORD_COLUMNS
    frame = read_batch_csv(out)  # the screening's own reader accepts it
    assert len(frame) == 40
    row = frame.set_index("patient_id").loc["OAK-0003"]
    assert row["t_score_total_hip"] == pytest.approx(-1.3) and row["sex"] == "female"


def test_a_bulk_folder_of_per_type_files(tmp_path):
    by_type: dict[str, list[str]] = {}
    for i in range(1, 11):
        for r in _person_lines(i):
            by_type.setdefault(r["resourceType"], []).append(json.dumps(r))
    by_type["Observation"].append(json.dumps(_person_lines(99)[0]))  # a Patient in the Observation file
    for rtype, lines in by_type.items():
        (tmp_path / f"{rtype}.ndjson").write_text("\n".join(lines) + "\n")
    out = tmp_path / "caseload.csv"
    summary = bulk_to_caseload(tmp_path, out, as_of=AS_OF)
    assert summary.written == 10
    assert summary.broken_count == 1 and "'Observation'" in summary.broken_lines[0]["problem"]
    assert summary.broken_lines[0]["file"] == "Observation.ndjson"


def test_a_medication_in_a_later_file_of_the_folder_is_found_and_a_missing_one_is_named(tmp_path):
    """Bulk Data IG: a folder with Medication.ndjson beside MedicationStatement.ndjson, and an
    Organization (about no one person: not used, not a broken line)."""
    people = [r for i in (1, 2) for r in _person_lines(i)]
    statements = [{"resourceType": "MedicationStatement", "id": f"ms{i}", "status": "active",
                   "subject": {"reference": f"Patient/p{i}"}, "effectivePeriod": {"start": "2025-12-05"},
                   "medicationReference": {"reference": ref}}
                  for i, ref in ((1, "Medication/dmab"), (2, "Medication/gone"))]
    files = {"Patient": [r for r in people if r["resourceType"] == "Patient"],
             "Observation": [r for r in people if r["resourceType"] == "Observation"],
             "MedicationStatement": statements,
             "Medication": [{"resourceType": "Medication", "id": "dmab",   # ATC M05BX04: denosumab
                             "code": {"coding": [{"system": C.ATC, "code": "M05BX04"}]}}],
             "Organization": [{"resourceType": "Organization", "id": "clinic", "name": "Invented Bone Clinic"}]}
    for rtype, resources in files.items():
        (tmp_path / f"{rtype}.ndjson").write_text("".join(json.dumps(r) + "\n" for r in resources))
    summary = bulk_to_caseload(tmp_path, tmp_path / "c.csv", as_of=AS_OF)
    assert summary.broken_count == 0 and summary.written == 2
    frame = read_batch_csv(tmp_path / "c.csv").set_index("patient_id")
    assert frame.loc["OAK-0001", "medications"] == "denosumab:12:"      # 2025-12-05 to 2026-12-05
    assert frame.loc["OAK-0002", "medications"] == ""
    assert summary.not_used == 2    # the unresolved reference (p2) and the Organization (about no one)


def test_a_referenced_medication_in_a_code_system_not_read_names_the_statements_line(tmp_path):
    lines = [json.dumps(r) for r in _person_lines(1)]
    lines.append(json.dumps({"resourceType": "MedicationStatement", "id": "ms1", "status": "active",
                             "subject": {"reference": "Patient/p1"}, "medicationReference": {"reference": "Medication/x"}}))
    lines.append(json.dumps({"resourceType": "Medication", "id": "x",     # a national product code (invented)
                             "code": {"coding": [{"system": "http://example.invalid/product", "code": "123"}]}}))
    (tmp_path / "e.ndjson").write_text("\n".join(lines) + "\n")
    summary = bulk_to_caseload(tmp_path / "e.ndjson", tmp_path / "c.csv", as_of=AS_OF)
    assert summary.written == 1 and summary.broken_count == 1
    broken = summary.broken_lines[0]
    assert broken["line"] == 5 and "MedicationStatement/ms1.medicationReference (Medication/x.code).coding" \
        in broken["problem"] and "http://example.invalid/product|123" in broken["problem"]


def test_a_byte_order_mark_opening_a_file_is_not_a_broken_line(tmp_path):
    """A UTF-8 byte-order mark (Unicode 15.0, section 23.8) some Windows tools write at a file's start."""
    for i in (1, 2):
        text = "".join(json.dumps(r) + "\n" for r in _person_lines(i))
        (tmp_path / f"part{i}.ndjson").write_bytes(b"\xef\xbb\xbf" + text.encode("utf-8"))
    summary = bulk_to_caseload(tmp_path, tmp_path / "c.csv", as_of=AS_OF)
    assert summary.broken_count == 0 and summary.written == 2


def test_ten_megabytes_of_ndjson_with_one_broken_line(tmp_path):
    src = tmp_path / "big.ndjson"
    n = 0
    with open(src, "w") as fh:
        i = 0
        while fh.tell() < 10 * 1024 * 1024:
            i += 1
            for r in _person_lines(i):
                n += 1
                fh.write(json.dumps(r) + "\n")
                if n == 5000:
                    fh.write('{"resourceType": "Patient", "id": \n')  # line 5001
                    n += 1
    summary = bulk_to_caseload(src, tmp_path / "c.csv", as_of=AS_OF)
    assert src.stat().st_size >= 10 * 1024 * 1024
    assert summary.broken_count == 1 and summary.broken_lines[0]["line"] == 5001
    assert summary.written == i
