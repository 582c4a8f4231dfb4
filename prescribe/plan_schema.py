"""The plan: what ``prescribe plan`` prints and the handout, the store and the app read.

PRODUCT.md fixes the fields other parts rely on.  Every field the planner, the safety
check, the sessions engine or the handout writes or reads is typed here, optional with a
default so that older plan files still read; the planner adds a field only by typing it
here (``tests/test_plan_schema.py`` checks that a built plan carries no untyped field).
Unknown fields in a plan file (from another tool) are kept as they are (docs/plan.md).
A plan file from another ``plan_format_version`` major is refused with a clear error.
"""

from __future__ import annotations

from datetime import date, timedelta
from typing import Any, ClassVar, Iterable, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from .errors import FieldProblem, PlanFileError
from .records import PatientRecord, ScreeningResult, problems_from_validation

PLAN_FORMAT_VERSION = "1.0"

SessionKind = Literal["impact", "resistance", "balance", "mixed"]

#: A figure written as a whole number or a decimal; kept as written (60 stays 60, 8.0 stays 8.0).
Number = int | float


class _Open(BaseModel):
    # Unknown fields of a plan file (another tool's) are kept and written back unchanged;
    # prescribe itself reads and writes only the typed fields (docs/plan.md, "Unknown fields").
    model_config = ConfigDict(extra="allow")


class Why(_Open):
    """One reason behind a planned exercise, with its source (PRODUCT.md "One derivation")."""

    reason: str = Field(min_length=1, description="In plain clinical words.")
    source: str = Field(min_length=1, description='Its citation, or "common practice".')
    about: Literal["chosen", "dose", "week"] | None = Field(
        None, description="chosen: why this exercise; dose: why this dose; week: why it changes or holds this week.")


class LimitReason(_Open):
    """Why one limit has its value: the rule (screening rule id, template, or the planner's own) and its source."""

    limit: str
    value: Any = None
    rule: str
    source: str
    reason: str = Field("", description="The reason in plain clinical words (the rule's title).")


class PlanLimits(_Open):
    """The limits a program is held to, worked out by one function from the plan's record
    (:func:`prescribe.safety.derive_limits`); every door works them out again and refuses a
    plan whose limits differ (rule ``limits_match``)."""

    max_impact_level: int = Field(ge=0, le=3)
    max_impacts_per_session: int = Field(ge=0)
    max_pct_1rm: Number | None = Field(None, ge=0, le=100, description="The heaviest resistance load allowed "
                                                                      "[% 1RM]; null: no limit beyond the phases.")
    avoid: list[str] = Field(default_factory=list)
    spine_sparing: bool = False
    balance_first: bool = False
    supervision: bool = Field(False, description="Supervised sessions advised for this person (the screening), "
                                                 "besides the heavy and high-impact work that is always supervised.")
    refer: bool = False
    carer_led: bool = False
    hold_volume: bool = False
    cleared: bool = Field(False, description="Worked out with a recorded clearance (what waited for it lifted).")
    supervised_from_pct_1rm: Number = Field(80, description="Resistance work at this % 1RM or more is supervised.")
    supervised_from_impact_level: int = Field(3, description="Impact work at this level or more is supervised.")
    template: str | None = Field(None, description="The template whose own caps were applied.")
    template_max_level: int | None = Field(None, ge=0, le=3, description="The template's own impact cap.")
    reasons: list[LimitReason] = Field(default_factory=list)

    #: The fields compared at every door (the reasons are printed, not compared: their wording may change).
    COMPARED: ClassVar[tuple[str, ...]] = (
        "max_impact_level", "max_impacts_per_session", "max_pct_1rm", "avoid", "spine_sparing", "balance_first",
        "supervision", "refer", "carer_led", "hold_volume", "cleared")

    def reasons_for(self, limit: str) -> list[LimitReason]:
        return [r for r in self.reasons if r.limit == limit]

    def supervises(self, exercise: "PlannedExercise") -> bool:
        """Whether ``exercise`` is done only with a clinician, trainer or carer there: the one rule
        the screen, the person's pages and the clinician's pages all mark by.  Its own mark, the
        heavy or high-impact work that is always supervised, or a person for whom the limits ask
        for supervised (or carer-led) sessions."""
        from .intensity import needs_supervision
        return (exercise.supervised or self.supervision or self.carer_led
                or needs_supervision(exercise.intensity, exercise.impact_level))

    def supervision_kind(self, plan: "Plan") -> str:
        """Who is there when the person exercises: "carer" (every session led by a carer or
        clinician), "advised" (supervised sessions, at least at first), "marked" (the exercises
        marked supervised) or "" (on their own); every page words it from this."""
        if self.carer_led:
            return "carer"
        if self.supervision:
            return "advised"
        if any(self.supervises(x) for w in plan.weeks for s in w.sessions for x in s.exercises):
            return "marked"
        return ""


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
    rest_s: Number | None = Field(None, ge=0, description="Rest between sets [s].")
    bout_gap_hours: Number | None = Field(None, ge=0, description="Hours between the bouts of a split "
                                                                  "session [h] (null with one bout).")
    notes: str = Field("", description="How to do it, in plain words.")
    load_kg: Number | None = Field(None, ge=0, description="Working load from the logged sessions [kg] "
                                                           "(an adjusted program; docs/sessions.md).")
    load_note: str | None = Field(None, description="How the working load was found.")
    why: list[Why] = Field(default_factory=list, description="Why it was chosen, why this dose and why this "
                                                             "week changes or holds, each with its source.")


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
    phase: str = Field("", description="The week's phase in words (impact and resistance).")
    impact_phase: str | None = Field(None, description="The impact part of the phase.")
    resistance_phase: str | None = Field(None, description="The resistance phase's name.")
    weak_window: bool | None = Field(None, description="Weeks 3-5 after a step up or the start: no "
                                                       "increase of any kind (null: not recorded).")
    step_up: bool | None = Field(None, description="A new or larger stimulus starts this week "
                                                   "(null: not recorded).")
    resistance_intensity_pct_1rm: Number | None = Field(None, ge=0, description="The week's highest "
                                                        "resistance load [% 1RM], null when by effort.")
    weekly_osteogenic_index: Number | None = Field(None, ge=0, description="Sum of the sessions' "
                                                   "osteogenic index [BW] (null: not recorded).")
    impact_volume: Number | None = Field(None, ge=0, description="Impact dose a session, in "
                                                                 "impact_volume_unit.")
    impact_volume_unit: str | None = Field(None, description='"reps", "minutes" or "impacts".')
    balance_minutes_per_session: Number | None = Field(None, ge=0, description="Balance work a "
                                                                               "session [min].")
    dose_of_week: int | None = Field(None, ge=1, description="In an adjusted program: the original "
                                                             "week whose dose this week repeats.")


