"""A program for a person the screening refers is a draft until a clinician clears it: the
rule, the clearance and the draft test."""

from __future__ import annotations

from typing import Iterator

from ..plan_schema import Plan
from .facts import _Facts
from .model import SafetyViolation

SRC_DRAFT = ("common practice (clinical governance): a program for a person the screening refers stays a "
             "draft until a named clinician records the clearance; the refer rules' own sources are in "
             "docs/rules.md")


def rule_draft_until_cleared(f: _Facts) -> Iterator[SafetyViolation]:
    """A program for a person the screening refers is a draft until a clinician records the clearance."""
    plan = f.plan
    cleared = bool(plan.cleared_by and plan.cleared_at)
    if (plan.cleared_by or plan.cleared_at) and not cleared:
        yield SafetyViolation("draft_until_cleared", None, None,
                              "the clearance names " + ("no clinician" if not plan.cleared_by else "no time"),
                              "cleared_by (who) and cleared_at (when) recorded together", SRC_DRAFT)
    if f.limits.refer and not plan.draft and not cleared:
        yield SafetyViolation("draft_until_cleared", None, None,
                              "the screening asks that a clinician clear this person before loading, but the "
                              "program is not marked as a draft and no clearance is recorded",
                              "draft = true until a clinician records the clearance (who and when)", SRC_DRAFT)


def record_clearance(plan: Plan, cleared_by: str, cleared_at: str | None = None) -> Plan:
    """A copy of ``plan`` cleared by a clinician: ``draft`` false, who and when recorded.

    Raises
    ------
    InputError
        ``cleared_by`` is empty or longer than 120 characters, or ``cleared_at`` is not
        an ISO 8601 date and time.
    """
    from datetime import datetime, timezone

    from ..errors import InputError

    who = cleared_by.strip() if isinstance(cleared_by, str) else cleared_by
    if not isinstance(who, str) or not 1 <= len(who) <= 120 or not who.isprintable():
        raise InputError.single("cleared_by", cleared_by, "the clearing clinician's name or initials "
                                "(1-120 printable characters)")
    if cleared_at is None:
        cleared_at = datetime.now(timezone.utc).replace(microsecond=0).isoformat()
    else:
        try:
            datetime.fromisoformat(str(cleared_at))
        except ValueError:
            raise InputError.single("cleared_at", cleared_at, "an ISO 8601 date and time") from None
    cleared = plan.model_copy(update={"draft": False, "cleared_by": who, "cleared_at": str(cleared_at)})
    if plan.limits is not None:
        # With the clearance recorded, what waited for it is lifted: the limits are worked out again.
        from .limits import limits_of_plan
        cleared = cleared.model_copy(update={"limits": limits_of_plan(cleared)})
    return cleared


def is_draft(plan: Plan) -> bool:
    """True while the program must not be started: a draft with no clearance recorded."""
    return bool(plan.draft) and not (plan.cleared_by and plan.cleared_at)
