"""The one safety check of a program, called at every door.

Every program the tool builds, edits, prints, saves or imports passes
:func:`check_program`, whatever its origin (the planner, an edit in the app, a plan
file edited by hand, a bundle from another clinic).  Each rule is one function that
returns :class:`SafetyViolation` records and cites its source; :data:`RULES` lists
them in the order they are checked.  :func:`assert_safe` raises
:class:`prescribe.errors.UnsafeProgram` (bad input: the command line exits 2) naming
the rule, the week, the exercise and what is allowed.

The limits a program is held to (:class:`Limits`) are the strictest of every
screening the check can find: the one passed in, the copy embedded in the plan, a
fresh screening of the patient record embedded in the plan, and a fresh screening of
the record the caller passes (the store's copy of the person).  A hand edit can loosen
the plan's copy of its screening; it cannot loosen the others.  See docs/safety.md.

This module is domain code: it never imports the store, the handout or the widgets.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Callable, Iterable, Iterator

from ...catalogue import IMPACT_LEVEL_LABELS
from ...errors import UnsafeProgram
from ...plan_schema import Plan, weak_window_weeks
from ...records import PatientRecord, ScreeningResult

__all__ = ["SafetyViolation", "Limits", "Rule", "RULES", "check_program", "assert_safe", "limits_for",
           "strictest_screening", "rescreen", "pct_1rm", "rpe_top", "SUPERVISED_FROM_PCT_1RM",
           "record_clearance", "is_draft",
           "MAX_BOUT_IMPACTS", "MIN_BOUT_GAP_H", "IMPACTS_CEILING"]

# --- sources ------------------------------------------------------------------------------
SRC_SCREENING = ("the screening's own limits (impact cap and patterns to avoid), from the rule files' sources "
                 "(docs/rules.md); impact training scaled to fracture risk: Beck, Daly, Fiatarone Singh & "
                 "Taaffe 2017, J Sci Med Sport 20(5):438-445")
SRC_ONE_LEVEL = "common practice: impact work steps up one level at a time"
SRC_REMODEL = ("Eriksen 1986, Endocr Rev 7:379 (resorption, about 3 weeks, precedes formation) and Heaney, "
               "Yates & Santora 1997, J Bone Miner Res 12:1143 (remodelling transient): no escalation in "
               "weeks 3-5 after a new or larger stimulus")
SRC_CEILING = ("Clissold et al. 2022, Arch Sports Med Physiother 7:7-15 (programs of 10-100 jumps a day); "
               "Jämsä et al. 2011, Front Physiol 2:73 (about 60 impacts a day above 4 g)")
SRC_BOUTS = ("Robling, Burr & Turner 2001, J Exp Biol 204:3389-3399 (about 8 h of recovery restores "
             "mechanosensitivity); 50 impacts a bout and a 4 h minimum gap are common practice")
SRC_DIRECTIONS = "Turner 1998, Bone 23:399-407 (unusual, varied loading directions are more osteogenic)"
SRC_FIGURES = "common practice: a plan's week and session figures are what its exercises add up to"
SRC_SPINE = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (Too Fit To Fracture: spine-sparing "
             "technique, no loaded flexion or twisting, 8-12 repetitions); Brooke-Wavell et al. 2022, Br J Sports "
             "Med 56:837-846 (up to 3 sets of up to 8 reps at 8-12RM loads); Beck et al. 2017, J Sci Med Sport "
             "20(5):438-445 (loaded spine flexion not recommended); the load of an 8RM as about 80% 1RM is from "
             "memory; effort at most 8 of 10: Giangregorio et al. 2015, Osteoporos Int 26(3):891-910 (seen on a "
             "secondary page)")
SRC_BALANCE = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (balance training daily where possible; "
               "their later update: at least twice a week); Sherrington et al. 2019, Cochrane Database Syst Rev "
               "CD012424 (balance and functional exercise reduce falls; from memory)")
SRC_SUPERVISION = ("Watson et al. 2018, J Bone Miner Res 33:211-220 (LIFTMOR: 5 x 5 at 80-85% 1RM, every session "
                   "supervised); supervision of high-impact work is common practice")
SRC_SWAP = ("common practice: a substitute keeps the movement (same category and progression family, one step "
            "harder at most, same dose unit), within the person's limits")
SRC_FALLS_LIMITS = ("Giangregorio et al. 2014, Osteoporos Int 25:821-835 (balance training progressed safely); "
                    "with falls risk, no high-balance-demand impact work and no resistance work of moderate or "
                    "high balance demand: common practice")
SRC_RESISTANCE_DAYS = ("Kohrt et al. 2004, Med Sci Sports Exerc 36:1985-1996 (resistance exercise 2-3 times a "
                       "week); a rest day between resistance sessions is common practice")
SRC_DRAFT = ("common practice (clinical governance): a program for a person the screening refers stays a "
             "draft until a named clinician records the clearance; the refer rules' own sources are in "
             "docs/rules.md")
SRC_RECORD = ("common practice: a program is checked against the person's own record, screened again with "
              "the current rules")
SRC_CATALOGUE = ("common practice: each exercise's level, force and patterns are the catalogue's, whose "
                 "figures carry their own published sources (docs/catalogue.md)")

#: Impacts a bout at most; more in a day are split into bouts (common practice, see SRC_BOUTS).
MAX_BOUT_IMPACTS = 50
#: Minimum documented gap between bouts of impact work [h] (common practice, see SRC_BOUTS).
MIN_BOUT_GAP_H = 4.0
#: Impacts a session at most, unless a template gives a reason (Clissold et al. 2022).
IMPACTS_CEILING = 100
#: From this intensity on, resistance work is supervised (Watson et al. 2018, LIFTMOR: every
#: session at 80-85% 1RM and above was supervised).
SUPERVISED_FROM_PCT_1RM = 80.0

IMPACT_LABELS = IMPACT_LEVEL_LABELS  # the catalogue's, next to the level boundaries

#: Spine-sparing limits for resistance work (see SRC_SPINE).
SPINE_MAX_SETS = 3
SPINE_MAX_REPS = 12
SPINE_MAX_PCT_1RM = 80.0
SPINE_MAX_RPE = 8.0
SPINAL_PATTERNS = frozenset({"loaded_spinal_flexion", "loaded_spinal_twisting"})
#: Days a week with balance work at least, where falls risk is flagged (see SRC_BALANCE).
MIN_BALANCE_DAYS = 2
#: Resistance sessions a week at most (see SRC_RESISTANCE_DAYS).
MAX_RESISTANCE_SESSIONS = 3
#: Categories of strength-type work (resistance, back extensors, posture).
STRENGTH_CATEGORIES = frozenset({"resistance", "back_extensor", "posture"})
_BALANCE_RANK = {"none": 0, "low": 1, "moderate": 2, "high": 3}


# =========================================================================================
# Records
# =========================================================================================

@dataclass(frozen=True)
class SafetyViolation:
    """One broken rule: where (week, exercise), what is wrong, what is allowed, and why.

    ``rule`` is a short id from :data:`RULES` (e.g. ``"impact_cap"``); ``week`` and
    ``exercise_id`` are None where the rule is about the whole plan; ``message`` is in
    plain words; ``allowed`` says what the rule allows; ``source`` is its citation (or
    "common practice").
    """

    rule: str
    week: int | None
    exercise_id: str | None
    message: str
    allowed: str
    source: str

    def text(self) -> str:
        """One line naming the rule, the week, the exercise, the problem and what is allowed."""
        where = [f"rule {self.rule}"]
        if self.week is not None:
            where.append(f"week {self.week}")
        if self.exercise_id:
            where.append(f"exercise {self.exercise_id}")
        return f"{', '.join(where)}: {self.message}; allowed: {self.allowed}"

    def as_dict(self) -> dict:
        return {"rule": self.rule, "week": self.week, "exercise_id": self.exercise_id,
                "message": self.message, "allowed": self.allowed, "source": self.source}


@dataclass(frozen=True)
class Limits:
    """The limits a program is held to: the strictest of every screening the check found."""

    cap: int
    avoid: frozenset[str]
    falls_risk: bool = False
    refer: bool = False
    supervision: bool = False
    spine_sparing: bool = False
    max_impacts: int = IMPACTS_CEILING
    #: Where the limits come from, e.g. ("plan.screening", "re-screened plan.record").
    origins: tuple[str, ...] = ()


@dataclass(frozen=True)
class Rule:
    """One rule of the check: its id, a plain title, its source and the function that applies it."""

    rule_id: str
    title: str
    source: str
    check: Callable[["_Facts"], Iterable[SafetyViolation]] = field(repr=False)


# =========================================================================================
# What the rules read: the plan's figures, gathered once
# =========================================================================================

_PCT_1RM = re.compile(r"(\d+(?:\.\d+)?)\s*(?:[-\u2013to ]+\s*(\d+(?:\.\d+)?))?\s*%\s*(?:of\s*)?1\s*-?\s*RM",
                      re.IGNORECASE)


@lru_cache(maxsize=1024)
def pct_1rm(intensity: str | None) -> float | None:
    """The highest %1RM an intensity text prescribes ("80% 1RM", "80-85% 1RM"), or None."""
    if not intensity:
        return None
    found = [float(b or a) for a, b in _PCT_1RM.findall(intensity)]
    return max(found) if found else None


_RPE = re.compile(r"RPE\s*(\d+(?:\.\d+)?)(?:\s*[-\u2013]\s*(\d+(?:\.\d+)?))?", re.IGNORECASE)


@lru_cache(maxsize=1024)
def rpe_top(intensity: str | None) -> float | None:
    """The highest Borg CR10 effort an intensity text prescribes ("RPE 5-6" gives 6), or None."""
    if not intensity:
        return None
    found = [float(b or a) for a, b in _RPE.findall(intensity)]
    return max(found) if found else None


@dataclass(frozen=True)
class _CatEntry:
    """What the check needs of one catalogue entry."""

    exercise_id: str
    category: str
    impact_level: int
    peak_grf_bw: float
    directions: frozenset[str]
    patterns: frozenset[str]
    dose_unit: str
    balance_rank: int
    spine_sparing: bool
    loaded: bool
    family: str
    depth: int
    patterns_list: list = field(default_factory=list)    # sorted, as the planner writes them
    directions_list: list = field(default_factory=list)  # in catalogue order, as the planner writes them


def _catalogue_entries(catalogue) -> dict[str, _CatEntry]:
    cached = getattr(catalogue, "_safety_entries", None)
    if cached is not None:
        return cached
    raw = {e.exercise_id: e for e in catalogue.all()}

    def root(e):
        depth, seen = 0, {e.exercise_id}
        while e.regression and e.regression in raw and raw[e.regression].category == e.category \
                and e.regression not in seen:
            e = raw[e.regression]
            seen.add(e.exercise_id)
            depth += 1
        return e.exercise_id, depth

    out = {}
    for e in raw.values():
        fam, depth = root(e)
        equipment = " ".join(e.equipment).lower()
        out[e.exercise_id] = _CatEntry(
            exercise_id=e.exercise_id, category=e.category, impact_level=int(e.impact_level),
            peak_grf_bw=float(e.peak_grf_bw), directions=frozenset(e.directions), patterns=frozenset(e.patterns),
            dose_unit=e.dose_unit, balance_rank=_BALANCE_RANK.get(e.balance_demand, 1),
            spine_sparing=bool(e.spine_sparing),
            loaded=bool(e.loaded_by_1rm or e.grf_plus_external_load)
            or any(w in equipment for w in ("dumbbell", "kettlebell", "barbell", "band", "plates", "bar")),
            family=fam, depth=depth, patterns_list=sorted(e.patterns), directions_list=list(e.directions))
    try:
        object.__setattr__(catalogue, "_safety_entries", out)
    except (AttributeError, TypeError):
        pass
    return out


@dataclass(frozen=True)
class _SessionFacts:
    """What the rules read of one session's exercises (computed once per distinct session)."""

    impacts: int            # level 2-3 landings, all exercises
    top: int                # highest impact level
    pct: float              # highest %1RM (0 if none)
    rpe: float              # highest effort of resistance work (resistance sessions; 0 if none)
    vol: int                # sets x repetitions of resistance work (resistance sessions)
    balance: bool           # holds balance work
    dirs: frozenset[str]    # loading directions of level 2-3 work
    landing: tuple          # level 2-3 exercises with impacts (for bouts)


