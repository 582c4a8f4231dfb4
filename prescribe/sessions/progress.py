"""Planned against done, week by week: the figures the live-session charts draw.

Pure domain code over the typed plan and logged sessions; no widgets.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from statistics import mean

from ..plan_schema import Plan
from ..stimulus import week_stages
from .records import LoggedSession


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


def weekly_progress(plan: Plan, sessions: list[LoggedSession]) -> WeeklyProgress:
    """Per program week: impacts, minutes and top load planned and done; mean pain and effort.

    Weeks with no session have NaN for pain and effort (a gap in the line), 0 done; a week is
    in a weak window as :func:`prescribe.stimulus.week_stages` says.
    """
    out = WeeklyProgress()
    by_week: dict[int, list[LoggedSession]] = {}
    for s in sessions:
        by_week.setdefault(s.week, []).append(s)
    for i, (w, stage) in enumerate(zip(plan.weeks, week_stages(plan.weeks)), start=1):
        exercises = [x for s in w.sessions for x in s.exercises]
        out.week.append(i)
        out.weak_window.append(stage.weak)
        out.impacts_planned.append(sum(s.impacts for s in w.sessions))
        out.minutes_planned.append(round(sum(float(x.minutes or 0) for x in exercises), 1))
        loads = [float(x.load_kg) for x in exercises if x.load_kg is not None]
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
