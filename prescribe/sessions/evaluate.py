"""The next-step rules applied to a program and its logged sessions: which rules fire, and why.

The rules are data (:mod:`prescribe.sessions.rules`, ``data/rules/sessions.toml``), each with a
source; this module reads the sessions and the program for each kind of rule and returns
the fired rules' reasons.  Which sessions' red flags count is :func:`red_flag_scope`.
"""

from __future__ import annotations

from datetime import date, timedelta
from statistics import mean

from ..plan_schema import Plan, start_day, week_start
from .lifts import qualifying_lifts
from .pause import active_pause
from .records import LoggedSession
from .rules import SessionRule, SessionRuleSet

#: Said with a low adherence: only logged sessions count, and a clinic often sees the person
#: once a week while the other sessions are done at home.
HOME_SESSIONS_COUNT = "; sessions the person did at home count once each is logged with its date"


def reason(rule: SessionRule, detail: str = "") -> dict:
    """A fired rule as the advice lists it: {rule, message, source, decision}."""
    msg = rule.message + (f" ({detail})" if detail else "")
    return {"rule": rule.id, "message": msg, "source": rule.source, "decision": rule.decision}


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


def red_flag_scope(plan: Plan, sessions: list[LoggedSession], version: int | None,
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
        since, before = pause.counts_from, plan.based_on_version
        scope = [s for s in sessions if (since and s.record.session_date >= since)
                 or (s.program_version is not None and s.program_version in (version, before))]
    else:
        scope = [s for s in sessions if version is not None and s.program_version == version]
    if latest is not None and latest not in scope:
        scope.append(latest)
    after = counts_after_version or (plan.resumed.paused_version if plan.resumed else None)
    if after is not None:
        scope = [s for s in scope if s.program_version is not None and s.program_version > after]
    return scope


def _planned_days(plan: Plan, week: int) -> int:
    """How many days of ``week`` have a session (0 beyond the program)."""
    return len({s.day for s in plan.weeks[week - 1].sessions}) if 1 <= week <= len(plan.weeks) else 0


def evaluate(rules: SessionRuleSet, plan: Plan, sessions: list[LoggedSession], week: int, today: date,
             baseline_pain: int, version: int | None,
             counts_after_version: int | None = None) -> tuple[list[dict], dict]:
    """The reasons of every rule that fires (:func:`reason`), and the lifts that earned more load."""
    fired: list[dict] = []
    lifts: dict = {}
    latest = sessions[-1] if sessions else None
    scope = red_flag_scope(plan, sessions, version, counts_after_version)
    symptoms = {c for s in scope for c in s.record.symptoms}
    start = start_day(plan)
    for rule in rules.rules:
        p, k = rule.params, rule.kind
        if k == "symptom_any":
            hit = sorted(symptoms.intersection(p.get("codes", [])))
            if hit:
                fired.append(reason(rule, "reported: " + ", ".join(hit)))
        elif k == "fell":
            falls = [s.record.session_date for s in scope if s.record.fell_since_last]
            if falls:
                fired.append(reason(rule, "reported at the session of " + ", ".join(falls)))
        elif k == "always":
            fired.append(reason(rule))
        elif k == "paused":
            pause = active_pause(plan)
            if pause is not None:
                fired.append(reason(rule, f"paused since {pause.since} from week {pause.from_week}"))
        elif latest is None:
            if k == "no_sessions":
                fired.append(reason(rule))
            elif k == "break_days_at_least" and (today - start).days >= int(p["days"]):
                fired.append(reason(rule, f"nothing logged in the {(today - start).days} days since the start"))
            elif k == "adherence_below" and week >= 2:
                fired.append(reason(rule, _adherence_detail(start, week - 1, _planned_days(plan, week - 1), [])))
        elif k == "pain_during_above":
            if latest.record.pain_during > p["above"]:
                fired.append(reason(rule, f"{latest.record.pain_during}/10 on {latest.record.session_date}"))
        elif k in ("pain_next_morning_above", "pain_not_settled"):
            told = [s for s in sessions[-2:] if s.record.pain_next_morning is not None]
            if told:
                nm = told[-1].record.pain_next_morning
                if k == "pain_next_morning_above" and nm > p["above"]:
                    fired.append(reason(rule, f"{nm}/10 after {told[-1].record.session_date}"))
                if k == "pain_not_settled" and nm > max(int(p.get("safe_max", 2)), baseline_pain):
                    fired.append(reason(rule, f"{nm}/10 after {told[-1].record.session_date}; "
                                              f"usual pain at intake {baseline_pain}/10"))
        elif k == "pain_rising":
            by_week: dict[int, list[int]] = {}
            for s in sessions:
                by_week.setdefault(s.week, []).append(s.record.pain_during)
            ws = sorted(by_week)
            if len(ws) >= 2:
                a, b = mean(by_week[ws[-2]]), mean(by_week[ws[-1]])
                if b - a >= p.get("by", 1):
                    fired.append(reason(rule, f"week {ws[-2]}: {a:.1f}/10, week {ws[-1]}: {b:.1f}/10"))
        elif k == "session_rpe_above":
            r = latest.record.session_rpe
            if r is not None and r > p["above"]:
                fired.append(reason(rule, f"CR10 {r:g} on {latest.record.session_date}"))
        elif k == "adherence_below":
            last = week - 1
            planned = _planned_days(plan, last)
            if planned:
                done = len({s.record.session_date for s in sessions if s.week == last})
                if done / planned < float(p["fraction"]):
                    days = sorted({s.record.day for s in sessions if s.week == last})
                    fired.append(reason(rule, _adherence_detail(start, last, planned, days)))
        elif k == "break_days_at_least":
            gap = (today - latest.record.day).days
            if gap >= int(p["days"]):
                fired.append(reason(rule, f"{gap} days since {latest.record.session_date}"))
        elif k == "reps_beyond_target":
            lifts = qualifying_lifts(rule, plan, sessions)
            if lifts:
                fired.append(reason(rule, "; ".join(f"{e}: {why}" for e, (_, _, why) in lifts.items())))
    return fired, lifts


def first_red_flag(rules: SessionRuleSet, plan: Plan, sessions: list[LoggedSession], version: int | None,
                   counts_after_version: int | None) -> str | None:
    """The date of the first session in scope with a stop_and_refer red flag (a pause counts
    its sessions from then on), or None."""
    codes = {c for r in rules.rules if r.decision == "stop_and_refer" and r.kind == "symptom_any"
             for c in r.params.get("codes", [])}
    falls = any(r.decision == "stop_and_refer" and r.kind == "fell" for r in rules.rules)
    days = [s.record.session_date for s in red_flag_scope(plan, sessions, version, counts_after_version)
            if codes.intersection(s.record.symptoms) or (falls and s.record.fell_since_last)]
    return min(days) if days else None
