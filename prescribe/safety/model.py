"""What the safety check reports and holds a program to: :class:`SafetyViolation`,
:class:`Limits` and :class:`Rule`."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Callable, Iterable

# Impacts a session at most, unless a template gives a reason (the loading science's ceiling, its source with it).
from ..loading.dose import IMPACTS_PER_SESSION_MAX as IMPACTS_CEILING

if TYPE_CHECKING:
    from ..plan_schema import PlanLimits
    from .facts import _Facts



@dataclass(frozen=True)
class SafetyViolation:
    """One broken rule: where (week, exercise), what is wrong, what is allowed, and why.

    ``rule`` is a short id from :data:`RULES` (e.g. ``"impact_cap"``); ``week`` and
    ``exercise_id`` are None where the rule is about the whole plan; ``message`` is in
    plain words; ``allowed`` says what the rule allows; ``source`` is its citation (or
    "common practice").
    """

    rule: str
    week: int | None
    exercise_id: str | None
    message: str
    allowed: str
    source: str

    def where(self) -> str:
        """The rule, the week and the exercise, e.g. ``"rule weak_window, week 4, exercise box_step"``."""
        parts = [f"rule {self.rule}"]
        if self.week is not None:
            parts.append(f"week {self.week}")
        if self.exercise_id:
            parts.append(f"exercise {self.exercise_id}")
        return ", ".join(parts)

    def text(self) -> str:
        """One line naming the rule, the week, the exercise, the problem and what is allowed."""
        return f"{self.where()}: {self.message}; allowed: {self.allowed}"

    def as_dict(self) -> dict:
        return {"rule": self.rule, "week": self.week, "exercise_id": self.exercise_id,
                "message": self.message, "allowed": self.allowed, "source": self.source}


@dataclass(frozen=True)
class Limits:
    """The limits a program is held to: the strictest of every screening the check found."""

    cap: int
    avoid: frozenset[str]
    falls_risk: bool = False
    refer: bool = False
    supervision: bool = False
    spine_sparing: bool = False
    max_impacts: int = IMPACTS_CEILING
    max_pct_1rm: int | None = None      # the heaviest resistance load allowed [% 1RM]
    carer_led: bool = False             # a short program, every session supervised or carer-led
    hold_volume: bool = False           # the starting dose held until the clearance
    #: Where the limits come from, e.g. ("plan.screening", "re-screened plan.record").
    origins: tuple[str, ...] = ()
    #: The derivation they were read from (:func:`prescribe.safety.derive_limits`), with its reasons.
    derived: "PlanLimits | None" = field(default=None, compare=False, repr=False)


@dataclass(frozen=True)
class Rule:
    """One rule of the check: its id, a plain title, its source and the function that applies it."""

    rule_id: str
    title: str
    source: str
    check: Callable[["_Facts"], Iterable[SafetyViolation]] = field(repr=False)
