"""The next-step engine: from a program and its logged sessions to a decision and an
adjusted program.

:func:`assess` evaluates the rules of :mod:`prescribe.sessions.rules` (data, each with
a source) and returns an :class:`Advice`: the program week of the next session, the
decision (progress | hold | step_back | stop_and_refer), its reasons, what the adjusted
program changes, the cautions, the estimated 1RM of each lift and the adjusted program
itself (``Advice.program``, a plan dict).

How a decision changes the program, from the week of the next session (W) on; the
weeks before W are kept exactly as they were:

* progress: week W as written (with the next working loads where a lift qualified);
* hold: week W repeats the dose of week W-1, the rest moves one week later;
* step_back: week W takes the dose of week W-2, the rest moves two weeks later;
* stop_and_refer: the program is paused from week W (nothing changes until a
  clinician has assessed the person; every page then says so).  A paused program stays
  paused until a clinician records the resumption (:mod:`prescribe.sessions.pause`):
  while it is paused the advice stays stop_and_refer and the red flags that paused it
  keep counting; after the resumption only sessions logged after it count.

Composing the new weeks never raises anything in weeks 3 to 5 after a step-up (the
window restarts at every step-up of the new sequence): where the next week of the
old program would, the week before is repeated instead.

Pure domain code: no store, no widgets; plans are plain dicts in and out.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date, timedelta
from statistics import mean
from typing import Any, Iterable

from ..cautions import with_standard
from ..intensity import pct_1rm
from ..plan_schema import WEAK_WINDOW_WEEKS, Plan, in_weak_window, program_week, week_start
from .loads import MAX_REPS_FOR_ESTIMATE, brzycki_1rm, round_load
from .pause import active_pause, pause_caution
from .records import SessionRecord
from .rules import RANK, SessionRule, SessionRuleSet, default_rules

#: How far back each decision takes week W's dose (weeks).
STEP = {"progress": 0, "hold": 1, "step_back": 2, "stop_and_refer": 0}


@dataclass(frozen=True)
class LoggedSession:
    """A stored session: the record, its program week and the program version it was logged against."""

    record: SessionRecord
    week: int
    program_version: int | None = None
    session_id: int | None = None


@dataclass
class Advice:
    patient_id: str
    week: int
    decision: str
    reasons: list[dict]
    changes: list[str]
    cautions: list[str]
    estimated_1rm: dict[str, dict] = field(default_factory=dict)
    next_loads: dict[str, float] = field(default_factory=dict)
    ruleset_version: str = ""
    as_of: str = ""
    program: dict | None = None

    def as_dict(self) -> dict:
        return {"patient_id": self.patient_id, "week": self.week, "decision": self.decision,
                "reasons": self.reasons, "changes": self.changes, "cautions": self.cautions,
                "estimated_1rm": self.estimated_1rm, "next_loads_kg": self.next_loads,
                "session_ruleset_version": self.ruleset_version, "as_of": self.as_of}


# ---------------------------------------------------------------------------------------
# small readers of a plan dict
# ---------------------------------------------------------------------------------------

#: Said with a low adherence: only logged sessions count, and a clinic often sees the person
#: once a week while the other sessions are done at home.
HOME_SESSIONS_COUNT = "; sessions the person did at home count once each is logged with its date"

def plan_dict(plan: Plan | dict) -> dict:
    return plan.model_dump(mode="json") if isinstance(plan, Plan) else plan


def plan_start(plan: dict) -> date:
    """The plan's start_date; an older plan without one starts on the day it was created."""
    text = plan.get("start_date") or str(plan.get("created", ""))[:10]
    return date.fromisoformat(text)


def week_dose(week: dict) -> tuple[float, ...]:
    """What counts as the stimulus of a week, for the no-rise-in-the-window guard:
    (impact level, impacts a session, impact volume, resistance %1RM, resistance sets x reps)."""
    pct, vol, minutes, reps0 = 0.0, 0, 0.0, 0
    for s in week.get("sessions", []):
        svol = 0
        for x in s.get("exercises", []):
            p = pct_1rm(x.get("intensity"))
            if p is not None and p > pct:
                pct = p
            if s.get("kind") == "resistance":
                svol += int(x.get("sets") or 0) * int(x.get("reps") or 0)
            elif x.get("impact_level") == 1:
                minutes = max(minutes, float(x.get("minutes") or 0))
            elif x.get("impact_level") == 0 and s.get("kind") in ("impact", "mixed") and x.get("category") != "balance":
                reps0 = max(reps0, int(x.get("reps") or 0))
        vol = max(vol, svol)
    if not pct and week.get("resistance_intensity_pct_1rm"):
        pct = float(week["resistance_intensity_pct_1rm"])
    return (week.get("impact_level", 0), week.get("impacts_per_session", 0), minutes, reps0, pct, vol)


