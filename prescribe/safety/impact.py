"""Rules on impact work and the screening's limits: the cap and the patterns to avoid, the
session ceiling, bouts, loading directions."""

from __future__ import annotations

import math
from typing import Iterator

from ..catalogue import IMPACT_LEVEL_LABELS
from ..loading.dose import BOUT_GAP_MIN_H as MIN_BOUT_GAP_H, IMPACTS_PER_BOUT_MAX as MAX_BOUT_IMPACTS
from .facts import _Facts
from .model import SafetyViolation

SRC_SCREENING = ("the screening's own limits (impact cap and patterns to avoid), from the rule files' sources "
                 "(docs/rules.md); impact training scaled to fracture risk: Beck, Daly, Fiatarone Singh & "
                 "Taaffe 2017, J Sci Med Sport 20(5):438-445")
SRC_CEILING = ("Clissold, Cronin, De Souza & Winwood 2022, Arch Sports Med Physiother 7(1):7-15 (the jump "
               "programs that raised femoral-neck BMD used 10-100 jumps a day); Jämsä et al. 2011, Front Physiol "
               "2:73 (about 60 impacts a day above 4 g); a ceiling of 100 a session: common practice")
SRC_BOUTS = ("Robling, Burr & Turner 2001, J Exp Biol 204:3389-3399 (about 8 h of recovery restores "
             "mechanosensitivity); 50 impacts a bout and a 4 h minimum gap are common practice")
SRC_DIRECTIONS = "Turner 1998, Bone 23:399-407 (unusual, varied loading directions are more osteogenic)"


IMPACT_LABELS = IMPACT_LEVEL_LABELS  # the catalogue's, next to the level boundaries


def rule_impact_cap(f: _Facts) -> Iterator[SafetyViolation]:
    """No exercise above the screening's impact cap (the strictest screening found)."""
    cap = f.limits.cap
    allowed = f"impact level {cap} ({IMPACT_LABELS[cap]}) or lower"
    for wk, top in zip(f.weeks, f.levels):
        if top <= cap and wk.impact_level <= cap:
            continue
        worst = next((x for s in wk.sessions for x in s.exercises if x.impact_level > cap), None)
        level = max(top, wk.impact_level)
        yield SafetyViolation(
            "impact_cap", wk.week, worst.exercise_id if worst else None,
            f"week {wk.week} reaches impact level {level} ({IMPACT_LABELS[level]}), above the screening's "
            f"max_impact_level {cap}", allowed, SRC_SCREENING)


def rule_avoided_patterns(f: _Facts) -> Iterator[SafetyViolation]:
    """No exercise whose movement patterns the screening asks to avoid."""
    avoid = f.limits.avoid
    if not avoid:
        return
    seen: set[tuple[int, str]] = set()
    for week, s, x in f.exercises():
        bad = avoid.intersection(x.patterns)
        if bad and (week, x.exercise_id) not in seen:
            seen.add((week, x.exercise_id))
            yield SafetyViolation(
                "avoided_pattern", week, x.exercise_id,
                f"{x.exercise_id} on day {s.day} involves {', '.join(sorted(bad))}, which the screening asks "
                "to avoid", "no exercise with " + ", ".join(sorted(avoid)), SRC_SCREENING)


def rule_session_ceiling(f: _Facts) -> Iterator[SafetyViolation]:
    """At most 100 impacts a session (or the template's documented ceiling)."""
    ceiling = f.limits.max_impacts
    for wk, largest in zip(f.weeks, f.session_max):
        if largest > ceiling:
            worst = max((s for s in wk.sessions), key=lambda s: s.impacts)
            ex = next((x.exercise_id for x in worst.exercises if x.impact_level >= 2 and x.impacts), None)
            yield SafetyViolation(
                "session_ceiling", wk.week, ex,
                f"week {wk.week}: {largest} impacts in a session, above the {ceiling} allowed",
                f"at most {ceiling} impacts a session", SRC_CEILING)


def rule_bout_split(f: _Facts) -> Iterator[SafetyViolation]:
    """More than 50 impacts in a day are split into bouts at least 4 h apart."""
    for wk, pairs, day_imp in zip(f.weeks, f.week_sessions, f.day_impacts):
        for day, total in day_imp.items():
            if total <= MAX_BOUT_IMPACTS:
                continue
            need = math.ceil(total / MAX_BOUT_IMPACTS)
            for s, sf in pairs:
                if s.day != day:
                    continue
                for x in sf.landing:
                    gap = x.bout_gap_hours
                    if x.bouts < need or gap is None or gap < MIN_BOUT_GAP_H:
                        yield SafetyViolation(
                            "bout_split", wk.week, x.exercise_id,
                            f"week {wk.week} day {day}: {total} impacts in the day need at least {need} bouts at "
                            f"least {MIN_BOUT_GAP_H:g} h apart ({x.exercise_id} has {x.bouts} bout(s), gap {gap} h)",
                            f"at most {MAX_BOUT_IMPACTS} impacts a bout, bouts at least {MIN_BOUT_GAP_H:g} h apart",
                            SRC_BOUTS)


def rule_two_directions(f: _Facts) -> Iterator[SafetyViolation]:
    """From moderate impact on, each week's level 2-3 work loads in at least two directions."""
    for wk, top, pairs in zip(f.weeks, f.levels, f.week_sessions):
        if top < 2:
            continue
        dirs: set[str] = set()
        for _, sf in pairs:
            dirs |= sf.dirs
        if len(dirs) < 2:
            yield SafetyViolation(
                "two_directions", wk.week, None,
                f"week {wk.week} loads at impact level {top} in {len(dirs)} direction(s)",
                "at least two loading directions from moderate impact on", SRC_DIRECTIONS)
