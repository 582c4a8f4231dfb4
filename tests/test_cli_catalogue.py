"""`prescribe exercises` and `prescribe dose` through the real entry point."""

from __future__ import annotations

import json
import math

import pytest

from conftest import run_cli

CONTRACT_FIELDS = {"exercise_id", "name", "category", "impact_level", "peak_grf_bw",
                   "loading_rate_bw_s", "directions", "patterns", "source"}


def test_exercises_lists_the_whole_catalogue_as_json():
    res = run_cli("exercises")
    assert res.returncode == 0, res.stderr
    rows = json.loads(res.stdout)
    assert len(rows) >= 40
    assert all(CONTRACT_FIELDS <= set(r) for r in rows)
    assert len({r["exercise_id"] for r in rows}) == len(rows)
    assert "caution" in res.stderr  # cautions go to stderr so stdout stays a JSON list


def test_exercises_filters_level_and_category_and_table():
    res = run_cli("exercises", "--level", "3", "--category", "impact")
    rows = json.loads(res.stdout)
    assert rows and all(r["impact_level"] == 3 and r["category"] == "impact" for r in rows)
    # Published forceful heel drop, 4.9 BW (Int J Sci Technol Soc 2021, 9:294-300): level 3.
    assert "heel_drop_forceful" in {r["exercise_id"] for r in rows}
    res = run_cli("exercises", "--max-level", "1", "--exclude-pattern", "single_leg_stance", "--table")
    assert res.returncode == 0, res.stderr
    lines = res.stdout.splitlines()
    assert lines[0].split()[:3] == ["exercise_id", "name", "category"]
    assert "walking" in res.stdout and "single_leg_stance " not in res.stdout
    assert "licensed clinician" in res.stdout


def test_exercises_bad_filter_exits_2():
    res = run_cli("exercises", "--level", "7")
    assert res.returncode == 2
    assert "--level" in res.stderr and "Traceback" not in res.stderr
    res = run_cli("exercises", "--category", "yoga")
    assert res.returncode == 2 and "--category" in res.stderr


def test_dose_prints_contract_fields_and_published_index():
    # Santos-Rocha, Oliveira & Veloso 2006, Br J Sports Med 40:860-866: 1.40 BW, 4194
    # cycles -> OI 11.7 from the means (published 12.0 +- 0.8).
    res = run_cli("dose", "step_aerobics_basic", "--cycles", "4194")
    assert res.returncode == 0, res.stderr
    d = json.loads(res.stdout)
    for key in ("exercise_id", "peak_grf_bw", "cycles", "bouts", "gap_hours", "osteogenic_index"):
        assert key in d
    assert d["bouts"] == 1 and d["cycles"] == 4194
    assert d["osteogenic_index"] == pytest.approx(1.40 * math.log(4195), abs=1e-3)
    assert abs(d["osteogenic_index"] - 12.0) <= 0.8
    assert d["cautions"]


def test_dose_bouts_gap_and_body_mass():
    res = run_cli("dose", "stamp_forceful", "--cycles", "61", "--bouts", "2", "--gap-hours", "0",
                  "--body-mass-kg", "70")
    d = json.loads(res.stdout)
    # Gap 0: one session of all cycles (documented recovery model limit).
    assert d["osteogenic_index"] == pytest.approx(4.5 * math.log(62), abs=1e-3)
    assert d["cycles_per_bout"] == [31, 30]
    assert d["peak_force_n"] == pytest.approx(4.5 * 70 * 9.80665, abs=0.1)
    long_gap = json.loads(run_cli("dose", "stamp_forceful", "--cycles", "61", "--bouts", "2",
                                  "--gap-hours", "8").stdout)
    assert long_gap["osteogenic_index"] > d["osteogenic_index"]


@pytest.mark.parametrize("args, words", [
    (("dose", "no_such_move", "--cycles", "10"), ["exercise_id", "no_such_move", "prescribe exercises"]),
    (("dose", "walking", "--cycles", "-5"), ["cycles", "-5"]),
    (("dose", "walking", "--cycles", "10", "--bouts", "0"), ["bouts", "0"]),
    (("dose", "walking", "--cycles", "10", "--body-mass-kg", "3"), ["body_mass_kg", "3"]),
])
def test_dose_bad_input_exits_2_naming_the_value(args, words):
    res = run_cli(*args)
    assert res.returncode == 2
    assert res.stdout == ""
    for w in words:
        assert w in res.stderr
    assert "Traceback" not in res.stderr
