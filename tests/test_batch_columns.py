"""The caseload read a column at a time: every bad-cell kind gives the message the record model
gives for that row (the same field, row, column, value and allowed words, in the same order), and
the batch command's output equals screening each person one by one with ``screen(record)``."""

from __future__ import annotations

import contextlib
import csv
import io
import json
from collections import Counter

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from prescribe.screening import batch_io
from prescribe.screening.batch_columns import TEXT_COLUMNS
from prescribe.screening.batch_io import RECORD_COLUMNS, iter_batch_csv, read_batch_csv, record_to_row, rows_to_records
from prescribe.cli import main
from prescribe.errors import InputError
from prescribe.screening import RESULT_COLUMNS, screen

from strategies import valid_records

SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])

#: Every kind of bad cell, as (column, cell text, words the message must hold).
BAD_CELLS: dict[str, tuple[str, str, str]] = {
    "age not a number": ("age_years", "seventy", "a whole number, or empty when absent"),
    "age not whole": ("age_years", "70.5", "a whole number, or empty when absent"),
    "age too low": ("age_years", "12", "a whole number from 18 to 110 (years), not 12."),
    "age huge": ("age_years", "1e300", "a whole number from 18 to 110"),
    "age missing": ("age_years", "", "is required"),
    "mass not finite": ("body_mass_kg", "inf", "a finite number, or empty when absent"),
    "mass nan": ("body_mass_kg", "nan", "a finite number, or empty when absent"),
    "mass too high": ("body_mass_kg", "301", "a number from 25 to 300 (kg), not 301.0."),
    "mass missing": ("body_mass_kg", " ", "is required"),
    "height too low": ("height_cm", "99.5", "a number from 100 to 230 (cm)"),
    "height missing": ("height_cm", "", "is required"),
    "t-score too low": ("t_score_lumbar_spine", "-9", "a number from -7 to 5 (SD), not -9.0."),
    "t-score not a number": ("t_score_total_hip", "low", "a finite number"),
    "falls negative": ("falls_past_year", "-1", "a whole number from 0 to 1000"),
    "chair too many": ("chair_stand_30s", "101", "a whole number from 0 to 100"),
    "tug too long": ("timed_up_and_go_s", "601", "a number from 0 to 600"),
    "tandem over ten": ("tandem_stance_s", "11", "a number from 0 to 10"),
    "pain over ten": ("pain_score", "11", "a whole number from 0 to 10"),
    "pain not whole": ("pain_score", "2.5", "a whole number"),
    "steroid dose without months": ("glucocorticoids_months", "5|", "is given"),
    "steroid months without dose": ("glucocorticoids_mg_per_day", "|6", "is given"),
    "steroid dose too high": ("glucocorticoids_mg_per_day", "1001|6", "a number from 0 to 1000"),
    "steroid months too long": ("glucocorticoids_months", "5|1201", "a number from 0 to 1200"),
    "steroid dose not a number": ("glucocorticoids_mg_per_day", "lots|6", "a finite number"),
    "sex unknown": ("sex", "woman", "one of 'female', 'male'"),
    "sex missing": ("sex", "", "is required"),
    "id missing": ("patient_id", "", "is required"),
    "id too long": ("patient_id", "X" * 65, "text of 1 to 64 characters"),
    "id with a line break": ("patient_id", "A\nB", "text of 1 to 64 characters"),
    # NUL and invisible direction marks (prescribe.identifiers): refused as the record refuses them.
    "id with a NUL": ("patient_id", "NTC\x000102", "text of 1 to 64 characters"),
    "id with a direction override": ("patient_id", "NTC-\u202e2010", "text of 1 to 64 characters"),
    "id with a direction isolate": ("patient_id", "\u2066NTC-0102\u2069", "text of 1 to 64 characters"),
    "id with a right-to-left mark": ("patient_id", "NTC\u200f-0102", "text of 1 to 64 characters"),
    "fracture site unknown": ("fractures", "knee:3:y", "unknown site 'knee'"),
    "fracture months too long": ("fractures", "hip:1201:y", "outside 0 to 1200"),
    "fracture months not a number": ("fractures", "hip:soon:y", "is not a number"),
    "fracture mark": ("fractures", "hip:3:maybe", "is not y or n"),
    "fracture item short": ("fractures", "wrist:3:n;hip:3", "is not site:months_ago:y|n"),
    "fracture empty item": ("fractures", "hip:3:y;", "is not site:months_ago:y|n"),
    "condition unknown": ("conditions", "gout", "condition codes joined by ';' from:"),
    "two conditions unknown": ("conditions", "gout; flu", "condition codes joined by ';' from:"),
    "condition twice": ("conditions", "knee_osteoarthritis;knee_osteoarthritis", "condition codes joined"),
    "id used before": ("patient_id", "<first>", "an id not already used (row 1 has it)"),
    # Version 2: each kind as the record model words it (the item of a compact cell named).
    "record version not whole": ("record_version", "1.5", "a whole number, or empty when absent"),
    "record version unknown": ("record_version", "3", "one of 1, 2, not 3."),
    "version 1 with version-2 fields": ("record_version", {"record_version": "1", "lives_alone": "true"},
                                        "2 (or leave it out) when version-2 fields"),
    "z-score too low": ("z_score_total_hip", "-8", "a number from -7 to 5 (SD), not -8.0."),
    "z-score not a number": ("z_score_femoral_neck", "low", "a finite number, or empty when absent"),
    "menopause unknown": ("menopause", "after", "one of 'premenopausal', 'perimenopausal', 'postmenopausal'"),
    "menopause for a man": ("menopause", {"sex": "male", "menopause": "postmenopausal"},
                            "empty for sex 'male' (menopausal status is recorded for women)"),
    "medication class unknown": ("medications", "denosumb:36:10", "items whose class is one of 'denosumab'"),
    "medication without class": ("medications", "denosumab:36:10; :3:1", "items whose class is one of"),
    "medication months too long": ("medications", "denosumab:1300:", "items whose months_on is a number from 0 "
                                   "to 1200 (months), not 'denosumab:1300:'."),
    "two medication items bad": ("medications", "x:1:1;anticoagulant::1201", "months_since_last_dose is a number"),
    "medication item short": ("medications", "denosumab:36", "is not class:months_on:months_since_last_dose"),
    "medication months not a number": ("medications", "denosumab:soon:", "months_on 'soon' is not a number"),
    "medication months not finite": ("medications", "denosumab::inf", "is not a finite number"),
    "surgery procedure unknown": ("surgeries", "hip_resurfacing:left:3:n", "items whose procedure is one of"),
    "surgery side unknown": ("surgeries", "hip_replacement:up:3:n", "items whose side is one of 'left'"),
    "surgery mark": ("surgeries", "knee_replacement:left:3:maybe", "surgeon-cleared mark 'maybe' is not y or n"),
    "surgery months missing": ("surgeries", "knee_replacement:left::y", "items whose months_ago is a number"),
    "surgery months too long": ("surgeries", "spinal_fusion:none:1201:n", "a number from 0 to 1200 (months)"),
    "surgery item short": ("surgeries", "spinal_fusion:none:3", "is not procedure:side:months_ago:y|n"),
    "fracture level unknown": ("fractures", "vertebra:12:y:T13", "items whose level is a vertebra from C1-C7"),
    "fracture level on a hip": ("fractures", "wrist:3:n;hip:12:y:T12", "items whose level is a vertebral level only "
                                "where site is 'vertebra'"),
    "fracture five parts": ("fractures", "vertebra:12:y:T12:L1", "is not site:months_ago:y|n[:level]"),
    "cancer not true or false": ("cancer_active", "yes", "true or false, or empty when absent"),
    "cancer metastases unknown": ("cancer_bone_metastases", {"cancer_active": "true", "cancer_bone_metastases": "maybe"},
                                  "one of 'excluded', 'unknown', 'present'"),
    "cancer metastases without active": ("cancer_active", {"cancer_active": "", "cancer_bone_metastases": "present"},
                                         "cancer_active is required: true or false"),
    "lives alone not true or false": ("lives_alone", "sometimes", "true or false, or empty when absent"),
    "has carer not true or false": ("has_carer", "2", "true or false, or empty when absent"),
    "cognition unknown": ("cognition", "poor", "one of 'none', 'mild', 'moderate', 'severe'"),
    "display name with a line break": ("display_name", "Ann\nB", "text of 1 to 80 characters"),
    "display name with a direction mark": ("display_name", "Ann\u202eB", "printable characters only"),
    "display name too long": ("display_name", "A" * 81, "text of 1 to 80 characters"),
}


