"""The caseload CSV: reading validates every row, bad files name the row and column, and
results are written whole or not at all."""

from __future__ import annotations

import csv

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from prescribe.screening.batch_io import (RECORD_COLUMNS, RECORD_V1_COLUMNS, format_fractures, fracture_columns, frame_to_records,
                                          parse_fractures, read_batch_csv, record_to_row, records_to_frame,
                                          write_batch_csv, write_results_csv)
from prescribe.errors import InputError
from prescribe.records import load_record
from prescribe.screening import RESULT_COLUMNS, results_from_frame, screen, screen_batch

#: A first-stage caseload (version-1 columns only): it reads as it did.
HEADER = ",".join(RECORD_V1_COLUMNS)
ROW_OK = "NTC-0100,72,female,61.5,158,-2.7,-2.1,,vertebra:14:y;wrist:60:n,1,12.5,9,8,5,6,knee_osteoarthritis;thoracic_kyphosis,2"


def write(tmp_path, *lines, name="in.csv"):
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def test_reads_a_full_row(tmp_path):
    df = read_batch_csv(write(tmp_path, HEADER, ROW_OK))
    [rec] = frame_to_records(df)
    assert rec.patient_id == "NTC-0100" and rec.age_years == 72
    assert rec.t_scores.lumbar_spine == -2.7 and rec.t_scores.total_hip is None
    assert [(f.site, f.months_ago, f.low_trauma) for f in rec.fractures] == [("vertebra", 14, True),
                                                                             ("wrist", 60, False)]
    assert rec.glucocorticoids.mg_per_day == 5 and rec.glucocorticoids.months == 6
    assert rec.conditions == ["knee_osteoarthritis", "thoracic_kyphosis"]


def test_optional_columns_may_be_left_out_and_empty_cells_are_absent(tmp_path):
    df = read_batch_csv(write(tmp_path, "patient_id,age_years,sex,body_mass_kg,height_cm,pain_score",
                              "NTC-0101,64,male,80,175,"))
    [rec] = frame_to_records(df)
    assert rec.pain_score == 0 and rec.fractures == [] and rec.t_scores.lowest() is None


def test_patient_files_round_trip_through_csv(tmp_path):
    records = [load_record(p) for p in sorted((__import__("pathlib").Path(__file__).parent /
                                               "data" / "patients").glob("*.json"))]
    assert len(records) >= 5
    path = tmp_path / "caseload.csv"
    write_batch_csv(records, path)
    assert frame_to_records(read_batch_csv(path)) == records


def test_fracture_cell_format():
    assert parse_fractures("vertebra:14:y;wrist:60.5:n") == [("vertebra", 14.0, True, None), ("wrist", 60.5, False, None)]
    assert parse_fractures("") == [] and parse_fractures("  ") == []
    assert format_fractures([{"site": "hip", "months_ago": 2.0, "low_trauma": True},
                             {"site": "rib", "months_ago": 0.25, "low_trauma": False}]) == "hip:2:y;rib:0.25:n"
    # A vertebra may name its level as a fourth part; the record checks the level itself.
    assert parse_fractures("vertebra:12:y:T12; vertebra:3:n: ") == [("vertebra", 12.0, True, "T12"),
                                                                      ("vertebra", 3.0, False, None)]
    assert format_fractures([{"site": "vertebra", "months_ago": 12.0, "low_trauma": True, "level": "T12"},
                             ("wrist", 3.0, False)]) == "vertebra:12:y:T12;wrist:3:n"
    for bad in ("vertebra:14", "knee:3:y", "hip:soon:y", "hip:3:maybe", "hip:-1:y", "hip:nan:y", "vertebra:1:y:T1:x"):
        with pytest.raises(ValueError):
            parse_fractures(bad)


def _item_parser_figures(cells):
    """The per-person fracture figures worked out with the item parser, one cell at a time."""
    count, vert, lt_hip, hip, last = [], [], [], [], []
    for text in cells:
        items = parse_fractures(text)
        count.append(float(sum(f.low_trauma for f in items)))
        vert.append(any(f.low_trauma and f.site == "vertebra" for f in items))
        lt_hip.append(any(f.low_trauma and f.site == "hip" for f in items))
        hip.append(any(f.site == "hip" for f in items))
        last.append(min((f.months_ago for f in items), default=np.nan))
    return [np.array(count), np.array(vert, dtype=bool), np.array(lt_hip, dtype=bool),
            np.array(hip, dtype=bool), np.array(last)]


