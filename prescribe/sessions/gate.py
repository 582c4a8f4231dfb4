"""The one safety check every program passes before it is saved or applied.

A thin door to the project's safety check, so the session commands call it in one
place.  A program that breaks a rule is refused with an :class:`InputError`-kind
error (exit 2) naming the rule, the week and what is allowed; nothing is stored.
"""

from __future__ import annotations

from ..errors import FieldProblem, InputError
from ..plan_schema import Plan, parse_plan


def assert_program_safe(plan: Plan | dict, screening=None, *, door: str = "") -> Plan:
    """Return the validated plan, or raise when the safety check finds a violation."""
    parsed = plan if isinstance(plan, Plan) else parse_plan(plan, source=door or None)
    from ..planner import check_plan
    problems = check_plan(parsed, screening)
    if problems:
        raise InputError([FieldProblem("program", p.split(":", 1)[0],
                                       f"a program that passes the safety check; refused because {p}")
                          for p in problems], source=door or None)
    return parsed
