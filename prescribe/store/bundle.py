"""The patient bundle: one person with every screening, program version, session log
and audit entry, as ``prescribe export`` writes it and ``prescribe import`` reads it.

:func:`parse_bundle` checks a bundle completely before anything is written, so a
malformed bundle changes nothing.  The format is described in docs/store.md.
"""

from __future__ import annotations

import copy
from datetime import date, datetime
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from ..errors import FieldProblem, InputError
from ..plan_schema import parse_plan
from ..records import ScreeningResult, parse_record

BUNDLE_FORMAT_VERSION = "1"
BUNDLE_KIND = "prescribe patient bundle"


def _timestamp(value: str) -> str:
    try:
        parsed = datetime.fromisoformat(value)
    except ValueError:
        raise ValueError("an ISO 8601 date and time with a UTC offset") from None
    if parsed.tzinfo is None:
        raise ValueError("an ISO 8601 date and time with a UTC offset")
    return value


class _Part(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True)


class _Person(_Part):
    patient_id: str
    created: str
    updated: str
    record: dict

    _ts = field_validator("created", "updated")(_timestamp)


class _Screening(_Part):
    created: str
    ruleset_version: str
    clinician: str = Field(max_length=200)
    result: dict

    _ts = field_validator("created")(_timestamp)


class _Program(_Part):
    version: int = Field(ge=1)
    based_on_version: int | None = Field(ge=1)
    created: str
    clinician: str = Field(min_length=1, max_length=200)
    note: str
    plan: dict

    _ts = field_validator("created")(_timestamp)


class _Session(_Part):
    program_version: int | None
    session_date: str
    done: Any
    rpe: int | None = Field(ge=0, le=10)
    pain: int | None = Field(ge=0, le=10)
    notes: str
    clinician: str = Field(max_length=200)
    created: str

    _ts = field_validator("created")(_timestamp)

    @field_validator("session_date")
    @classmethod
    def _day(cls, value: str) -> str:
        try:
            date.fromisoformat(value)
        except ValueError:
            raise ValueError("a date as YYYY-MM-DD") from None
        return value


class _SessionEntry(_Part):
    """One session record (PRODUCT.md "Session record") with its week and who logged it."""

    week: int | None = Field(ge=0)
    program_version: int | None
    clinician: str = Field(max_length=200)
    created: str
    session: dict

    _ts = field_validator("created")(_timestamp)

class _SensorSummary(_Part):
    created: str
    clinician: str = Field(max_length=200)
    summary: dict

    _ts = field_validator("created")(_timestamp)

    @field_validator("summary")
    @classmethod
    def _has_days(cls, value: dict) -> dict:
        if not isinstance(value.get("days"), list):
            raise ValueError("a sensor summary with its list of days, as printed by `prescribe sensor`")
        return value


class _Retest(_Part):
    """One retest (docs/reassess.md) with the record's measures it replaced and what it led to."""

    created: str
    clinician: str = Field(max_length=200)
    retest: dict
    previous: dict
    result: dict
    decision: Literal["continue", "hold", "refer"]
    template: str | None = Field(None, max_length=120)
    verdicts: dict = Field(default_factory=dict)
    program_version: int | None = Field(None, ge=1)

    _ts = field_validator("created")(_timestamp)


class _Audit(_Part):
    at: str
    action: str = Field(min_length=1, max_length=40)
    clinician: str
    detail: dict

    _ts = field_validator("at")(_timestamp)


class _Bundle(_Part):
    bundle_format_version: Literal["1"]
    kind: Literal["prescribe patient bundle"]
    tool_version: str
    cautions: list[str] = Field(default_factory=list)
    person: _Person
    screenings: list[_Screening]
    programs: list[_Program]
    session_logs: list[_Session] = Field(default_factory=list)
    sessions: list[_SessionEntry] = Field(default_factory=list)  # optional: older bundles have none
    #: Optional: bundles written before worn-sensor summaries existed have none.
    sensor_summaries: list[_SensorSummary] = Field(default_factory=list)
    #: Optional: bundles written before retests existed have none.
    retests: list[_Retest] = Field(default_factory=list)
    audit: list[_Audit]


def _records(bundle: dict) -> list[dict]:
    """Every copy of the person's record in a bundle: the person's own and each program's."""
    out = [bundle.get("person", {}).get("record")]
    out += [(p.get("plan") or {}).get("record") for p in bundle.get("programs") or []]
    return [r for r in out if isinstance(r, dict)]


def has_display_name(bundle: dict) -> bool:
    """Whether any copy of the record in ``bundle`` (or an audit entry) carries the person's name."""
    return any("display_name" in r for r in _records(bundle)) or any(
        "display_name" in ((a.get("detail") or {}).get("previous") or {}) for a in bundle.get("audit") or [])


def without_display_name(bundle: dict) -> dict:
    """A copy of ``bundle`` without the name the person's handout uses.

    The name is taken from the person's record, from the record embedded in each program
    version's plan and from the replaced values kept in the audit log (``previous``); the
    audit still says the field changed, never to what.  The screenings carry no copy of the
    record.  ``record_version`` stays, so a record that was version 2 still reads as version 2.
    """
    out = copy.deepcopy(bundle)
    for record in _records(out):
        record.pop("display_name", None)
    for entry in out.get("audit") or []:
        previous = (entry.get("detail") or {}).get("previous")
        if isinstance(previous, dict):
            previous.pop("display_name", None)
    return out


