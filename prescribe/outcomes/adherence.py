"""Sessions done against sessions planned, over the program versions a person has had.

Pure domain code: the plans and the logged session dates in, counts out.
"""

from __future__ import annotations

from datetime import date, timedelta

from ..plan_schema import program_week
from ..sessions.engine import plan_start

__all__ = ["sessions_against_planned"]


def sessions_against_planned(versions: list[tuple[str, dict]], session_dates: list[str], until: date) -> dict:
    """Planned session days from the first program's start to ``until`` (inclusive), and the days
    with a logged session.

    ``versions``: (created, plan) of each stored program version, oldest first; on each day the
    version stored last before or on that day governs (the first one before it was stored).
    A paused version plans nothing from the week it is paused.  Returns ``{planned, done,
    from, until, fraction}`` (fraction null when nothing was planned).
    """
    if not versions:
        return {"planned": 0, "done": 0, "from": None, "until": until.isoformat(), "fraction": None}
    parsed = []
    for created, plan in versions:
        weeks = plan.get("weeks") or []
        days = [{int(s.get("day", 0)) for s in w.get("sessions", [])} for w in weeks]
        pause = (plan.get("paused") or {}).get("from_week")
        parsed.append((date.fromisoformat(str(created)[:10]), plan_start(plan), days, pause))
    first = min(p[1] for p in parsed)
    planned = 0
    d = first
    i = 0
    while d <= until:
        while i + 1 < len(parsed) and parsed[i + 1][0] <= d:
            i += 1
        _, start, days, pause = parsed[i]
        wk = program_week(start, d)
        if 1 <= wk <= len(days) and (pause is None or wk < pause) and d.isoweekday() in days[wk - 1]:
            planned += 1
        d += timedelta(days=1)
    done = len({s for s in session_dates if first.isoformat() <= s <= until.isoformat()})
    return {"planned": planned, "done": done, "from": first.isoformat(), "until": until.isoformat(),
            "fraction": round(done / planned, 3) if planned else None}
