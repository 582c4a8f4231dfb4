"""Planned against delivered: the program's impacts and osteogenic index on the days a
sensor was worn, the delivered share, and the days that went beyond the plan.

Dates: week N of a program runs from its start date + 7(N - 1) days; a session's
``day`` is the day of the week (1 = Monday), so it falls on the date of that weekday
inside its program week.  A plan without ``start_date`` is dated from the day its
program version was saved (the caller says so in a note).

What is compared: a program's impacts are the landings of level 2-3 exercises (peak
force 2 BW or more; PRODUCT.md), so the delivered impacts set beside them are the
counted impacts whose estimated peak force is 2 BW or more (``impacts_2bw_or_more``).
"""

from __future__ import annotations

from datetime import date, datetime, timedelta

from ..errors import InputError
from ..plan_schema import Plan
from ..stimulus import weak_weeks


def planned_by_date(plan: Plan, start: date) -> dict[str, dict]:
    """Planned impacts and osteogenic index for every dated session of the plan (a week is in a weak
    window as :func:`prescribe.stimulus.weak_weeks` says)."""
    out: dict[str, dict] = {}
    weak = weak_weeks(plan.weeks)
    for w in plan.weeks:
        first = start + timedelta(days=7 * (w.week - 1))
        for s in w.sessions:
            offset = (s.day - first.isoweekday()) % 7
            day = (first + timedelta(days=offset)).isoformat()
            entry = out.setdefault(day, {"week": w.week, "planned_impacts": 0,
                                         "planned_osteogenic_index": 0.0, "weak_window": w.week in weak,
                                         "sessions": []})
            entry["planned_impacts"] += s.impacts
            entry["planned_osteogenic_index"] += s.osteogenic_index
            entry["sessions"].append(s.kind)
    return out


