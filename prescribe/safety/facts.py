"""What the rules read: the plan's figures and the catalogue's, gathered once for all rules.

A built plan shares exercise models between sessions and weeks; the figures of a session
are computed once per distinct set of exercises (the check runs at every door, so it is
kept fast: ``benchmarks/bench_safety.py``).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterator

from ..intensity import pct_1rm, rpe_top  # noqa: F401 - read by the rules through this module
from ..plan_schema import Plan
from ..records import PatientRecord
from ..stimulus import Load, highest, session_load
from .model import Limits

#: Categories of strength-type work (resistance, back extensors, posture).
STRENGTH_CATEGORIES = frozenset({"resistance", "back_extensor", "posture"})


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
            dose_unit=e.dose_unit, balance_rank=e.balance_demand_rank,
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

    load: Load              # what it asks of the skeleton (prescribe.stimulus.session_load)
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
        self.loads: list[Load] = []        # per week: its load (prescribe.stimulus.week_load)
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
        week_loads: dict[tuple, Load] = {}  # a built plan repeats its weeks' sessions: one load each
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
            wkey = tuple(id(sf) for _, sf in pairs)
            load = week_loads.get(wkey)
            if load is None:
                load = week_loads[wkey] = highest(sf.load for _, sf in pairs)
            self.week_sessions.append(pairs)
            self.balance_days.append(bal_days)
            self.resistance_days.append(res_days)
            self.day_impacts.append(day_imp)
            self.loads.append(load)
            self.levels.append(load.impact_level)
            self.session_max.append(load.impacts)
            self.res_pct.append(load.pct_1rm)
            self.res_rpe.append(load.rpe)
            self.res_vol.append(load.volume)

    def exercises(self) -> Iterator[tuple[int, object, object]]:
        """(first week, session, exercise) for each distinct exercise in its session's kind."""
        return iter(self.contexts.values())


def _session_facts(kind: str, xs) -> _SessionFacts:
    load = session_load(kind, xs)
    balance = False
    dirs: set[str] = set()
    landing = []
    for x in xs:
        if x.impact_level >= 2:
            dirs.update(x.directions)
            if x.impacts > 0:
                landing.append(x)
        if x.category == "balance" and (x.minutes or x.sets or x.reps):
            balance = True
    return _SessionFacts(load, load.impacts, load.impact_level, load.pct_1rm, load.rpe, load.volume, balance,
                         frozenset(dirs), tuple(landing))
