"""Rules on strength work: spine-sparing variants and loads, supervision of heavy lifts and
high impact, and rest days between resistance sessions."""

from __future__ import annotations

from typing import Iterator

from ..intensity import SUPERVISED_FROM_PCT_1RM, needs_supervision, pct_1rm, rpe_top
from .facts import STRENGTH_CATEGORIES, _Facts
from .model import SafetyViolation

SRC_SPINE = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (Too Fit To Fracture: spine-sparing "
             "technique, no loaded flexion or twisting, 8-12 repetitions); Brooke-Wavell et al. 2022, Br J Sports "
             "Med 56:837-846 (up to 3 sets of up to 8 reps at 8-12RM loads); Beck et al. 2017, J Sci Med Sport "
             "20(5):438-445 (loaded spine flexion not recommended); the load of an 8RM as about 80% 1RM is from "
             "memory; effort at most 8 of 10: Giangregorio et al. 2015, Osteoporos Int 26(3):891-910 (seen on a "
             "secondary page)")
SRC_SUPERVISION = ("Watson et al. 2018, J Bone Miner Res 33:211-220 (LIFTMOR: 5 x 5 at 80-85% 1RM, every session "
                   "supervised); supervision of high-impact work is common practice")
SRC_RESISTANCE_DAYS = ("Kohrt et al. 2004, Med Sci Sports Exerc 36:1985-1996 (resistance exercise 2-3 times a "
                       "week); a rest day between resistance sessions is common practice")


#: Spine-sparing limits for resistance work (see SRC_SPINE).
SPINE_MAX_SETS = 3
SPINE_MAX_REPS = 12
SPINE_MAX_PCT_1RM = 80.0
SPINE_MAX_RPE = 8.0
#: Resistance sessions a week at most (see SRC_RESISTANCE_DAYS).
MAX_RESISTANCE_SESSIONS = 3


def rule_spine_sparing_variant(f: _Facts) -> Iterator[SafetyViolation]:
    """Where spinal flexion or twisting is to be avoided, strength work uses spine-sparing variants only."""
    if not f.limits.spine_sparing:
        return
    reported: set[str] = set()
    for week, s, x in f.exercises():
        e = f.entries.get(x.exercise_id)
        if e is None or e.category not in STRENGTH_CATEGORIES or e.spine_sparing or x.exercise_id in reported:
            continue
        if s.kind != "resistance" and not e.loaded:
            continue  # body-weight work inside impact sessions
        reported.add(x.exercise_id)
        yield SafetyViolation(
            "spine_sparing_variant", week, x.exercise_id,
            f"{x.exercise_id} is not a spine-sparing variant, and this program must spare the spine",
            "spine-sparing variants only (marked spine_sparing in the catalogue)", SRC_SPINE)


def rule_spine_sparing_load(f: _Facts) -> Iterator[SafetyViolation]:
    """Where spinal flexion or twisting is to be avoided: at most 3 sets of at most 12, no heavier than an 8RM."""
    if not f.limits.spine_sparing:
        return
    allowed = (f"at most {SPINE_MAX_SETS} sets of at most {SPINE_MAX_REPS} repetitions, no heavier than about "
               f"{SPINE_MAX_PCT_1RM:g}% 1RM (an 8RM) and effort at most RPE {SPINE_MAX_RPE:g}")
    seen: set[tuple[int, int]] = set()
    for week, s, x in f.exercises():
        if (week, id(x)) in seen:
            continue
        seen.add((week, id(x)))
        e = f.entries.get(x.exercise_id)
        category = e.category if e else x.category
        if category not in STRENGTH_CATEGORIES:
            continue
        pct, rpe = pct_1rm(x.intensity), rpe_top(x.intensity)
        loaded = pct is not None or (e is not None and e.loaded)
        if s.kind != "resistance" and not loaded:
            continue  # body-weight sit-to-stand and the like inside impact sessions
        wrong = []
        if (x.sets or 0) > SPINE_MAX_SETS:
            wrong.append(f"{x.sets} sets")
        if (x.reps or 0) > SPINE_MAX_REPS:
            wrong.append(f"{x.reps} repetitions")
        if pct is not None and pct > SPINE_MAX_PCT_1RM:
            wrong.append(f"{pct:g}% 1RM")
        if rpe is not None and rpe > SPINE_MAX_RPE:
            wrong.append(f"effort RPE {rpe:g}")
        if wrong:
            yield SafetyViolation(
                "spine_sparing_load", week, x.exercise_id,
                f"{x.exercise_id} on day {s.day} is prescribed {', '.join(wrong)} in a spine-sparing program",
                allowed, SRC_SPINE)


def rule_supervision(f: _Facts) -> Iterator[SafetyViolation]:
    """Work at 80% 1RM or more, or at high impact (level 3), is marked supervised, with its session."""
    seen: set[tuple[int, int]] = set()
    for week, s, x in f.exercises():
        if not needs_supervision(x.intensity, x.impact_level):
            continue
        if x.supervised and s.supervised:
            continue
        key = (week, id(x))
        if key in seen:
            continue
        seen.add(key)
        pct = pct_1rm(x.intensity)
        what = f"{pct:g}% 1RM" if pct is not None and pct >= SUPERVISED_FROM_PCT_1RM else "high impact (level 3)"
        yield SafetyViolation(
            "supervision", week, x.exercise_id,
            f"{x.exercise_id} on day {s.day} is {what} but is not marked supervised"
            + ("" if s.supervised else " (nor is its session)"),
            f"work at {SUPERVISED_FROM_PCT_1RM:g}% 1RM or more, or at high impact, only supervised "
            "(the exercise and its session marked supervised)", SRC_SUPERVISION)


def rule_resistance_days(f: _Facts) -> Iterator[SafetyViolation]:
    """At most 3 resistance sessions a week, never on consecutive days."""
    ok: set[tuple] = set()
    for wk, res_days in zip(f.weeks, f.resistance_days):
        if len(res_days) < 2:
            continue
        key = tuple(res_days)
        if key in ok:
            continue
        days = sorted(set(res_days))
        close = [(a, b) for a, b in zip(days, days[1:]) if b - a < 2]
        if len(days) <= MAX_RESISTANCE_SESSIONS and not close:
            ok.add(key)
            continue
        what = (f"{len(days)} resistance sessions" if len(days) > MAX_RESISTANCE_SESSIONS
                else f"resistance on consecutive days {close[0][0]} and {close[0][1]}")
        yield SafetyViolation("resistance_days", wk.week, None, f"week {wk.week} has {what}",
                              f"at most {MAX_RESISTANCE_SESSIONS} resistance sessions a week, with a rest day "
                              "between them", SRC_RESISTANCE_DAYS)
