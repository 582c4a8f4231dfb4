"""Tables of a plan for reading on screen or at the command line (pandas).

The planner itself (:mod:`prescribe.planning`) never imports pandas; the readers that
want a table (``prescribe plan``'s weekly table, the app's summary) build it here.
"""

from __future__ import annotations

import pandas as pd

from .plan_schema import Plan, review_dates
from .planning.dosing import prescribed_pct_1rm
from .stimulus import week_stages, weekly_osteogenic_index

__all__ = ["weekly_summary", "SUMMARY_COLUMNS"]

#: Columns of :func:`weekly_summary`, in order.
SUMMARY_COLUMNS: list[str] = ["week", "phase", "impact_level", "impacts_per_session", "sessions",
                              "weekly_osteogenic_index", "weak_window", "reassessment",
                              "resistance_intensity_pct_1rm", "review_date"]


def weekly_summary(plan: Plan) -> pd.DataFrame:
    """One row a week: the columns of :data:`SUMMARY_COLUMNS` (``sessions`` is a count; ``review_date``
    the first day of a review week, YYYY-MM-DD, empty elsewhere or without a start date)."""
    rows = []
    # A review week is dated by its first day, counted from the plan's start_date (none without one).
    review_day = {week: when.isoformat() for week, when in review_dates(plan) if when is not None}
    weak = {st.week: st.weak for st in week_stages(plan.weeks)}
    for w in plan.weeks:
        rows.append({
            "week": w.week, "phase": w.phase, "impact_level": w.impact_level,
            "impacts_per_session": w.impacts_per_session, "sessions": len(w.sessions),
            "weekly_osteogenic_index": weekly_osteogenic_index(w),
            "weak_window": weak[w.week], "reassessment": w.reassessment,
            # Read from the exercises, so a week never states more than it prescribes.
            "resistance_intensity_pct_1rm": prescribed_pct_1rm(x for s in w.sessions for x in s.exercises),
            "review_date": review_day.get(w.week),
        })
    return pd.DataFrame(rows, columns=SUMMARY_COLUMNS)