def _spoil(row: dict, kind: str, first_id: str) -> dict:
    column, cell, _ = BAD_CELLS[kind]
    row = dict(row)
    if isinstance(cell, dict):               # cells that are bad together (a check across fields)
        row.update(cell)
    elif "|" in cell:                        # a glucocorticoid pair: dose|months
        row["glucocorticoids_mg_per_day"], row["glucocorticoids_months"] = cell.split("|")
    elif cell == "<first>":
        row[column] = first_id
    else:
        row[column] = cell
    return row


def _write(tmp_path, rows: list[dict], name: str = "in.csv"):
    path = tmp_path / name
    with path.open("w", encoding="utf-8", newline="") as fh:
        writer = csv.DictWriter(fh, fieldnames=list(RECORD_COLUMNS), lineterminator="\n")
        writer.writeheader()
        for row in rows:
            writer.writerow({c: batch_io.spreadsheet_text(v) if c in TEXT_COLUMNS else v for c, v in row.items()})
    return path


def _column_problems(path) -> list:
    with pytest.raises(InputError) as caught:
        read_batch_csv(path)
    return [(p.field, p.value, p.allowed, p.kind) for p in caught.value.problems]


def _record_problems(rows: list[dict]) -> list:
    """The problems the record model finds validating one row at a time (the reference)."""
    with pytest.raises(InputError) as caught:
        rows_to_records(rows)
    return [(p.field, p.value, p.allowed, p.kind) for p in caught.value.problems]


