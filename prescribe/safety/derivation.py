"""A plan's embedded screening and limits must be the ones its record gives: worked out again
at every door (PRODUCT.md "One derivation of every figure").

A hand edit of a plan file can loosen its copy of the screening ("cap 3, avoid nothing") or its
limits; the exercises may still be safe, but every page printed from the file would then say
what is not so.  Such a plan is refused, naming the field.  A screening stricter than the
record's (kept from an older rule set, or given by the caller) is not refused: the plan follows
the stricter, and so do its limits.
"""

from __future__ import annotations

from typing import Iterator

from .facts import _Facts
from .limits import rescreen
from .model import SafetyViolation

SRC_DERIVATION = ("common practice (clinical safety): every figure a page prints is worked out again from the "
                  "person's record at every door; a copy that differs is refused, not printed")

#: Screening fields that hold a program back, and how a copy can be looser than the record's.
_BOOL_FIELDS = ("falls_risk", "balance_first", "refer", "supervision", "carer_led", "hold_volume")


def _looser(embedded, fresh) -> list[tuple[str, object, object]]:
    """(field, embedded value, the record's value) for each field the embedded copy holds less."""
    out = []
    if embedded.max_impact_level > fresh.max_impact_level:
        out.append(("max_impact_level", embedded.max_impact_level, fresh.max_impact_level))
    missing = sorted(set(fresh.avoid) - set(embedded.avoid))
    if missing:
        out.append(("avoid", sorted(embedded.avoid), sorted(fresh.avoid)))
    for name in _BOOL_FIELDS:
        if getattr(fresh, name) and not getattr(embedded, name):
            out.append((name, False, True))
    if fresh.max_pct_1rm is not None and (embedded.max_pct_1rm is None or embedded.max_pct_1rm > fresh.max_pct_1rm):
        out.append(("max_pct_1rm", embedded.max_pct_1rm, fresh.max_pct_1rm))
    return out


def rule_screening_matches(f: _Facts) -> Iterator[SafetyViolation]:
    """The plan's embedded screening holds the person back no less than the record screened again."""
    plan = f.plan
    if plan.record is None:
        return  # nothing to screen again (the doors that need a record ask for one: require_record)
    cleared = bool(plan.cleared_by and plan.cleared_at)
    if cleared and not plan.screening.cleared:
        return  # a screening from before the clearance is superseded by the record's (docs/safety.md)
    fresh = rescreen(plan.record, cleared)
    for field, had, should in _looser(plan.screening, fresh):
        yield SafetyViolation(
            "screening_matches", None, None,
            f"the plan's screening says {field} {had!r}, but its record screened again with the current rules "
            f"gives {should!r} (field screening.{field})",
            f"screening.{field} as the record gives it ({should!r}) or stricter; rebuild the plan with "
            "`prescribe plan`", SRC_DERIVATION)


def rule_limits_match(f: _Facts) -> Iterator[SafetyViolation]:
    """The plan's limits are the ones its record, screening and template give (when it carries them)."""
    stated, derived = f.plan.limits, f.limits.derived
    if stated is None or derived is None:
        return  # an older plan file: its limits are worked out here and printed from the derivation
    for field in stated.COMPARED:
        had, should = getattr(stated, field), getattr(derived, field)
        if isinstance(had, list):
            had, should = sorted(had), sorted(should)
        if had != should:
            yield SafetyViolation(
                "limits_match", None, None,
                f"the plan's limits say {field} {had!r}, but its record, screening and template give "
                f"{should!r} (field limits.{field})",
                f"limits.{field} = {should!r} as worked out from the record; rebuild the plan with `prescribe plan`",
                SRC_DERIVATION)
