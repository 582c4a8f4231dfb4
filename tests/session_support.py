"""Helpers shared by the session tests (this module holds no tests).  Invented people only."""

from __future__ import annotations

from datetime import date, timedelta
from functools import lru_cache

from prescribe.plan_schema import Plan, parse_plan
from prescribe.planning import PlanOptions, build_plan
from prescribe.records import parse_record
from prescribe.sessions.records import LoggedSession, parse_session

START = date(2026, 6, 1)  # a Monday
PID = "SES-0001"


def person(pid: str = PID, **changes):
    data = {"patient_id": pid, "age_years": 63, "sex": "female", "body_mass_kg": 66.0, "height_cm": 163.0,
            "t_scores": {"lumbar_spine": -1.7, "femoral_neck": -1.9}, "fractures": [], "falls_past_year": 0,
            "timed_up_and_go_s": 7.5, "chair_stand_30s": 15, "tandem_stance_s": 10, "conditions": [],
            "pain_score": 0}
    data.update(changes)
    return parse_record(data)


@lru_cache(maxsize=8)
def _plan(pid: str, weeks: int, start: str) -> dict:
    plan = build_plan(person(pid), options=PlanOptions(weeks=weeks), created="2026-06-01T08:00:00+00:00")
    return plan.model_copy(update={"start_date": start}).model_dump(mode="json")


def plan_dict(pid: str = PID, weeks: int = 26, start: date = START) -> dict:
    """A planner-built program as plan JSON data (a fresh copy each call)."""
    import copy
    return copy.deepcopy(_plan(pid, weeks, start.isoformat()))


@lru_cache(maxsize=8)
def program(pid: str = PID, weeks: int = 26, start: date = START) -> Plan:
    """A planner-built program, typed (shared: read it, change copies only)."""
    return parse_plan(_plan(pid, weeks, start.isoformat()))


def day_of(week: int, offset: int = 0, start: date = START) -> date:
    return start + timedelta(days=7 * (week - 1) + offset)


def logged(week: int, offset: int = 0, *, pid: str = PID, version: int | None = 1, sid: int = 0,
           start: date = START, **fields) -> LoggedSession:
    data = {"patient_id": pid, "session_date": day_of(week, offset, start).isoformat(), "pain_during": 0}
    data.update(fields)
    return LoggedSession(parse_session(data), week, version, sid)


def full_weeks(weeks, plan: Plan | dict, pid: str = PID, **fields) -> list[LoggedSession]:
    """Every planned session day of the given weeks done, with ``fields``."""
    plan = plan if isinstance(plan, Plan) else parse_plan(plan)
    out = []
    for w in weeks:
        days = sorted({s.day for s in plan.weeks[w - 1].sessions})
        for d in days:
            out.append(logged(w, d - 1, pid=pid, sid=len(out) + 1, **fields))
    return out