def compare_with_plan(summary: dict, plan: Plan, start: date) -> dict:
    """Add the planned figures to each day of ``summary`` and the delivered share.

    Returns a dict with ``days`` (one per recorded day: date, week, planned_impacts,
    delivered_impacts, planned_osteogenic_index, delivered_osteogenic_index,
    weak_window, beyond_plan, in_program), ``weeks`` (the same summed per program
    week), ``planned_impacts``, ``delivered_impacts``, ``delivered_share``,
    ``planned_osteogenic_index``, ``delivered_osteogenic_index``,
    ``delivered_share_osteogenic_index`` and ``flags`` (days beyond the plan; inside a
    weak window they are marked for the clinician's attention).
    """
    planned = planned_by_date(plan, start)
    end = start + timedelta(days=7 * len(plan.weeks) - 1)
    weak = weak_weeks(plan.weeks)
    days, flags = [], []
    for d in summary["days"]:
        if d.get("date") is None:
            continue
        day = date.fromisoformat(d["date"])
        in_program = start <= day <= end
        week = (day - start).days // 7 + 1 if in_program else None
        p = planned.get(d["date"], {})
        delivered = d.get("impacts_2bw_or_more") or 0
        planned_n = int(p.get("planned_impacts", 0))
        row = {
            "date": d["date"], "week": week, "in_program": in_program,
            "weak_window": bool(week in weak) if week else False,
            "planned_impacts": planned_n, "delivered_impacts": int(delivered),
            "planned_osteogenic_index": round(float(p.get("planned_osteogenic_index", 0.0)), 2),
            "delivered_osteogenic_index": d.get("osteogenic_index"),
            "wear_time_h": d.get("wear_time_h"),
            "beyond_plan": in_program and delivered > planned_n,
            "delivered_share": round(delivered / planned_n, 3) if in_program and planned_n else None,
        }
        days.append(row)
        if row["beyond_plan"]:
            extra = delivered - planned_n
            if row["weak_window"]:
                flags.append({"date": row["date"], "week": week, "severity": "attention",
                              "message": f"{delivered} impacts of 2 BW or more against {planned_n} planned "
                                         f"({extra} more) in week {week}, inside the weeks 3 to 5 after a step-up "
                                         "when bone is transiently weaker: ask what was done and review the "
                                         "program."})
            else:
                flags.append({"date": row["date"], "week": week, "severity": "note",
                              "message": f"{delivered} impacts of 2 BW or more against {planned_n} planned "
                                         f"({extra} more) in week {week}."})
        elif not in_program:
            flags.append({"date": row["date"], "week": None, "severity": "note",
                          "message": "outside the program's weeks: nothing was planned for this day."})
    weeks: dict[int, dict] = {}
    for r in days:
        if r["week"] is None:
            continue
        wk = weeks.setdefault(r["week"], {"week": r["week"], "days_recorded": 0, "planned_impacts": 0,
                                          "delivered_impacts": 0, "planned_osteogenic_index": 0.0,
                                          "delivered_osteogenic_index": 0.0, "weak_window": r["weak_window"]})
        wk["days_recorded"] += 1
        for k in ("planned_impacts", "delivered_impacts"):
            wk[k] += r[k]
        wk["planned_osteogenic_index"] = round(wk["planned_osteogenic_index"] + r["planned_osteogenic_index"], 2)
        wk["delivered_osteogenic_index"] = round(wk["delivered_osteogenic_index"]
                                                 + (r["delivered_osteogenic_index"] or 0.0), 2)
    in_prog = [r for r in days if r["in_program"]]
    p_imp = sum(r["planned_impacts"] for r in in_prog)
    d_imp = sum(r["delivered_impacts"] for r in in_prog)
    p_oi = round(sum(r["planned_osteogenic_index"] for r in in_prog), 2)
    d_oi = round(sum(r["delivered_osteogenic_index"] or 0.0 for r in in_prog), 2)
    return {
        "start_date": start.isoformat(),
        "days": days,
        "weeks": [weeks[k] for k in sorted(weeks)],
        "planned_impacts": p_imp,
        "delivered_impacts": d_imp,
        "delivered_share": round(d_imp / p_imp, 3) if p_imp else None,
        "planned_osteogenic_index": p_oi,
        "delivered_osteogenic_index": d_oi,
        "delivered_share_osteogenic_index": round(d_oi / p_oi, 3) if p_oi else None,
        "flags": flags,
        "basis": "delivered impacts are those with an estimated peak force of 2 BW or more (a program's impacts "
                 "are level 2-3 landings); the delivered osteogenic index is the day's index from every counted "
                 "impact; the planned index is the sum of the plan's session indices that day",
    }


def program_start(plan: Plan, saved_at: str | None) -> tuple[date, str]:
    """The program's start date, and a note when it had to be taken from elsewhere."""
    if plan.start_date:
        return date.fromisoformat(plan.start_date), ""
    for value, what in ((saved_at, "the day its program version was saved"), (plan.created, "the day it was created")):
        if value:
            try:
                day = datetime.fromisoformat(str(value)).date()
            except ValueError:
                continue
            return day, (f"The stored program has no start_date: week 1 was taken to start on {what}, "
                         f"{day.isoformat()}.")
    raise InputError.single("start_date", None, "a start date in the stored program")


def lift_plan_figures(summary: dict) -> None:
    """Put the planned figures beside each day (and the totals at the top), as the contract reads them."""
    plan = summary["plan"]
    by_date = {d["date"]: d for d in plan["days"]}
    for d in summary["days"]:
        p = by_date.get(d.get("date"))
        if p is None:
            continue
        for k in ("week", "in_program", "weak_window", "planned_impacts", "delivered_impacts",
                  "planned_osteogenic_index", "beyond_plan", "delivered_share"):
            d[k] = p[k]
    for k in ("planned_impacts", "delivered_impacts", "delivered_share", "planned_osteogenic_index",
              "delivered_osteogenic_index", "delivered_share_osteogenic_index"):
        summary[k] = plan[k]
