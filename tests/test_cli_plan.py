"""``prescribe plan`` end to end: the real entry point in a subprocess, invented patients."""

from __future__ import annotations

import json

import pytest

from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.cli import main
from prescribe.plan_schema import parse_plan
from prescribe.planning import check_plan

from conftest import run_cli

OSTEOPENIA = {"patient_id": "ELM-0101", "age_years": 64, "sex": "female", "body_mass_kg": 61.5,
              "height_cm": 162.0, "t_scores": {"lumbar_spine": -1.8, "femoral_neck": -1.5}}
VERTEBRAL = {"patient_id": "ELM-0102", "age_years": 72, "sex": "female", "body_mass_kg": 58.0,
             "height_cm": 157.0, "t_scores": {"lumbar_spine": -3.0},
             "fractures": [{"site": "vertebra", "months_ago": 8, "low_trauma": True}]}


@pytest.fixture
def patient(tmp_path):
    def write(data, name="patient.json"):
        path = tmp_path / name
        path.write_text(json.dumps(data), encoding="utf-8")
        return str(path)
    return write


def test_plan_26_weeks_end_to_end(patient):
    done = run_cli("plan", patient(OSTEOPENIA), "--weeks", "26")
    assert done.returncode == 0, done.stderr
    plan = parse_plan(json.loads(done.stdout))
    assert plan.patient_id == "ELM-0101" and len(plan.weeks) == 26
    assert plan.cautions[:len(STANDARD_CAUTIONS)] == list(STANDARD_CAUTIONS)
    assert plan.sources and plan.ruleset_version and plan.screening.patient_id == "ELM-0101"
    assert check_plan(plan) == []
    assert [w.week for w in plan.weeks] == list(range(1, 27))


def test_plan_options_reach_the_planner(patient):
    done = run_cli("plan", patient(OSTEOPENIA), "--weeks", "12", "--template", "gentle", "--start-level", "1",
                   "--impact-sessions", "2", "--resistance-sessions", "3", "--balance-sessions", "4",
                   "--exclude", "stamp_gentle", "side_stamp_gentle")
    assert done.returncode == 0, done.stderr
    plan = parse_plan(json.loads(done.stdout))
    assert len(plan.weeks) == 12 and plan.template.name == "gentle" and plan.template_version == 1
    assert plan.options["exclude"] == ["stamp_gentle", "side_stamp_gentle"]
    used = {x.exercise_id for w in plan.weeks for s in w.sessions for x in s.exercises}
    assert not used & {"stamp_gentle", "side_stamp_gentle"}
    kinds = [s.kind for s in plan.weeks[0].sessions]
    assert kinds.count("resistance") == 3
    assert sum(k in ("impact", "mixed") for k in kinds) == 2


def test_plan_table_shows_weeks_and_cautions(patient):
    done = run_cli("plan", patient(VERTEBRAL), "--table")
    assert done.returncode == 0, done.stderr
    lines = done.stdout.splitlines()
    header = next(line for line in lines if line.startswith("week"))
    for column in ("phase", "impact_level", "impacts_per_session", "weak_window", "reassessment"):
        assert column in header
    rows = [line for line in lines if line[:3].strip().isdigit()]
    assert len(rows) == 26
    assert "post_vertebral_fracture" in done.stdout
    assert "Cautions:" in done.stdout and STANDARD_CAUTIONS[0] in done.stdout


def test_plan_table_dates_the_reviews_from_the_start_date(patient):
    done = run_cli("plan", patient(OSTEOPENIA), "--weeks", "16", "--start-date", "2026-06-01", "--table")
    assert done.returncode == 0, done.stderr
    header = next(line for line in done.stdout.splitlines() if line.startswith("week"))
    assert "review_date" in header
    # Reviews of a 16-week plan: weeks 8 and 16 (reassessment_weeks); week N starts on
    # start_date + 7(N-1) days (PRODUCT.md).
    assert "2026-07-20" in done.stdout and "2026-09-14" in done.stdout


@pytest.mark.parametrize("args,words", [
    (["--weeks", "7"], ["--weeks", "7", "8 to 52"]),
    (["--weeks", "six"], ["--weeks", "'six'", "whole number"]),
    (["--template", "brisk"], ["--template", "'brisk'", "gentle", "post_vertebral_fracture", "standard"]),
    (["--impact-sessions", "0"], ["--impact-sessions", "0", "1 to 7"]),
    (["--balance-sessions", "1"], ["--balance-sessions", "1", "2 to 7"]),
    (["--exclude", "moonwalk"], ["--exclude", "'moonwalk'", "catalogue"]),
])
def test_bad_options_exit_2_with_a_clear_message(patient, args, words, capsys):
    # In-process through the same main() the entry point calls (a subprocess a case
    # would cost seconds each); the real entry point is exercised by the tests around.
    try:
        code = main(["plan", patient(OSTEOPENIA), *args])
    except SystemExit as stop:  # argparse's own errors (a non-number) exit through our parser
        code = stop.code
    out, err = capsys.readouterr()
    assert code == 2
    assert out == ""
    assert "Traceback" not in err
    for word in words:
        assert word in err, (word, err)


def test_start_level_above_the_cap_is_refused_with_exit_2(patient):
    # After a vertebral fracture the program stays at or below brisk walking
    # (Brooke-Wavell et al. 2022), so a start at high impact is refused under rule 1.
    done = run_cli("plan", patient(VERTEBRAL), "--start-level", "3")
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "refused (rule 1)" in done.stderr and "start_level 3" in done.stderr


def test_step_up_inside_the_weak_window_is_refused_with_exit_2(patient, capsys):
    # Weeks 3-5 after a step-up carry no higher level (Eriksen 1986; Heaney et al. 1997).
    code = main(["plan", patient(OSTEOPENIA), "--step-up-weeks", "8", "10"])
    out, err = capsys.readouterr()
    assert code == 2 and out == ""
    assert "refused (rule 3)" in err and "week 10" in err


def test_bad_record_and_missing_file_exit_2(patient, tmp_path):
    done = run_cli("plan", patient({**OSTEOPENIA, "age_years": 12}))
    assert done.returncode == 2 and "age_years" in done.stderr and "12" in done.stderr
    done = run_cli("plan", str(tmp_path / "nobody.json"))
    assert done.returncode == 2 and "nobody.json" in done.stderr
