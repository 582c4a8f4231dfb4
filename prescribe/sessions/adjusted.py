"""The adjusted program: how a decision changes the program from the week of the next session.

From the week of the next session (W) on; the weeks before W are kept exactly as they were:

* progress: week W as written (with the next working loads where a lift qualified);
* hold: week W repeats the dose of week W-1, the rest moves one week later;
* step_back: week W takes the dose of week W-2, the rest moves two weeks later;
* stop_and_refer: the program is paused from week W (nothing changes until a clinician
  has assessed the person; every page then says so).

Composing the new weeks never raises anything in weeks 3 to 5 after a new or larger
stimulus of the new sequence (:mod:`prescribe.stimulus`: impact and resistance alike):
where the next week of the old program would, the week before is repeated instead.
"""

from __future__ import annotations

from datetime import date

from ..cautions import with_standard
from ..intensity import pct_1rm
from ..loading.one_rep_max import round_load
from ..plan_schema import Plan, PlanPause, PlannedWeek, Why
from ..stimulus import Load, in_weak_window, new_stimulus, week_load, week_stages
from .pause import active_pause, pause_caution

#: How far back each decision takes week W's dose (weeks).
STEP = {"progress": 0, "hold": 1, "step_back": 2, "stop_and_refer": 0}

_LOADS: dict[int, tuple[list, list]] = {}


def _loads(weeks: list[PlannedWeek]) -> list[Load]:
    """week_load of every week, remembered for the same (never changed) list of weeks."""
    hit = _LOADS.get(id(weeks))
    if hit is not None and hit[0] is weeks:
        return hit[1]
    loads = [week_load(w) for w in weeks]
    if len(_LOADS) >= 16:
        _LOADS.clear()
    _LOADS[id(weeks)] = (weeks, loads)
    return loads


def compose_weeks(weeks: list[PlannedWeek], week: int, back: int) -> tuple[list[tuple[int, bool]], list[str]]:
    """The new program as a list of (index of the old week whose dose it takes, repeated by the guard).

    Weeks before ``week`` map to themselves; week ``week`` takes old week
    ``max(1, week - back)``; each later week advances one old week unless that would raise
    anything in weeks 3-5 after a new or larger stimulus of the new sequence (above its
    window's week 2, in any measure of :class:`prescribe.stimulus.Load`), when it repeats.
    """
    loads = _loads(weeks)
    seq: list[tuple[int, bool]] = [(i, False) for i in range(week - 1)]
    notes: list[str] = []
    starts = [s.week - 1 for s in week_stages(weeks[:week - 1], loads[:week - 1]) if s.stimulus]

    def append(i: int, repeated: bool) -> None:
        previous = loads[seq[-1][0]] if seq else None
        if new_stimulus(previous, loads[i]):
            starts.append(len(seq))
        seq.append((i, repeated))

    idx = max(0, week - 1 - back)
    while idx < len(weeks):
        k = len(seq)  # 0-based new week
        held = [s for s in starts if in_weak_window(k - s + 1)]
        raises = [s for s in held if loads[idx].rises_above(loads[seq[s + 1][0]])]
        if raises:
            s = raises[-1]
            notes.append(f"week {k + 1} repeats the dose of week {k} (weeks 3-5 after the new or larger stimulus "
                         f"in week {s + 1}: nothing rises)")
            append(seq[-1][0], True)
            continue
        append(idx, False)
        idx += 1
    return seq, notes


def describe(load: Load) -> str:
    """A week's dose in words: impact level and work, resistance load."""
    parts = [f"impact level {load.impact_level}"]
    if load.impacts:
        parts.append(f"{load.impacts} impacts a session")
    elif load.minutes:
        parts.append(f"{load.minutes:g} min of walking-type work")
    elif load.reps:
        parts.append(f"{load.reps} repetitions")
    if load.pct_1rm:
        parts.append(f"resistance at {load.pct_1rm:g}% 1RM")
    return ", ".join(parts)


def _annotate_loads(weeks: list[PlannedWeek], start: int, decision: str, e1rm: dict, lifts: dict,
                    last_loads: dict[str, float]) -> list[PlannedWeek]:
    out = list(weeks[:start - 1])
    for w in weeks[start - 1:]:
        sessions = []
        for s in w.sessions:
            new_ex = []
            for x in s.exercises:
                pct = pct_1rm(x.intensity)
                est = (e1rm.get(x.exercise_id) or {}).get("kg")
                load = None
                note = ""
                if pct is not None and est:
                    load = round_load(pct / 100 * est)
                    note = f"about {load:g} kg ({pct:g}% of an estimated 1RM of {est:g} kg)"
                if (decision != "progress" and x.exercise_id in last_loads and load is not None
                        and load > last_loads[x.exercise_id]):
                    load = last_loads[x.exercise_id]
                    note = f"{load:g} kg, as last time (no increase while holding)"
                if decision == "progress" and x.exercise_id in lifts:
                    bumped = lifts[x.exercise_id][1]
                    if load is None or load < bumped:
                        load = bumped
                        note = f"{bumped:g} kg (up from {lifts[x.exercise_id][0]:g} kg)"
                new_ex.append(x if load is None else x.model_copy(update={"load_kg": load, "load_note": note}))
            sessions.append(s.model_copy(update={"exercises": new_ex}))
        out.append(w.model_copy(update={"sessions": sessions}))
    return out


