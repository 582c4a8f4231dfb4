"""Which exercises a program uses: the planner's view of the catalogue and its choices.

Impact work covering at least two loading directions from moderate impact on (rule 5),
resistance progression chains within the spine-sparing and falls-risk limits (rule 6),
and balance work sliding toward harder exercises (rule 7).  The choices are a mixin of
the builder (:class:`~prescribe.planning.builder._Builder`), which holds the person's
limits and the pool of allowed exercises.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Iterable

from ..catalogue import IMPACT_LEVEL_LABELS as IMPACT_LABELS
from ..languages import N_
from ..records import FIELD_META, PatientRecord, ScreeningResult
from .progression import reassessment_weeks
from .templates import Template
from .sources import (BALANCE_FIRST_WEEKS, BALANCE_STAGE_WEEKS, BALANCE_STAGE_WEEKS_FALLS, FRAIL_BODYWEIGHT_WEEKS,
                      NARROW_STANCE_PATTERN, NEVER_IN_RESISTANCE, RESISTANCE_CHAINS_MAX, SRC_ACSM_PROGRESSION,
                      SRC_BALANCE_MEASURED, SRC_BROOKE, SRC_GIANG)

#: The tandem stance test's full time [s]: the record's own bound (the test stops there).
TANDEM_TEST_FULL_S: float = FIELD_META["tandem_stance_s"]["maximum"]

@dataclass(frozen=True)
class _Ex:
    """The planner's view of one catalogue entry (read once per catalogue)."""

    exercise_id: str
    name: str
    category: str
    impact_level: int
    peak_grf_bw: float
    directions: tuple[str, ...]
    patterns: frozenset[str]
    balance_rank: int
    dose_unit: str
    progression: str | None
    regression: str | None
    spine_sparing: bool
    loaded_by_1rm: bool
    external_load: bool
    order: int
    source: str


def _views(catalogue) -> list[_Ex]:
    cached = getattr(catalogue, "_planner_views", None)
    if cached is not None:
        return cached
    out = []
    for i, e in enumerate(catalogue.all()):
        equipment = " ".join(getattr(e, "equipment", ()) or ()).lower()
        out.append(_Ex(
            exercise_id=e.exercise_id, name=e.name, category=e.category,
            impact_level=int(e.impact_level), peak_grf_bw=float(e.peak_grf_bw),
            directions=tuple(e.directions), patterns=frozenset(e.patterns),
            balance_rank=e.balance_demand_rank,
            dose_unit=getattr(e, "dose_unit", "reps"),
            progression=getattr(e, "progression", None), regression=getattr(e, "regression", None),
            spine_sparing=bool(getattr(e, "spine_sparing", False)),
            loaded_by_1rm=bool(getattr(e, "loaded_by_1rm", False)),
            external_load=bool(getattr(e, "grf_plus_external_load", False))
            or any(w in equipment for w in ("dumbbell", "kettlebell", "barbell", "band", "plates")),
            order=i, source=str(getattr(e, "source", "")),
        ))
    try:
        object.__setattr__(catalogue, "_planner_views", out)
    except (AttributeError, TypeError):
        pass
    return out


def _pick_impact(pool: list[_Ex], level: int, prefer: frozenset[str]) -> list[_Ex] | None:
    """Exercises for a week of impact work at ``level`` (2 or 3), covering >= 2 directions.

    The main exercise is the steadiest (lowest balance demand) at the level; others are
    added when they bring a new loading direction (rule 5).  None when rule 5 cannot be
    met with the exercises allowed.
    """
    def key(e: _Ex):
        return (e.exercise_id not in prefer, e.balance_rank, e.order)

    at_level = sorted((e for e in pool if e.impact_level == level), key=key)
    if not at_level:
        return None
    chosen = [at_level[0]]
    dirs = set(at_level[0].directions)
    for e in at_level[1:]:
        if len(chosen) == 3:
            break
        if set(e.directions) - dirs:
            chosen.append(e)
            dirs |= set(e.directions)
    if len(dirs) < 2:
        lower = sorted((e for e in pool if 2 <= e.impact_level < level), key=key)
        for e in lower:
            if set(e.directions) - dirs:
                chosen.append(e)
                dirs |= set(e.directions)
                break
    return chosen if len(dirs) >= 2 else None


def _chains(pool: list[_Ex], allowed: set[str]) -> list[list[_Ex]]:
    """Resistance progression chains (regression -> progression), in catalogue order."""
    by_id = {e.exercise_id: e for e in pool if e.category == "resistance" and e.dose_unit == "reps"}
    targets = {e.progression for e in by_id.values()}
    chains = []
    for e in sorted(by_id.values(), key=lambda x: x.order):
        if e.exercise_id in targets:
            continue
        chain, cur, seen = [], e, set()
        while cur is not None and cur.exercise_id not in seen:
            seen.add(cur.exercise_id)
            chain.append(cur)
            cur = by_id.get(cur.progression) if cur.progression else None
        chain = [c for c in chain if c.exercise_id in allowed]
        if chain:
            chains.append(chain)
    return chains


