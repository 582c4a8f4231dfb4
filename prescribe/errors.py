"""The error hierarchy of prescribe.

Bad input is an exception whose message names the field, the value and what is
allowed.  A clinical finding is never an exception: it is a returned flag.

Every error carries ``exit_code``: the command line exits 2 for bad input and 1
for any other failure.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any


class PrescribeError(Exception):
    """Base of every error prescribe raises on purpose."""

    exit_code = 1


@dataclass(frozen=True)
class FieldProblem:
    """One bad field: where it is, what it held and what is allowed."""

    field: str
    value: Any
    allowed: str
    kind: str = "invalid"  # invalid | missing | unknown_field | absent

    @property
    def message(self) -> str:
        if self.kind == "absent":  # missing from a source document (a FHIR Bundle), named in its terms
            return f"{self.field} is missing: {self.allowed}."
        if self.kind == "missing":
            return f"{self.field} is required: {self.allowed}."
        if self.kind == "unknown_field":
            return f"{self.field} is not a field here; allowed: {self.allowed}."
        return f"{self.field} must be {self.allowed}, not {_show(self.value)}."

    def as_dict(self) -> dict:
        return {"field": self.field, "value": _jsonable(self.value), "allowed": self.allowed,
                "kind": self.kind, "message": self.message}


class InputError(PrescribeError, ValueError):
    """Bad input: one or more fields that break the documented contract."""

    exit_code = 2

    def __init__(self, problems: list[FieldProblem] | FieldProblem, source: str | None = None):
        if isinstance(problems, FieldProblem):
            problems = [problems]
        self.problems = list(problems)
        self.source = source
        head = f"{source}: " if source else ""
        if len(self.problems) == 1:
            text = head + self.problems[0].message
        else:
            text = head + f"{len(self.problems)} fields are not valid:\n" + "\n".join(
                "  - " + p.message for p in self.problems)
        super().__init__(text)

    @classmethod
    def single(cls, field: str, value: Any, allowed: str, source: str | None = None) -> "InputError":
        return cls([FieldProblem(field, value, allowed)], source=source)


class NotPermittedError(InputError):
    """The clinician's role does not allow this action (a clinician approving a template)."""

    def __init__(self, clinician: str, action: str, role_needed: str):
        self.clinician, self.action, self.role_needed = clinician, action, role_needed
        super().__init__(FieldProblem(
            "clinician", clinician,
            f"a clinic {role_needed} to {action} (this clinician's role is clinician; a hub admin adds "
            f"leads to the clinic-leads group, or the clinic settings list them under [roles] leads)"))


class RuleFileError(PrescribeError):
    """A screening rule file is malformed: names the file, the rule and the problem."""

    def __init__(self, file: str, rule_id: str | None, problem: str):
        self.file, self.rule_id, self.problem = file, rule_id, problem
        where = f"{file}" + (f", rule {rule_id!r}" if rule_id else "")
        super().__init__(f"{where}: {problem}")


class CatalogueError(PrescribeError):
    """The exercise catalogue is malformed: names the entry, the field and the problem."""

    def __init__(self, entry: str | None, field: str | None, problem: str, file: str | None = None):
        self.entry, self.field, self.problem, self.file = entry, field, problem, file
        parts = [p for p in (file, f"exercise {entry!r}" if entry else None,
                             f"field {field!r}" if field else None) if p]
        super().__init__(", ".join(parts) + f": {problem}")


class PlanRequestRefused(PrescribeError):
    """A clinician's request to the planner would break a safety rule."""

    exit_code = 2

    def __init__(self, rule: str, reason: str, field: str | None = None, value: Any = None):
        self.rule, self.reason, self.field, self.value = rule, reason, field, value
        super().__init__(f"refused ({rule}): {reason}")


class UnsafeProgram(InputError, PlanRequestRefused):
    """A program breaks a safety rule (:mod:`prescribe.safety`): refused at every door.

    Bad input (the command line exits 2); also a :class:`PlanRequestRefused`, so code
    that refuses an edit catches both.  ``violations`` holds every
    :class:`~prescribe.safety.SafetyViolation`; ``rule`` is the first one's rule id.
    The message names the door, then each broken rule with its week, its exercise and
    what is allowed.
    """

    exit_code = 2
    #: Violations shown in the message; the rest are counted.
    SHOWN = 5

    def __init__(self, violations: list, door: str = ""):
        self.violations = list(violations)
        self.door = door
        first = self.violations[0] if self.violations else None
        self.rule = first.rule if first else "safety"
        self.reason = first.message if first else ""
        self.field = "program"
        self.value = None
        self.source = door or None
        self.problems = [FieldProblem(_where(v), None, v.allowed) for v in self.violations]
        head = f"{door}: " if door else ""
        lines = [v.text() for v in self.violations[:self.SHOWN]]
        more = len(self.violations) - self.SHOWN
        if more > 0:
            lines.append(f"... and {more} more")
        n = len(self.violations)
        text = (head + f"refused: the program breaks {n} safety rule check{'s' if n != 1 else ''}: "
                + ("; ".join(lines) if n <= 1 else "\n  - " + "\n  - ".join(lines)))
        Exception.__init__(self, text)


def _where(v) -> str:
    """Where a violation is (the violation's own words: :meth:`prescribe.safety.SafetyViolation.where`)."""
    return v.where()


class PlanFileError(InputError):
    """A plan file is malformed or from an incompatible version."""


class StoreError(PrescribeError):
    """The record store cannot be opened or used."""


class ConflictError(StoreError):
    """A save was based on an older version than the one stored."""

    exit_code = 1


class NotFoundError(StoreError):
    """No such person or program in the store."""


class ProgramPaused(InputError):
    """A save, import or adjustment would replace a paused program (docs/sessions.md).

    Bad input (the command line exits 2); nothing is stored.  The message says since when
    and from which week the program is paused, why, and that a clinician lifts the pause
    by recording the resumption with a reason (``prescribe resume``).
    """

    def __init__(self, patient_id: str, version: int, pause: dict, door: str = ""):
        self.patient_id, self.version, self.pause, self.door = patient_id, version, dict(pause), door
        since, week = pause.get("since", "?"), pause.get("from_week", "?")
        reason = (pause.get("reason") or "").strip() or "no reason recorded"
        allowed = (f"a program saved after a clinician records the resumption: `prescribe resume {patient_id} "
                   "--clinician NAME --reason TEXT` (or Resume in the app's live-session section)")
        self.problems = [FieldProblem("program", f"version {version}, paused since {since}", allowed)]
        self.source = door or None
        head = f"{door}: " if door else ""
        Exception.__init__(self, (
            f"{head}refused: the program of {patient_id!r} (version {version}) has been paused since {since} "
            f"from week {week} for: {reason}. Nothing was stored. It stays paused until a clinician records "
            f"the resumption with a reason: `prescribe resume {patient_id} --clinician NAME --reason TEXT` "
            "(or Resume in the app's live-session section)."))


def _jsonable(value: Any) -> Any:
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    return repr(value)


def _show(value: Any) -> str:
    if isinstance(value, str):
        text = repr(value)
    else:
        text = repr(_jsonable(value))
    return text if len(text) <= 80 else text[:77] + "..."