def _paused(plan: Plan, week: int, reasons: list[dict], today: date, counts_from: str | None,
            pause_rules: frozenset[str]) -> tuple[dict, list[PlannedWeek], list[str]]:
    """The program paused from ``week``: (the plan fields that change, the weeks, the changes)."""
    was = active_pause(plan)
    reason = "; ".join(r["message"] for r in reasons
                       if r["decision"] == "stop_and_refer" and r["rule"] not in pause_rules)
    update: dict = {}
    if was is not None:  # paused again: the same pause goes on, from its first week and day
        pause = was.model_copy(update={"reason": reason or was.reason})
    else:
        pause = PlanPause(from_week=week, since=today.isoformat(), reason=reason,
                          until="a clinician has assessed the person and decided how to go on",
                          counts_from=counts_from)
        update["resumed"] = None  # a new pause: the earlier resumption no longer applies
    weeks = list(plan.weeks)
    if 1 <= week <= len(weeks):
        weeks[week - 1] = weeks[week - 1].model_copy(update={"reassessment": True})
    update.update(paused=pause, cautions=with_standard([pause_caution(pause.from_week), *plan.cautions]))
    changes = [f"program paused from week {week}: no further loading until a clinician has assessed the "
               f"person; week {week} is marked for reassessment"]
    return update, weeks, changes


#: Why an adjusted week holds the dose it does (each decision's rule and source is listed with the adjustment).
SRC_ADJUSTED = ("the session advice from the logged sessions (docs/sessions.md; each decision's rule and source is "
                "listed with the adjustment)")
_MOVED = {"hold": "the advice was to hold", "step_back": "the advice was to step back",
          "progress": "the program moved on as planned"}


def _why_moved(week: PlannedWeek, dose_of_week: int, decision: str) -> PlannedWeek:
    """``week`` with each exercise's week reason saying it now gives the dose of another week."""
    what = _MOVED.get(decision, decision.replace("_", " "))
    reason = Why(reason=f"Gives the dose of week {dose_of_week} of the earlier version: {what} after the logged "
                        "sessions", source=SRC_ADJUSTED, about="week")
    return week.model_copy(update={"sessions": [
        s.model_copy(update={"exercises": [
            x.model_copy(update={"why": [*(w for w in x.why if w.about != "week"), reason]})
            for x in s.exercises]})
        for s in week.sessions]})


def adjusted_program(plan: Plan, week: int, decision: str, reasons: list[dict], e1rm: dict, lifts: dict,
                     last_loads: dict[str, float], today: date, counts_from: str | None = None,
                     pause_rules: frozenset[str] = frozenset()) -> tuple[Plan, list[str]]:
    """The program as the decision changes it from ``week``, and what changed, in words."""
    old = plan.weeks
    if decision == "stop_and_refer":
        update, weeks, changes = _paused(plan, week, reasons, today, counts_from, pause_rules)
    else:
        update, changes = {"paused": None}, []
        back = STEP[decision] if week > 1 else 0
        seq, notes = compose_weeks(old, week, back)
        weeks = [_why_moved(old[i].model_copy(update={"week": k, "dose_of_week": i + 1}), i + 1, decision)
                 if k >= week and i + 1 != k else old[i].model_copy(update={"week": k})
                 for k, (i, _) in enumerate(seq, start=1)]
        loads = _loads(old)
        stages = week_stages(weeks, [loads[i] for i, _ in seq])
        weeks = [w if k < week else w.model_copy(update={"step_up": bool(st.stimulus),
                                                          "weak_window": st.window is not None})
                 for k, (w, st) in enumerate(zip(weeks, stages), start=1)]
        if len(weeks) > len(old) and not weeks[-1].reassessment:
            weeks[-1] = weeks[-1].model_copy(update={"reassessment": True})
        if decision == "progress":
            changes.append(f"week {week} as planned: {describe(stages[week - 1].load)}" if week <= len(weeks)
                           else "the program's last week has passed: review it and plan the next block")
        elif week <= len(weeks) and seq[week - 1][0] + 1 == week:
            changes.append(f"week {week} as written: there is no earlier week to go back to")
        elif week <= len(weeks):
            src = seq[week - 1][0] + 1
            what = "repeats" if decision == "hold" else "goes back to"
            moved = len(weeks) - len(old)
            changes.append(f"week {week} {what} the dose of week {src} ({describe(loads[src - 1])}); "
                           f"the rest of the program moves {moved} week{'s' if moved != 1 else ''} later "
                           f"({len(weeks)} weeks in all)")
        changes.extend(notes)
        for ex_id, (a, b, _) in lifts.items() if decision == "progress" else ():
            changes.append(f"{ex_id}: next load {b:g} kg (up {100 * (b / a - 1):.0f}% from {a:g} kg)")
        if decision == "step_back" and week <= len(weeks):
            weeks[week - 1] = weeks[week - 1].model_copy(update={"reassessment": True})
    weeks = _annotate_loads(weeks, week, decision, e1rm, lifts, last_loads)
    return plan.model_copy(update={**update, "weeks": weeks}), changes
