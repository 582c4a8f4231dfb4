"""What each exercise of a session is given: sets, repetitions, impacts, minutes, bouts,
intensity and rest, and the session's osteogenic index.

The doses of impact, resistance and balance work are a mixin of the builder
(:class:`~prescribe.planning.builder._Builder`); the helpers below are shared with the
editing of a plan (:mod:`prescribe.planning.editing`).
"""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Any, Iterable

from ..languages import N_
from ..loading.dose import daily_osteogenic_index, osteogenic_index
from .templates import ResistancePhase
from ..intensity import needs_supervision, pct_1rm as _pct_1rm
from .sources import CARER_LED_MAX_EXERCISES
from .selection import _Ex
from .sources import (IMPACT_REST_S, IMPACTS_PER_SET, LIFT_PRACTICE_PCT, LIFT_PRACTICE_REPS, LIFT_PRACTICE_SETS,
                      MIN_BOUT_GAP_H, STEPS_PER_MINUTE)


def prescribed_pct_1rm(exercises: Iterable[Any]) -> float | None:
    """The highest load given as % 1RM among exercises (models or dicts), or None when none is.

    What the program prescribes, read from each exercise's ``intensity`` text ("70% 1RM"),
    so that a week's figure can never say more than its exercises do.
    """
    found = []
    for x in exercises:
        text = x.get("intensity") if isinstance(x, dict) else getattr(x, "intensity", "")
        pct = _pct_1rm(text)
        if pct is not None:
            found.append(pct)
    return max(found) if found else None


def _rpe_for(pct: float | None, fallback: str) -> str:
    """Borg CR10 effort matching a %1RM band for unloaded work (common practice, from memory)."""
    if pct is None:
        return fallback
    if pct < 60:
        return "RPE 4-5"
    if pct < 70:
        return "RPE 5-6"
    if pct < 80:
        return "RPE 6-7"
    return "RPE 7-8"


#: The intensity of high-impact work (the person's pages say "your hardest controlled effort").
MAXIMAL_EFFORT = "maximal controlled effort"


def _exercise(e: _Ex, **kw) -> dict:
    d = {"exercise_id": e.exercise_id, "name": e.name, "category": e.category,
         "sets": None, "reps": None, "impacts": 0, "minutes": None, "bouts": 1, "intensity": "",
         "impact_level": e.impact_level, "peak_grf_bw": e.peak_grf_bw,
         "directions": list(e.directions), "patterns": sorted(e.patterns),
         "rest_s": None, "bout_gap_hours": None, "notes": "", "supervised": False}
    d.update(kw)
    # Supervised wherever 80% 1RM or more, or high impact, is prescribed (prescribe.safety,
    # rule supervision: Watson et al. 2018; common practice for high impact).
    d["supervised"] = bool(d["supervised"] or needs_supervision(d["intensity"], d["impact_level"]))
    return d


def _session_oi(exercises: list[dict]) -> float:
    """Turner's osteogenic index of a session: the sum over its exercises [BW].

    Level 2-3 impacts use :func:`prescribe.loading.dose.daily_osteogenic_index` with the
    documented bouts and gap; minutes of walking-type work count
    :data:`~prescribe.planning.sources.STEPS_PER_MINUTE` cycles a minute; repetitions count one cycle each;
    balance holds are static and count none (Turner 1998: bone responds to dynamic load).
    """
    total = 0.0
    for x in exercises:
        if x["impacts"]:
            total += _oi(x["peak_grf_bw"], x["impacts"], x["bouts"], x["bout_gap_hours"] or 8.0)
        elif x["category"] == "impact" and x["minutes"]:
            total += _oi(x["peak_grf_bw"], int(x["minutes"] * STEPS_PER_MINUTE))
        elif x["sets"] and x["reps"] and x["category"] != "balance":
            total += _oi(x["peak_grf_bw"], x["sets"] * x["reps"])
    return round(total, 2)


@lru_cache(maxsize=4096)
def _oi(peak_grf_bw: float, cycles: int, bouts: int = 1, gap_hours: float = 8.0) -> float:
    """:func:`prescribe.loading.dose.daily_osteogenic_index` as a float, remembered (plans repeat doses)."""
    if bouts == 1:
        return float(osteogenic_index(peak_grf_bw, cycles))
    return float(daily_osteogenic_index(peak_grf_bw, cycles, bouts, gap_hours))