def step_up_weeks(weeks: list[dict]) -> list[int]:
    """Weeks (1-based) where the impact level rises; week 1 counts when it has impact work."""
    out, prev = [], 0
    for i, w in enumerate(weeks, start=1):
        lv = w.get("impact_level", 0)
        if lv > prev:
            out.append(i)
        prev = lv
    return out


def window_position(weeks: list[dict], week: int) -> tuple[int | None, int]:
    """(the step-up week before or at ``week``, the position of ``week`` counting it as 1)."""
    ups = [s for s in step_up_weeks(weeks[:week]) if s <= week]
    if not ups:
        return None, 0
    return ups[-1], week - ups[-1] + 1


# ---------------------------------------------------------------------------------------
# the rules
# ---------------------------------------------------------------------------------------

def _adherence_detail(start: date, week: int, planned: int, days: list[date]) -> str:
    """Which sessions the adherence count read: the week's days, the planned number, the dates logged."""
    first = week_start(start, week)  # week N runs from start_date + 7(N-1) days
    last = first + timedelta(days=6)
    if (first.year, first.month) == (last.year, last.month):
        span = f"{first.day} and {last.day} {last:%B %Y}"
    elif first.year == last.year:
        span = f"{first.day} {first:%B} and {last.day} {last:%B %Y}"
    else:
        span = f"{first.day} {first:%B %Y} and {last.day} {last:%B %Y}"
    logged = ("sessions on " + ", ".join(f"{d.day} {d:%B}" for d in days)) if days else "none logged"
    return (f"{len(days)} of {planned} planned sessions logged in week {week}, between {span} ({logged})"
            f"{HOME_SESSIONS_COUNT}")


def _reason(rule: SessionRule, detail: str = "") -> dict:
    msg = rule.message + (f" ({detail})" if detail else "")
    return {"rule": rule.id, "message": msg, "source": rule.source, "decision": rule.decision}


def _planned_reps(plan: dict, week: int, exercise_id: str) -> int | None:
    weeks = plan.get("weeks", [])
    if not 1 <= week <= len(weeks):
        return None
    for s in weeks[week - 1].get("sessions", []):
        for x in s.get("exercises", []):
            if x.get("exercise_id") == exercise_id and x.get("reps"):
                return int(x["reps"])
    return None


_LAST_HISTORY: list = [(None, None)]


def _lift_history(sessions: list[LoggedSession]) -> dict[str, list[tuple[LoggedSession, Any]]]:
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


def estimate_1rm(sessions: list[LoggedSession]) -> dict[str, dict]:
    """Per lift, the estimated 1RM from its latest set of 1 to 10 reps (Brzycki 1993)."""
    out = {}
    for ex_id, hist in _lift_history(sessions).items():
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


def _qualifying_lifts(rule: SessionRule, plan: dict, sessions: list[LoggedSession]) -> dict[str, tuple[float, float, str]]:
    """Lifts that earned more load: {exercise_id: (last load, next load, why)}."""
    p = rule.params
    need, extra, max_rpe = int(p.get("sessions_running", 2)), int(p.get("min_extra_reps", 1)), p.get("max_rpe", 8)
    inc = min(max(float(p.get("increase_pct", 5)), float(p.get("min_increase_pct", 2))),
              float(p.get("max_increase_pct", 10)))
    lo, hi = float(p.get("min_increase_pct", 2)), float(p.get("max_increase_pct", 10))
    out = {}
    for ex_id, hist in _lift_history(sessions).items():
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


def red_flag_scope(plan: dict, sessions: list[LoggedSession], version: int | None,
                   counts_after_version: int | None = None) -> list[LoggedSession]:
    """The sessions whose red flags (symptoms, falls) count, oldest first.

    Those logged against ``version`` and the latest session; while the plan is paused also
    every session from the first one that paused it (``paused.counts_from``) and those
    logged against the version it paused, so the red flags keep counting until a
    clinician records the resumption.  After a resumption (``counts_after_version``, else
    the plan's ``resumed.paused_version``) only sessions logged against a later version count.
    """
    latest = sessions[-1] if sessions else None
    pause = active_pause(plan)
    if pause is not None:
        since, before = pause.get("counts_from"), plan.get("based_on_version")
        scope = [s for s in sessions if (since and s.record.session_date >= since)
                 or (s.program_version is not None and s.program_version in (version, before))]
    else:
        scope = [s for s in sessions if version is not None and s.program_version == version]
    if latest is not None and latest not in scope:
        scope.append(latest)
    after = counts_after_version or (plan.get("resumed") or {}).get("paused_version")
    if after is not None:
        scope = [s for s in scope if s.program_version is not None and s.program_version > after]
    return scope