class _Facts:
    """The plan and its limits, with each week's and session's figures computed once for all rules.

    A built plan shares exercise models between sessions and weeks; the figures of a
    session are computed once per distinct set of exercises, and the per-exercise rules
    see each distinct (exercise, session kind, supervised) once, at its first week.
    """

    def __init__(self, plan: Plan, limits: Limits, catalogue, record: PatientRecord | None = None):
        self.plan, self.limits, self.record = plan, limits, record
        self.catalogue = catalogue
        self.entries = _catalogue_entries(catalogue)
        self.weeks = plan.weeks
        self.levels: list[int] = []        # per week: highest impact level
        self.session_max: list[int] = []   # per week: largest session's level 2-3 impacts
        self.res_pct: list[float] = []     # per week: highest %1RM
        self.res_rpe: list[float] = []     # per week: highest effort of resistance work
        self.res_vol: list[int] = []       # per week: largest resistance session's sets x repetitions
        self.week_sessions: list[list[tuple]] = []  # per week: (session, facts)
        self.balance_days: list[set[int]] = []       # per week: days with balance work
        self.resistance_days: list[list[int]] = []   # per week: days of resistance sessions
        self.day_impacts: list[dict[int, int]] = []  # per week: level 2-3 landings a day (days with any)
        self.count_mismatch: list[tuple] = []        # (week, session, facts) whose impacts do not add up
        self.contexts: dict[tuple, tuple] = {}      # (id(x), kind, supervised) -> (week, session, x)
        cache: dict[tuple, _SessionFacts] = {}
        contexts = self.contexts
        get = cache.get
        for wk in plan.weeks:
            pairs = []
            bal_days: set[int] = set()
            res_days: list[int] = []
            day_imp: dict[int, int] = {}
            for s in wk.sessions:
                kind, sup, xs = s.kind, s.supervised, s.exercises
                key = (kind, sup, *map(id, xs))
                sf = get(key)
                if sf is None:
                    sf = cache[key] = _session_facts(kind, xs)
                    for x in xs:
                        ck = (id(x), kind, sup)
                        if ck not in contexts:
                            contexts[ck] = (wk.week, s, x)
                pairs.append((s, sf))
                if sf.impacts != s.impacts:
                    self.count_mismatch.append((wk, s, sf))
                if sf.balance:
                    bal_days.add(s.day)
                if kind == "resistance":
                    res_days.append(s.day)
                if sf.impacts:
                    day_imp[s.day] = day_imp.get(s.day, 0) + sf.impacts
            top = largest = vol = 0
            pct = rpe = 0.0
            for _, sf in pairs:
                if sf.top > top:
                    top = sf.top
                if sf.impacts > largest:
                    largest = sf.impacts
                if sf.pct > pct:
                    pct = sf.pct
                if sf.rpe > rpe:
                    rpe = sf.rpe
                if sf.vol > vol:
                    vol = sf.vol
            self.week_sessions.append(pairs)
            self.balance_days.append(bal_days)
            self.resistance_days.append(res_days)
            self.day_impacts.append(day_imp)
            self.levels.append(top)
            self.session_max.append(largest)
            self.res_pct.append(pct)
            self.res_rpe.append(rpe)
            self.res_vol.append(vol)

    def exercises(self) -> Iterator[tuple[int, object, object]]:
        """(first week, session, exercise) for each distinct exercise in its session's kind."""
        return iter(self.contexts.values())