class _Dosing:
    """The builder's doses for a week's sessions (a mixin: the builder holds the choices it reads)."""

    def impact_exercises(self, level: int, vol: int) -> list[dict]:
        chosen = self.sets_by_level.get(level, [])
        if self.carer_led:      # a short program: room for the balance work in a session
            chosen = chosen[:CARER_LED_MAX_EXERCISES - 2]
        if level == 0:
            return [_exercise(e, sets=2, reps=vol, rest_s=60, intensity="RPE 3-4",
                              notes=N_("Weight-bearing, feet on the ground; hold a support if needed."))
                    for e in chosen]
        if level == 1:
            return [_exercise(e, minutes=float(vol), intensity="RPE 3-4",
                              notes=N_("Steady pace; firm, even footfalls.")) for e in chosen]
        split = self.tpl.impact["bout_split_above"]
        bouts = max(1, math.ceil(vol / split))
        gap = self.tpl.impact["bout_gap_hours"] if bouts > 1 else None
        k = min(len(chosen), vol)
        base, extra = divmod(vol, k)
        out = []
        for i, e in enumerate(chosen[:k]):
            n = base + (1 if i < extra else 0)
            # The planner's notes are printed on the person's pages, in the person's language
            # (prescribe.languages: N_ and named placeholders).
            figures = {"reps": IMPACTS_PER_SET, "rest": IMPACT_REST_S}
            note = N_("Sets of about %(reps)s with %(rest)s s rest; land with control.") % figures
            if bouts > 1:
                note = N_("Sets of about %(reps)s with %(rest)s s rest; land with control. Split into %(bouts)s "
                          "bouts at least %(min_gap)s h apart (about %(gap)s h is best).") % {
                    **figures, "bouts": bouts, "min_gap": f"{MIN_BOUT_GAP_H:g}", "gap": f"{gap:g}"}
            out.append(_exercise(e, sets=math.ceil(n / IMPACTS_PER_SET), reps=None, impacts=n, bouts=bouts,
                                 intensity=MAXIMAL_EFFORT if e.impact_level == 3 else "RPE 5-6",
                                 rest_s=IMPACT_REST_S, bout_gap_hours=gap, notes=note))
        return out

    def resistance_exercises(self, week: int, ph: ResistancePhase) -> tuple[list[dict], ResistancePhase]:
        ph, lifts, practice, bodyweight = self.resistance_mode(week, ph)
        rest = 60 if ph.pct_1rm is None else (90 if ph.pct_1rm < 80 else 150)
        by_effort = ph.pct_1rm is None and ph.name != "technique"
        note = N_("%(phase)s phase: smooth, controlled lifting; breathe out on effort.") % {"phase": ph.name}
        if by_effort:
            note = N_("%(phase)s phase: smooth, controlled lifting; breathe out on effort. Progress by effort: "
                      "when every set feels easier than the effort asked in two sessions running, add 2-10%% to "
                      "the load.") % {"phase": ph.name}
        out = []
        for chain in self.chains:
            if bodyweight:
                # Sit-to-stand before loaded squats: the most advanced form without external load.
                unloaded = [c for c in chain if not c.external_load and not c.loaded_by_1rm]
                e = unloaded[-1] if unloaded else chain[0]
            else:
                usable = [c for c in chain if lifts or not c.loaded_by_1rm] or chain[:1]
                e = usable[-1]
            sets, reps, pct = ph.sets, ph.reps, ph.pct_1rm
            if pct is not None and self.max_pct_1rm is not None:
                pct = min(pct, float(self.max_pct_1rm))    # the screening's heaviest load allowed
            ex_note, ex_rest = note, rest
            if e.loaded_by_1rm and practice:
                # Light practice of the same barbell lift before it is loaded (Watson et al. 2018).
                sets, reps = LIFT_PRACTICE_SETS, LIFT_PRACTICE_REPS
                pct = LIFT_PRACTICE_PCT if pct is None else min(pct, LIFT_PRACTICE_PCT)
                ex_rest = 90
                ex_note = N_("Light practice of this lift: learn the movement with a light load, supervised, "
                             "before it is loaded more heavily.")
            elif pct is not None and pct >= 80 and not e.loaded_by_1rm:
                # 5 x 5 at 80-85% 1RM is for the main barbell lifts (Watson et al. 2018);
                # accessory work stays at 3 x 8 (Brooke-Wavell et al. 2022).
                sets, reps, pct = 3, 8, 70.0
            if pct is not None and (e.loaded_by_1rm or e.external_load):
                intensity = f"{pct:g}% 1RM"
            else:
                intensity = _rpe_for(pct, ph.intensity)
            out.append(_exercise(e, sets=sets, reps=reps, intensity=intensity, rest_s=ex_rest, notes=ex_note))
        extra = []
        if self.carer_led:
            return out[:CARER_LED_MAX_EXERCISES], ph
        if self.back:
            extra.append(self.back[0] if ph.name == "technique" or len(self.back) == 1 else self.back[1])
        if self.posture:
            extra.append(self.posture[0])
        for e in extra:
            out.append(_exercise(e, sets=2, reps=8 if ph.name == "technique" else 10,
                                 intensity="RPE 3-4" if ph.name == "technique" else "RPE 5-6", rest_s=60,
                                 notes=N_("Spine long and neutral throughout.")))
        return out, ph

    def balance_exercises(self, week: int, minutes: float) -> list[dict]:
        chosen = self._balance_set(week)
        if not chosen:
            return []
        each = max(1.0, round(2 * minutes / len(chosen)) / 2)
        _, held = self._stance_limit()
        hold = (N_("hold 10-30 s at a time") if held is None else
                N_("hold up to %(seconds)s s at a time (as long as held at the test)")
                % {"seconds": max(5, int(held)) if held < 30 else 30})
        return [_exercise(e, minutes=each, rest_s=30, intensity=N_("challenging but safe"),
                          notes=N_("Near a counter or stable support; %(hold)s.") % {"hold": hold}) for e in chosen]