def _evaluate(rules: SessionRuleSet, plan: dict, sessions: list[LoggedSession], week: int, today: date,
              baseline_pain: int, version: int | None,
              counts_after_version: int | None = None) -> tuple[list[dict], dict]:
    fired: list[dict] = []
    lifts: dict = {}
    latest = sessions[-1] if sessions else None
    scope = red_flag_scope(plan, sessions, version, counts_after_version)
    symptoms = {c for s in scope for c in s.record.symptoms}
    start = plan_start(plan)
    weeks = plan.get("weeks", [])
    for rule in rules.rules:
        p, k = rule.params, rule.kind
        if k == "symptom_any":
            hit = sorted(symptoms.intersection(p.get("codes", [])))
            if hit:
                fired.append(_reason(rule, "reported: " + ", ".join(hit)))
        elif k == "fell":
            falls = [s.record.session_date for s in scope if s.record.fell_since_last]
            if falls:
                fired.append(_reason(rule, "reported at the session of " + ", ".join(falls)))
        elif k == "always":
            fired.append(_reason(rule))
        elif k == "paused":
            pause = active_pause(plan)
            if pause is not None:
                fired.append(_reason(rule, f"paused since {pause.get('since')} from week {pause.get('from_week')}"))
        elif latest is None:
            if k == "no_sessions":
                fired.append(_reason(rule))
            elif k == "break_days_at_least" and (today - start).days >= int(p["days"]):
                fired.append(_reason(rule, f"nothing logged in the {(today - start).days} days since the start"))
            elif k == "adherence_below" and week >= 2:
                last = week - 1
                planned = (len({s.get("day") for s in weeks[last - 1].get("sessions", [])})
                           if last <= len(weeks) else 0)
                fired.append(_reason(rule, _adherence_detail(start, last, planned, [])))
        elif k == "pain_during_above":
            if latest.record.pain_during > p["above"]:
                fired.append(_reason(rule, f"{latest.record.pain_during}/10 on {latest.record.session_date}"))
        elif k in ("pain_next_morning_above", "pain_not_settled"):
            told = [s for s in sessions[-2:] if s.record.pain_next_morning is not None]
            if told:
                nm = told[-1].record.pain_next_morning
                if k == "pain_next_morning_above" and nm > p["above"]:
                    fired.append(_reason(rule, f"{nm}/10 after {told[-1].record.session_date}"))
                if k == "pain_not_settled" and nm > max(int(p.get("safe_max", 2)), baseline_pain):
                    fired.append(_reason(rule, f"{nm}/10 after {told[-1].record.session_date}; "
                                               f"usual pain at intake {baseline_pain}/10"))
        elif k == "pain_rising":
            by_week: dict[int, list[int]] = {}
            for s in sessions:
                by_week.setdefault(s.week, []).append(s.record.pain_during)
            ws = sorted(by_week)
            if len(ws) >= 2:
                a, b = mean(by_week[ws[-2]]), mean(by_week[ws[-1]])
                if b - a >= p.get("by", 1):
                    fired.append(_reason(rule, f"week {ws[-2]}: {a:.1f}/10, week {ws[-1]}: {b:.1f}/10"))
        elif k == "session_rpe_above":
            r = latest.record.session_rpe
            if r is not None and r > p["above"]:
                fired.append(_reason(rule, f"CR10 {r:g} on {latest.record.session_date}"))
        elif k == "adherence_below":
            last = week - 1
            if 1 <= last <= len(weeks):
                planned = len({s.get("day") for s in weeks[last - 1].get("sessions", [])})
                done = len({s.record.session_date for s in sessions if s.week == last})
                if planned and done / planned < float(p["fraction"]):
                    days = sorted({s.record.day for s in sessions if s.week == last})
                    fired.append(_reason(rule, _adherence_detail(start, last, planned, days)))
        elif k == "break_days_at_least":
            gap = (today - latest.record.day).days
            if gap >= int(p["days"]):
                fired.append(_reason(rule, f"{gap} days since {latest.record.session_date}"))
        elif k == "reps_beyond_target":
            lifts = _qualifying_lifts(rule, plan, sessions)
            if lifts:
                fired.append(_reason(rule, "; ".join(f"{e}: {why}" for e, (_, _, why) in lifts.items())))
    return fired, lifts


