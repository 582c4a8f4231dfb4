"""The plan: what ``prescribe plan`` prints and the handout, the store and the app read.

PRODUCT.md fixes the fields other parts rely on; the planner may add fields.
A plan file from another ``plan_format_version`` major is refused with a clear error.
"""

from __future__ import annotations

from datetime import date, timedelta
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

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


class PlanTemplate(_Open):
    """The template a program was built from: which document, and which version of it."""

    name: str
    title: str = ""
    summary: str = ""
    version: int | None = Field(None, ge=1, description="The template's version (1 for a shipped file "
                                                         "unless it says otherwise).")
    origin: str | None = Field(None, description='"shipped" (a file of the package) or "clinic" (the store).')


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
    template: PlanTemplate | None = None
    template_version: int | None = Field(None, ge=1, description="Version of the template used (null in plans "
                                                                  "made before versions were recorded).")
    start_date: str | None = Field(None, description="First day of week 1 (YYYY-MM-DD); week N runs from "
                                                      "start_date + 7(N-1) days. Absent in older plan files.")
    based_on_version: int | None = Field(None, ge=1, description="The stored program version this one was "
                                                                 "made from (an adjustment), or null.")

    @field_validator("start_date")
    @classmethod
    def _iso_day(cls, value: str | None) -> str | None:
        if value is None:
            return None
        try:
            return date.fromisoformat(value).isoformat()
        except (TypeError, ValueError):
            raise ValueError("a date as YYYY-MM-DD") from None
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


def parse_day(value: Any, field: str) -> date:
    """A ``YYYY-MM-DD`` text (or a date) as a date; :class:`InputError` naming ``field`` otherwise."""
    from .errors import InputError
    if isinstance(value, date):
        return value
    if isinstance(value, str) and len(value) == 10:
        try:
            return date.fromisoformat(value)
        except ValueError:
            pass
    raise InputError.single(field, value, "a date as YYYY-MM-DD")


def week_start(start_date: date | str, week: int) -> date:
    """First day of program week ``week``: start_date + 7(week - 1) days."""
    start = parse_day(start_date, "start_date")
    return start + timedelta(days=7 * (int(week) - 1))


def program_week(start_date: date | str, on: date | str | None = None) -> int:
    """The program week that ``on`` (default: today) falls in; week 1 starts on ``start_date``.

    A day before the start is week 0 (the program has not begun).
    """
    start = parse_day(start_date, "start_date")
    day = date.today() if on is None else parse_day(on, "date")
    days = (day - start).days
    return 0 if days < 0 else days // 7 + 1