def _session_facts(kind: str, xs) -> _SessionFacts:
    impacts = top = vol = 0
    pct = rpe = 0.0
    balance = False
    dirs: set[str] = set()
    landing = []
    in_res = kind == "resistance"
    for x in xs:
        lv = x.impact_level
        if lv > top:
            top = lv
        if lv >= 2:
            impacts += x.impacts
            dirs.update(x.directions)
            if x.impacts > 0:
                landing.append(x)
        p = pct_1rm(x.intensity)
        if p is not None and p > pct:
            pct = p
        if in_res:
            r = rpe_top(x.intensity)
            if r is not None and r > rpe:
                rpe = r
            vol += (x.sets or 0) * (x.reps or 0)
        if x.category == "balance" and (x.minutes or x.sets or x.reps):
            balance = True
    return _SessionFacts(impacts, top, pct, rpe, vol, balance, frozenset(dirs), tuple(landing))


# =========================================================================================
# The rules (one function a rule)
# =========================================================================================

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


def rule_week_figures(f: _Facts) -> Iterator[SafetyViolation]:
    """A week's impact level is its exercises' highest (the other rules read it)."""
    for wk, top in zip(f.weeks, f.levels):
        if top != wk.impact_level:
            yield SafetyViolation(
                "week_level_matches", wk.week, None,
                f"week {wk.week} says impact level {wk.impact_level} but its exercises reach {top}",
                "the week's impact_level equal to its exercises' highest", SRC_FIGURES)