def _first_red_flag(rules: SessionRuleSet, plan: dict, sessions: list[LoggedSession], version: int | None,
                    counts_after_version: int | None) -> str | None:
    """The date of the first session in scope with a stop_and_refer red flag (a pause counts
    its sessions from then on), or None."""
    codes = {c for r in rules.rules if r.decision == "stop_and_refer" and r.kind == "symptom_any"
             for c in r.params.get("codes", [])}
    falls = any(r.decision == "stop_and_refer" and r.kind == "fell" for r in rules.rules)
    days = [s.record.session_date for s in red_flag_scope(plan, sessions, version, counts_after_version)
            if codes.intersection(s.record.symptoms) or (falls and s.record.fell_since_last)]
    return min(days) if days else None


# ---------------------------------------------------------------------------------------
# composing the adjusted program
# ---------------------------------------------------------------------------------------

def _exceeds(a: tuple, b: tuple) -> bool:
    return any(x > y + 1e-9 for x, y in zip(a, b))


_DOSES: dict[int, tuple[list, list]] = {}


def _doses(weeks: list[dict]) -> list[tuple]:
    """week_dose of every week, remembered for the same (never changed) list of weeks."""
    hit = _DOSES.get(id(weeks))
    if hit is not None and hit[0] is weeks:
        return hit[1]
    doses = [week_dose(w) for w in weeks]
    if len(_DOSES) >= 16:
        _DOSES.clear()
    _DOSES[id(weeks)] = (weeks, doses)
    return doses


def compose_weeks(weeks: list[dict], week: int, back: int) -> tuple[list[tuple[int, bool]], list[str]]:
    """The new program as a list of (index of the old week whose dose it takes, repeated by the guard).

    Weeks before ``week`` map to themselves; week ``week`` takes old week
    ``max(1, week - back)``; each later week advances one old week unless that would
    raise anything in weeks 3-5 after a step-up of the new sequence, when it repeats.
    """
    n = len(weeks)
    doses = _doses(weeks)
    seq: list[tuple[int, bool]] = [(i, False) for i in range(week - 1)]
    notes: list[str] = []
    first = max(0, week - 1 - back)
    prev_level, s = 0, None  # s: 0-based index of the last step-up of the new sequence
    for j, (i, _) in enumerate(seq):
        if doses[i][0] > prev_level:
            s = j
        prev_level = doses[i][0]

    def append(i: int, repeated: bool) -> None:
        nonlocal prev_level, s
        if doses[i][0] > prev_level:
            s = len(seq)
        prev_level = doses[i][0]
        seq.append((i, repeated))

    idx = first
    while idx < n:
        k = len(seq)  # 0-based new week
        if s is not None and in_weak_window(k - s + 1) and seq:
            base = doses[seq[s + 1][0]]
            if doses[idx][0] > prev_level or _exceeds(doses[idx], base):
                notes.append(f"week {k + 1} repeats the dose of week {k} (weeks 3-5 after the step-up in "
                             f"week {s + 1}: nothing rises)")
                append(seq[-1][0], True)
                continue
        append(idx, False)
        idx += 1
    return seq, notes


def _describe(week: dict) -> str:
    lv, imp, minutes, reps0, pct, vol = week_dose(week)
    parts = [f"impact level {lv}"]
    if imp:
        parts.append(f"{imp} impacts a session")
    elif minutes:
        parts.append(f"{minutes:g} min of walking-type work")
    elif reps0:
        parts.append(f"{reps0} repetitions")
    if pct:
        parts.append(f"resistance at {pct:g}% 1RM")
    return ", ".join(parts)