@pytest.mark.parametrize("kind", list(BAD_CELLS))
def test_every_bad_cell_kind_gives_the_record_models_message_with_row_and_column(tmp_path, kind):
    good = {"patient_id": "NTC-0100", "age_years": "72", "sex": "female", "body_mass_kg": "61.5",
            "height_cm": "158", "t_score_lumbar_spine": "-2.7", "t_score_femoral_neck": "-2.1",
            "t_score_total_hip": "", "fractures": "vertebra:14:y;wrist:60:n", "falls_past_year": "1",
            "timed_up_and_go_s": "12.5", "chair_stand_30s": "9", "tandem_stance_s": "8",
            "glucocorticoids_mg_per_day": "5", "glucocorticoids_months": "6",
            "conditions": "knee_osteoarthritis;thoracic_kyphosis", "pain_score": "2"}
    other = dict(good, patient_id="NTC-0101")
    bad = _spoil(dict(good, patient_id="NTC-0102"), kind, good["patient_id"])
    rows = [good, other, bad]
    path = _write(tmp_path, rows)
    found = _column_problems(path)
    assert found == _record_problems(rows)
    column, _, words = BAD_CELLS[kind]
    pid = bad["patient_id"].strip()
    label = f"row 3 (patient_id {pid})" if pid else "row 3"
    assert found and all(field == f"{label}: {column}" for field, *_ in found), found
    with pytest.raises(InputError) as caught:
        read_batch_csv(path)
    assert words in str(caught.value)


@SETTINGS
@given(st.lists(st.tuples(valid_records(), st.one_of(st.none(), st.sampled_from(list(BAD_CELLS)))),
                min_size=1, max_size=14, unique_by=lambda pair: pair[0].patient_id))