def rule_impact_counts(f: _Facts) -> Iterator[SafetyViolation]:
    """Session and week impact counts are what the exercises add up to."""
    for wk, s, sf in f.count_mismatch:
        yield SafetyViolation(
            "impact_counts_match", wk.week, None,
            f"week {wk.week} day {s.day}: session impacts {s.impacts} do not add up to the exercises' "
            f"level 2-3 impacts {sf.impacts}", "session impacts equal to the sum of its level 2-3 impacts",
            SRC_FIGURES)
    for wk, largest in zip(f.weeks, f.session_max):
        if largest != wk.impacts_per_session:
            yield SafetyViolation(
                "impact_counts_match", wk.week, None,
                f"week {wk.week}: impacts_per_session {wk.impacts_per_session} is not the largest session's "
                f"{largest}", "impacts_per_session equal to the largest session's impacts", SRC_FIGURES)


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


def rule_one_level_at_a_time(f: _Facts) -> Iterator[SafetyViolation]:
    """Impact steps up one level at a time (week 1 is the start level chosen)."""
    lv = f.levels
    for i in range(1, len(lv)):
        if lv[i] > lv[i - 1] + 1:
            wk = f.weeks[i]
            ex = next((x.exercise_id for s in wk.sessions for x in s.exercises if x.impact_level == lv[i]), None)
            yield SafetyViolation(
                "one_level_at_a_time", wk.week, ex,
                f"week {wk.week} steps up from impact level {lv[i - 1]} to {lv[i]}",
                f"impact level {lv[i - 1] + 1} at most (one level at a time)", SRC_ONE_LEVEL)


def _stimulus_starts(f: _Facts) -> list[int]:
    """Indexes of weeks with a new or larger stimulus of either kind.

    The first week with any impact or resistance work; a rise in impact level; a rise in
    resistance intensity (%1RM or effort).
    """
    out = []
    for i in range(len(f.weeks)):
        if i == 0:
            if f.levels[0] > 0 or f.res_pct[0] > 0 or f.res_rpe[0] > 0 or f.res_vol[0] > 0:
                out.append(0)
        elif (f.levels[i] > f.levels[i - 1] or f.res_pct[i] > f.res_pct[i - 1]
              or f.res_rpe[i] > f.res_rpe[i - 1]):
            out.append(i)
    return out


_MEASURES = (
    ("levels", "the impact level", "impact level {}", "{}"),
    ("session_max", "the impacts a session", "at most {} impacts a session", "{}"),
    ("res_pct", "the resistance intensity", "at most {}% 1RM", "{:g}% 1RM"),
    ("res_rpe", "the resistance effort", "effort at most RPE {}", "RPE {:g}"),
    ("res_vol", "the resistance volume (sets x repetitions a session)", "at most {} sets x repetitions a session",
     "{}"),
)


