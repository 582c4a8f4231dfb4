"""A synthetic but valid plan for handout tests (invented person, invented clinic).

Exercise ids are those of the exercise catalogue (prescribe/data/exercises.toml).

The real planner's output is used where it exists; this factory keeps edge cases
(escaping, missing optional fields, long plans) easy to build.
"""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Iterable

from prescribe.plan_schema import PLAN_FORMAT_VERSION, Plan

# Peak ground reaction forces (BW) of the invented demo exercises, from the published
# force-plate figures the catalogue also uses:
#   stamp at moderate effort 2.9-3.1 BW (Ryan, Clissold & Winwood 2021, Sports Injr Med 5:168);
#   forceful heel drop 4.9 BW ("Osteogenic quantification ... heel drop", Int J Sci Technol Soc 2021);
#   two-foot side hops 4.48 BW within 4.02-4.93 BW (Clissold group, Am J Sports Sci 2022).
_IMPACT_EXERCISES = {
    2: [("stamp_gentle", "Stamp, moderate effort", 3.0, ["vertical"])],
    3: [("heel_drop_forceful", "Heel drop, forceful", 4.9, ["vertical"]),
        ("lateral_hop", "Side hop", 4.48, ["side_to_side", "vertical"])],
}


def _impact_exercises(level: int, impacts: int, bouts: int) -> list[dict]:
    if level <= 1:  # low impact work is prescribed in minutes, not impacts (PRODUCT.md)
        return [{"exercise_id": "brisk_walking", "name": "Brisk walking", "category": "impact", "minutes": 20,
                 "intensity": "RPE 4", "impact_level": 1, "peak_grf_bw": 1.3,
                 "directions": ["vertical", "forward_back"], "patterns": []}]
    chosen = _IMPACT_EXERCISES[level]
    share = impacts // len(chosen)
    out = []
    for i, (ex_id, name, grf, dirs) in enumerate(chosen):
        n = share if i < len(chosen) - 1 else impacts - share * (len(chosen) - 1)
        out.append({"exercise_id": ex_id, "name": name, "category": "impact", "impacts": n,
                    "bouts": bouts, "intensity": "RPE 7", "impact_level": level,
                    "peak_grf_bw": grf, "directions": dirs, "patterns": []})
    return out


