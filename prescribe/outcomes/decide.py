"""After a retest: continue, hold or refer, and the next block that continues from the current levels.

:func:`decide` reads the compared measures, the falls since the last visit, the height
lost and the re-screened record, and returns the decision with its reasons (each with
its source, from ``prescribe/data/retest_measures.toml``): the strongest finding wins
(refer over hold over continue).

:func:`next_block` builds the next program version when the decision is ``continue``:
the planner on the re-screened record with the same template and options, starting at
the impact level and in the resistance phase of the last week done of the current
program (never back to week 1), and starting no earlier than the end of weeks 3-5 after
the current program's last new or larger stimulus (so no step up falls inside that
window: until then the current program goes on).  The result passes the one safety check.

Pure domain code: plans are plain dicts in and out; no store.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date

from ..plan_schema import Plan, PlanBlock, program_week, start_day, week_start
from ..stimulus import WEAK_WINDOW_WEEKS, week_stages
from ..records import PatientRecord, ScreeningResult
from .measures import decision_rules, measure_rules

__all__ = ["RANK", "Decision", "decide", "next_block", "cleared_rules", "needs_new_clearance"]

#: Strength of each decision: the strongest finding wins.
RANK: dict[str, int] = {"continue": 0, "hold": 1, "refer": 2}


@dataclass
class Decision:
    decision: str
    reasons: list[dict]
    flags: list[dict] = field(default_factory=list)


def _reason(key: str, **fmt) -> dict:
    rule = decision_rules()[key]
    return {"rule": f"reassess.{key}", "decision": rule["decision"], "message": rule["message"].format(**fmt),
            "source": rule["source"], "status": rule["status"]}


def _fmt(x: float) -> str:
    return f"{x:+g}"


def cleared_rules(plan: Plan | None) -> set[str]:
    """The screening rules a recorded clearance of ``plan`` lifted."""
    if plan is None or not plan.cleared_by:
        return set()
    return {f.rule for f in plan.screening.flags if f.lifted_by_clearance}


def needs_new_clearance(screening: ScreeningResult, plan: Plan | None) -> list[str]:
    """Rules of ``screening`` (screened without a clearance) that ask for one the current program
    does not already hold: a referral or a cap that waits for a clinician's clearance."""
    done = cleared_rules(plan)
    return [f.rule for f in screening.flags
            if (f.until_cleared or f.severity == "clear_first") and f.rule not in done]


def decide(measures: list[dict], falls_since_last: int, height_loss: float | None, screening: ScreeningResult,
           plan: Plan | None) -> Decision:
    """continue | hold | refer, with the reasons (each with its source) and the red flags.

    ``screening`` is the re-screened record without a clearance: rules that wait for a
    clearance the current program already holds do not refer again.
    """
    rules = decision_rules()
    reasons: list[dict] = []
    flags: list[dict] = []
    if height_loss is not None and height_loss >= _height_mdc() - 1e-9:
        r = _reason("height_loss", loss=height_loss)
        reasons.append(r)
        flags.append({"flag": "height_loss", "value_cm": height_loss, "message": r["message"], "source": r["source"]})
    if falls_since_last >= int(rules["falls_many"]["falls_at_least"]):
        reasons.append(_reason("falls_many", falls=falls_since_last))
    elif falls_since_last >= int(rules["fell"]["falls_at_least"]):
        reasons.append(_reason("fell", falls=falls_since_last))
    if falls_since_last:
        flags.append({"flag": "fell", "falls": falls_since_last, "message": reasons[-1]["message"],
                      "source": reasons[-1]["source"]})
    for m in measures:
        worse = m["verdict"] == "worse" or m["verdict_since_previous"] == "worse"
        if not worse or m["measure"] == "height_cm":
            continue  # height: the height-loss rule above speaks for it
        since = m["change"] if m["verdict"] == "worse" else m["change_since_previous"]
        key = "bone_loss" if m["measure"].startswith(("t_scores.", "z_scores.")) else "worse"
        if key == "bone_loss":
            r = _reason(key, label=m["label"], change=_fmt(since), mdc=f"{m['mdc']:g}")
        else:
            r = _reason(key, label=m["label"], change=f"{_fmt(since)} {m['unit']}", mdc=f"{m['mdc']:g} {m['unit']}")
        reasons.append(r)
        flag = "pain_up" if m["measure"] == "pain_score" else "bone_loss" if key == "bone_loss" else "worse"
        flags.append({"flag": flag, "measure": m["measure"], "message": r["message"], "source": r["source"]})
    pending = needs_new_clearance(screening, plan)
    if pending:
        fired = [f for f in screening.flags if f.rule in pending]
        r = _reason("screening_refers", rules="; ".join(f.title or f.rule for f in fired))
        r["source"] = "; ".join(dict.fromkeys(f.source for f in fired)) or r["source"]  # each rule's own
        reasons.append(r)
        flags.append({"flag": "screening_refers", "rules": pending, "message": r["message"], "source": r["source"]})
    pause = plan.paused if plan is not None else None
    if pause is not None:
        reasons.append(_reason("paused", since=pause.since, reason=pause.reason or "no reason given"))
    if not reasons:
        reasons.append(_reason("continue"))
    top = max(RANK[r["decision"]] for r in reasons)
    decision = next(d for d, i in RANK.items() if i == top)
    reasons.sort(key=lambda r: -RANK[r["decision"]])
    return Decision(decision, reasons, flags)