def _views_by_id(pool: Iterable[_Ex], ids: set[str]) -> list[_Ex]:
    return [e for e in pool if e.exercise_id in ids]


def _frail(record: PatientRecord, screening: ScreeningResult) -> bool:
    """Frail for the planner: a 30-s chair stand below the normal range for age and sex.

    Read from the record (Rikli & Jones 1999 norms, :func:`prescribe.screening.chair_stand_norm_low`),
    or from the screening's ``falls.chair_stand`` flag when the screening came with it.
    """
    if any(f.rule == "falls.chair_stand" for f in screening.flags):
        return True
    if record.chair_stand_30s is None:
        return False
    from ..screening import chair_stand_norm_low
    low = chair_stand_norm_low(record.age_years, record.sex)
    return low is not None and record.chair_stand_30s < low



def _phases_within(phases, max_pct_1rm: float | None) -> tuple:
    """The resistance phases up to the heaviest load allowed (screening ``max_pct_1rm``): phases above
    it are left out and the last one kept runs to the end of the program."""
    if max_pct_1rm is None:
        return tuple(phases)
    kept = [ph for ph in phases if ph.pct_1rm is None or ph.pct_1rm <= max_pct_1rm]
    if not kept:
        kept = [replace(phases[0], pct_1rm=float(max_pct_1rm))]
    if len(kept) < len(phases):
        kept[-1] = replace(kept[-1], weeks=0)
    return tuple(kept)


