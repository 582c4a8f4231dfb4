"""The session record: what a person did in one session and how it felt.

PRODUCT.md ("Session record") fixes the fields.  Validation happens once, here; a bad
record raises :class:`prescribe.errors.InputError` naming the field, the value and
what is allowed.  A session never changes the person's intake record: today's pain
and symptoms live in the session, the intake's ``pain_score`` stays the baseline.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import TYPE_CHECKING, Any, Iterable, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from ..errors import FieldProblem, InputError
from ..identifiers import IDENTIFIER_CHARACTERS, identifier_text
from ..records import day_text, finite_number

if TYPE_CHECKING:
    from ..plan_schema import Plan

#: Symptom codes a session may carry (the vocabulary may grow; codes are never renamed).
SYMPTOMS: dict[str, str] = {
    "chest_pain": "Chest pain, pressure or tightness during or after exercise.",
    "dizziness": "Dizziness, light-headedness or feeling faint.",
    "unusual_breathlessness": "Breathlessness out of proportion to the effort, or not settling with rest.",
    "palpitations": "A racing, pounding or irregular heartbeat.",
    "new_back_pain": "New back pain, especially sudden mid-back pain (possible vertebral fracture).",
    "new_joint_pain": "New pain in a joint that was not painful before.",
    "joint_swelling": "Swelling of a joint after the session.",
}

SymptomCode = Literal["chest_pain", "dizziness", "unusual_breathlessness", "palpitations", "new_back_pain",
                      "new_joint_pain", "joint_swelling"]

#: What each field accepts, in words (messages name it).
ALLOWED: dict[str, str] = {
    "patient_id": "the id of a stored person (1 to 64 characters, " + IDENTIFIER_CHARACTERS + ")",
    "session_date": "a date as YYYY-MM-DD, not in the future and not before the program's start_date",
    "program_version": "a stored program version of this person (a whole number from 1), or null for the latest",
    "exercises": "a list of {exercise_id, sets_done, reps_done, impacts_done, minutes_done, load_kg, rpe}",
    "exercise_id": "an exercise id (1 to 64 characters, " + IDENTIFIER_CHARACTERS + ")",
    "sets_done": "a whole number from 0 to 50, or null",
    "reps_done": "a whole number from 0 to 500 (repetitions in a set), or null",
    "impacts_done": "a whole number from 0 to 1000, or null",
    "minutes_done": "a number of minutes from 0 to 600, or null",
    "load_kg": "a load in kg from 0 to 500, or null",
    "rpe": "a number from 0 to 10 on the Borg CR10 scale, or null",
    "session_rpe": "a number from 0 to 10 on the Borg CR10 scale, or null",
    "pain_during": "a whole number from 0 to 10",
    "pain_next_morning": "a whole number from 0 to 10, or null",
    "symptoms": "a list of distinct symptom codes from: " + ", ".join(SYMPTOMS),
    "fell_since_last": "true or false",
    "note": "text of at most 2000 characters",
}




class ExerciseDone(BaseModel):
    """What was done of one exercise in a session; all but ``exercise_id`` optional."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)

    exercise_id: str = Field(min_length=1, max_length=64)
    sets_done: int | None = Field(None, ge=0, le=50)
    reps_done: int | None = Field(None, ge=0, le=500, description="Repetitions in a set (the best or usual set).")
    impacts_done: int | None = Field(None, ge=0, le=1000, description="Level 2-3 landings, all bouts.")
    minutes_done: float | None = Field(None, ge=0, le=600)
    load_kg: float | None = Field(None, ge=0, le=500, description="External load of the working sets [kg].")
    rpe: float | None = Field(None, ge=0, le=10, description="Effort of the exercise, Borg CR10 (0-10).")

    _f = field_validator("minutes_done", "load_kg", "rpe")(finite_number)
    _id = field_validator("exercise_id")(identifier_text)


