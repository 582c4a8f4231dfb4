"""The plan file contract (PRODUCT.md "The plan"): malformed or other-version plans are refused."""

from __future__ import annotations

import json

import pytest

from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.errors import PlanFileError
from prescribe.plan_schema import PLAN_FORMAT_VERSION, parse_plan, review_dates

SCREENING = {
    "patient_id": "NTC-0100", "bone_density_category": "osteopenia", "falls_risk": False,
    "max_impact_level": 3, "avoid": [], "refer": False, "flags": [], "cautions": list(STANDARD_CAUTIONS),
}


def minimal_plan(**over):
    plan = {
        "plan_format_version": PLAN_FORMAT_VERSION, "patient_id": "NTC-0100", "created": "2026-12-01T10:00:00Z",
        "tool_version": "0.1.0", "ruleset_version": "test", "screening": SCREENING,
        "cautions": list(STANDARD_CAUTIONS), "sources": [],
        "weeks": [{"week": 1, "impact_level": 1, "impacts_per_session": 0, "reassessment": False,
                   "sessions": [{"day": 1, "kind": "impact", "impacts": 0, "osteogenic_index": 0.0,
                                 "exercises": [{"exercise_id": "brisk_walk", "name": "Brisk walk",
                                                "category": "impact", "minutes": 20, "impact_level": 1,
                                                "peak_grf_bw": 1.3}]}]}],
    }
    plan.update(over)
    return plan


def test_a_minimal_plan_parses_and_keeps_extra_fields():
    plan = parse_plan(minimal_plan(options={"weeks": 8}))
    assert plan.weeks[0].sessions[0].exercises[0].exercise_id == "brisk_walk"
    assert plan.model_dump()["options"] == {"weeks": 8}


def test_other_major_version_is_refused_with_the_version_named():
    with pytest.raises(PlanFileError) as info:
        parse_plan(minimal_plan(plan_format_version="2.0"))
    assert "plan_format_version" in str(info.value) and "'2.0'" in str(info.value)
    with pytest.raises(PlanFileError, match="plan_format_version"):
        parse_plan({k: v for k, v in minimal_plan().items() if k != "plan_format_version"})


def test_malformed_fields_are_named():
    bad = minimal_plan()
    bad["weeks"][0]["impact_level"] = 5
    with pytest.raises(PlanFileError, match=r"weeks\[0\]\.impact_level"):
        parse_plan(bad)
    with pytest.raises(PlanFileError, match="JSON object"):
        parse_plan([1, 2])


def _untyped(model, where="plan"):
    """Every untyped (extra) field of a plan model and the models under it, with its place."""
    from pydantic import BaseModel

    found = [f"{where}.{k}" for k in (model.model_extra or {})]
    for name in type(model).model_fields:
        value = getattr(model, name)
        items = value if isinstance(value, list) else [value]
        for i, item in enumerate(items):
            if isinstance(item, BaseModel) and hasattr(item, "model_extra") and item.model_config.get("extra"):
                found += _untyped(item, f"{where}.{name}[{i}]" if isinstance(value, list) else f"{where}.{name}")
    return found


def test_every_field_the_planner_writes_is_typed():
    # The planner adds a field only by typing it in plan_schema (docs/plan.md "Unknown fields").
    from prescribe.planning import PlanOptions, build_plan, replace_exercise
    from prescribe.records import parse_record

    record = parse_record({"patient_id": "TYP-0001", "age_years": 63, "sex": "female", "body_mass_kg": 66.0,
                           "height_cm": 162.0, "t_scores": {"lumbar_spine": -1.9}})
    plan = build_plan(record, options=PlanOptions(weeks=30), created="2026-12-01T09:00:00+00:00")
    assert _untyped(plan) == []
    assert plan.weeks[0].phase and plan.weeks[0].weak_window is False and plan.weeks[0].step_up is True
    assert plan.max_impacts_per_session is not None and plan.options["weeks"] == 30
    used = plan.weeks[0].sessions[0].exercises[0]
    swapped = replace_exercise(plan, used.exercise_id, used.exercise_id)
    assert _untyped(swapped) == [] and swapped.swaps[0].old == used.exercise_id
    # Through a JSON file and back, nothing is left untyped either.
    assert _untyped(parse_plan(json.loads(plan.model_dump_json()))) == []