class PlanTemplate(_Open):
    """The template a program was built from: which document, and which version of it."""

    name: str
    title: str = ""
    summary: str = ""
    version: int | None = Field(None, ge=1, description="The template's version (1 for a shipped file "
                                                         "unless it says otherwise).")
    origin: str | None = Field(None, description='"shipped" (a file of the package) or "clinic" (the store).')


class PlanSwap(_Open):
    """One exercise swapped for another by ``replace_exercise``."""

    old: str
    new: str
    week: int | None = Field(None, ge=1, description="The program week the swap was made in (null: not "
                                                     "known, e.g. before the program began).")


class PlanAdjustment(_Open):
    """The session-based advice an adjusted program applies (docs/sessions.md)."""

    decision: str
    week: int
    as_of: str
    reasons: list[dict[str, Any]] = Field(default_factory=list)
    changes: list[str] = Field(default_factory=list)
    session_ruleset_version: str | None = None


class PlanPause(_Open):
    """A program paused until a clinician has assessed the person (docs/sessions.md)."""

    from_week: int
    since: str
    reason: str = ""
    until: str = ""
    counts_from: str | None = Field(None, description="The date of the first session whose red flag paused the "
                                                      "program: sessions from then on keep counting while it "
                                                      "is paused (YYYY-MM-DD; null in older plans).")


class PlanResume(_Open):
    """The resumption a clinician recorded, lifting a pause (``prescribe resume``, docs/sessions.md)."""

    by: str = Field(min_length=1, max_length=200, description="The clinician (the login under JupyterHub).")
    at: str = Field(description="ISO 8601 UTC time the resumption was recorded.")
    reason: str = Field(min_length=1, description="Why the program may go on, in the clinician's words.")
    paused_version: int | None = Field(None, ge=1, description="The stored program version that was paused; "
                                                               "only sessions logged after it count again.")
    paused_since: str | None = Field(None, description="When the lifted pause began (YYYY-MM-DD).")
    from_week: int | None = Field(None, ge=1, description="The week the lifted pause began.")


