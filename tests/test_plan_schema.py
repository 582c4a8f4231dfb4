"""The plan file contract (PRODUCT.md "The plan"): malformed or other-version plans are refused."""

from __future__ import annotations

import pytest

from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.errors import PlanFileError
from prescribe.plan_schema import PLAN_FORMAT_VERSION, parse_plan

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
