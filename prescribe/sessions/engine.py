"""The next-step engine: from a program and its logged sessions to a decision and an
adjusted program.

:func:`assess` evaluates the rules of :mod:`prescribe.sessions.rules` (data, each with
a source; :mod:`prescribe.sessions.evaluate`) and returns an :class:`Advice`: the program
week of the next session, the decision (progress | hold | step_back | stop_and_refer), its
reasons, what the adjusted program changes, the cautions, the estimated 1RM of each lift
(:mod:`prescribe.sessions.lifts`) and the adjusted program itself (``Advice.program``, a
:class:`prescribe.plan_schema.Plan`; :mod:`prescribe.sessions.adjusted`).

A progress decision never lands in weeks 3 to 5 after a new or larger stimulus of either
kind, impact or resistance (:func:`prescribe.stimulus.week_stages`, the derivation the
safety check holds every program to): there it becomes hold, with that reason.  A paused
program stays paused until a clinician records the resumption
(:mod:`prescribe.sessions.pause`): while it is paused the advice stays stop_and_refer and
the red flags that paused it keep counting; after the resumption only sessions logged
after it count.

Pure domain code: no store, no widgets; the typed plan in and out.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date
from typing import Iterable

from ..cautions import with_standard
from ..plan_schema import Plan, program_week, start_day
from ..stimulus import STIMULUS_WORDS, week_stages
from .adjusted import adjusted_program
from .evaluate import evaluate, first_red_flag, reason
from .lifts import estimate_1rm, last_loads
from .records import LoggedSession
from .rules import RANK, SessionRuleSet, default_rules

__all__ = ["Advice", "LoggedSession", "assess", "weak_window_reason"]


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
    program: Plan | None = None

    def as_dict(self) -> dict:
        return {"patient_id": self.patient_id, "week": self.week, "decision": self.decision,
                "reasons": self.reasons, "changes": self.changes, "cautions": self.cautions,
                "estimated_1rm": self.estimated_1rm, "next_loads_kg": self.next_loads,
                "session_ruleset_version": self.ruleset_version, "as_of": self.as_of}


def weak_window_reason(plan: Plan, week: int) -> str | None:
    """Why ``week`` of ``plan`` holds (weeks 3-5 after a new or larger stimulus, or a week the plan
    labels a window; :func:`prescribe.stimulus.week_stages`), or None when it does not."""
    stages = {st.week: st for st in week_stages(plan.weeks)}
    stage = stages.get(week)
    if stage is None or not stage.weak:
        return None
    if stage.window is None:
        return f"week {week} is labelled a remodelling window in the program (no increase)"
    start, pos = stage.window
    what = " and ".join(STIMULUS_WORDS.get(k, "loading") for k in stages[start].stimulus)
    return f"week {week} is week {pos} after the new or larger stimulus ({what}) of week {start}"


def assess(plan: Plan, sessions: Iterable[LoggedSession], *, today: date | None = None,
           baseline_pain: int = 0, program_version: int | None = None,
           rules: SessionRuleSet | None = None, counts_after_version: int | None = None) -> Advice:
    """The next step for one person.

    Parameters
    ----------
    plan : Plan
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
        against it (and always in the latest session; see
        :func:`prescribe.sessions.evaluate.red_flag_scope`).
    counts_after_version : int, optional
        The paused version a clinician last lifted (``prescribe resume``): sessions logged
        against it or an earlier version no longer count for the red flags.
    """
    if not isinstance(plan, Plan):
        raise TypeError("assess takes a prescribe.plan_schema.Plan (validate a plan file with parse_plan)")
    rules = rules or default_rules()
    today = today or date.today()
    sessions = sorted(sessions, key=lambda s: (s.record.session_date, s.session_id or 0))
    week = min(max(program_week(start_day(plan), today), 1), len(plan.weeks))
    fired, lifts = evaluate(rules, plan, sessions, week, today, baseline_pain, program_version,
                            counts_after_version)
    top = max((RANK[r["decision"]] for r in fired), default=0)
    decision = next(d for d, i in RANK.items() if i == top)
    if decision == "progress":
        reasons = [r for r in fired if r["decision"] == "progress"]
        if any(r["rule"] != "session.as_planned" for r in reasons):
            reasons = [r for r in reasons if r["rule"] != "session.as_planned"]
        win = rules.by_kind("weak_window")
        why = weak_window_reason(plan, week) if win else None
        if why:
            decision = "hold"
            reasons = [reason(win[0], why)] + \
                [{**r, "message": r["message"] + " (not applied: weak window)"} for r in reasons]
            lifts = {}
    else:
        reasons = [r for r in fired if r["decision"] == decision] + \
                  [r for r in fired if r["decision"] != decision and r["decision"] != "progress"]
    e1rm = estimate_1rm(sessions)
    pause_rules = frozenset(r.id for r in rules.by_kind("paused"))
    program, changes = adjusted_program(plan, week, decision, reasons, e1rm, lifts if decision == "progress" else {},
                                        last_loads(sessions), today,
                                        first_red_flag(rules, plan, sessions, program_version, counts_after_version),
                                        pause_rules)
    cautions = with_standard([*(["Stop: refer for assessment before any further loading."]
                                if decision == "stop_and_refer" else []), *plan.cautions])
    for r in reasons:
        r.pop("decision", None)
    return Advice(patient_id=plan.patient_id, week=week, decision=decision, reasons=reasons, changes=changes,
                  cautions=cautions, estimated_1rm=e1rm,
                  next_loads={e: b for e, (_, b, _) in lifts.items()} if decision == "progress" else {},
                  ruleset_version=rules.version, as_of=today.isoformat(), program=program)
