"""Editing a built plan: swapping an exercise, and reading back the options and swaps a
plan was made with, so a reopened program can be rebuilt with one change.

Every edit passes the one safety check (:func:`prescribe.safety.assert_safe`).
"""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from ..plan_schema import Plan
from .dosing import _session_oi
from .options import PlanOptions
from .selection import _views


def fixed_options(plan: Plan) -> dict[str, Any]:
    """The options the clinician fixed when the plan was built (its ``options.fixed``), as
    :class:`PlanOptions` keywords, so the same program can be rebuilt with one change."""
    recorded = plan.options or {}
    out = {}
    for name in recorded.get("fixed") or ():
        if name in PlanOptions.model_fields and name in recorded:
            value = recorded[name]
            out[name] = tuple(value) if isinstance(value, list) else value
    return out


def plan_swaps(plan: Plan) -> list[tuple[str, str]]:
    """The swaps :func:`replace_exercise` made on this plan, oldest first, as (old_id, new_id)."""
    return [(s.old, s.new) for s in plan.swaps or ()]


def replace_exercise(plan: Plan, old_id: str, new_id: str, catalogue=None, *, week: int | None = None) -> Plan:
    """A copy of ``plan`` with every use of ``old_id`` swapped for ``new_id``.

    The new exercise keeps the old one's dose (sets, reps, impacts, minutes, bouts,
    intensity) and brings its own level, force, directions and patterns; the week
    and session figures are recomputed.  ``week`` is the program week the swap is made
    in (the person's current week of a running program; None before it begins): it is
    recorded with the swap, and a swap to a more demanding exercise made in weeks 3-5
    after a new or larger stimulus is refused (safety rule ``weak_window``).

    Raises
    ------
    InputError
        ``old_id`` is not in the plan or ``new_id`` is not in the catalogue.
    UnsafeProgram
        The swapped plan would break a rule of :func:`prescribe.safety.check_program`
        (an :class:`InputError` and a :class:`PlanRequestRefused`).
    """
    if catalogue is None:
        from ..catalogue import default_catalogue
        catalogue = default_catalogue()
    by_id = {e.exercise_id: e for e in _views(catalogue)}
    if new_id not in by_id:
        raise InputError.single("new_id", new_id, "an exercise id from the catalogue")
    new = by_id[new_id]
    data = plan.model_dump(mode="python")
    # Why the new exercise is there: its own reasons, the swap, and the dose and week reasons of
    # the one it replaces (it keeps that dose); prescribe.planning.why.
    from ..safety import plan_limits
    from .why import SRC_SWAPPED, chosen_why
    limits = plan_limits(plan)
    old_name = next((x.name for w in plan.weeks for s in w.sessions for x in s.exercises if x.exercise_id == old_id),
                    old_id)
    new_chosen = [w.model_dump() for w in chosen_why(new, limits, falls=limits.balance_first)]
    swapped = {"reason": f"Swapped in for {old_name} by the clinician, at the same dose", "source": SRC_SWAPPED,
               "about": "chosen"}
    found = False
    for w in data["weeks"]:
        for s in w["sessions"]:
            for i, x in enumerate(s["exercises"]):
                if x["exercise_id"] != old_id:
                    continue
                found = True
                kept = [w for w in x.get("why") or () if w.get("about") in ("dose", "week")]
                x.update(exercise_id=new.exercise_id, name=new.name, category=new.category,
                         impact_level=new.impact_level, peak_grf_bw=new.peak_grf_bw,
                         directions=list(new.directions), patterns=sorted(new.patterns),
                         why=[*new_chosen, swapped, *kept])
                if new.impact_level >= 2 and not x["impacts"]:
                    x["impacts"] = int(x.get("reps") or 0) * int(x.get("sets") or 1)
                if new.impact_level < 2:
                    x["impacts"] = 0
            s["impacts"] = sum(x["impacts"] for x in s["exercises"] if x["impact_level"] >= 2)
            s["osteogenic_index"] = _session_oi(s["exercises"])
        w["impact_level"] = max((x["impact_level"] for s in w["sessions"] for x in s["exercises"]), default=0)
        w["impacts_per_session"] = max((s["impacts"] for s in w["sessions"]), default=0)
        w["weekly_osteogenic_index"] = round(sum(s["osteogenic_index"] for s in w["sessions"]), 2)
    if not found:
        raise InputError.single("old_id", old_id, "an exercise id used in this plan")
    # Kept with the plan, so a reopened program can be rebuilt with the same swaps.
    if week is not None and not (isinstance(week, int) and 1 <= week <= len(plan.weeks)):
        raise InputError.single("week", week, f"a week of the program, 1 to {len(plan.weeks)}")
    data["swaps"] = [*(data.get("swaps") or []), {"old": old_id, "new": new_id, "week": week}]
    new_plan = Plan.model_validate(data)
    from ..safety import assert_safe
    assert_safe(new_plan, door=f"replacing {old_id} with {new_id}", catalogue=catalogue)
    return new_plan

