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
from typing import Callable, Iterable, Iterator

from .errors import UnsafeProgram
from .plan_schema import Plan
from .records import PatientRecord, ScreeningResult

__all__ = ["SafetyViolation", "Limits", "Rule", "RULES", "check_program", "assert_safe", "limits_for",
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
SRC_CATALOGUE = ("common practice: each exercise's level, force and patterns are the catalogue's, whose "
                 "figures carry their own published sources (docs/catalogue.md)")

#: Impacts a bout at most; more in a day are split into bouts (common practice, see SRC_BOUTS).
MAX_BOUT_IMPACTS = 50
#: Minimum documented gap between bouts of impact work [h] (common practice, see SRC_BOUTS).
MIN_BOUT_GAP_H = 4.0
#: Impacts a session at most, unless a template gives a reason (Clissold et al. 2022).
IMPACTS_CEILING = 100

IMPACT_LABELS: dict[int, str] = {0: "no impact", 1: "low impact", 2: "moderate impact", 3: "high impact"}


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


def pct_1rm(intensity: str | None) -> float | None:
    """The highest %1RM an intensity text prescribes ("80% 1RM", "80-85% 1RM"), or None."""
    if not intensity:
        return None
    found = [float(b or a) for a, b in _PCT_1RM.findall(intensity)]
    return max(found) if found else None


class _Facts:
    """The plan and its limits, with each week's figures computed once for all rules."""

    def __init__(self, plan: Plan, limits: Limits, catalogue):
        self.plan, self.limits = plan, limits
        self.catalogue = catalogue
        self.weeks = plan.weeks
        # Per week: highest impact level of its exercises, largest session's level 2-3 impacts.
        self.levels: list[int] = []
        self.session_max: list[int] = []
        for wk in plan.weeks:
            top = 0
            largest = 0
            for s in wk.sessions:
                n = 0
                for x in s.exercises:
                    if x.impact_level > top:
                        top = x.impact_level
                    if x.impact_level >= 2:
                        n += x.impacts
                if n > largest:
                    largest = n
            self.levels.append(top)
            self.session_max.append(largest)

    def exercises(self) -> Iterator[tuple[int, object, object]]:
        """(week, session, exercise) for every exercise of the plan."""
        for wk in self.weeks:
            for s in wk.sessions:
                for x in s.exercises:
                    yield wk.week, s, x


def _extra(model, key, default=None):
    extra = getattr(model, "model_extra", None) or {}
    return extra.get(key, default)


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
    for wk, largest in zip(f.weeks, f.session_max):
        for s in wk.sessions:
            n = sum(x.impacts for x in s.exercises if x.impact_level >= 2)
            if n != s.impacts:
                yield SafetyViolation(
                    "impact_counts_match", wk.week, None,
                    f"week {wk.week} day {s.day}: session impacts {s.impacts} do not add up to the exercises' "
                    f"level 2-3 impacts {n}", "session impacts equal to the sum of its level 2-3 impacts",
                    SRC_FIGURES)
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
    for wk in f.weeks:
        by_day: dict[int, list] = {}
        for s in wk.sessions:
            for x in s.exercises:
                if x.impact_level >= 2 and x.impacts > 0:
                    by_day.setdefault(s.day, []).append(x)
        for day, xs in by_day.items():
            total = sum(x.impacts for x in xs)
            if total <= MAX_BOUT_IMPACTS:
                continue
            need = math.ceil(total / MAX_BOUT_IMPACTS)
            for x in xs:
                gap = _extra(x, "bout_gap_hours")
                if x.bouts < need or gap is None or gap < MIN_BOUT_GAP_H:
                    yield SafetyViolation(
                        "bout_split", wk.week, x.exercise_id,
                        f"week {wk.week} day {day}: {total} impacts in the day need at least {need} bouts at "
                        f"least {MIN_BOUT_GAP_H:g} h apart ({x.exercise_id} has {x.bouts} bout(s), gap {gap} h)",
                        f"at most {MAX_BOUT_IMPACTS} impacts a bout, bouts at least {MIN_BOUT_GAP_H:g} h apart",
                        SRC_BOUTS)


def rule_two_directions(f: _Facts) -> Iterator[SafetyViolation]:
    """From moderate impact on, each week's level 2-3 work loads in at least two directions."""
    for wk, top in zip(f.weeks, f.levels):
        if top < 2:
            continue
        dirs: set[str] = set()
        for s in wk.sessions:
            for x in s.exercises:
                if x.impact_level >= 2:
                    dirs.update(x.directions)
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


def rule_weak_window(f: _Facts) -> Iterator[SafetyViolation]:
    """No escalation in weeks 3-5 after a step-up (the first week with impact counts)."""
    levels, counts = f.levels, f.session_max
    for i, lv in enumerate(levels):
        if lv > (levels[i - 1] if i else 0):
            for j in (i + 2, i + 3, i + 4):  # window weeks 3, 4, 5 against window week 2 (index i + 1)
                if j >= len(levels):
                    break
                wk = f.weeks[j]
                if levels[j] > levels[i + 1]:
                    yield SafetyViolation(
                        "weak_window", wk.week, None,
                        f"week {wk.week} raises the impact level to {levels[j]} inside weeks 3-5 after the "
                        f"step-up in week {i + 1} (week 2 of it had level {levels[i + 1]})",
                        f"impact level {levels[i + 1]} or lower", SRC_REMODEL)
                if counts[j] > counts[i + 1]:
                    yield SafetyViolation(
                        "weak_window", wk.week, None,
                        f"week {wk.week} has {counts[j]} impacts a session inside weeks 3-5 after the step-up "
                        f"in week {i + 1}, more than the {counts[i + 1]} of its week 2",
                        f"at most {counts[i + 1]} impacts a session", SRC_REMODEL)


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
    if record is not None:
        found.append(("re-screened record", _rescreen(record)))
    cap = min(s.max_impact_level for _, s in found)
    plan_cap = _extra(plan, "max_impact_level")
    if isinstance(plan_cap, int) and not isinstance(plan_cap, bool) and 0 <= plan_cap < cap:
        cap = plan_cap  # the template's own cap can only lower the screening's
    avoid = frozenset(p for _, s in found for p in s.avoid)
    max_imp = _extra(plan, "max_impacts_per_session", IMPACTS_CEILING)
    if not isinstance(max_imp, int) or isinstance(max_imp, bool) or max_imp < 0:
        max_imp = IMPACTS_CEILING
    if max_imp > IMPACTS_CEILING and not _extra(plan, "max_impacts_reason", ""):
        max_imp = IMPACTS_CEILING
    return Limits(
        cap=cap, avoid=avoid,
        falls_risk=any(s.falls_risk or s.balance_first for _, s in found),
        refer=any(s.refer for _, s in found),
        supervision=any(s.supervision for _, s in found),
        spine_sparing=bool(avoid & {"loaded_spinal_flexion", "loaded_spinal_twisting"})
        or _extra(plan, "spine_sparing") is True,
        max_impacts=max_imp,
        origins=tuple(name for name, _ in found),
    )


def _rescreen(record: PatientRecord) -> ScreeningResult:
    from .screening import screen
    return screen(record)


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
        from .catalogue import default_catalogue
        catalogue = default_catalogue()
    limits = limits_for(plan, screening, record=record)
    facts = _Facts(plan, limits, catalogue)
    out: list[SafetyViolation] = []
    for rule in (RULES if rules is None else rules):
        out.extend(rule.check(facts))
    return out


def assert_safe(plan: Plan, screening: ScreeningResult | None = None, *, door: str = "", catalogue=None,
                record: PatientRecord | None = None) -> None:
    """Raise :class:`~prescribe.errors.UnsafeProgram` when :func:`check_program` finds a violation.

    ``door`` names where the program came in (``"prescribe handout"``, ``"app: swap"``)
    and starts the message.
    """
    found = check_program(plan, screening, catalogue=catalogue, record=record)
    if found:
        raise UnsafeProgram(found, door=door)