def rule_weak_window(f: _Facts) -> Iterator[SafetyViolation]:
    """No escalation of any kind in weeks 3-5 after a new or larger stimulus of either kind.

    Counting the week of a new or larger stimulus (the start, a higher impact level, a
    higher resistance intensity) as week 1, weeks 3, 4 and 5 carry no higher impact
    level, impacts a session, resistance intensity, effort or volume than week 2.  A week
    the plan labels as a window ("no increase") rises above the week before in nothing.
    """
    n = len(f.weeks)
    flagged: set[tuple[int, str]] = set()
    for i in _stimulus_starts(f):
        if i + 1 >= n:
            continue
        for j in sorted(weak_window_weeks([i])):  # 0-based indices of weeks 3-5 from index i
            if j >= n:
                break
            for attr, what, allowed, fmt in _MEASURES:
                values = getattr(f, attr)
                if values[j] > values[i + 1] and (j, attr) not in flagged:
                    flagged.add((j, attr))
                    wk = f.weeks[j]
                    yield SafetyViolation(
                        "weak_window", wk.week, _top_exercise(f, j, attr),
                        f"week {wk.week} raises {what} to {fmt.format(values[j])} inside weeks 3-5 after the new "
                        f"or larger stimulus of week {i + 1} (week 2 of it had {fmt.format(values[i + 1])})",
                        allowed.format(fmt.format(values[i + 1]).replace("% 1RM", "").replace("RPE ", ""))
                        + " (no increase of any kind in weeks 3-5)", SRC_REMODEL)
    for j in range(1, n):
        wk = f.weeks[j]
        if not wk.weak_window:
            continue
        for attr, what, allowed, fmt in _MEASURES:
            values = getattr(f, attr)
            if values[j] > values[j - 1] and (j, attr) not in flagged:
                flagged.add((j, attr))
                yield SafetyViolation(
                    "weak_window", wk.week, _top_exercise(f, j, attr),
                    f"week {wk.week} is labelled a remodelling window (no increase) but raises {what} from "
                    f"{fmt.format(values[j - 1])} to {fmt.format(values[j])}",
                    "no increase of any kind in a week labelled as a window", SRC_REMODEL)


def _top_exercise(f: _Facts, j: int, attr: str) -> str | None:
    wk = f.weeks[j]
    best, key = None, -1.0
    for s in wk.sessions:
        for x in s.exercises:
            if attr in ("levels", "session_max"):
                k = float(x.impact_level * 1000 + x.impacts) if x.impact_level >= 2 or attr == "levels" else -1
            elif attr == "res_pct":
                k = pct_1rm(x.intensity) or -1
            elif attr == "res_rpe":
                k = (rpe_top(x.intensity) or -1) if s.kind == "resistance" else -1
            else:
                k = float((x.sets or 0) * (x.reps or 0)) if s.kind == "resistance" else -1
            if k > key:
                best, key = x.exercise_id, k
    return best


def rule_catalogue_match(f: _Facts) -> Iterator[SafetyViolation]:
    """Every exercise is in the catalogue with the catalogue's level, force, category and patterns.

    A hand edit cannot relabel a drop jump as level 0 or drop its patterns: the other
    rules read the plan's figures, so they must be the catalogue's.
    """
    seen: set[int] = set()
    reported: set[str] = set()
    for week, s, x in f.exercises():
        if id(x) in seen:
            continue
        seen.add(id(x))
        e = f.entries.get(x.exercise_id)
        if (e is not None and x.category == e.category and x.impact_level == e.impact_level
                and x.peak_grf_bw == e.peak_grf_bw and x.patterns == e.patterns_list
                and x.directions == e.directions_list):
            continue  # the planner's own copy of the entry
        if e is None:
            if x.exercise_id not in reported:
                reported.add(x.exercise_id)
                yield SafetyViolation("catalogue_match", week, x.exercise_id,
                                      f"{x.exercise_id!r} is not an exercise of the catalogue",
                                      "exercise ids from the catalogue (`prescribe exercises`)", SRC_CATALOGUE)
            continue
        wrong = []
        if x.category != e.category:
            wrong.append(f"category {x.category!r} (catalogue: {e.category!r})")
        if x.impact_level != e.impact_level:
            wrong.append(f"impact level {x.impact_level} (catalogue: {e.impact_level})")
        if abs(x.peak_grf_bw - e.peak_grf_bw) > 1e-6:
            wrong.append(f"peak GRF {x.peak_grf_bw:g} BW (catalogue: {e.peak_grf_bw:g})")
        if set(x.patterns) != e.patterns:
            wrong.append(f"patterns {sorted(x.patterns)} (catalogue: {sorted(e.patterns)})")
        if not set(x.directions) <= e.directions:
            wrong.append(f"directions {sorted(x.directions)} (catalogue: {sorted(e.directions)})")
        if wrong and (x.exercise_id, week) not in reported:
            reported.add(x.exercise_id)
            yield SafetyViolation("catalogue_match", week, x.exercise_id,
                                  f"{x.exercise_id} is given {'; '.join(wrong)}",
                                  "the catalogue's own figures for each exercise", SRC_CATALOGUE)


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


def rule_balance_every_week(f: _Facts) -> Iterator[SafetyViolation]:
    """Where falls risk is flagged, balance work on at least two days of every week."""
    if not f.limits.falls_risk:
        return
    for wk, days in zip(f.weeks, f.balance_days):
        if len(days) < MIN_BALANCE_DAYS:
            yield SafetyViolation(
                "balance_every_week", wk.week, None,
                f"week {wk.week} has balance work on {len(days)} day(s), and the screening flags falls risk",
                f"balance work on at least {MIN_BALANCE_DAYS} days every week", SRC_BALANCE)