def test_random_rows_with_bad_cells_get_exactly_the_record_models_problems(tmp_path_factory, people):
    # Random valid people, some with one bad cell of a random kind (several kinds in one file):
    # the column-wise reader reports exactly what validating each row with the record model does.
    first_id = people[0][0].patient_id
    # The first row's own id is not "used before": that kind spoils only a later row.
    people = [(r, None if i == 0 and kind == "id used before" else kind) for i, (r, kind) in enumerate(people)]
    rows = [record_to_row(r) if kind is None else _spoil(record_to_row(r), kind, first_id) for r, kind in people]
    path = _write(tmp_path_factory.mktemp("rows"), rows)
    if all(kind is None for _, kind in people):
        assert len(read_batch_csv(path)) == len(rows)
        return
    assert _column_problems(path) == _record_problems(rows)


def test_the_random_rows_reach_every_bad_cell_kind():
    # Coverage of the property above: the strategy draws every kind.
    drawn = Counter()

    @settings(max_examples=300, deadline=None, database=None)
    @given(st.sampled_from(list(BAD_CELLS)))
    def draw(kind):
        drawn[kind] += 1

    draw()
    assert set(drawn) == set(BAD_CELLS)


# --- the command against the per-record evaluator ----------------------------------------------

def _expected_row(result) -> dict:
    """A results row as docs/rules.md describes it, from one person's ``screen(record)``."""
    def number(v):
        if v is None:
            return ""
        return str(int(v)) if float(v).is_integer() else repr(float(v))
    return {
        "patient_id": batch_io.spreadsheet_text(result.patient_id),
        "bone_density_category": result.bone_density_category,
        "falls_risk": "true" if result.falls_risk else "false",
        "max_impact_level": str(result.max_impact_level),
        "avoid": ";".join(result.avoid),
        "refer": "true" if result.refer else "false",
        "balance_first": "true" if result.balance_first else "false",
        "supervision": "true" if result.supervision else "false",
        "flags": ";".join(f.rule for f in result.flags),
        "lowest_t_score": number(result.lowest_t_score),
        "lowest_t_score_site": result.lowest_t_score_site or "",
        "ruleset_version": result.ruleset_version,
        "cautions": " | ".join(result.cautions),
        "density_reference": result.density_reference,
        "lowest_z_score": number(result.lowest_z_score),
        "lowest_z_score_site": result.lowest_z_score_site or "",
        "max_pct_1rm": number(result.max_pct_1rm),
        "carer_led": "true" if result.carer_led else "false",
        "hold_volume": "true" if result.hold_volume else "false",
    }


_UNUSUAL = [repr, lambda m: f"{m:e}", lambda m: f"{m:.17f}", lambda m: f" {m!r} "]


def _unusual_fractures(record, style: int) -> str:
    """The record's fracture cell with valid but unusual numbers (exponents, long decimals, spaces)."""
    fmt = _UNUSUAL[style % len(_UNUSUAL)]
    return ";".join(f"{f.site}:{fmt(f.months_ago)}:{'y' if f.low_trauma else 'n'}" + (f":{f.level}" if f.level else "")
                    for f in record.fractures)