def _column_parser_figures(cells):
    columns, normal, reasons = fracture_columns(cells)
    assert reasons == {}
    assert list(normal) == [format_fractures(parse_fractures(c)) for c in cells]
    return [columns.low_trauma_count, columns.low_trauma_vertebral, columns.low_trauma_hip, columns.hip,
            columns.months_since_last]


@pytest.mark.parametrize("cells", [
    ["", "vertebra:14:y;wrist:60:n", "hip:2.5:n", "vertebra:0.00001:y;vertebra:3:y", "other:0:n;rib:.5:y"],
    ["", ""], ["pelvis:1200:y"], ["humerus:0.1:n;humerus:0.3:y;hip:007.250:n", "rib:1.:y"],
    ["other:1199.99999999999:n;wrist:0.00000000000001:y"],
])
def test_column_fracture_parser_agrees_with_the_item_parser(cells):
    for a, b in zip(_column_parser_figures(cells), _item_parser_figures(cells)):
        assert a.dtype == b.dtype
        assert np.array_equal(a, b, equal_nan=True)


_SITES = st.sampled_from(["vertebra", "hip", "wrist", "humerus", "pelvis", "rib", "other"])


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.tuples(_SITES, st.integers(0, 120_000).map(lambda c: c / 100), st.booleans()),
                         max_size=4), max_size=8))
def test_column_fracture_parser_agrees_on_plain_cells(cell_items):
    # Months with at most two decimals, as a clinic writes them.
    cells = [format_fractures({"site": s, "months_ago": m, "low_trauma": lt} for s, m, lt in items)
             for items in cell_items]
    for a, b in zip(_column_parser_figures(cells), _item_parser_figures(cells)):
        assert np.array_equal(a, b, equal_nan=True)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.lists(st.tuples(_SITES, st.floats(0, 1200, allow_nan=False, allow_infinity=False),
                                   st.booleans(), st.sampled_from(["{}", " {} ", "{}  "]),
                                   st.sampled_from([repr, lambda m: f"{m:e}", lambda m: f"{m:.20f}", str])),
                         max_size=4), max_size=8))
def test_column_fracture_parser_agrees_on_unusual_but_valid_numbers(cell_items):
    # Exponents, 20 decimals, spaces around items and parts: valid, and read exactly as float() reads them.
    cells = [";".join(pad.format(f"{s}: {fmt(m)} :{'y' if lt else 'n'}") for s, m, lt, pad, fmt in items)
             for items in cell_items]
    for a, b in zip(_column_parser_figures(cells), _item_parser_figures(cells)):
        assert np.array_equal(a, b, equal_nan=True)


@pytest.mark.parametrize("cell", ["hip:1e-05:y", "hip:0.30000000000000004:y", " hip:3:y", "hip: 1_0 :n"])
def test_column_fracture_parser_takes_unusual_valid_cells(cell):
    # These went to a slower parser before; now the one column parser reads them like the item parser.
    cells = ["wrist:3:n", cell]
    for a, b in zip(_column_parser_figures(cells), _item_parser_figures(cells)):
        assert np.array_equal(a, b, equal_nan=True)


@pytest.mark.parametrize("cell", ["hip:3:x", "hip:3:y;", "knee:3:y", "hip:3", "hip::y", "hip:1.2.3:y",
                                  "hip:1201:y", "hip:-1:y", "hip:nan:y", "hip:inf:y"])
def test_column_fracture_parser_names_each_bad_cell_with_the_item_parsers_reason(cell):
    columns, normal, reasons = fracture_columns(["wrist:3:n", cell, "", cell])
    with pytest.raises(ValueError) as caught:
        parse_fractures(cell)
    assert reasons == {1: str(caught.value), 3: str(caught.value)}
    assert list(normal) == ["wrist:3:n", "", "", ""]
    assert list(columns.low_trauma_count) == [0.0, 0.0, 0.0, 0.0]