def rule_supervision(f: _Facts) -> Iterator[SafetyViolation]:
    """Work at 80% 1RM or more, or at high impact (level 3), is marked supervised, with its session."""
    seen: set[tuple[int, int]] = set()
    for week, s, x in f.exercises():
        pct = pct_1rm(x.intensity)
        heavy = pct is not None and pct >= SUPERVISED_FROM_PCT_1RM
        if not (heavy or x.impact_level >= 3):
            continue
        if x.supervised and s.supervised:
            continue
        key = (week, id(x))
        if key in seen:
            continue
        seen.add(key)
        what = f"{pct:g}% 1RM" if heavy else "high impact (level 3)"
        yield SafetyViolation(
            "supervision", week, x.exercise_id,
            f"{x.exercise_id} on day {s.day} is {what} but is not marked supervised"
            + ("" if x.supervised else "") + ("" if s.supervised else " (nor is its session)"),
            f"work at {SUPERVISED_FROM_PCT_1RM:g}% 1RM or more, or at high impact, only supervised "
            "(the exercise and its session marked supervised)", SRC_SUPERVISION)


def rule_falls_risk_limits(f: _Facts) -> Iterator[SafetyViolation]:
    """With falls risk: no high-balance-demand impact work, no resistance work of moderate or high demand."""
    if not f.limits.falls_risk:
        return
    reported: set[str] = set()
    for week, s, x in f.exercises():
        e = f.entries.get(x.exercise_id)
        if e is None or x.exercise_id in reported:
            continue
        if (e.category == "impact" and e.balance_rank >= 3) or (e.category == "resistance" and e.balance_rank >= 2):
            reported.add(x.exercise_id)
            yield SafetyViolation(
                "falls_risk_limits", week, x.exercise_id,
                f"{x.exercise_id} asks for {['no', 'low', 'moderate', 'high'][e.balance_rank]} balance, and the "
                "screening flags falls risk",
                "with falls risk: impact work below high balance demand, resistance work of low balance demand",
                SRC_FALLS_LIMITS)


def rule_swap_same_kind(f: _Facts) -> Iterator[SafetyViolation]:
    """A swap keeps the kind of movement and the person's limits."""
    for sw in f.plan.swaps or ():
        old_id, new_id = sw.old, sw.new
        old, new = f.entries.get(old_id), f.entries.get(new_id)
        if old is None or new is None:
            yield SafetyViolation("swap_same_kind", None, new_id,
                                  f"the swap of {old_id} for {new_id} names an exercise the catalogue does not have",
                                  "swaps between catalogue exercises", SRC_SWAP)
            continue
        wrong = []
        if new.category != old.category:
            wrong.append(f"it changes the kind of work from {old.category} to {new.category}")
        elif new.category in STRENGTH_CATEGORIES and new.family != old.family:
            wrong.append(f"{new_id} is another movement than {old_id} (a different progression family)")
        elif new.category in STRENGTH_CATEGORIES and new.depth > old.depth + 1:
            wrong.append(f"{new_id} is {new.depth - old.depth} progression steps harder than {old_id}")
        if new.dose_unit != old.dose_unit and not wrong:
            wrong.append(f"it changes the dose from {old.dose_unit} to {new.dose_unit}")
        if f.limits.spine_sparing and new.category in STRENGTH_CATEGORIES and not new.spine_sparing:
            wrong.append(f"{new_id} is not a spine-sparing variant")
        if new.impact_level > f.limits.cap:
            wrong.append(f"{new_id} is impact level {new.impact_level}, above the cap {f.limits.cap}")
        bad = sorted(new.patterns & f.limits.avoid)
        if bad:
            wrong.append(f"{new_id} involves {', '.join(bad)}")
        if wrong:
            yield SafetyViolation(
                "swap_same_kind", None, new_id, f"swapping {old_id} for {new_id}: " + "; ".join(wrong),
                f"a substitute for {old_id} of the same kind ({old.category}"
                + (f", the {old.family} family, at most one step harder" if old.category in STRENGTH_CATEGORIES
                   else "") + ") within the person's limits", SRC_SWAP)


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
        if len(days) > MAX_RESISTANCE_SESSIONS or close:
            what = (f"{len(days)} resistance sessions" if len(days) > MAX_RESISTANCE_SESSIONS
                    else f"resistance on consecutive days {close[0][0]} and {close[0][1]}")
            yield SafetyViolation("resistance_days", wk.week, None, f"week {wk.week} has {what}",
                                  f"at most {MAX_RESISTANCE_SESSIONS} resistance sessions a week, with a rest day "
                                  "between them", SRC_RESISTANCE_DAYS)


def rule_draft_until_cleared(f: _Facts) -> Iterator[SafetyViolation]:
    """A program for a person the screening refers is a draft until a clinician records the clearance."""
    plan = f.plan
    cleared = bool(plan.cleared_by and plan.cleared_at)
    if (plan.cleared_by or plan.cleared_at) and not cleared:
        yield SafetyViolation("draft_until_cleared", None, None,
                              "the clearance names " + ("no clinician" if not plan.cleared_by else "no time"),
                              "cleared_by (who) and cleared_at (when) recorded together", SRC_DRAFT)
    if f.limits.refer and not plan.draft and not cleared:
        yield SafetyViolation("draft_until_cleared", None, None,
                              "the screening asks that a clinician clear this person before loading, but the "
                              "program is not marked as a draft and no clearance is recorded",
                              "draft = true until a clinician records the clearance (who and when)", SRC_DRAFT)