def _run(args: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(args)
    return code, out.getvalue(), err.getvalue()


@SETTINGS
@given(st.lists(valid_records(), min_size=1, max_size=25, unique_by=lambda r: r.patient_id),
       st.integers(0, 3), st.sampled_from([2, 5, 1000]))
def test_batch_command_output_equals_screening_each_person_alone(tmp_path_factory, records, style, chunk):
    folder = tmp_path_factory.mktemp("cmd")
    rows = [dict(record_to_row(r), fractures=_unusual_fractures(r, style + i)) for i, r in enumerate(records)]
    path = _write(folder, rows)
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(batch_io, "CHUNK_ROWS", chunk)          # several chunks, one, or a partial one
        code, stdout, stderr = _run(["screen", "--batch", str(path), "--out", str(folder / "out.csv")])
    assert code == 0, stderr
    assert stderr == ""                                     # no progress bar when stderr is not a terminal
    with (folder / "out.csv").open(encoding="utf-8", newline="") as fh:
        reader = csv.DictReader(fh)
        assert reader.fieldnames == list(RESULT_COLUMNS)
        written = list(reader)
    assert written == [_expected_row(screen(r)) for r in records]
    assert json.loads(stdout)["patients"] == len(records)


def test_unusual_fracture_numbers_are_drawn(tmp_path):
    # Coverage of the property above: the styles give exponents, long decimals and spaces.
    from prescribe.records import parse_record
    rec = parse_record({"patient_id": "A", "age_years": 70, "sex": "female", "body_mass_kg": 60.0,
                        "height_cm": 160.0, "fractures": [{"site": "hip", "months_ago": 2.5, "low_trauma": True}]})
    cells = [_unusual_fractures(rec, s) for s in range(4)]
    assert cells == ["hip:2.5:y", "hip:2.500000e+00:y", "hip:2.50000000000000000:y", "hip: 2.5 :y"]


# --- streaming: bad rows late in the file, ids across chunks, earlier results kept -----------

def _caseload_rows(n: int) -> list[dict]:
    return [{"patient_id": f"NTC-{i:05d}", "age_years": "70", "sex": "female", "body_mass_kg": "60",
             "height_cm": "160"} for i in range(n)]


def test_bad_rows_in_several_chunks_are_all_reported_and_nothing_is_written(tmp_path, monkeypatch):
    monkeypatch.setattr(batch_io, "CHUNK_ROWS", 4)
    rows = _caseload_rows(20)
    rows[2]["age_years"] = "12"
    rows[17]["sex"] = "f"
    rows[13]["patient_id"] = rows[9]["patient_id"]          # the same id, two chunks apart
    path = _write(tmp_path, rows)
    out = tmp_path / "out.csv"
    out.write_text("earlier results\n", encoding="utf-8")
    code, stdout, stderr = _run(["screen", "--batch", str(path), "--out", str(out)])
    assert code == 2 and stdout == ""
    assert "3 fields are not valid" in stderr
    assert "row 3 (patient_id NTC-00002): age_years must be a whole number from 18 to 110 (years), not 12." in stderr
    assert "row 14 (patient_id NTC-00009): patient_id must be an id not already used (row 10 has it)" in stderr
    assert "row 18 (patient_id NTC-00017): sex must be one of 'female', 'male', not 'f'." in stderr
    assert out.read_text(encoding="utf-8") == "earlier results\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["in.csv", "out.csv"]


def test_chunks_cover_every_row_once_with_blank_lines_skipped(tmp_path):
    rows = _caseload_rows(11)
    path = _write(tmp_path, rows)
    text = path.read_text(encoding="utf-8").splitlines()
    path.write_text("\n\n" + "\n".join(text[:4] + [",,,,", ""] + text[4:]) + "\n", encoding="utf-8")
    chunks = list(iter_batch_csv(path, chunk_rows=3))
    assert [c.first_row for c in chunks] == [1, 4, 5, 8, 11]     # blank lines are read but not counted
    ids = [pid for c in chunks for pid in c.frame["patient_id"]]
    assert ids == [r["patient_id"] for r in rows]


def test_a_structural_problem_late_in_the_file_wins_over_bad_rows_as_before(tmp_path, monkeypatch):
    monkeypatch.setattr(batch_io, "CHUNK_ROWS", 2)
    rows = _caseload_rows(6)
    rows[0]["age_years"] = "12"
    path = _write(tmp_path, rows)
    path.write_text(path.read_text(encoding="utf-8") + "NTC-9,70\n", encoding="utf-8")
    with pytest.raises(InputError) as caught:
        read_batch_csv(path)
    assert [p.field for p in caught.value.problems] == ["row 7 (patient_id NTC-9)"]
    assert f"{len(RECORD_COLUMNS)} cells, one per header column" in str(caught.value)


# --- the progress bar: on a terminal only ---------------------------------------------------------

def test_progress_bar_goes_to_a_terminal_and_never_to_a_pipe(tmp_path, cli):
    import os
    import pty
    import subprocess
    import sys
    from pathlib import Path

    path = _write(tmp_path, _caseload_rows(30))
    piped = cli("screen", "--batch", str(path), "--out", str(tmp_path / "piped.csv"))
    assert piped.returncode == 0 and piped.stderr == ""
    exe = Path(sys.executable).with_name("prescribe")
    cmd = [str(exe)] if exe.exists() else [sys.executable, "-m", "prescribe.cli"]
    master, slave = pty.openpty()
    try:
        proc = subprocess.run([*cmd, "screen", "--batch", str(path), "--out", str(tmp_path / "tty.csv")],
                              stdout=subprocess.PIPE, stderr=slave, timeout=300)
        os.close(slave)
        shown = b""
        while True:
            try:
                data = os.read(master, 4096)
            except OSError:
                break
            if not data:
                break
            shown += data
    finally:
        os.close(master)
    assert proc.returncode == 0
    text = shown.decode("utf-8")
    assert "screening [" in text and "] 30 people" in text, text
    assert json.loads(proc.stdout)["patients"] == 30            # stdout stays the JSON summary alone
    assert (tmp_path / "tty.csv").read_bytes() == (tmp_path / "piped.csv").read_bytes()


def test_a_bad_output_path_is_reported_after_the_caseloads_own_problems_as_before(tmp_path):
    rows = _caseload_rows(3)
    good = _write(tmp_path, rows, "good.csv")
    rows[1]["age_years"] = "12"
    bad = _write(tmp_path, rows, "bad.csv")
    nowhere = str(tmp_path / "missing" / "out.csv")
    code, _, stderr = _run(["screen", "--batch", str(bad), "--out", nowhere])
    assert code == 2 and "row 2 (patient_id NTC-00001): age_years" in stderr and "existing folder" not in stderr
    code, _, stderr = _run(["screen", "--batch", str(good), "--out", nowhere])
    assert code == 2 and "output file" in stderr and "a path in an existing folder" in stderr


# --- the column-wise writer writes what the csv module writes -----------------------------------

_CELL_TEXT = st.text(alphabet=st.sampled_from(list('ab ,"\n\r;=+-@\t\'|1.')), max_size=8)


@SETTINGS
@given(st.lists(st.tuples(_CELL_TEXT, st.one_of(st.none(), st.just(float("nan")), st.floats(-1e20, 1e20)),
                          st.booleans(), st.integers(-5, 5), st.one_of(st.none(), _CELL_TEXT)),
                max_size=12), st.booleans())
def test_results_text_is_what_the_csv_module_writes_cell_by_cell(rows, one_column):
    # The reference: the csv module's writer, fed each cell formatted as docs/rules.md says
    # (text guarded against formulas, true/false, whole numbers without '.0', absent empty).
    import math

    import pandas as pd

    from prescribe.screening.batch_io import frame_to_csv_text, spreadsheet_text

    frame = pd.DataFrame({"text": pd.Series([r[0] for r in rows], dtype=object),
                          "number": pd.Series([r[1] for r in rows], dtype="float64"),
                          "yes": pd.Series([r[2] for r in rows], dtype=bool),
                          "count": pd.Series([r[3] for r in rows], dtype="int64"),
                          "maybe": pd.Series([r[4] for r in rows], dtype=object)})
    if one_column:
        frame = frame[["text"]]

    def cell(v):
        if v is None or (isinstance(v, float) and math.isnan(v)):
            return ""
        if isinstance(v, bool):
            return "true" if v else "false"
        if isinstance(v, float):
            return str(int(v)) if v.is_integer() and abs(v) < 1e15 else repr(v)
        if isinstance(v, int):
            return str(v)
        return spreadsheet_text(v)

    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    writer.writerow(list(frame.columns))
    for values in frame.astype(object).itertuples(index=False):
        writer.writerow([cell(v) for v in values])
    assert frame_to_csv_text(frame) == buf.getvalue()
