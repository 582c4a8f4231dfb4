"""The one strict JSON reader (prescribe.fileio) and the caseload CSV's guard against formulas."""

from __future__ import annotations

import csv
import json

import pytest

from prescribe import fileio
from prescribe.screening.batch_io import (from_spreadsheet_text, read_batch_csv, spreadsheet_text, write_batch_csv,
                                          write_results_csv)
from prescribe.errors import InputError
from prescribe.records import parse_record
from prescribe.screening import screen_batch

RECORD = {"patient_id": "NTC-7001", "age_years": 66, "sex": "female", "body_mass_kg": 61.0,
          "height_cm": 158.0, "t_scores": {"lumbar_spine": -2.5}}


# ------------------------------------------------------------------ duplicated keys
def test_a_key_given_twice_is_refused_naming_the_key(tmp_path):
    # Python's json would keep the later value silently; the clinician may have read the first.
    path = tmp_path / "p.json"
    path.write_text('{"patient_id": "NTC-1", "pain_score": 2, "age_years": 70, "pain_score": 8}', encoding="utf-8")
    with pytest.raises(InputError) as err:
        fileio.read_json_file(path, "patient record file")
    text = str(err.value)
    assert "'pain_score' given twice" in text and "patient record file" in text and str(path) in text


def test_a_key_given_twice_deep_inside_is_refused():
    text = json.dumps({"weeks": [{"week": 1, "sessions": []}]}).replace('"week": 1', '"week": 1, "week": 2')
    with pytest.raises(InputError, match="'week' given twice"):
        fileio.parse_json_text(text, "PLAN.json")


def test_the_same_key_in_two_objects_is_fine():
    assert fileio.parse_json_text('[{"a": 1}, {"a": 2}]') == [{"a": 1}, {"a": 2}]


# ------------------------------------------------------------------ depth and size
def test_nesting_past_the_documented_depth_is_bad_input():
    ok = "[" * fileio.JSON_MAX_DEPTH + "]" * fileio.JSON_MAX_DEPTH
    assert fileio.parse_json_text(ok) is not None
    deeper = "[" * (fileio.JSON_MAX_DEPTH + 1) + "]" * (fileio.JSON_MAX_DEPTH + 1)
    with pytest.raises(InputError, match=f"at most {fileio.JSON_MAX_DEPTH} levels"):
        fileio.parse_json_text(deeper)


def test_nesting_past_the_interpreter_recursion_limit_is_bad_input_too():
    very = '{"a": ' * 200_000 + "1" + "}" * 200_000
    with pytest.raises(InputError, match="nested"):
        fileio.parse_json_text(very, "bundle file")


def test_a_file_over_the_size_cap_is_refused_before_it_is_read(tmp_path):
    path = tmp_path / "huge.json"
    with path.open("wb") as fh:                 # a sparse file: large on paper, nothing on disk
        fh.truncate(fileio.JSON_MAX_BYTES + 1)
    with pytest.raises(InputError, match=f"at most {fileio.JSON_MAX_BYTES} bytes"):
        fileio.read_json_file(path, "PLAN.json")


def test_a_file_at_the_size_cap_is_read(tmp_path):
    path = tmp_path / "p.json"
    path.write_text(json.dumps(RECORD), encoding="utf-8")
    assert fileio.read_json_file(path, max_bytes=path.stat().st_size) == RECORD
    with pytest.raises(InputError):
        fileio.read_json_file(path, max_bytes=path.stat().st_size - 1)


def test_batch_csv_over_its_cap_is_refused(tmp_path, monkeypatch):
    path = tmp_path / "in.csv"
    path.write_text("patient_id,age_years,sex,body_mass_kg,height_cm\nNTC-1,70,female,60,160\n", encoding="utf-8")
    monkeypatch.setattr("prescribe.screening.batch_io.CSV_MAX_BYTES", 10)
    with pytest.raises(InputError, match="at most 10 bytes"):
        read_batch_csv(path)


# ------------------------------------------------------------------ spreadsheet formulas
# OWASP Foundation, "CSV Injection": a cell starting with = + - @, tab or carriage return
# is read as a formula by spreadsheets; prefix it with a single quote so it shows as text.
@pytest.mark.parametrize("cell", ["=HYPERLINK(\"http://x\")", "+1+1", "-2+3", "@SUM(A1)", "\tx", "\rx"])
def test_formula_cells_are_marked_as_text_and_read_back_exactly(cell):
    guarded = spreadsheet_text(cell)
    assert guarded == "'" + cell
    assert from_spreadsheet_text(guarded) == cell


