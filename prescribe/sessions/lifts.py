"""The lifts of the logged sessions: each lift's estimated one-repetition maximum and the
lifts that earned more load.

The estimate is Brzycki's (:mod:`prescribe.loading.one_rep_max`); the load progression
follows the rule ``reps_beyond_target`` of the session rules (data, with its source).
"""

from __future__ import annotations

from typing import Any

from ..loading.one_rep_max import MAX_REPS_FOR_ESTIMATE, brzycki_1rm, round_load
from ..plan_schema import Plan
from .records import LoggedSession
from .rules import SessionRule

_LAST_HISTORY: list = [(None, None)]


def lift_history(sessions: list[LoggedSession]) -> dict[str, list[tuple[LoggedSession, Any]]]:
    """Per lift, the (session, exercise) entries with a load and reps, oldest first (the last
    list asked for is remembered: one assessment asks three times)."""
    last = _LAST_HISTORY[0]  # one read: safe when threads share the module
    if last[0] is sessions:
        return last[1]
    out: dict[str, list] = {}
    for s in sessions:
        for x in s.record.exercises:
            if x.load_kg is not None and x.load_kg > 0 and x.reps_done:
                out.setdefault(x.exercise_id, []).append((s, x))
    _LAST_HISTORY[0] = (sessions, out)
    return out


def last_loads(sessions: list[LoggedSession]) -> dict[str, float]:
    """Per lift, the load of its latest logged set [kg]."""
    return {e: h[-1][1].load_kg for e, h in lift_history(sessions).items()}


def estimate_1rm(sessions: list[LoggedSession]) -> dict[str, dict]:
    """Per lift, the estimated 1RM from its latest set of 1 to 10 reps (Brzycki 1993)."""
    out = {}
    for ex_id, hist in lift_history(sessions).items():
        s, x = hist[-1]
        entry = {"from": {"session_date": s.record.session_date, "load_kg": x.load_kg, "reps_done": x.reps_done}}
        if x.reps_done > MAX_REPS_FOR_ESTIMATE:
            entry.update(kg=None, method=None,
                         why=f"{x.reps_done} reps: the estimate is valid up to {MAX_REPS_FOR_ESTIMATE} reps only")
        else:
            entry.update(kg=round(brzycki_1rm(x.load_kg, x.reps_done), 1),
                         method="Brzycki 1993, J Phys Educ Recreat Dance 64(1):88-90")
        out[ex_id] = entry
    return out


def _planned_reps(plan: Plan, week: int, exercise_id: str) -> int | None:
    if not 1 <= week <= len(plan.weeks):
        return None
    for s in plan.weeks[week - 1].sessions:
        for x in s.exercises:
            if x.exercise_id == exercise_id and x.reps:
                return int(x.reps)
    return None


def qualifying_lifts(rule: SessionRule, plan: Plan, sessions: list[LoggedSession]) -> dict[str, tuple[float, float, str]]:
    """Lifts that earned more load: {exercise_id: (last load, next load, why)}."""
    p = rule.params
    need, extra, max_rpe = int(p.get("sessions_running", 2)), int(p.get("min_extra_reps", 1)), p.get("max_rpe", 8)
    inc = min(max(float(p.get("increase_pct", 5)), float(p.get("min_increase_pct", 2))),
              float(p.get("max_increase_pct", 10)))
    lo, hi = float(p.get("min_increase_pct", 2)), float(p.get("max_increase_pct", 10))
    out = {}
    for ex_id, hist in lift_history(sessions).items():
        if len(hist) < need:
            continue
        recent = hist[-need:]
        load = recent[-1][1].load_kg
        ok = True
        for s, x in recent:
            target = _planned_reps(plan, s.week, ex_id)
            if (target is None or abs(x.load_kg - load) > 1e-6 or x.reps_done < target + extra
                    or (x.rpe is not None and x.rpe > max_rpe)):
                ok = False
                break
        if not ok:
            continue
        new = round_load(load * (1 + inc / 100))
        if not lo <= (new / load - 1) * 100 <= hi + 1e-9:
            new = round(load * (1 + inc / 100), 1)
        target = _planned_reps(plan, recent[-1][0].week, ex_id)
        out[ex_id] = (load, new, f"{recent[-1][1].reps_done} reps against a target of {target} at {load:g} kg, "
                                 f"{need} sessions running")
    return out