class PlanBlock(_Open):
    """A next block after a retest (docs/reassess.md): where it continues from."""

    after_retest: str = Field(description="The retest's date (YYYY-MM-DD).")
    continues_from_week: int = Field(ge=1, description="The last week of the previous program done before "
                                                       "this block starts.")
    start_level: int | None = Field(None, ge=0, le=3, description="The impact level of week 1.")
    start_phase: str | None = Field(None, description="The resistance phase of week 1.")
    last_stimulus_week: int | None = Field(None, ge=1, description="The previous program's last week with a "
                                                                   "new or larger stimulus (before the block).")


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
    # What the planner was asked and the limits it built to.
    options: dict[str, Any] | None = Field(None, description="The planner's options, with the names the "
                                                             "clinician fixed under \"fixed\".")
    swaps: list[PlanSwap] = Field(default_factory=list, description="Exercises swapped since the plan was "
                                                                    "built, oldest first.")
    max_impacts_per_session: int | None = Field(None, description="The template's ceiling of impacts a "
                                                                  "session.")
    max_impacts_reason: str | None = Field(None, description="Why the template's ceiling is above the "
                                                             "usual one (empty otherwise).")
    start_level: int | None = Field(None, description="Impact level of week 1.")
    top_level: int | None = Field(None, description="Highest impact level the plan builds to.")
    max_impact_level: int | None = Field(None, description="The impact cap the plan was built to.")
    avoid: list[str] | None = Field(None, description="Movement patterns the plan avoids.")
    spine_sparing: bool | None = Field(None, description="Spine-sparing variants and loads throughout.")
    goals: list[str] | None = Field(None, description="Goals in plain words (the handout writes its own "
                                                      "when absent).")
    body_mass_kg: Number | None = Field(None, description="Body mass for the explained loads [kg].")
    # An adjusted program (docs/sessions.md).
    adjustment: PlanAdjustment | None = None
    paused: PlanPause | None = None
    resumed: PlanResume | None = Field(None, description="The recorded resumption that lifted the last pause.")
    # A next block after a retest (docs/reassess.md).
    block: PlanBlock | None = None
    # The limits the plan is held to, with their reasons (null in older plan files: worked out at the door).
    limits: PlanLimits | None = None


def _shared_entries(data: dict) -> dict:
    """``data`` with each distinct session and exercise entry validated once and the same model
    shared wherever the entry repeats (as the planner's own plans share theirs, so the safety
    check works each distinct session out once).  Entries are shared only when equal as JSON
    values: a session equal to the one at the same place in the week before, an exercise equal to
    one already seen under its id."""
    seen: dict[str, list[tuple[dict, PlannedExercise]]] = {}

    def exercise(x: Any) -> Any:
        if not isinstance(x, dict):
            return x
        alike = seen.setdefault(str(x.get("exercise_id")), [])
        for raw, model in alike:
            if raw == x:
                return model
        model = PlannedExercise.model_validate(x)
        alike.append((x, model))
        return model

    weeks, before = [], []
    for week in data.get("weeks") or []:
        if not isinstance(week, dict):
            return data
        now = []
        for i, session in enumerate(week.get("sessions") or []):
            if i < len(before) and before[i][0] == session:
                now.append(before[i])
                continue
            now.append((session, PlannedSession.model_validate(
                {**session, "exercises": [exercise(x) for x in session.get("exercises") or []]})))
        weeks.append({**week, "sessions": [model for _, model in now]})
        before = now
    return {**data, "weeks": weeks}


def parse_plan(data: Any, source: str | None = None, *, share: bool = False) -> Plan:
    """Validate a plan (parsed JSON); refuse another format major version.

    ``share``: repeated session and exercise entries become one shared model each (for plans that
    are read, never changed: the store's stored versions); a plan that does not validate that way
    is validated again the usual way, for the usual message."""
    if not isinstance(data, dict):
        raise PlanFileError([FieldProblem("plan", data, "a JSON object as printed by `prescribe plan`")], source)
    version = data.get("plan_format_version")
    if version is None or str(version).split(".")[0] != PLAN_FORMAT_VERSION.split(".")[0]:
        raise PlanFileError([FieldProblem("plan_format_version", version,
                                          f"a plan of format version {PLAN_FORMAT_VERSION.split('.')[0]}.x "
                                          f"(made by this version of prescribe; rebuild the plan with `prescribe plan`)")],
                            source)
    if share:
        try:
            return Plan.model_validate(_shared_entries(data))
        except (ValidationError, AttributeError, TypeError):
            pass
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


def review_dates(plan: Plan) -> list[tuple[int, date | None]]:
    """(week, first day of that week) of every review the plan asks for, in week order.

    The one place a review week becomes a date: the handout, the app and the weekly table
    read it.  Week N starts on start_date + 7(N-1) days (:func:`week_start`); a plan without
    ``start_date`` (older plan files) gets no dates, never dates counted from ``created``
    (the program may have begun later than the plan was made).
    """
    start = plan.start_date
    return [(wk.week, week_start(start, wk.week) if start else None)
            for wk in sorted(plan.weeks, key=lambda w: w.week) if wk.reassessment]


def program_week(start_date: date | str, on: date | str | None = None) -> int:
    """The program week that ``on`` (default: today) falls in; week 1 starts on ``start_date``.

    A day before the start is week 0 (the program has not begun).
    """
    start = parse_day(start_date, "start_date")
    day = date.today() if on is None else parse_day(on, "date")
    days = (day - start).days
    return 0 if days < 0 else days // 7 + 1


def start_day(plan: Plan) -> date:
    """The first day of week 1: the plan's ``start_date``; an older plan without one is taken to start
    on the day it was created (the session log, the advice, the next block and the letter count
    weeks from it)."""
    return parse_day(plan.start_date or str(plan.created)[:10], "start_date")