def test_bulk_fracture_parser_hands_unusual_cells_to_the_item_parser():
    # A frame handed straight to the screening: a bad fracture cell is bad input naming the cell.
    with pytest.raises(InputError, match="fractures") as caught:
        screen_batch(pd.DataFrame({"patient_id": ["A"], "age_years": [70], "sex": ["female"],
                                   "body_mass_kg": [60.0], "height_cm": [160.0], "fractures": ["knee:3:y"]}))
    assert "unknown site 'knee'" in str(caught.value) and "'knee:3:y'" in str(caught.value)


# --- bad rows: the field names the row (numbered from 1 under the header) and the column ----------

@pytest.mark.parametrize("row, field, words", [
    ("NTC-0007,12,female,60,160,,,,,,,,,,,,", "row 1 (patient_id NTC-0007): age_years", "from 18 to 110"),
    ("NTC-0007,seventy,female,60,160,,,,,,,,,,,,", "row 1 (patient_id NTC-0007): age_years", "a whole number"),
    ("NTC-0007,70,woman,60,160,,,,,,,,,,,,", "row 1 (patient_id NTC-0007): sex", "'female', 'male'"),
    ("NTC-0007,70,female,60,160,-9,,,,,,,,,,,", "row 1 (patient_id NTC-0007): t_score_lumbar_spine", "from -7 to 5"),
    ("NTC-0007,70,female,60,160,,,,knee:3:y,,,,,,,,", "row 1 (patient_id NTC-0007): fractures", "unknown site 'knee'"),
    ("NTC-0007,70,female,60,160,,,,,,,,,,,gout,", "row 1 (patient_id NTC-0007): conditions", "condition codes"),
    ("NTC-0007,70,female,60,160,,,,,,,,,5,,,", "row 1 (patient_id NTC-0007): glucocorticoids_months", "is given"),
    ("NTC-0007,70,female,60,160,,,,,,,,11,,,,", "row 1 (patient_id NTC-0007): tandem_stance_s", "from 0 to 10"),
    ("NTC-0007,70,female,60,160,,,,,,,,,,,,11", "row 1 (patient_id NTC-0007): pain_score", "from 0 to 10"),
    (",70,female,60,160,,,,,,,,,,,,", "row 1: patient_id", "required"),
])
def test_bad_row_names_row_and_column(tmp_path, row, field, words):
    with pytest.raises(InputError) as caught:
        read_batch_csv(write(tmp_path, HEADER, row))
    [problem] = caught.value.problems
    assert problem.field == field
    assert words in problem.message


def test_every_bad_row_is_reported_at_once(tmp_path):
    good = ROW_OK
    with pytest.raises(InputError) as caught:
        read_batch_csv(write(tmp_path, HEADER, good, good.replace("NTC-0100", "NTC-0102").replace(",72,", ",17,"),
                             good.replace("NTC-0100", "NTC-0103").replace("female", "f")))
    fields = [p.field for p in caught.value.problems]
    assert fields == ["row 2 (patient_id NTC-0102): age_years", "row 3 (patient_id NTC-0103): sex"]


def test_duplicate_patient_ids_are_refused(tmp_path):
    with pytest.raises(InputError, match=r"row 2 \(patient_id NTC-0100\): patient_id.*row 1 has it"):
        read_batch_csv(write(tmp_path, HEADER, ROW_OK, ROW_OK))


@pytest.mark.parametrize("lines, words", [
    (["patient_id,age_years,sex,body_mass_kg", "A,70,female,60"], "column height_cm is required"),
    ([HEADER + ",shoe_size", ROW_OK + ",38"], "column shoe_size is not a field here"),
    ([HEADER.replace("sex", "age_years"), ROW_OK], "each column once"),
    ([HEADER, ROW_OK + ",extra"], "18 cells"),
    ([HEADER, 'NTC-1,"70,female,60,160,,,,,,,,,,,,'], "well-formed CSV"),
    ([HEADER, 'NTC-1,7"0,female,60,160,,,,,,,,,,,,'], "a whole number"),
    ([], "a header row"),
])
def test_malformed_csv(tmp_path, lines, words):
    path = write(tmp_path, *lines)
    with pytest.raises(InputError) as caught:
        read_batch_csv(path)
    assert words in str(caught.value)


