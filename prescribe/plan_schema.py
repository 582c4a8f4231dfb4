"""The plan: what ``prescribe plan`` prints and the handout, the store and the app read.

PRODUCT.md fixes the fields other parts rely on; the planner may add fields.
A plan file from another ``plan_format_version`` major is refused with a clear error.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .errors import FieldProblem, PlanFileError
from .records import PatientRecord, ScreeningResult, problems_from_validation

PLAN_FORMAT_VERSION = "1.0"

SessionKind = Literal["impact", "resistance", "balance", "mixed"]


class _Open(BaseModel):
    # Extra fields are kept: the planner may add fields without breaking readers.
    model_config = ConfigDict(extra="allow")


class PlannedExercise(_Open):
    exercise_id: str
    name: str
    category: str
    sets: int | None = Field(None, ge=0)
    reps: int | None = Field(None, ge=0)
    impacts: int = Field(0, ge=0, description="Landings of level 2-3 work in this session (all bouts).")
    minutes: float | None = Field(None, ge=0)
    bouts: int = Field(1, ge=1)
    intensity: str = Field("", description='For example "80% 1RM" or "RPE 6".')
    impact_level: int = Field(ge=0, le=3)
    peak_grf_bw: float = Field(ge=0)
    directions: list[str] = Field(default_factory=list)
    patterns: list[str] = Field(default_factory=list)
    supervised: bool = Field(False, description="Done only with a clinician or trainer present "
                                                "(80% 1RM or more, or high impact).")


class PlannedSession(_Open):
    day: int = Field(ge=1, le=7, description="Day of the week, 1 = Monday.")
    kind: SessionKind
    exercises: list[PlannedExercise]
    impacts: int = Field(0, ge=0)
    osteogenic_index: float = Field(0.0, ge=0)
    supervised: bool = Field(False, description="The session holds supervised work.")


class PlannedWeek(_Open):
    week: int = Field(ge=1)
    impact_level: int = Field(ge=0, le=3)
    impacts_per_session: int = Field(ge=0)
    reassessment: bool = False
    sessions: list[PlannedSession]


class Plan(_Open):
    plan_format_version: str = PLAN_FORMAT_VERSION
    patient_id: str
    created: str
    tool_version: str
    ruleset_version: str
    screening: ScreeningResult
    cautions: list[str]
    sources: list[str]
    weeks: list[PlannedWeek] = Field(min_length=1)
    # Safety (docs/safety.md): the record the plan was built from, re-screened by the check;
    # a draft until a clinician records the clearance of a person the screening refers.
    record: PatientRecord | None = None
    draft: bool = False
    cleared_by: str | None = Field(None, min_length=1, max_length=120)
    cleared_at: str | None = Field(None, description="ISO 8601 UTC time of the clearance.")


def parse_plan(data: Any, source: str | None = None) -> Plan:
    """Validate a plan (parsed JSON); refuse another format major version."""
    if not isinstance(data, dict):
        raise PlanFileError([FieldProblem("plan", data, "a JSON object as printed by `prescribe plan`")], source)
    version = data.get("plan_format_version")
    if version is None or str(version).split(".")[0] != PLAN_FORMAT_VERSION.split(".")[0]:
        raise PlanFileError([FieldProblem("plan_format_version", version,
                                          f"a plan of format version {PLAN_FORMAT_VERSION.split('.')[0]}.x "
                                          f"(made by this version of prescribe; rebuild the plan with `prescribe plan`)")],
                            source)
    try:
        return Plan.model_validate(data)
    except ValidationError as err:
        raise PlanFileError(problems_from_validation(err, data), source) from None
