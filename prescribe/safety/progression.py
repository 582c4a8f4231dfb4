"""Rules on how a program progresses: one impact level at a time, and no escalation of any
kind in weeks 3-5 after a new or larger stimulus."""

from __future__ import annotations

from typing import Iterator

from ..stimulus import stimulus_weeks, weak_window_weeks
from .facts import STRENGTH_CATEGORIES, _CatEntry, _Facts, pct_1rm, rpe_top
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
    """Indexes of weeks with a new or larger stimulus of either kind (:func:`prescribe.stimulus.new_stimulus`:
    the first week with any impact or resistance work; a rise in impact level; a rise in resistance
    intensity, %1RM or effort); worked out once per check."""
    starts = getattr(f, "_stimulus_starts", None)
    if starts is None:
        starts = f._stimulus_starts = stimulus_weeks(f.loads)
    return starts


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
    level, impacts a session, resistance intensity, effort or volume than week 2, and no
    loading exercise more demanding than the one it takes the place of in week 2
    (:func:`harder_reason`); a swap made in one of those weeks (``swaps[].week``) is no
    swap to a more demanding exercise.  A week the plan labels as a window ("no increase")
    rises above the week before in nothing.
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
    yield from _window_exercises(f, set())


#: Categories whose exercises load the skeleton: a harder one of these is a larger stimulus.
LOADING_CATEGORIES = STRENGTH_CATEGORIES | {"impact"}


def harder_reason(new: _CatEntry, old: _CatEntry) -> str | None:
    """Why exercise ``new`` asks more of the skeleton than ``old`` (None when it does not).

    More demanding: a higher impact level; the catalogue's progression of it (the same
    progression family, further along); for impact work, a higher peak ground reaction force.
    The dose a swap keeps (%1RM, sets and repetitions) is compared by the week's own measures.
    """
    if new.impact_level > old.impact_level:
        return f"impact level {new.impact_level}, above {old.exercise_id}'s {old.impact_level}"
    if new.category == old.category and new.family == old.family and new.depth > old.depth:
        steps = new.depth - old.depth
        return (f"the catalogue's progression of {old.exercise_id} ({steps} step{'s' if steps > 1 else ''} "
                "harder)")
    if "impact" in (new.category, old.category) and new.peak_grf_bw > old.peak_grf_bw + 1e-9:
        return (f"a peak ground reaction force of {new.peak_grf_bw:g} BW, above {old.exercise_id}'s "
                f"{old.peak_grf_bw:g} BW")
    return None


def _week_ids(f: _Facts, j: int) -> set[str]:
    return {x.exercise_id for s in f.weeks[j].sessions for x in s.exercises}


def _harder_brought_in(f: _Facts, j: int, ref: int) -> Iterator[tuple[str, str, str]]:
    """(new id, replaced id, why) for each loading exercise of week index ``j`` that takes the
    place of a less demanding one of week index ``ref`` (same category, the same progression
    family first)."""
    now, before = _week_ids(f, j), _week_ids(f, ref)
    gone = [f.entries[i] for i in sorted(before - now) if i in f.entries]
    for new_id in sorted(now - before):
        new = f.entries.get(new_id)
        if new is None or new.category not in LOADING_CATEGORIES:
            continue  # rule catalogue_match reports an unknown exercise
        same = [g for g in gone if g.category == new.category]
        family = [g for g in same if g.family == new.family]
        pool = family or same
        if not pool:
            continue  # an added exercise: the week's impacts and volume measures read it
        old = max(pool, key=lambda g: (g.depth, g.impact_level, g.peak_grf_bw))
        why = harder_reason(new, old)
        if why:
            yield new_id, old.exercise_id, why


def _window_weeks(f: _Facts) -> dict[int, tuple[int, int]]:
    """0-based index of each week in weeks 3-5 of a window -> (index of its stimulus week, position)."""
    out: dict[int, tuple[int, int]] = {}
    for i in _stimulus_starts(f):
        for j in sorted(weak_window_weeks([i])):
            if j < len(f.weeks):
                out.setdefault(j, (i, j - i + 1))
    return out


def _window_exercises(f: _Facts, flagged: set[tuple[int, str]]) -> Iterator[SafetyViolation]:
    """A harder exercise in weeks 3-5, planned from week to week or swapped in during those weeks."""
    windows = _window_weeks(f)
    for j, (i, pos) in sorted(windows.items()):
        if i + 1 >= len(f.weeks):
            continue
        for new_id, old_id, why in _harder_brought_in(f, j, i + 1):
            if (j, new_id) in flagged:
                continue
            flagged.add((j, new_id))
            wk = f.weeks[j]
            yield SafetyViolation(
                "weak_window", wk.week, new_id,
                f"week {wk.week} (week {pos} after the new or larger stimulus of week {i + 1}) brings in "
                f"{new_id} in place of {old_id}: {why}",
                f"{old_id} or a less demanding substitute until week {i + 1 + 5} (no increase of any kind in "
                "weeks 3-5)", SRC_REMODEL)
    for sw in f.plan.swaps or ():
        if sw.week is None or not 1 <= sw.week <= len(f.weeks):
            continue
        j = sw.week - 1
        labelled = bool(f.weeks[j].weak_window)
        if j not in windows and not labelled:
            continue
        new, old = f.entries.get(sw.new), f.entries.get(sw.old)
        if new is None or old is None:
            continue  # rule swap_same_kind reports it
        why = harder_reason(new, old)
        if not why or (j, sw.new) in flagged:
            continue
        flagged.add((j, sw.new))
        when = (f"week {windows[j][1]} after the new or larger stimulus of week {windows[j][0] + 1}"
                if j in windows else "a week labelled as a remodelling window")
        end = windows[j][0] + 1 + 5 if j in windows else sw.week + 1
        yield SafetyViolation(
            "weak_window", sw.week, sw.new,
            f"the swap of {sw.old} for {sw.new} made in week {sw.week} ({when}) raises the load: {sw.new} is {why}",
            f"keep {sw.old} or swap to a less demanding exercise now; a harder one from week {end} "
            "(no increase of any kind in weeks 3-5)", SRC_REMODEL)


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