def test_bad_quoting_is_refused(tmp_path):
    path = tmp_path / "q.csv"
    path.write_text(HEADER + '\nNTC-1,70,"fe"male,60,160,,,,,,,,,,,,\n', encoding="utf-8")
    with pytest.raises(InputError, match="well-formed CSV"):
        read_batch_csv(path)


def test_missing_or_binary_file(tmp_path):
    with pytest.raises(InputError, match="existing, readable CSV"):
        read_batch_csv(tmp_path / "none.csv")
    (tmp_path / "bin.csv").write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(InputError, match="UTF-8"):
        read_batch_csv(tmp_path / "bin.csv")


# --- results ------------------------------------------------------------------------------

def test_results_frame_and_csv(tmp_path):
    records = [load_record(p) for p in sorted((__import__("pathlib").Path(__file__).parent /
                                               "data" / "patients").glob("*.json"))]
    out = screen_batch(records_to_frame(records))
    assert list(out.columns) == list(RESULT_COLUMNS)
    assert results_from_frame(out) == [screen(r) for r in records]
    path = tmp_path / "out.csv"
    write_results_csv(out, path)
    rows = list(csv.DictReader(path.open(encoding="utf-8")))
    assert [r["patient_id"] for r in rows] == [r.patient_id for r in records]
    first = screen(records[0])
    assert rows[0]["flags"] == ";".join(f.rule for f in first.flags)
    assert rows[0]["max_impact_level"] == str(first.max_impact_level)
    assert rows[0]["refer"] in ("true", "false")
    assert rows[0]["cautions"].startswith(first.cautions[0])


def test_results_are_written_whole_or_not_at_all(tmp_path):
    out = screen_batch(records_to_frame([]))
    with pytest.raises(InputError, match="existing folder"):
        write_results_csv(out, tmp_path / "missing" / "out.csv")
    with pytest.raises(InputError, match="not a folder"):
        write_results_csv(out, tmp_path)
    assert list(tmp_path.iterdir()) == []      # no temporary file left behind


def test_record_to_row_uses_every_column():
    rec = load_record(__import__("pathlib").Path(__file__).parent / "data" / "patients" / "NTC-0041.json")
    row = record_to_row(rec)
    assert list(row) == list(RECORD_COLUMNS)
    assert row["glucocorticoids_mg_per_day"] == "7.5" and row["fractures"] == "humerus:2:n"


def test_reads_a_version_2_row_and_writes_the_name_only_when_asked(tmp_path):
    header = ",".join(RECORD_COLUMNS)
    row = (ROW_OK.replace("vertebra:14:y;", "vertebra:14:y:T12;") +
           ",2,-2.1,,,postmenopausal,denosumab:36:10;anticoagulant::0,TRUE,,hip_replacement:left:8:n,"
           "moderate,True,false,Ada Example")
    [rec] = frame_to_records(read_batch_csv(write(tmp_path, header, row)))
    assert rec.record_version == 2 and rec.z_scores.lumbar_spine == -2.1 and rec.menopause == "postmenopausal"
    assert [(m.class_, m.months_on, m.months_since_last_dose) for m in rec.medications] == [
        ("denosumab", 36.0, 10.0), ("anticoagulant", None, 0.0)]
    assert rec.cancer.active is True and rec.cancer.bone_metastases == "unknown"   # the record's default
    assert [(s.procedure, s.side, s.months_ago, s.surgeon_cleared_impact) for s in rec.surgeries] == [
        ("hip_replacement", "left", 8.0, False)]
    assert rec.fractures[0].level == "T12" and rec.fractures[1].level is None
    assert (rec.cognition, rec.lives_alone, rec.has_carer, rec.display_name) == ("moderate", True, False, "Ada Example")
    plain, named = tmp_path / "plain.csv", tmp_path / "named.csv"
    write_batch_csv([rec], plain)
    write_batch_csv([rec], named, with_display_name=True)
    assert "display_name" not in plain.read_text().splitlines()[0] and "Ada Example" not in plain.read_text()
    assert frame_to_records(read_batch_csv(named)) == [rec]
    assert frame_to_records(read_batch_csv(plain)) == [rec.model_copy(update={"display_name": None})]
