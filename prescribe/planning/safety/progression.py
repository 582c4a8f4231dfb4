"""Rules on how a program progresses: one impact level at a time, and no escalation of any
kind in weeks 3-5 after a new or larger stimulus."""

from __future__ import annotations

from typing import Iterator

from ...plan_schema import weak_window_weeks
from .facts import _Facts, pct_1rm, rpe_top
from .model import SafetyViolation

SRC_ONE_LEVEL = "common practice: impact work steps up one level at a time"
SRC_REMODEL = ("Eriksen 1986, Endocr Rev 7:379 (resorption, about 3 weeks, precedes formation) and Heaney, "
               "Yates & Santora 1997, J Bone Miner Res 12:1143 (remodelling transient): no escalation in "
               "weeks 3-5 after a new or larger stimulus")


def rule_one_level_at_a_time(f: _Facts) -> Iterator[SafetyViolation]:
    """Impact steps up one level at a time (week 1 is the start level chosen)."""
    lv = f.levels
    for i in range(1, len(lv)):
        if lv[i] > lv[i - 1] + 1:
            wk = f.weeks[i]
            ex = next((x.exercise_id for s in wk.sessions for x in s.exercises if x.impact_level == lv[i]), None)
            yield SafetyViolation(
                "one_level_at_a_time", wk.week, ex,
                f"week {wk.week} steps up from impact level {lv[i - 1]} to {lv[i]}",
                f"impact level {lv[i - 1] + 1} at most (one level at a time)", SRC_ONE_LEVEL)


def _stimulus_starts(f: _Facts) -> list[int]:
    """Indexes of weeks with a new or larger stimulus of either kind.

    The first week with any impact or resistance work; a rise in impact level; a rise in
    resistance intensity (%1RM or effort).
    """
    out = []
    for i in range(len(f.weeks)):
        if i == 0:
            if f.levels[0] > 0 or f.res_pct[0] > 0 or f.res_rpe[0] > 0 or f.res_vol[0] > 0:
                out.append(0)
        elif (f.levels[i] > f.levels[i - 1] or f.res_pct[i] > f.res_pct[i - 1]
              or f.res_rpe[i] > f.res_rpe[i - 1]):
            out.append(i)
    return out


_MEASURES = (
    ("levels", "the impact level", "impact level {}", "{}"),
    ("session_max", "the impacts a session", "at most {} impacts a session", "{}"),
    ("res_pct", "the resistance intensity", "at most {}% 1RM", "{:g}% 1RM"),
    ("res_rpe", "the resistance effort", "effort at most RPE {}", "RPE {:g}"),
    ("res_vol", "the resistance volume (sets x repetitions a session)", "at most {} sets x repetitions a session",
     "{}"),
)


def rule_weak_window(f: _Facts) -> Iterator[SafetyViolation]:
    """No escalation of any kind in weeks 3-5 after a new or larger stimulus of either kind.

    Counting the week of a new or larger stimulus (the start, a higher impact level, a
    higher resistance intensity) as week 1, weeks 3, 4 and 5 carry no higher impact
    level, impacts a session, resistance intensity, effort or volume than week 2.  A week
    the plan labels as a window ("no increase") rises above the week before in nothing.
    """
    n = len(f.weeks)
    flagged: set[tuple[int, str]] = set()
    for i in _stimulus_starts(f):
        if i + 1 >= n:
            continue
        for j in sorted(weak_window_weeks([i])):  # 0-based indices of weeks 3-5 from index i
            if j >= n:
                break
            for attr, what, allowed, fmt in _MEASURES:
                values = getattr(f, attr)
                if values[j] > values[i + 1] and (j, attr) not in flagged:
                    flagged.add((j, attr))
                    wk = f.weeks[j]
                    yield SafetyViolation(
                        "weak_window", wk.week, _top_exercise(f, j, attr),
                        f"week {wk.week} raises {what} to {fmt.format(values[j])} inside weeks 3-5 after the new "
                        f"or larger stimulus of week {i + 1} (week 2 of it had {fmt.format(values[i + 1])})",
                        allowed.format(fmt.format(values[i + 1]).replace("% 1RM", "").replace("RPE ", ""))
                        + " (no increase of any kind in weeks 3-5)", SRC_REMODEL)
    for j in range(1, n):
        wk = f.weeks[j]
        if not wk.weak_window:
            continue
        for attr, what, allowed, fmt in _MEASURES:
            values = getattr(f, attr)
            if values[j] > values[j - 1] and (j, attr) not in flagged:
                flagged.add((j, attr))
                yield SafetyViolation(
                    "weak_window", wk.week, _top_exercise(f, j, attr),
                    f"week {wk.week} is labelled a remodelling window (no increase) but raises {what} from "
                    f"{fmt.format(values[j - 1])} to {fmt.format(values[j])}",
                    "no increase of any kind in a week labelled as a window", SRC_REMODEL)


def _top_exercise(f: _Facts, j: int, attr: str) -> str | None:
    wk = f.weeks[j]
    best, key = None, -1.0
    for s in wk.sessions:
        for x in s.exercises:
            if attr in ("levels", "session_max"):
                k = float(x.impact_level * 1000 + x.impacts) if x.impact_level >= 2 or attr == "levels" else -1
            elif attr == "res_pct":
                k = pct_1rm(x.intensity) or -1
            elif attr == "res_rpe":
                k = (rpe_top(x.intensity) or -1) if s.kind == "resistance" else -1
            else:
                k = float((x.sets or 0) * (x.reps or 0)) if s.kind == "resistance" else -1
            if k > key:
                best, key = x.exercise_id, k
    return best