def rule_same_person(f: _Facts) -> Iterator[SafetyViolation]:
    """The record the plan carries, and the one it is checked against, are the plan's person."""
    for name, rec in (("the plan's record", f.plan.record), ("the stored record", f.record)):
        if rec is not None and rec.patient_id != f.plan.patient_id:
            yield SafetyViolation("same_person", None, None,
                                  f"{name} is {rec.patient_id!r} but the plan is for {f.plan.patient_id!r}",
                                  "a record of the plan's own person", SRC_FIGURES)


#: The rules, in the order they are checked.
RULES: tuple[Rule, ...] = (
    Rule("impact_cap", "Never above the screening's impact cap", SRC_SCREENING, rule_impact_cap),
    Rule("avoided_pattern", "No movement pattern the screening asks to avoid", SRC_SCREENING,
         rule_avoided_patterns),
    Rule("week_level_matches", "A week's impact level is its exercises' highest", SRC_FIGURES, rule_week_figures),
    Rule("impact_counts_match", "Impact counts add up", SRC_FIGURES, rule_impact_counts),
    Rule("session_ceiling", "At most 100 impacts a session", SRC_CEILING, rule_session_ceiling),
    Rule("bout_split", "More than 50 impacts a day split into bouts at least 4 h apart", SRC_BOUTS,
         rule_bout_split),
    Rule("two_directions", "Two loading directions from moderate impact on", SRC_DIRECTIONS, rule_two_directions),
    Rule("one_level_at_a_time", "Impact steps up one level at a time", SRC_ONE_LEVEL, rule_one_level_at_a_time),
    Rule("weak_window", "No escalation in weeks 3-5 after a new or larger stimulus", SRC_REMODEL, rule_weak_window),
    Rule("catalogue_match", "Exercises are the catalogue's, with its figures", SRC_CATALOGUE, rule_catalogue_match),
    Rule("spine_sparing_variant", "Spine-sparing variants where flexion or twisting is to be avoided", SRC_SPINE,
         rule_spine_sparing_variant),
    Rule("spine_sparing_load", "Spine-sparing load limits where flexion or twisting is to be avoided", SRC_SPINE,
         rule_spine_sparing_load),
    Rule("balance_every_week", "Balance work every week where falls risk is flagged", SRC_BALANCE,
         rule_balance_every_week),
    Rule("falls_risk_limits", "Balance demand within the limits of a person at falls risk", SRC_FALLS_LIMITS,
         rule_falls_risk_limits),
    Rule("supervision", "Supervision at 80% 1RM or more, or at high impact", SRC_SUPERVISION, rule_supervision),
    Rule("swap_same_kind", "A swap keeps the kind of movement and the person's limits", SRC_SWAP,
         rule_swap_same_kind),
    Rule("resistance_days", "At most 3 resistance sessions a week, not on consecutive days", SRC_RESISTANCE_DAYS,
         rule_resistance_days),
    Rule("draft_until_cleared", "A draft until a clinician clears a referred person", SRC_DRAFT,
         rule_draft_until_cleared),
    Rule("same_person", "The records are the plan's own person's", SRC_FIGURES, rule_same_person),
)


# =========================================================================================
# Limits and the check
# =========================================================================================

def limits_for(plan: Plan, screening: ScreeningResult | None = None, *,
               record: PatientRecord | None = None) -> Limits:
    """The strictest limits of every screening available for this plan.

    Considered: ``screening`` (when given), the plan's embedded screening, and a fresh
    screening of ``record`` (the caller's copy of the person, e.g. the store's) with the
    current rules.  The cap is the lowest, the patterns to avoid the union, falls risk,
    refer and supervision are set if any says so.
    """
    found: list[tuple[str, ScreeningResult]] = []
    if screening is not None:
        found.append(("screening given", screening))
    found.append(("plan.screening", plan.screening))
    if plan.record is not None:
        found.append(("re-screened plan.record", rescreen(plan.record)))
    if record is not None:
        found.append(("re-screened record", rescreen(record)))
    cap = min(s.max_impact_level for _, s in found)
    plan_cap = plan.max_impact_level
    if plan_cap is not None and 0 <= plan_cap < cap:
        cap = plan_cap  # the template's own cap can only lower the screening's
    avoid = frozenset(p for _, s in found for p in s.avoid)
    max_imp = plan.max_impacts_per_session
    if max_imp is None or max_imp < 0:
        max_imp = IMPACTS_CEILING
    if max_imp > IMPACTS_CEILING and not plan.max_impacts_reason:
        max_imp = IMPACTS_CEILING
    return Limits(
        cap=cap, avoid=avoid,
        falls_risk=any(s.falls_risk or s.balance_first for _, s in found),
        refer=any(s.refer for _, s in found),
        supervision=any(s.supervision for _, s in found),
        spine_sparing=bool(avoid & SPINAL_PATTERNS)
        or plan.spine_sparing is True,
        max_impacts=max_imp,
        origins=tuple(name for name, _ in found),
    )


_CATEGORY_ORDER = ("unknown", "normal", "osteopenia", "osteoporosis", "severe_osteoporosis")