def make_plan(weeks: int = 26, step_ups: Iterable[int] | None = None, *, patient_id: str = "NTC-0042",
              start_level: int = 2, note: str | None = None, extra_weeks: bool = False,
              resistance_pct: tuple[int, int] = (70, 85), reassess_every: int = 8,
              cautions: list[str] | None = None) -> dict:
    """A plan dict that validates as :class:`prescribe.plan_schema.Plan`.

    ``step_ups`` are the weeks whose impact level rises by one (default: week 9 and
    week 17 while below level 3).  ``extra_weeks`` adds the planner's optional per-week
    fields (phase, step_up, weak_window, resistance_intensity_pct_1rm,
    weekly_osteogenic_index).  ``note`` is put on the first impact exercise.
    """
    if step_ups is None:
        step_ups = [w for w in (9, 17) if w <= weeks]
    step_ups = sorted(set(step_ups))
    plan_weeks = []
    level = start_level
    impacts = 20
    since_step = 0
    pct_lo, pct_hi = resistance_pct
    for w in range(1, weeks + 1):
        step = w in step_ups and level < 3
        if step:
            level += 1
            impacts = 20  # a new, larger stimulus starts at a low count
        elif w == 1:
            impacts = 20
            since_step = 0
        else:
            since_step += 1
        weak = step_ups and any(s + 2 <= w <= s + 4 for s in step_ups)
        # Counts rise by 10 every second week outside the weak window, up to 80 a session
        # (roughly 60-100 impacts a session is the usual practical target: common practice).
        if not step and not weak and since_step % 2 == 0 and w > 1:
            impacts = min(80, impacts + 10)
        if level <= 1:
            impacts = 0
        bouts = 2 if impacts >= 40 else 1
        pct = min(pct_hi, pct_lo + 5 * ((w - 1) // 4))
        impact_ex = [{"exercise_id": "marching_on_spot", "name": "Marching on the spot", "category": "impact",
                      "minutes": 5, "intensity": "RPE 3", "impact_level": 1, "peak_grf_bw": 1.2,
                      "directions": ["vertical"], "patterns": []}] + _impact_exercises(level, impacts, bouts)
        if note and w == 1:
            impact_ex[1]["notes"] = note
        oi = round(sum(e["peak_grf_bw"] * math.log(e["impacts"] + 1) for e in impact_ex if e.get("impacts")), 2)
        resistance_ex = [
            {"exercise_id": "goblet_box_squat", "name": "Goblet squat to a box", "category": "resistance", "sets": 3,
             "reps": 8, "intensity": f"{pct}% 1RM", "impact_level": 0, "peak_grf_bw": 1.0,
             "directions": ["vertical"], "patterns": []},
            {"exercise_id": "seated_row_band", "name": "Seated row with a band", "category": "resistance", "sets": 3,
             "reps": 10, "intensity": f"{pct}% 1RM", "impact_level": 0, "peak_grf_bw": 0.0,
             "directions": ["forward_back"], "patterns": []},
        ]
        balance_ex = [{"exercise_id": "tandem_stance", "name": "Heel-to-toe stance", "category": "balance",
                       "minutes": 10, "intensity": "RPE 4", "impact_level": 0, "peak_grf_bw": 1.0,
                       "directions": [], "patterns": []}]
        sessions = [
            {"day": 1, "kind": "impact", "exercises": impact_ex, "impacts": impacts, "osteogenic_index": oi},
            {"day": 2, "kind": "resistance", "exercises": resistance_ex, "impacts": 0, "osteogenic_index": 0.0},
            {"day": 3, "kind": "impact", "exercises": impact_ex, "impacts": impacts, "osteogenic_index": oi},
            {"day": 4, "kind": "resistance", "exercises": resistance_ex, "impacts": 0, "osteogenic_index": 0.0},
            {"day": 5, "kind": "impact", "exercises": impact_ex, "impacts": impacts, "osteogenic_index": oi},
            {"day": 6, "kind": "balance", "exercises": balance_ex, "impacts": 0, "osteogenic_index": 0.0},
        ]
        week = {"week": w, "impact_level": level, "impacts_per_session": impacts,
                "reassessment": w % reassess_every == 0 or w == weeks, "sessions": sessions}
        if extra_weeks:
            week.update({"phase": "build" if w > 4 else "start", "step_up": step, "weak_window": bool(weak),
                         "resistance_intensity_pct_1rm": pct, "weekly_osteogenic_index": round(3 * oi, 2)})
        plan_weeks.append(week)
    screening = {
        "patient_id": patient_id, "bone_density_category": "osteoporosis", "falls_risk": True,
        "max_impact_level": 3, "avoid": ["loaded_spinal_flexion"], "refer": False,
        "flags": [{"rule": "tug_slow", "severity": "adapt",
                   "message": "Timed Up and Go 13.1 s: at risk of falling; add balance training.",
                   "source": "CDC STEADI, Timed Up and Go (TUG) form"}],
        "cautions": ["Avoid loaded or repeated spinal flexion and twisting."],
        "lowest_t_score": -2.7, "lowest_t_score_site": "lumbar_spine", "ruleset_version": "demo-1",
    }
    plan = {
        "plan_format_version": PLAN_FORMAT_VERSION, "patient_id": patient_id, "created": "2026-03-02",
        "tool_version": "0.1.0", "ruleset_version": "demo-1", "screening": screening,
        "cautions": cautions if cautions is not None else
        ["Land softly with knees slightly bent; hold a counter or wall if you feel unsteady."],
        "sources": ["Turner CH, Robling AG 2003, Exerc Sport Sci Rev 31(1):45-50",
                    "Beck BR et al. 2017, J Sci Med Sport 20(5):438-445"],
        "weeks": plan_weeks,
    }
    Plan.model_validate(plan)  # the factory must only ever build valid plans
    return plan


#: An invented person (no real record): 67, osteoporosis at the lumbar spine, no fractures.
DEMO_RECORD = {
    "patient_id": "NTC-0042", "age_years": 67, "sex": "female", "body_mass_kg": 61, "height_cm": 162,
    "t_scores": {"lumbar_spine": -2.7, "femoral_neck": -2.2}, "fractures": [], "falls_past_year": 0,
    "timed_up_and_go_s": 9.5, "conditions": [], "pain_score": 1,
}


def planner_plan(weeks: int, record: dict | None = None):
    """A real plan from the planner for the invented demo person."""
    from prescribe.planning import PlanOptions, build_plan
    from prescribe.records import parse_record

    return build_plan(parse_record(record or DEMO_RECORD), options=PlanOptions(weeks=weeks),
                      created="2026-03-02T09:00:00+00:00")


@lru_cache(maxsize=1)
def whole_catalogue_plan():
    """A two-week plan whose first week uses every catalogue exercise once (an invented person)."""
    from prescribe.catalogue import default_catalogue
    from prescribe.plan_schema import parse_plan

    data = make_plan(weeks=2)
    everything = [{"exercise_id": ex.exercise_id, "name": ex.name, "category": ex.category, "sets": 1, "reps": 5,
                   "intensity": "RPE 3", "impact_level": ex.impact_level,
                   "peak_grf_bw": ex.peak_grf_bw, "directions": list(ex.directions), "patterns": []}
                  for ex in default_catalogue()]
    data["weeks"][0]["sessions"].append({"day": 7, "kind": "mixed", "exercises": everything, "impacts": 0,
                                         "osteogenic_index": 0.0})
    return parse_plan(data)
