"""The one safety check every program passes before it is saved or applied.

A thin door to :func:`prescribe.safety.assert_safe`, so the session commands call it
in one place.  A program that breaks a rule is refused with
:class:`prescribe.errors.UnsafeProgram` (bad input, exit 2) naming the rule, the week,
the exercise and what is allowed; nothing is stored.
"""

from __future__ import annotations

from ..plan_schema import Plan, parse_plan


def assert_program_safe(plan: Plan | dict, screening=None, *, door: str = "", record=None) -> Plan:
    """Return the validated plan, or raise UnsafeProgram when the safety check finds a violation."""
    from ..safety import assert_safe
    parsed = plan if isinstance(plan, Plan) else parse_plan(plan, source=door or None)
    assert_safe(parsed, screening, door=door, record=record)
    return parsed