def _annotate_loads(weeks: list[dict], start: int, decision: str, e1rm: dict, lifts: dict,
                    last_loads: dict[str, float]) -> None:
    for w in weeks[start - 1:]:
        for s in w.get("sessions", []):
            new_ex = []
            for x in s.get("exercises", []):
                ex_id = x.get("exercise_id")
                pct = pct_1rm(x.get("intensity"))
                est = (e1rm.get(ex_id) or {}).get("kg")
                load = None
                note = ""
                if pct is not None and est:
                    load = round_load(pct / 100 * est)
                    note = f"about {load:g} kg ({pct:g}% of an estimated 1RM of {est:g} kg)"
                if decision != "progress" and ex_id in last_loads and load is not None and load > last_loads[ex_id]:
                    load = last_loads[ex_id]
                    note = f"{load:g} kg, as last time (no increase while holding)"
                if decision == "progress" and ex_id in lifts:
                    bumped = lifts[ex_id][1]
                    if load is None or load < bumped:
                        load = bumped
                        note = f"{bumped:g} kg (up from {lifts[ex_id][0]:g} kg)"
                if load is not None:
                    x = {**x, "load_kg": load, "load_note": note}
                new_ex.append(x)
            s["exercises"] = new_ex


#: Why an adjusted week holds the dose it does (the session rules' sources are in data/session_rules.toml).
SRC_ADJUSTED = ("the session advice from the logged sessions (docs/sessions.md; each decision's rule and source is "
                "listed with the adjustment)")


def _why_moved(week: dict, dose_of_week: int, decision: str) -> None:
    """The week reason of each exercise of ``week`` (a copy) says it now gives the dose of another week."""
    what = {"hold": "the advice was to hold", "step_back": "the advice was to step back",
            "progress": "the program moved on as planned"}.get(decision, decision.replace("_", " "))
    reason = {"reason": f"Gives the dose of week {dose_of_week} of the earlier version: {what} after the logged "
                        "sessions", "source": SRC_ADJUSTED, "about": "week"}
    for s in week["sessions"]:
        s["exercises"] = [{**x, "why": [*(w for w in x.get("why") or () if w.get("about") != "week"), reason]}
                          for x in s["exercises"]]


def _copy_week(week: dict) -> dict:
    """A copy of a week that can be changed without touching the original (exercise dicts are
    shared and never changed in place)."""
    return {**week, "sessions": [{**s, "exercises": list(s.get("exercises", []))} for s in week.get("sessions", [])]}


def _adjusted(plan: dict, week: int, decision: str, reasons: list[dict], e1rm: dict, lifts: dict,
              last_loads: dict[str, float], today: date, counts_from: str | None = None,
              pause_rules: frozenset[str] = frozenset()) -> tuple[dict, list[str]]:
    old = plan["weeks"]
    changes: list[str] = []
    new = dict(plan)
    new.pop("paused", None)
    if decision == "stop_and_refer":
        weeks = [_copy_week(w) for w in old]
        was = active_pause(plan)
        reason = "; ".join(r["message"] for r in reasons
                           if r["decision"] == "stop_and_refer" and r["rule"] not in pause_rules)
        if was is not None:  # paused again: the same pause goes on, from its first week and day
            new["paused"] = {**was, "reason": reason or was.get("reason", "")}
        else:
            new["paused"] = {"from_week": week, "since": today.isoformat(), "reason": reason,
                             "until": "a clinician has assessed the person and decided how to go on",
                             "counts_from": counts_from}
            new.pop("resumed", None)  # a new pause: the earlier resumption no longer applies
        if 1 <= week <= len(weeks):
            weeks[week - 1]["reassessment"] = True
        new["cautions"] = with_standard([pause_caution(new["paused"]["from_week"]), *plan.get("cautions", [])])
        changes.append(f"program paused from week {week}: no further loading until a clinician has assessed the "
                       "person; week {0} is marked for reassessment".format(week))
    else:
        back = STEP[decision] if week > 1 else 0
        seq, notes = compose_weeks(old, week, back)
        weeks = []
        for k, (i, repeated) in enumerate(seq, start=1):
            w = _copy_week(old[i])
            w["week"] = k
            if k >= week and i + 1 != k:
                w["dose_of_week"] = i + 1
                _why_moved(w, i + 1, decision)
            weeks.append(w)
        ups = set(step_up_weeks(weeks))
        for k, w in enumerate(weeks, start=1):
            if k >= week:
                s, pos = window_position(weeks, k)
                w["step_up"] = k in ups
                w["weak_window"] = in_weak_window(pos)
        if len(weeks) > len(old) and not weeks[-1].get("reassessment"):
            weeks[-1]["reassessment"] = True
        if decision == "progress":
            changes.append(f"week {week} as planned: {_describe(weeks[week - 1])}" if week <= len(weeks)
                           else "the program's last week has passed: review it and plan the next block")
        elif week <= len(weeks) and seq[week - 1][0] + 1 == week:
            changes.append(f"week {week} as written: there is no earlier week to go back to")
        elif week <= len(weeks):
            src = seq[week - 1][0] + 1
            what = "repeats" if decision == "hold" else "goes back to"
            moved = len(weeks) - len(old)
            changes.append(f"week {week} {what} the dose of week {src} ({_describe(old[src - 1])}); "
                           f"the rest of the program moves {moved} week{'s' if moved != 1 else ''} later "
                           f"({len(weeks)} weeks in all)")
        changes.extend(notes)
        for ex_id, (a, b, _) in lifts.items() if decision == "progress" else ():
            changes.append(f"{ex_id}: next load {b:g} kg (up {100 * (b / a - 1):.0f}% from {a:g} kg)")
        if decision == "step_back" and week <= len(weeks):
            weeks[week - 1]["reassessment"] = True
    _annotate_loads(weeks, week, decision, e1rm, lifts, last_loads)
    new["weeks"] = weeks
    return new, changes