def test_every_field_an_adjusted_program_writes_is_typed():
    from prescribe.sessions.engine import assess
    from session_support import day_of, full_weeks, logged, program

    plan = program()
    sessions = full_weeks([6], plan)
    sessions[1] = logged(6, 1, sid=2, exercises=[{"exercise_id": "back_squat", "load_kg": 30.0, "reps_done": 9}])
    # Through a JSON file and back (as the store keeps it): nothing the engine writes is untyped.
    adjusted = parse_plan(assess(plan, sessions, today=day_of(7), program_version=1).program.model_dump(mode="json"))
    assert _untyped(adjusted) == []
    assert any(x.load_kg for w in adjusted.weeks for s in w.sessions for x in s.exercises)
    sessions[-1] = logged(6, 5, sid=9, fell_since_last=True)
    paused = parse_plan(assess(plan, sessions, today=day_of(7), program_version=1).program.model_dump(mode="json"))
    assert _untyped(paused) == [] and paused.paused.from_week == 7


def test_an_older_plan_without_the_optional_fields_reads_with_their_defaults():
    plan = parse_plan(minimal_plan())
    week, ex = plan.weeks[0], plan.weeks[0].sessions[0].exercises[0]
    assert week.weak_window is None and week.step_up is None and week.phase == ""
    assert week.weekly_osteogenic_index is None and ex.bout_gap_hours is None and ex.notes == ""
    assert plan.swaps == [] and plan.max_impact_level is None and plan.spine_sparing is None


def test_unknown_fields_from_another_tool_are_kept_as_they_are():
    data = minimal_plan(clinic_note="from another tool")
    data["weeks"][0]["their_flag"] = 1
    plan = parse_plan(data)
    assert plan.model_extra == {"clinic_note": "from another tool"}
    assert plan.model_dump(mode="json")["weeks"][0]["their_flag"] == 1


def test_a_typed_field_of_the_wrong_kind_is_named():
    with pytest.raises(PlanFileError) as info:
        parse_plan(minimal_plan(swaps=[{"old": "brisk_walk"}]))
    assert "swaps" in str(info.value)


def test_the_weak_window_is_weeks_3_to_5_after_each_step_up():
    # PRODUCT.md: weeks 3-5 after a new or larger stimulus (the step-up week is week 1).
    from prescribe.stimulus import in_weak_window, weak_window_weeks

    assert weak_window_weeks([1]) == {3, 4, 5}
    assert weak_window_weeks([1, 9]) == {3, 4, 5, 11, 12, 13}
    assert [p for p in range(0, 8) if in_weak_window(p)] == [3, 4, 5]


def test_one_table_of_impact_level_labels():
    import prescribe.handout.content as content
    import prescribe.planning as planner
    import prescribe.safety as safety
    from prescribe.catalogue import IMPACT_LEVEL_LABELS

    assert IMPACT_LEVEL_LABELS == {0: "no impact", 1: "low impact", 2: "moderate impact", 3: "high impact"}
    assert planner.IMPACT_LABELS is IMPACT_LEVEL_LABELS and safety.IMPACT_LABELS is IMPACT_LEVEL_LABELS
    assert content.LEVEL_LABELS is IMPACT_LEVEL_LABELS
    assert content.LEVEL_WORDS[2] == "moderate impact (like skipping or gentle stamps)"


def test_the_plan_command_help_states_the_option_table(cli):
    from prescribe.planning.options import OPTION_DEFAULTS, OPTION_RANGES

    done = cli("plan", "--help")
    text = " ".join(done.stdout.split())
    low, high = OPTION_RANGES["weeks"]
    assert f"program length, {low}-{high} weeks (default {OPTION_DEFAULTS['weeks']})" in text
    low, high = OPTION_RANGES["resistance_sessions_per_week"]
    assert f"resistance sessions a week, {low}-{high} (default 2)" in text


def test_review_dates_are_the_first_days_of_the_review_weeks_counted_from_start_date():
    # PRODUCT.md: week N runs from start_date + 7(N-1) days.
    from datetime import date

    from handout_fixtures import make_plan
    data = make_plan(weeks=16, reassess_every=8)
    data["start_date"] = "2026-06-01"
    assert review_dates(parse_plan(data)) == [(8, date(2026, 7, 20)), (16, date(2026, 9, 14))]
    del data["start_date"]  # an older plan file: weeks without dates, never dates from "created"
    assert review_dates(parse_plan(data)) == [(8, None), (16, None)]