class _Selection:
    """The builder's choices of exercises (a mixin: the builder holds the state they read)."""

    def _choose_impact(self) -> None:
        pool = [e for e in self.pool if e.category == "impact"
                and not (self.falls and e.balance_rank >= 3)]
        pool_l23 = [e for e in pool if e.impact_level >= 2 and e.dose_unit == "impacts"]
        level1 = sorted((e for e in pool if e.impact_level == 1 and e.dose_unit == "minutes"),
                        key=lambda e: (e.exercise_id not in self.prefer, e.balance_rank, -e.peak_grf_bw, e.order))
        level0 = sorted((e for e in self.pool if e.category == "resistance" and e.impact_level == 0
                         and e.dose_unit == "reps" and e.peak_grf_bw >= 1.0 and not e.external_load
                         and e.balance_rank <= 1),
                        key=lambda e: (e.exercise_id not in self.prefer, -e.peak_grf_bw, e.order))
        self.sets_by_level: dict[int, list[_Ex]] = {0: level0[:2], 1: level1[:1]}
        for lv in (2, 3):
            picked = _pick_impact(pool_l23, lv, self.prefer)
            if picked:
                self.sets_by_level[lv] = picked
        default_start = min(self.cap, self.tpl.impact["default_start_level"])
        start = self.options.start_level if self.options.start_level is not None else default_start
        while start > 0 and not self.sets_by_level.get(start):
            start -= 1
        if self.options.start_level is not None and start < self.options.start_level:
            self.cautions.append(N_("The start level was lowered from %(asked)s to %(start)s: too few allowed "
                                    "exercises at that level (from moderate impact on they must load the skeleton "
                                    "in at least two directions).") % {"asked": self.options.start_level,
                                                                       "start": start})
        top = start
        while top + 1 <= self.cap and self.sets_by_level.get(top + 1):
            top += 1
        if top < self.cap:
            self.cautions.append(N_("Impact work stops at level %(top)s (%(label)s), below the allowed %(cap)s: "
                                    "too few allowed exercises above it to load the skeleton in at least two "
                                    "directions.") % {"top": top, "label": IMPACT_LABELS[top], "cap": self.cap})
        self.start, self.top = start, top

    def _choose_resistance(self) -> None:
        # The one derivation (prescribe.safety.derive_limits) says whether and why.
        self.spine_sparing = self.limits.spine_sparing
        why = next((r.reason for r in self.limits.reasons if r.limit == "spine_sparing"), "")
        self.phases = _phases_within(self.tpl.spine_sparing_phases if self.spine_sparing
                                     else self.tpl.resistance_phases, self.max_pct_1rm)
        wanted = self.options.start_phase
        self.continuing = False
        if wanted is not None:
            names = [ph.name for ph in self.phases]
            if wanted in names:
                # A next block continues in the phase the last one stood in (docs/reassess.md).
                self.phases = tuple(self.phases[names.index(wanted):])
                self.continuing = names.index(wanted) > 0
            else:
                self.cautions.append(N_("Resistance work starts from the first phase (%(first)s): this program's "
                                        "phases (%(phases)s) do not include %(asked)s, the phase asked for.")
                                     % {"first": names[0], "phases": ", ".join(names), "asked": repr(wanted)})
        self.frail = _frail(self.record, self.screening)
        allowed = {e.exercise_id for e in self.pool
                   if not (e.patterns & NEVER_IN_RESISTANCE) and e.impact_level == 0
                   and (e.spine_sparing or not self.spine_sparing)
                   and not (self.falls and e.balance_rank >= 2)}
        self.chains = _chains(self.pool, allowed)
        self.chains.sort(key=lambda ch: (not any(c.exercise_id in self.prefer for c in ch), ch[0].order))
        self.chains = self.chains[:RESISTANCE_CHAINS_MAX]
        self.back = [e for e in self.pool if e.category == "back_extensor" and e.exercise_id in allowed]
        self.posture = [e for e in self.pool if e.category == "posture" and e.dose_unit == "reps"] \
            if (self.spine_sparing or "thoracic_kyphosis" in self.record.conditions) else []
        if self.spine_sparing:
            self.sources.append(SRC_GIANG)
            self.cautions.append(N_("Spine-sparing program (%(why)s): keep the spine long and neutral; no loaded "
                                    "or repeated forward bending or twisting of the spine, and moderate loads only.")
                                 % {"why": why})
        if any(ph.pct_1rm is None and ph.name != "technique" for ph in self.phases):
            self.sources.append(SRC_ACSM_PROGRESSION)
        if self.frail:
            self.cautions.append(N_("Weak legs for age (30-s chair stand below the norm): supervised sessions; "
                                    "sit-to-stand from a chair comes before any loaded squat, and body-weight "
                                    "forms of the strength exercises are used for at least the first %(weeks)s "
                                    "weeks.") % {"weeks": FRAIL_BODYWEIGHT_WEEKS})
        self.sources.append(SRC_BROOKE)

    def _choose_balance(self) -> None:
        self.balance_pool = sorted((e for e in self.pool if e.category == "balance"),
                                   key=lambda e: (e.balance_rank, e.exercise_id not in self.prefer, e.order))
        narrow_from, held = self._stance_limit()
        if held is not None and any(NARROW_STANCE_PATTERN in e.patterns for e in self.balance_pool):
            self.sources.append(SRC_BALANCE_MEASURED)
            self.cautions.append(N_("Tandem stance was held for %(held)s s of %(full)s: balance work starts with "
                                    "feet together and stepping, holds no longer than the person held, and "
                                    "heel-to-toe or one-leg stance waits for the review (from week %(week)s).")
                                 % {"held": f"{held:g}", "full": f"{TANDEM_TEST_FULL_S:g}", "week": narrow_from})
        if self.falls:
            self.sources.append(SRC_GIANG)
            impact = (N_("impact work does not step above low impact in the first %(weeks)s weeks")
                      % {"weeks": BALANCE_FIRST_WEEKS} if self.start <= 1 else
                      N_("the clinician chose to start impact work at level %(level)s (%(label)s)")
                      % {"level": self.start, "label": IMPACT_LABELS[self.start]})
            self.cautions.append(N_("Falls risk: balance work comes first in each session and is practised next to "
                                    "a stable support, supervised at first; %(impact)s.") % {"impact": impact})

    def _stance_limit(self) -> tuple[int, float | None]:
        """(first week narrow-base stance may be used, seconds held) where the person could not hold
        the tandem stance test for its full time; (1, None) otherwise."""
        held = self.record.tandem_stance_s
        if held is None or held >= TANDEM_TEST_FULL_S:
            return 1, None
        reviews = reassessment_weeks(self.options.weeks)
        return (reviews[0] + 1 if reviews else self.options.weeks + 1), held

    def _balance_set(self, week: int) -> list[_Ex]:
        """Three balance exercises, sliding toward harder ones every few weeks.

        From the easiest with falls risk, one step further on otherwise; a step every
        6 weeks (8 with falls risk) (common practice: progressive balance challenge,
        Giangregorio et al. 2014).
        """
        stage_len = BALANCE_STAGE_WEEKS_FALLS if self.falls else BALANCE_STAGE_WEEKS
        stage = (week - 1) // stage_len + (0 if self.falls else 1)
        if self.hold_volume:
            stage = 0 if self.falls else 1
        pool = self.balance_pool
        narrow_from, _ = self._stance_limit()
        if week < narrow_from:
            pool = [e for e in pool if NARROW_STANCE_PATTERN not in e.patterns]
        count = 2 if self.carer_led else 3
        offset = max(0, min(stage, len(pool) - count))
        return sorted(pool[offset:offset + count], key=lambda e: (e.balance_rank, e.order))