def _height_mdc() -> float:
    """The height loss that flags a possible new vertebral fracture [cm] (the height measure's threshold)."""
    return float(measure_rules()["height_cm"].mdc)


# ---------------------------------------------------------------------------------------
# the next block
# ---------------------------------------------------------------------------------------

def next_block(plan: Plan, record: PatientRecord, retest_day: date, *, template=None, cleared_by: str | None = None,
               cleared_at: str | None = None, created: str | None = None) -> tuple[Plan, dict]:
    """The next program after a retest on ``retest_day``: (the plan, what it continues from).

    The block starts on the retest day, or later where that day falls inside weeks 3-5
    after the current program's last new or larger stimulus (then on the first day after
    that window).  It starts at the impact level and in the resistance phase of the last
    week of the current program done before it (at most the re-screened cap), with the
    current program's template, weeks and fixed options.  ``template``: a resolved clinic
    template (the template library's), else the shipped one the plan names.  The new or larger
    stimuli of the current program are :func:`prescribe.stimulus.week_stages`'.
    """
    from ..planning import PlanOptions, build_plan
    from ..planning.editing import fixed_options
    from ..safety import assert_safe, record_clearance
    weeks = plan.weeks
    start = start_day(plan)
    n = len(weeks)
    at_retest = max(program_week(start, retest_day), 1)
    ups = [st.week for st in week_stages(weeks) if st.stimulus and st.week <= min(at_retest, n)]
    last_up = ups[-1] if ups else None
    first_after_window = (last_up + WEAK_WINDOW_WEEKS[1]) if last_up is not None else 1
    begin_week = max(at_retest, first_after_window)
    starts_on = max(retest_day, week_start(start, begin_week))
    done_week = min(max(program_week(start, starts_on) - 1, 1), n)
    done = weeks[done_week - 1]
    options = fixed_options(plan)
    options.pop("step_up_weeks", None)
    level = done.impact_level
    phase = done.resistance_phase
    options.update(start_level=level, weeks=min(max(n, 8), 52))
    if phase:
        options["start_phase"] = phase
    tpl_name = (plan.template.name if plan.template else None) or (plan.options or {}).get("template")
    if template is None and tpl_name and (plan.template is None or plan.template.origin != "clinic"):
        options["template"] = tpl_name
    else:
        options.pop("template", None)
    cleared = bool(cleared_by)
    # Never above what the re-screened record and the template allow (a fall may lower the cap).
    from ..planning.builder import _default_template
    from ..planning.templates import load_template
    from ..safety import rescreen
    tpl_obj = template if template is not None else load_template(options.get("template")
                                                                 or _default_template(record))
    cap = min(rescreen(record, cleared).max_impact_level, int(tpl_obj.impact["max_level"]))
    if level > cap:
        options["start_level"] = cap
    new = build_plan(record, options=PlanOptions(**options), created=created, template=template, cleared=cleared)
    if cleared:
        new = record_clearance(new, cleared_by, cleared_at)
    info = {"starts_on": starts_on.isoformat(), "continues_from_week": done_week, "retest_week": at_retest,
            "start_level": new.start_level, "start_phase": new.weeks[0].resistance_phase, "weeks": len(new.weeks),
            "asked_start_level": level, "asked_start_phase": phase, "cap": cap, "last_stimulus_week": last_up,
            "template": (new.template.name if new.template else None)}
    new = new.model_copy(update={"start_date": starts_on.isoformat(), "block": PlanBlock(
        after_retest=retest_day.isoformat(), continues_from_week=done_week, start_level=new.start_level,
        start_phase=info["start_phase"], last_stimulus_week=last_up)})
    assert_safe(new, door="prescribe reassess: the next block", record=record)
    return new, info