# ---------------------------------------------------------------------------------------
# the entry point
# ---------------------------------------------------------------------------------------

def assess(plan: Plan | dict, sessions: Iterable[LoggedSession], *, today: date | None = None,
           baseline_pain: int = 0, program_version: int | None = None,
           rules: SessionRuleSet | None = None, counts_after_version: int | None = None) -> Advice:
    """The next step for one person.

    Parameters
    ----------
    plan : Plan or dict
        The current program (the latest stored version).
    sessions : iterable of LoggedSession
        The person's sessions, oldest first.
    today : date, optional
        The day of the decision (default: today); the week of the next session is the
        program week of this day (at least 1, at most the program's last week).
    baseline_pain : int
        The person's usual pain at intake (the record's ``pain_score``), 0-10.
    program_version : int, optional
        The stored version of ``plan``: red flags are looked for in the sessions logged
        against it (and always in the latest session; see :func:`red_flag_scope`).
    counts_after_version : int, optional
        The paused version a clinician last lifted (``prescribe resume``): sessions logged
        against it or an earlier version no longer count for the red flags.
    """
    rules = rules or default_rules()
    plan = plan_dict(plan)
    today = today or date.today()
    sessions = sorted(sessions, key=lambda s: (s.record.session_date, s.session_id or 0))
    n = len(plan["weeks"])
    week = min(max(program_week(plan_start(plan), today), 1), n)
    fired, lifts = _evaluate(rules, plan, sessions, week, today, baseline_pain, program_version,
                             counts_after_version)
    top = max((RANK[r["decision"]] for r in fired), default=0)
    decision = next(d for d, i in RANK.items() if i == top)
    if decision == "progress":
        reasons = [r for r in fired if r["decision"] == "progress"]
        if any(r["rule"] != "session.as_planned" for r in reasons):
            reasons = [r for r in reasons if r["rule"] != "session.as_planned"]
        win = rules.by_kind("weak_window")
        if win:
            lo, hi = win[0].params.get("window_weeks", WEAK_WINDOW_WEEKS)
            s, pos = window_position(plan["weeks"], week)
            if s is not None and lo <= pos <= hi:
                decision = "hold"
                reasons = [_reason(win[0], f"week {week} is week {pos} after the step-up in week {s}")] + \
                    [{**r, "message": r["message"] + " (not applied: weak window)"} for r in reasons]
                lifts = {}
    else:
        reasons = [r for r in fired if r["decision"] == decision] + \
                  [r for r in fired if r["decision"] != decision and r["decision"] != "progress"]
    e1rm = estimate_1rm(sessions)
    last_loads = {e: h[-1][1].load_kg for e, h in _lift_history(sessions).items()}
    pause_rules = frozenset(r.id for r in rules.by_kind("paused"))
    program, changes = _adjusted(plan, week, decision, reasons, e1rm, lifts if decision == "progress" else {},
                                 last_loads, today, _first_red_flag(rules, plan, sessions, program_version,
                                                                    counts_after_version), pause_rules)
    cautions = with_standard([*(["Stop: refer for assessment before any further loading."]
                                if decision == "stop_and_refer" else []), *plan.get("cautions", [])])
    for r in reasons:
        r.pop("decision", None)
    return Advice(patient_id=plan["patient_id"], week=week, decision=decision, reasons=reasons, changes=changes,
                  cautions=cautions, estimated_1rm=e1rm,
                  next_loads={e: b for e, (_, b, _) in lifts.items()} if decision == "progress" else {},
                  ruleset_version=rules.version, as_of=today.isoformat(), program=program)