def strictest_screening(*screenings: ScreeningResult) -> ScreeningResult:
    """One screening holding the strictest of each: lowest cap, every pattern to avoid, falls
    risk, refer, supervision and balance-first if any says so, the most severe density
    category, every flag and caution (first seen first).  The first screening's identity
    (patient_id, rule-set version) is kept."""
    first = screenings[0]
    if len(screenings) == 1:
        return first
    flags, seen_rules, cautions = [], set(), []
    for scr in screenings:
        for fl in scr.flags:
            if fl.rule not in seen_rules:
                seen_rules.add(fl.rule)
                flags.append(fl)
        for c in scr.cautions:
            if c not in cautions:
                cautions.append(c)
    known = [s.bone_density_category for s in screenings if s.bone_density_category != "unknown"]
    category = max(known, key=_CATEGORY_ORDER.index) if known else first.bone_density_category
    avoid: list[str] = []
    for scr in screenings:
        avoid.extend(p for p in scr.avoid if p not in avoid)
    return first.model_copy(update={
        "bone_density_category": category,
        "falls_risk": any(s.falls_risk for s in screenings),
        "max_impact_level": min(s.max_impact_level for s in screenings),
        "avoid": avoid,
        "refer": any(s.refer for s in screenings),
        "flags": flags,
        "cautions": cautions,
        "balance_first": any(s.balance_first for s in screenings),
        "supervision": any(s.supervision for s in screenings),
    })


def rescreen(record: PatientRecord) -> ScreeningResult:
    """The record screened with the current rules (remembered: a plan is checked at many doors)."""
    return _rescreen_json(record.model_dump_json())


@lru_cache(maxsize=256)
def _rescreen_json(text: str) -> ScreeningResult:
    from ...records import PatientRecord as _Record
    from ...screening import screen
    return screen(_Record.model_validate_json(text))


def check_program(plan: Plan, screening: ScreeningResult | None = None, *, catalogue=None,
                  record: PatientRecord | None = None, rules: Iterable[Rule] | None = None
                  ) -> list[SafetyViolation]:
    """Every rule the program breaks; ``[]`` when it is safe.

    Parameters
    ----------
    plan : Plan
        Any plan: built by the planner, edited in the app, or edited by hand.
    screening : ScreeningResult, optional
        A screening to hold the plan to, besides the plan's own.
    catalogue : Catalogue, optional
        The exercise catalogue (default: the packaged one).
    record : PatientRecord, optional
        The person's record as the caller knows it (e.g. the store's); it is screened
        again with the current rules and the plan held to the stricter result.
    rules : iterable of Rule, optional
        A subset of :data:`RULES` (default: all).
    """
    if catalogue is None:
        from ...catalogue import default_catalogue
        catalogue = default_catalogue()
    limits = limits_for(plan, screening, record=record)
    facts = _Facts(plan, limits, catalogue, record)
    out: list[SafetyViolation] = []
    for rule in (RULES if rules is None else rules):
        out.extend(rule.check(facts))
    return out


def assert_safe(plan: Plan, screening: ScreeningResult | None = None, *, door: str = "", catalogue=None,
                record: PatientRecord | None = None, require_record: bool = False) -> None:
    """Raise :class:`~prescribe.errors.UnsafeProgram` when :func:`check_program` finds a violation.

    ``door`` names where the program came in (``"prescribe handout"``, ``"app: swap"``)
    and starts the message.  With ``require_record`` a plan that carries no patient
    record, checked without the caller's (the store's) record either, is refused: its
    only screening is the plan's own copy, which a hand edit can loosen.
    """
    found = check_program(plan, screening, catalogue=catalogue, record=record)
    if require_record and plan.record is None and record is None:
        found.insert(0, SafetyViolation(
            "record_on_file", None, None,
            "the plan carries no patient record to screen again, and no stored record of "
            f"{plan.patient_id!r} was given, so its embedded screening cannot be trusted",
            "a plan made by this version of `prescribe plan` (it carries the record), or the person's record "
            "from the store", SRC_RECORD))
    if found:
        raise UnsafeProgram(found, door=door)


def record_clearance(plan: Plan, cleared_by: str, cleared_at: str | None = None) -> Plan:
    """A copy of ``plan`` cleared by a clinician: ``draft`` false, who and when recorded.

    Raises
    ------
    InputError
        ``cleared_by`` is empty or longer than 120 characters, or ``cleared_at`` is not
        an ISO 8601 date and time.
    """
    from datetime import datetime, timezone

    from ...errors import InputError

    who = cleared_by.strip() if isinstance(cleared_by, str) else cleared_by
    if not isinstance(who, str) or not 1 <= len(who) <= 120 or not who.isprintable():
        raise InputError.single("cleared_by", cleared_by, "the clearing clinician's name or initials "
                                "(1-120 printable characters)")
    if cleared_at is None:
        cleared_at = datetime.now(timezone.utc).replace(microsecond=0).isoformat()
    else:
        try:
            datetime.fromisoformat(str(cleared_at))
        except ValueError:
            raise InputError.single("cleared_at", cleared_at, "an ISO 8601 date and time") from None
    return plan.model_copy(update={"draft": False, "cleared_by": who, "cleared_at": str(cleared_at)})


def is_draft(plan: Plan) -> bool:
    """True while the program must not be started: a draft with no clearance recorded."""
    return bool(plan.draft) and not (plan.cleared_by and plan.cleared_at)