class SessionRecord(BaseModel):
    """One session as recorded by the clinician (PRODUCT.md, "Session record")."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)

    patient_id: str = Field(min_length=1, max_length=64)
    session_date: str
    program_version: int | None = Field(None, ge=1)
    exercises: list[ExerciseDone] = Field(default_factory=list, max_length=100)
    session_rpe: float | None = Field(None, ge=0, le=10, description="Session effort, Borg CR10 (0-10).")
    pain_during: int = Field(ge=0, le=10, description="Pain during the session, 0-10.")
    pain_next_morning: int | None = Field(None, ge=0, le=10, description="Pain the next morning, 0-10.")
    symptoms: list[SymptomCode] = Field(default_factory=list)
    fell_since_last: bool = False
    note: str = Field("", max_length=2000)

    _f = field_validator("session_rpe")(finite_number)
    _id = field_validator("patient_id")(identifier_text)

    _day = field_validator("session_date")(day_text)

    @field_validator("symptoms")
    @classmethod
    def _distinct(cls, value: list[str]) -> list[str]:
        if len(set(value)) != len(value):
            raise ValueError("a symptom is listed twice")
        return value

    @property
    def day(self) -> date:
        return date.fromisoformat(self.session_date)


def _loc(loc: tuple) -> str:
    out = ""
    for part in loc:
        if part in ("float", "int", "str", "bool", "none", "ExerciseDone", "function-after"):
            continue
        out += f"[{part}]" if isinstance(part, int) else ("." if out else "") + str(part)
    return out or "session"


def parse_session(data: Any, source: str | None = None) -> SessionRecord:
    """Validate a session record given as parsed JSON; :class:`InputError` names each bad field."""
    if not isinstance(data, dict):
        raise InputError([FieldProblem("session", data, "a JSON object with the session record's fields")], source)
    try:
        return SessionRecord.model_validate(data)
    except ValidationError as err:
        problems: list[FieldProblem] = []
        seen: set[str] = set()
        for e in err.errors(include_url=False):
            field = _loc(tuple(e["loc"]))
            if field in seen:
                continue
            seen.add(field)
            last = next((p for p in reversed(e["loc"]) if isinstance(p, str) and p in ALLOWED), None)
            if e["type"] == "extra_forbidden":
                known = ", ".join(ExerciseDone.model_fields if "exercises[" in field else SessionRecord.model_fields)
                problems.append(FieldProblem(field, e.get("input"), f"a known field ({known})", kind="unknown_field"))
            elif e["type"] == "missing":
                problems.append(FieldProblem(field, None, ALLOWED.get(last or "", "a value"), kind="missing"))
            else:
                allowed = ALLOWED.get(last or "", "a valid value")
                if last == "symptoms" or (last is None and "symptoms" in field):
                    allowed = ALLOWED["symptoms"]
                problems.append(FieldProblem(field, e.get("input"), allowed))
        raise InputError(problems, source) from None


def check_day_in_program(field: str, day: date, start_date: str | date | None, today: date | None = None,
                         source: str | None = None) -> None:
    """Refuse a day in the future or before the program's start date (InputError naming ``field``):
    the one check of a session's and a retest's day."""
    today = today or date.today()
    if day > today:
        raise InputError.single(field, day.isoformat(), f"a date not in the future (today is {today.isoformat()})",
                                source)
    if start_date is not None:
        start = start_date if isinstance(start_date, date) else date.fromisoformat(str(start_date))
        if day < start:
            raise InputError.single(field, day.isoformat(),
                                    f"a date on or after the program's start_date {start.isoformat()}", source)


def check_session_dates(session: SessionRecord, start_date: str | date | None, today: date | None = None,
                        source: str | None = None) -> None:
    """Refuse a session in the future or before the program's start date (InputError naming session_date)."""
    check_day_in_program("session_date", session.day, start_date, today, source)


def check_session_exercises(session: SessionRecord, plan: "Plan", catalogue_ids: Iterable[str],
                            version: int | None = None, source: str | None = None) -> None:
    """Refuse an exercise the catalogue does not have or the session's program version does not hold.

    ``plan`` is the stored program version; every ``exercises[i].exercise_id``
    must be one of its exercises (which are the catalogue's).  :class:`InputError` names each
    wrong id and the program's ids.
    """
    known = set(catalogue_ids)
    planned = sorted({x.exercise_id for w in plan.weeks for s in w.sessions for x in s.exercises})
    program = (f"program version {version} of {session.patient_id!r}" if version is not None
               else f"the program of {session.patient_id!r}")
    problems = []
    for i, done in enumerate(session.exercises):
        where = None
        if done.exercise_id not in known:
            where = "not in the exercise catalogue"
        elif done.exercise_id not in planned:
            where = f"not in {program}"
        if where:
            problems.append(FieldProblem(f"exercises[{i}].exercise_id", done.exercise_id,
                                         f"an exercise of {program} ({where}): " + ", ".join(planned)))
    if problems:
        raise InputError(problems, source)


@dataclass(frozen=True)
class LoggedSession:
    """A stored session: the record, its program week and the program version it was logged against."""

    record: SessionRecord
    week: int
    program_version: int | None = None
    session_id: int | None = None
