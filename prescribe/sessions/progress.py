"""Planned against done, week by week: the figures the live-session charts draw.

Pure domain code over a plan dict and logged sessions; no widgets.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from statistics import mean

from ..plan_schema import in_weak_window
from .engine import LoggedSession, window_position


@dataclass
class WeeklyProgress:
    week: list[int] = field(default_factory=list)
    weak_window: list[bool] = field(default_factory=list)
    impacts_planned: list[int] = field(default_factory=list)
    impacts_done: list[float] = field(default_factory=list)
    minutes_planned: list[float] = field(default_factory=list)
    minutes_done: list[float] = field(default_factory=list)
    load_planned_kg: list[float] = field(default_factory=list)
    load_done_kg: list[float] = field(default_factory=list)
    pain_during: list[float] = field(default_factory=list)
    pain_next_morning: list[float] = field(default_factory=list)
    session_rpe: list[float] = field(default_factory=list)
    sessions_done: list[int] = field(default_factory=list)


def _avg(values: list[float]) -> float:
    return round(mean(values), 2) if values else math.nan


def weekly_progress(plan: dict, sessions: list[LoggedSession]) -> WeeklyProgress:
    """Per program week: impacts, minutes and top load planned and done; mean pain and effort.

    Weeks with no session have NaN for pain and effort (a gap in the line), 0 done.
    """
    out = WeeklyProgress()
    by_week: dict[int, list[LoggedSession]] = {}
    for s in sessions:
        by_week.setdefault(s.week, []).append(s)
    weeks = plan.get("weeks", [])
    for i, w in enumerate(weeks, start=1):
        out.week.append(i)
        _, pos = window_position(weeks, i)
        out.weak_window.append(in_weak_window(pos))
        out.impacts_planned.append(sum(int(s.get("impacts") or 0) for s in w.get("sessions", [])))
        out.minutes_planned.append(round(sum(float(x.get("minutes") or 0) for s in w.get("sessions", [])
                                             for x in s.get("exercises", [])), 1))
        loads = [float(x["load_kg"]) for s in w.get("sessions", []) for x in s.get("exercises", [])
                 if x.get("load_kg") is not None]
        out.load_planned_kg.append(max(loads) if loads else math.nan)
        done = by_week.get(i, [])
        out.sessions_done.append(len(done))
        out.impacts_done.append(sum(x.impacts_done or 0 for s in done for x in s.record.exercises))
        out.minutes_done.append(round(sum(x.minutes_done or 0 for s in done for x in s.record.exercises), 1))
        lifted = [x.load_kg for s in done for x in s.record.exercises if x.load_kg]
        out.load_done_kg.append(max(lifted) if lifted else math.nan)
        out.pain_during.append(_avg([s.record.pain_during for s in done]))
        out.pain_next_morning.append(_avg([s.record.pain_next_morning for s in done
                                           if s.record.pain_next_morning is not None]))
        out.session_rpe.append(_avg([s.record.session_rpe for s in done if s.record.session_rpe is not None]))
    return out