@pytest.mark.parametrize("cell", ["-2.5", "+3", "-1e3", "NTC-0001", "vertebra:14:y", "", "'plain"])
def test_numbers_and_ordinary_text_are_left_alone(cell):
    assert spreadsheet_text(cell) == cell
    assert from_spreadsheet_text(cell) == cell


def test_a_cell_that_already_starts_with_the_mark_round_trips():
    for cell in ("'=1", "''x"):
        assert from_spreadsheet_text(spreadsheet_text(cell)) == cell


def test_caseload_and_results_files_never_start_a_cell_with_a_formula(tmp_path):
    evil = parse_record({**RECORD, "patient_id": "=cmd|'/c calc'!A1"})
    plain = parse_record({**RECORD, "patient_id": "NTC-7002", "t_scores": {"lumbar_spine": -2.7}})
    caseload, results = tmp_path / "caseload.csv", tmp_path / "results.csv"
    write_batch_csv([evil, plain], caseload)
    rows = list(csv.DictReader(caseload.open(encoding="utf-8")))
    assert rows[0]["patient_id"] == "'=cmd|'/c calc'!A1"
    assert rows[1]["t_score_lumbar_spine"] == "-2.7"          # a number stays a number
    frame = read_batch_csv(caseload)                          # and reads back as the same person
    assert frame["patient_id"].tolist() == ["=cmd|'/c calc'!A1", "NTC-7002"]
    write_results_csv(screen_batch(frame), results)
    out = list(csv.DictReader(results.open(encoding="utf-8")))
    assert out[0]["patient_id"] == "'=cmd|'/c calc'!A1"
    assert out[1]["lowest_t_score"] == "-2.7"
    for row in out:
        assert all(not v or v[0] not in "=+@\t\r" for v in row.values())


# ------------------------------------------------------------------ a byte-order mark
BOM = "\ufeff"


def test_a_json_file_with_a_byte_order_mark_reads(tmp_path):
    # Windows editors save "UTF-8 with BOM"; the mark is not part of the data.
    path = tmp_path / "record.json"
    path.write_text(BOM + '{"patient_id": "NTC-0100"}', encoding="utf-8")
    assert fileio.read_json_file(path, "record") == {"patient_id": "NTC-0100"}
    assert fileio.read_text_file(path, "record").startswith("{")


def test_every_input_file_with_a_byte_order_mark_reads_at_the_command_line(tmp_path, capsys, monkeypatch):
    from pathlib import Path

    from prescribe.cli import main
    from prescribe.plan_schema import parse_plan

    monkeypatch.setenv("PRESCRIBE_DB", str(tmp_path / "store.db"))
    person = Path(__file__).parent / "data" / "patients" / "NTC-0012.json"

    def bom(name: str, text: str):
        path = tmp_path / name
        path.write_bytes((BOM + text).encode("utf-8"))
        return str(path)

    def ok(*args):
        capsys.readouterr()
        code = main(list(args))
        out, err = capsys.readouterr()
        assert code == 0, err
        return out

    record = bom("person.json", person.read_text(encoding="utf-8"))
    assert json.loads(ok("screen", record))["patient_id"] == "NTC-0012"                  # a record
    plan = bom("plan.json", ok("plan", record, "--weeks", "8", "--start-date", "2026-03-02"))
    assert parse_plan(json.loads(open(plan, encoding="utf-8-sig").read())).patient_id == "NTC-0012"
    ok("handout", plan, "--out", str(tmp_path / "h.html"))                                 # a plan
    assert "NTC-0012" in (tmp_path / "h.html").read_text(encoding="utf-8")
    ok("save", record, "--plan", plan)
    session = bom("session.json", json.dumps({"patient_id": "NTC-0012", "session_date": "2026-03-03",
                                              "pain_during": 0}))
    assert json.loads(ok("session", "add", session))["week"] == 1                          # a session
    header = "patient_id,age_years,sex,body_mass_kg,height_cm,t_score_lumbar_spine\n"
    batch = bom("in.csv", header + "NTC-0200,66,female,60,160,-2.6\n")
    ok("screen", "--batch", batch, "--out", str(tmp_path / "out.csv"))                     # a batch CSV
    assert "NTC-0200" in (tmp_path / "out.csv").read_text(encoding="utf-8")
    shipped = Path(fileio.__file__).parent / "data" / "templates" / "standard.toml"
    template = bom("draft.toml", shipped.read_text(encoding="utf-8"))
    ok("template", "check", template, "--random", "1")                                     # a template
