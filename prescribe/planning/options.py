"""What the clinician fixes for a plan: :class:`PlanOptions`, with the ranges and defaults
of its whole-number options.

Each bound is given once, as the field's metadata (``ge``/``le``); :data:`OPTION_RANGES`
and :data:`OPTION_DEFAULTS` are read from the fields, so forms and the command line's
help offer exactly the values the options accept.  This module loads without the
planner (it needs pydantic and the rules table's template names only).
"""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from ..errors import FieldProblem, InputError
from .templates import template_names

__all__ = ["PlanOptions", "OPTION_RANGES", "OPTION_DEFAULTS", "option_range", "range_text"]

#: Balance sessions a week when the option is left unset and no falls risk is flagged; with it,
#: the template's ``balance.sessions_falls_risk``.
BALANCE_SESSIONS_DEFAULT = 3


class PlanOptions(BaseModel):
    """What the clinician fixes for a plan.  Bad values raise :class:`InputError`.

    ``balance_sessions_per_week`` left as None means 3 a week, or the template's
    ``sessions_falls_risk`` (4 in the bundled ones) when falls risk is flagged.
    ``include`` lists exercises the clinician prefers: the planner picks them first
    where their level and category fit; one that breaks rule 1 is refused.
    ``step_up_weeks`` fixes the weeks where the impact level rises (then only there);
    a week that would break rule 1, 2 or 3 (already at the cap, the level not yet held
    at full volume, or inside weeks 3-5 after the previous step-up) is refused.
    ``start_phase`` names the resistance phase week 1 starts in (a next block continuing
    from where the last one stood, docs/reassess.md); a phase the program's phases do not
    hold (a spine-sparing program has its own) starts from the first, with a caution.
    """

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)

    weeks: int = Field(26, ge=8, le=52)
    start_level: int | None = Field(None, ge=0, le=3)
    impact_sessions_per_week: int = Field(3, ge=1, le=7)
    resistance_sessions_per_week: int = Field(2, ge=1, le=3)
    balance_sessions_per_week: int | None = Field(None, ge=2, le=7)
    exclude: tuple[str, ...] = ()
    include: tuple[str, ...] = ()
    template: str | None = None
    step_up_weeks: tuple[int, ...] = ()
    start_phase: str | None = Field(None, min_length=1, max_length=40)

    def __init__(self, **data: Any):
        for key in ("exclude", "include", "step_up_weeks"):
            if isinstance(data.get(key), list):
                data[key] = tuple(data[key])
        try:
            super().__init__(**data)
        except ValidationError as err:
            problems = []
            for e in err.errors(include_url=False):
                field = str(e["loc"][0]) if e["loc"] else "options"
                if e["type"] == "extra_forbidden":
                    problems.append(FieldProblem(field, e.get("input"), "a known option (" +
                                                 ", ".join(type(self).model_fields) + ")", kind="unknown_field"))
                elif field not in {p.field for p in problems}:
                    problems.append(FieldProblem(field, e.get("input"), _OPTION_ALLOWED.get(field, "a valid value")))
            raise InputError(problems) from None
        if self.template is not None and self.template not in template_names():
            raise InputError.single("template", self.template, _OPTION_ALLOWED["template"])
        late = [w for w in self.step_up_weeks if not 2 <= w <= self.weeks]
        if late:
            raise InputError.single("step_up_weeks", late[0] if len(late) == 1 else late,
                                    f"weeks from 2 to the plan's last week ({self.weeks})")


def _bounds(name: str) -> tuple[int, int]:
    meta = PlanOptions.model_fields[name].metadata
    low = next(m.ge for m in meta if hasattr(m, "ge"))
    high = next(m.le for m in meta if hasattr(m, "le"))
    return int(low), int(high)


#: option name -> (smallest, largest) accepted value (read from the fields' bounds).
OPTION_RANGES: dict[str, tuple[int, int]] = {
    name: _bounds(name) for name in ("weeks", "start_level", "impact_sessions_per_week",
                                     "resistance_sessions_per_week", "balance_sessions_per_week")}

#: option name -> the value used when the clinician leaves the option unset.
OPTION_DEFAULTS: dict[str, int] = {
    **{name: PlanOptions.model_fields[name].default
       for name in ("weeks", "impact_sessions_per_week", "resistance_sessions_per_week")},
    # Without falls risk; with it, the template's balance.sessions_falls_risk.
    "balance_sessions_per_week": BALANCE_SESSIONS_DEFAULT,
}

_OPTION_ALLOWED = {
    "weeks": "a whole number of weeks from {} to {}".format(*OPTION_RANGES["weeks"]),
    "start_level": "an impact level 0, 1, 2 or 3, or null to let the planner choose",
    "impact_sessions_per_week": "a whole number from {} to {}".format(*OPTION_RANGES["impact_sessions_per_week"]),
    "resistance_sessions_per_week": "a whole number from {} to {} (on non-consecutive days)".format(
        *OPTION_RANGES["resistance_sessions_per_week"]),
    "balance_sessions_per_week": "a whole number from {} to {} (balance work at least twice a week), or null "
                                 "for the default".format(*OPTION_RANGES["balance_sessions_per_week"]),
    "exclude": "a list of exercise ids from the catalogue",
    "include": "a list of exercise ids from the catalogue",
    "template": "one of " + ", ".join(template_names()) + ", or null for the default",
    "step_up_weeks": "a list of week numbers (whole numbers) where the clinician wants the impact level raised",
    "start_phase": "the name of a resistance phase of the template (1 to 40 characters), or null for the first",
}


def option_range(name: str) -> tuple[int, int]:
    """The smallest and largest value :class:`PlanOptions` accepts for a whole-number option.

    Forms offer exactly these values, so a choice on screen is never refused for its range.
    """
    if name not in OPTION_RANGES:
        raise ValueError(f"{name} is not a whole-number option with a range")
    return OPTION_RANGES[name]


def range_text(name: str) -> str:
    """``"LOW-HIGH"`` for a whole-number option (help texts)."""
    low, high = OPTION_RANGES[name]
    return f"{low}-{high}"