def _where(loc: tuple) -> str:
    out = ""
    for part in loc:
        out += f"[{part}]" if isinstance(part, int) else ("." if out else "") + str(part)
    return out or "bundle"


def _allowed(error: dict) -> str:
    if error["type"] == "literal_error" and error["loc"] == ("bundle_format_version",):
        return (f"{BUNDLE_FORMAT_VERSION!r} (a bundle written by `prescribe export` of this version)")
    msg = str(error.get("ctx", {}).get("error") or error["msg"])
    for prefix in ("Value error, ", "Input should be ", "input should be "):
        if msg.startswith(prefix):
            msg = msg[len(prefix):]
    return msg


def parse_bundle(data: Any, source: str | None = None) -> dict:
    """Check a bundle and return it as plain data (raises InputError naming each bad field)."""
    if not isinstance(data, dict):
        raise InputError([FieldProblem("bundle", data, "a JSON object as written by `prescribe export`")], source)
    try:
        bundle = _Bundle.model_validate(data)
    except ValidationError as err:
        problems = []
        for e in err.errors(include_url=False):
            kind = {"missing": "missing", "extra_forbidden": "unknown_field"}.get(e["type"], "invalid")
            allowed = ("a field of the bundle format (docs/store.md)" if kind == "unknown_field"
                       else "a part of every bundle (docs/store.md)" if kind == "missing" else _allowed(e))
            problems.append(FieldProblem(_where(e["loc"]), e.get("input"), allowed, kind=kind))
        raise InputError(problems, source) from None
    out = bundle.model_dump()
    pid = bundle.person.patient_id
    problems: list[FieldProblem] = []
    try:
        record = parse_record(bundle.person.record, source="person.record")
    except InputError as exc:
        raise InputError([FieldProblem("person.record." + p.field, p.value, p.allowed, p.kind)
                          for p in exc.problems], source) from None
    if record.patient_id != pid:
        problems.append(FieldProblem("person.record.patient_id", record.patient_id, f"the bundle's patient_id {pid!r}"))
    out["person"]["record"] = record.model_dump(mode="json")
    for i, s in enumerate(bundle.screenings):
        try:
            result = ScreeningResult.model_validate(s.result)
        except ValidationError as err:
            first = err.errors(include_url=False)[0]
            problems.append(FieldProblem(f"screenings[{i}].result." + _where(first["loc"]), first.get("input"),
                                         _allowed(first)))
            continue
        if result.patient_id != pid:
            problems.append(FieldProblem(f"screenings[{i}].result.patient_id", result.patient_id,
                                         f"the bundle's patient_id {pid!r}"))
        out["screenings"][i]["result"] = result.model_dump(mode="json")
    for i, p in enumerate(bundle.programs):
        if p.version != i + 1:
            problems.append(FieldProblem(f"programs[{i}].version", p.version,
                                         f"{i + 1} (versions are numbered 1, 2, 3, ... in order)"))
        if p.based_on_version is not None and p.based_on_version >= p.version:
            problems.append(FieldProblem(f"programs[{i}].based_on_version", p.based_on_version,
                                         f"an earlier version than {p.version}, or null"))
        try:
            plan = parse_plan(p.plan, source=f"programs[{i}].plan")
        except InputError as exc:
            problems.extend(FieldProblem(f"programs[{i}].plan.{q.field}", q.value, q.allowed, q.kind)
                            for q in exc.problems)
            continue
        if plan.patient_id != pid:
            problems.append(FieldProblem(f"programs[{i}].plan.patient_id", plan.patient_id,
                                         f"the bundle's patient_id {pid!r}"))
    versions = {p.version for p in bundle.programs}
    for i, s in enumerate(bundle.session_logs):
        if s.program_version is not None and s.program_version not in versions:
            problems.append(FieldProblem(f"session_logs[{i}].program_version", s.program_version,
                                         "a program version in this bundle, or null"))
    from ..outcomes.retest import parse_retest
    from ..sessions.records import parse_session
    # Sessions and retests: each names a program version of this bundle and is one of the person's own.
    for key, inner, parse in (("sessions", "session", parse_session), ("retests", "retest", parse_retest)):
        for i, item in enumerate(getattr(bundle, key)):
            if item.program_version is not None and item.program_version not in versions:
                problems.append(FieldProblem(f"{key}[{i}].program_version", item.program_version,
                                             "a program version in this bundle, or null"))
            try:
                rec = parse(getattr(item, inner))
            except InputError as exc:
                problems.extend(FieldProblem(f"{key}[{i}].{inner}.{q.field}", q.value, q.allowed, q.kind)
                                for q in exc.problems)
                continue
            if rec.patient_id != pid:
                problems.append(FieldProblem(f"{key}[{i}].{inner}.patient_id", rec.patient_id,
                                             f"the bundle's patient_id {pid!r}"))
            out[key][i][inner] = rec.model_dump(mode="json")
    if problems:
        raise InputError(problems, source)
    return out
