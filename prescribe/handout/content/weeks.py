"""A plan's figures week by week, as the charts, the tables and both audiences' pages read them.

The step-ups and the weak windows are :func:`prescribe.stimulus.week_stages`' (the check's and
the advice's own), the resistance load is read from the exercises, and the weekly osteogenic
index is :func:`prescribe.stimulus.weekly_osteogenic_index`; fields the planner may add
(``phase``; per exercise ``rest_s``, ``bout_gap_hours``, ``notes``) are used when present.
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

from ...cautions import with_standard
from ...plan_schema import Plan, PlannedWeek, review_dates
from ...stimulus import week_stages, weekly_osteogenic_index
from ..i18n import long_date, translate
from .wording import pct_1rm


@dataclass(frozen=True)
class WeekFacts:
    """One week of the plan as the charts and tables need it."""

    week: int
    impact_level: int
    impacts_per_session: int
    step_up: bool
    weak_window: bool
    resistance_pct_1rm: float | None
    reassessment: bool
    phase: str
    weekly_oi: float
    max_session_oi: float
    peak_grf_bw: float
    directions: tuple[str, ...]
    sessions: int
    #: Minutes of walking-type work (impact level 1, dosed in minutes) in one session, at most.
    walking_minutes: float = 0.0


def week_facts(plan: Plan) -> list[WeekFacts]:
    """Per-week figures.

    A step-up is a week whose impact level starts or rises; a week in the weak window is one
    :attr:`prescribe.stimulus.WeekStage.weak` holds (weeks 3-5 after a new or larger stimulus
    of impact or resistance, or labelled a window by the plan).  The resistance load is always
    read from the exercises.
    """
    weeks = sorted(plan.weeks, key=lambda w: w.week)
    out = []
    for wk, stage in zip(weeks, week_stages(weeks)):
        # The load is read from the week's exercises, never from the week's summary field: the
        # handout must not state a higher intensity than the program prescribes.
        found = [p for ex in week_exercises(wk) if (p := pct_1rm(ex.intensity)) is not None]
        pct = max(found) if found else None
        session_oi = [s.osteogenic_index for s in wk.sessions]
        loading = [ex for ex in week_exercises(wk) if ex.impact_level >= 1]
        directions = sorted({d for ex in loading for d in ex.directions})
        out.append(WeekFacts(
            week=wk.week, impact_level=wk.impact_level, impacts_per_session=wk.impacts_per_session,
            step_up=stage.impact_step_up, weak_window=stage.weak, resistance_pct_1rm=pct,
            reassessment=wk.reassessment, phase=wk.phase, weekly_oi=weekly_osteogenic_index(wk),
            max_session_oi=max(session_oi, default=0.0),
            peak_grf_bw=max((ex.peak_grf_bw for ex in loading), default=0.0),
            directions=tuple(directions), sessions=len(wk.sessions),
            walking_minutes=max((sum(ex.minutes or 0 for ex in ses.exercises if ex.impact_level == 1 and not ex.impacts)
                                 for ses in wk.sessions), default=0.0)))
    return out


def week_exercises(week: PlannedWeek):
    """Every exercise of the week, session by session."""
    for session in week.sessions:
        yield from session.exercises


def review_weeks(plan: Plan) -> list[tuple[int, str | None]]:
    """(week, date in words or None) of every review the plan asks for.

    The dates come from :func:`prescribe.plan_schema.review_dates` (counted from the plan's
    ``start_date``); a plan without a start date gets weeks only.
    """
    return [(week, day_words(when) if when else None) for week, when in review_dates(plan)]


def day_words(day: dt.date) -> str:
    """A day as the pages print it: ``20 April 2026`` (in the current language's conventions)."""
    return long_date(day)


def all_cautions(plan: Plan) -> list[str]:
    """The standard cautions first, then the plan's and the screening's own."""
    return with_standard([*plan.cautions, *plan.screening.cautions])


def person_cautions(plan: Plan) -> list[str]:
    """The cautions of the person's pages: the standard ones, what the screening's rules say to the
    person (``person_notes``), then the planner's own; never the screening's clinician-facing texts
    (they are on the clinician's pages).  In the current language."""
    for_clinician = set(plan.screening.cautions)
    texts = with_standard([*plan.screening.person_notes, *(c for c in plan.cautions if c not in for_clinician)])
    return [translate(text) for text in texts]


def person_name(plan: Plan) -> str:
    """How the person's pages address the person: the record's display_name, else the pseudonymous id."""
    record = plan.record
    return record.display_name if record is not None and record.display_name else plan.patient_id
