"""The builder: a record, its screening and the options -> a validated :class:`~prescribe.plan_schema.Plan`."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import datetime, timezone
from functools import lru_cache
from typing import Any, Iterable

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from .. import __version__
from ..cautions import with_standard
from ..dose import daily_osteogenic_index, osteogenic_index
from ..errors import FieldProblem, InputError, PlanRequestRefused
from ..catalogue import IMPACT_LEVEL_LABELS
from ..plan_schema import (PLAN_FORMAT_VERSION, Plan, PlannedExercise, PlannedSession, PlannedWeek,
                          in_weak_window)
from .rules import IMPACTS_CEILING, ResistancePhase, Template, load_template, template_names
from .options import OPTION_DEFAULTS, OPTION_RANGES
from ..records import PatientRecord, ScreeningResult
from .safety import SUPERVISED_FROM_PCT_1RM, pct_1rm as _pct_1rm

__all__ = ["PlanOptions", "build_plan", "check_plan", "replace_exercise", "prescribed_pct_1rm",
           "reassessment_weeks", "option_range", "fixed_options", "plan_swaps", "IMPACT_LABELS"]

IMPACT_LABELS = IMPACT_LEVEL_LABELS  # the catalogue's, next to the level boundaries

# --- sources the plan cites (only those actually used go into plan.sources) --------------
SRC_KOHRT = "Kohrt et al. 2004, Med Sci Sports Exerc 36:1985-1996 (ACSM position stand: weight-bearing 3-5 and resistance 2-3 times a week)"
SRC_BECK = "Beck, Daly, Fiatarone Singh & Taaffe 2017, J Sci Med Sport 20(5):438-445 (ESSA position statement: impact plus progressive resistance training; loaded spine flexion not recommended)"
SRC_WATSON = "Watson et al. 2018, J Bone Miner Res 33:211-220 (LIFTMOR: 5 x 5 at 80-85% 1RM after a technique phase)"
SRC_GIANG = "Giangregorio et al. 2014, Osteoporos Int 25:821-835 (spine-sparing technique after vertebral fracture; balance training; 8-12 repetitions)"
SRC_ROBLING = "Robling, Burr & Turner 2001, J Exp Biol 204:3389-3399 (about 8 h of recovery restores mechanosensitivity; rest between loading cycles)"
SRC_REMODEL = "Eriksen 1986, Endocr Rev 7:379 (resorption about 3 weeks precedes formation) and Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143 (remodelling transient): no escalation in weeks 3-5 after a step-up"
SRC_TURNER_OI = "Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50 (osteogenic index = peak GRF x ln(cycles + 1))"
SRC_TURNER_DIR = "Turner 1998, Bone 23:399-407 (bone responds to dynamic, unusual loading: at least two loading directions)"
SRC_BROOKE = "Brooke-Wavell et al. 2022, Br J Sports Med 56:837-846 (strength 2-3 days a week; moderate impact; after vertebral fracture impact no more than brisk walking)"
SRC_CADENCE = "Walking cadence of about 100 steps a minute, used to count loading cycles of minutes-based work (from memory)"

#: Loading cycles a minute of walking-type work (from memory; see SRC_CADENCE).
STEPS_PER_MINUTE = 100.0
#: Impacts a set of impact work, and the rest between sets [s] (common practice,
#: informed by Robling, Burr & Turner 2001: rest between cycles adds to the response).
IMPACTS_PER_SET = 10
IMPACT_REST_S = 15
#: Minimum documented gap between bouts of impact work [h] (issue rule 4).
MIN_BOUT_GAP_H = 4.0
#: Weeks of the balance-first phase when falls risk is flagged: no step-up above
#: low impact before it ends (Giangregorio et al. 2014; length common practice).
BALANCE_FIRST_WEEKS = 4
#: Weeks between balance-difficulty steps (common practice); longer with falls risk.
BALANCE_STAGE_WEEKS = 6
BALANCE_STAGE_WEEKS_FALLS = 8
#: Weeks a due resistance phase may wait for a close impact step-up, so both share one
#: remodelling window (common practice).
PHASE_WAIT_WEEKS = 3
#: Resistance exercises a session drawn from progression chains, plus one back extensor.
RESISTANCE_CHAINS_MAX = 5
#: From this %1RM on, a chain's main barbell lift (``loaded_by_1rm``) is loaded by % 1RM.
LIFT_LOAD_FROM_PCT = 70.0
#: Weeks of light practice of a barbell lift before it is loaded at LIFT_LOAD_FROM_PCT or more,
#: and so always before 80% 1RM or more: the LIFTMOR program began with about a month of
#: technique work on the same lifts (Watson et al. 2018, J Bone Miner Res 33:211-220; the month
#: is from memory).  The practice dose (3 x 8 at 50% 1RM, a light load) is common practice.
LIFT_PRACTICE_WEEKS = 4
LIFT_PRACTICE_SETS, LIFT_PRACTICE_REPS, LIFT_PRACTICE_PCT = 3, 8, 50.0
#: A frail person (30-s chair stand below the norm for age and sex, Rikli & Jones 1999) does
#: body-weight sit-to-stand (and the other chains' unloaded forms) in the technique phase and
#: at least the first weeks, before any loaded squat (common practice).
FRAIL_BODYWEIGHT_WEEKS = 4
#: Load progression in effort-based phases: add 2-10% when the target is beaten (ACSM 2009,
#: Med Sci Sports Exerc 41:687-708); "two sessions running" is common practice.
SRC_ACSM_PROGRESSION = ("American College of Sports Medicine 2009, Progression models in resistance training "
                        "for healthy adults, Med Sci Sports Exerc 41(3):687-708 (add 2-10% load when the "
                        "person does 1-2 repetitions beyond the target)")
#: Patterns the planner never chooses for resistance work, whatever the screening says:
#: loaded spine flexion is not recommended (Beck et al. 2017); twisting under load
#: likewise (Giangregorio et al. 2014).
NEVER_IN_RESISTANCE = frozenset({"loaded_spinal_flexion", "loaded_spinal_twisting"})

_BALANCE_RANK = {"none": 0, "low": 1, "moderate": 2, "high": 3}

# Day layouts (1 = Monday).  Resistance on non-consecutive days, across the week end too.
_IMPACT_DAYS = {1: (1,), 2: (1, 4), 3: (1, 3, 5), 4: (1, 3, 5, 7), 5: (1, 2, 3, 5, 6),
                6: (1, 2, 3, 4, 5, 6), 7: (1, 2, 3, 4, 5, 6, 7)}
_RESISTANCE_DAYS = {1: (2,), 2: (2, 6), 3: (2, 4, 6)}
_EXTRA_BALANCE_DAY_ORDER = (7, 2, 4, 6, 1, 3, 5)


# =========================================================================================
# Options
# =========================================================================================

_OPTION_ALLOWED = {
    "weeks": "a whole number of weeks from {} to {}".format(*OPTION_RANGES["weeks"]),
    "start_level": "an impact level 0, 1, 2 or 3, or null to let the planner choose",
    "impact_sessions_per_week": "a whole number from {} to {}".format(*OPTION_RANGES["impact_sessions_per_week"]),
    "resistance_sessions_per_week": "a whole number from {} to {} (on non-consecutive days)".format(
        *OPTION_RANGES["resistance_sessions_per_week"]),
    "balance_sessions_per_week": "a whole number from {} to {} (balance work at least twice a week), or null "
                                 "for the default".format(*OPTION_RANGES["balance_sessions_per_week"]),
    "exclude": "a list of exercise ids from the catalogue",
    "include": "a list of exercise ids from the catalogue",
    "template": "one of " + ", ".join(template_names()) + ", or null for the default",
    "step_up_weeks": "a list of week numbers (whole numbers) where the clinician wants the impact level raised",
}


class PlanOptions(BaseModel):
    """What the clinician fixes for a plan.  Bad values raise :class:`InputError`.

    ``balance_sessions_per_week`` left as None means 3 a week, or the template's
    ``sessions_falls_risk`` (4 in the bundled ones) when falls risk is flagged.
    ``include`` lists exercises the clinician prefers: the planner picks them first
    where their level and category fit; one that breaks rule 1 is refused.
    ``step_up_weeks`` fixes the weeks where the impact level rises (then only there);
    a week that would break rule 1, 2 or 3 (already at the cap, the level not yet held
    at full volume, or inside weeks 3-5 after the previous step-up) is refused.
    """

    model_config = ConfigDict(extra="forbid", frozen=True, strict=True)

    weeks: int = Field(OPTION_DEFAULTS["weeks"], ge=OPTION_RANGES["weeks"][0], le=OPTION_RANGES["weeks"][1])
    start_level: int | None = Field(None, ge=OPTION_RANGES["start_level"][0], le=OPTION_RANGES["start_level"][1])
    impact_sessions_per_week: int = Field(OPTION_DEFAULTS["impact_sessions_per_week"],
                                          ge=OPTION_RANGES["impact_sessions_per_week"][0],
                                          le=OPTION_RANGES["impact_sessions_per_week"][1])
    resistance_sessions_per_week: int = Field(OPTION_DEFAULTS["resistance_sessions_per_week"],
                                              ge=OPTION_RANGES["resistance_sessions_per_week"][0],
                                              le=OPTION_RANGES["resistance_sessions_per_week"][1])
    balance_sessions_per_week: int | None = Field(None, ge=OPTION_RANGES["balance_sessions_per_week"][0],
                                                  le=OPTION_RANGES["balance_sessions_per_week"][1])
    exclude: tuple[str, ...] = ()
    include: tuple[str, ...] = ()
    template: str | None = None
    step_up_weeks: tuple[int, ...] = ()

    def __init__(self, **data: Any):
        for key in ("exclude", "include", "step_up_weeks"):
            if isinstance(data.get(key), list):
                data[key] = tuple(data[key])
        try:
            super().__init__(**data)
        except ValidationError as err:
            problems = []
            for e in err.errors(include_url=False):
                field = str(e["loc"][0]) if e["loc"] else "options"
                if e["type"] == "extra_forbidden":
                    problems.append(FieldProblem(field, e.get("input"), "a known option (" +
                                                 ", ".join(type(self).model_fields) + ")", kind="unknown_field"))
                elif field not in {p.field for p in problems}:
                    problems.append(FieldProblem(field, e.get("input"), _OPTION_ALLOWED.get(field, "a valid value")))
            raise InputError(problems) from None
        if self.template is not None and self.template not in template_names():
            raise InputError.single("template", self.template, _OPTION_ALLOWED["template"])
        late = [w for w in self.step_up_weeks if not 2 <= w <= self.weeks]
        if late:
            raise InputError.single("step_up_weeks", late[0] if len(late) == 1 else late,
                                    f"weeks from 2 to the plan's last week ({self.weeks})")


def option_range(name: str) -> tuple[int, int]:
    """The smallest and largest value :class:`PlanOptions` accepts for a whole-number option.

    Forms offer exactly these values, so a choice on screen is never refused for its range.
    """
    if name not in OPTION_RANGES:
        raise ValueError(f"{name} is not a whole-number option with a range")
    return OPTION_RANGES[name]


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


# =========================================================================================
# Exercise views and choice
# =========================================================================================

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
            balance_rank=_BALANCE_RANK.get(getattr(e, "balance_demand", "low"), 1),
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


# =========================================================================================
# Dose
# =========================================================================================

# =========================================================================================
# The plan
# =========================================================================================

def reassessment_weeks(weeks: int) -> list[int]:
    """Review weeks: evenly spaced, at most 8 weeks apart, the last week included.

    Plans of 12 weeks or more get reviews every 6 to 8 weeks (issue 4; common practice).
    """
    k = max(1, math.ceil(weeks / 8))
    return sorted({int(math.floor(i * weeks / k + 0.5)) for i in range(1, k + 1)})


def _spine_sparing(record: PatientRecord, screening: ScreeningResult, tpl: Template) -> tuple[bool, str]:
    if tpl.spine_sparing:
        return True, f"template {tpl.name}"
    if any(f.site == "vertebra" for f in record.fractures):
        return True, "vertebral fracture on record"
    if screening.bone_density_category == "severe_osteoporosis":
        return True, "severe osteoporosis"
    if sum(1 for f in record.fractures if f.low_trauma) >= 2:
        return True, "two or more fragility fractures (high vertebral risk)"
    if "thoracic_kyphosis" in record.conditions:
        return True, "marked thoracic kyphosis"
    spinal = sorted({"loaded_spinal_flexion", "loaded_spinal_twisting"} & set(screening.avoid))
    if spinal:
        # The safety check holds every program with a spinal pattern to avoid to spine-sparing
        # loads (prescribe.safety, rule spine_sparing_load): plan for them from the start.
        return True, "the screening asks to avoid " + " and ".join(p.replace("_", " ") for p in spinal)
    return False, ""


def _phase_at(phases: tuple[ResistancePhase, ...], week: int) -> ResistancePhase:
    start = 1
    for ph in phases:
        if ph.weeks == 0 or week < start + ph.weeks:
            return ph
        start += ph.weeks
    return phases[-1]


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


def prescribed_pct_1rm(exercises: Iterable[Any]) -> float | None:
    """The highest load given as % 1RM among exercises (models or dicts), or None when none is.

    What the program prescribes, read from each exercise's ``intensity`` text ("70% 1RM"),
    so that a week's figure can never say more than its exercises do.
    """
    found = []
    for x in exercises:
        text = x.get("intensity") if isinstance(x, dict) else getattr(x, "intensity", "")
        match = _PCT_1RM_TEXT.search(text or "")
        if match:
            found.append(float(match.group(1)))
    return max(found) if found else None


_PCT_1RM_TEXT = re.compile(r"(\d+(?:\.\d+)?)\s*%\s*(?:of\s+)?1\s*RM", re.IGNORECASE)


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


def _exercise(e: _Ex, **kw) -> dict:
    d = {"exercise_id": e.exercise_id, "name": e.name, "category": e.category,
         "sets": None, "reps": None, "impacts": 0, "minutes": None, "bouts": 1, "intensity": "",
         "impact_level": e.impact_level, "peak_grf_bw": e.peak_grf_bw,
         "directions": list(e.directions), "patterns": sorted(e.patterns),
         "rest_s": None, "bout_gap_hours": None, "notes": "", "supervised": False}
    d.update(kw)
    # Supervised wherever 80% 1RM or more, or high impact, is prescribed (prescribe.safety,
    # rule supervision: Watson et al. 2018; common practice for high impact).
    d["supervised"] = bool(d["supervised"] or d["impact_level"] >= 3
                           or (_pct_1rm(d["intensity"]) or 0) >= SUPERVISED_FROM_PCT_1RM)
    return d


def _session_oi(exercises: list[dict]) -> float:
    """Turner's osteogenic index of a session: the sum over its exercises [BW].

    Level 2-3 impacts use :func:`prescribe.dose.daily_osteogenic_index` with the
    documented bouts and gap; minutes of walking-type work count
    :data:`STEPS_PER_MINUTE` cycles a minute; repetitions count one cycle each;
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
    """:func:`prescribe.dose.daily_osteogenic_index` as a float, remembered (plans repeat doses)."""
    if bouts == 1:
        return float(osteogenic_index(peak_grf_bw, cycles))
    return float(daily_osteogenic_index(peak_grf_bw, cycles, bouts, gap_hours))


class _Builder:
    """Holds one plan's choices; :meth:`weeks` lays them out week by week."""

    def __init__(self, record: PatientRecord, screening: ScreeningResult, options: PlanOptions,
                 catalogue, tpl: Template):
        self.record, self.screening, self.options, self.tpl = record, screening, options, tpl
        self.cautions: list[str] = []
        self.sources: list[str] = [SRC_KOHRT, SRC_BECK, SRC_REMODEL, SRC_TURNER_OI]
        views = _views(catalogue)
        by_id = {e.exercise_id: e for e in views}
        for field in ("exclude", "include"):
            unknown = [x for x in getattr(options, field) if x not in by_id]
            if unknown:
                raise InputError.single(field, unknown[0] if len(unknown) == 1 else unknown,
                                        "exercise ids from the catalogue (list them with `prescribe exercises`)")
        self.screen_cap = int(screening.max_impact_level)
        self.cap = min(self.screen_cap, tpl.impact["max_level"])
        self.avoid = frozenset(screening.avoid)
        for x in options.include:
            e = by_id[x]
            bad = sorted(e.patterns & self.avoid)
            if bad:
                raise PlanRequestRefused("rule 1", f"exercise {x!r} involves {', '.join(bad)}, which the "
                                         "screening asks to avoid", field="include", value=x)
            if e.impact_level > self.cap:
                raise PlanRequestRefused("rule 1", f"exercise {x!r} is impact level {e.impact_level}, above "
                                         f"the level {self.cap} allowed for this person", field="include", value=x)
        if options.start_level is not None and options.start_level > self.cap:
            why = ("the screening's max_impact_level" if options.start_level > self.screen_cap
                   else f"the {tpl.name} template's max_level")
            raise PlanRequestRefused("rule 1", f"start_level {options.start_level} is above {why} "
                                     f"({self.cap}); the plan may not exceed it", field="start_level",
                                     value=options.start_level)
        self.falls = bool(screening.falls_risk or screening.balance_first)
        excluded = set(options.exclude)
        self.prefer = frozenset(options.include)
        self.pool = [e for e in views if e.exercise_id not in excluded and not (e.patterns & self.avoid)
                     and e.impact_level <= self.cap]
        self._choose_impact()
        self._choose_resistance()
        self._choose_balance()

    # --- choices -----------------------------------------------------------------------
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
            self.cautions.append(f"The start level was lowered from {self.options.start_level} to {start}: "
                                 "too few allowed exercises at that level (from moderate impact on they must "
                                 "load the skeleton in at least two directions).")
        top = start
        while top + 1 <= self.cap and self.sets_by_level.get(top + 1):
            top += 1
        if top < self.cap:
            self.cautions.append(f"Impact work stops at level {top} ({IMPACT_LABELS[top]}), below the allowed "
                                 f"{self.cap}: too few allowed exercises above it to load the skeleton in at "
                                 "least two directions.")
        self.start, self.top = start, top

    def _choose_resistance(self) -> None:
        self.spine_sparing, why = _spine_sparing(self.record, self.screening, self.tpl)
        self.phases = self.tpl.spine_sparing_phases if self.spine_sparing else self.tpl.resistance_phases
        self.frail = _frail(self.record, self.screening)
        first = self.phases[0]
        technique = first.weeks if first.pct_1rm is None and first.weeks > 0 else 0
        # Body-weight forms for the frail: the first (technique) phase, and at least 4 weeks.
        self.bodyweight_until = max(FRAIL_BODYWEIGHT_WEEKS, technique) if self.frail else 0
        heavy = [w for w in range(1, self.options.weeks + 1)
                 if (p := _phase_at(self.phases, w).pct_1rm) is not None and p >= LIFT_LOAD_FROM_PCT]
        # A barbell lift comes in LIFT_PRACTICE_WEEKS before its first loaded week, at a light load.
        self.lift_from = max(1, heavy[0] - LIFT_PRACTICE_WEEKS) if heavy else None
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
            self.cautions.append(f"Spine-sparing program ({why}): keep the spine long and neutral; no loaded "
                                 "or repeated forward bending or twisting of the spine, and moderate loads only.")
        if any(ph.pct_1rm is None and ph.name != "technique" for ph in self.phases):
            self.sources.append(SRC_ACSM_PROGRESSION)
        if self.frail:
            self.cautions.append("Weak legs for age (30-s chair stand below the norm): supervised sessions; "
                                 "sit-to-stand from a chair comes before any loaded squat, and body-weight "
                                 f"forms of the strength exercises are used for at least the first "
                                 f"{FRAIL_BODYWEIGHT_WEEKS} weeks.")
        self.sources.append(SRC_BROOKE)

    def _choose_balance(self) -> None:
        self.balance_pool = sorted((e for e in self.pool if e.category == "balance"),
                                   key=lambda e: (e.balance_rank, e.exercise_id not in self.prefer, e.order))
        if self.falls:
            self.sources.append(SRC_GIANG)
            impact = (f"impact work does not step above low impact in the first {BALANCE_FIRST_WEEKS} weeks"
                      if self.start <= 1 else
                      f"the clinician chose to start impact work at level {self.start} ({IMPACT_LABELS[self.start]})")
            self.cautions.append("Falls risk: balance work comes first in each session and is practised "
                                 f"next to a stable support, supervised at first; {impact}.")

    def _balance_set(self, week: int) -> list[_Ex]:
        """Three balance exercises, sliding toward harder ones every few weeks.

        From the easiest with falls risk, one step further on otherwise; a step every
        6 weeks (8 with falls risk) (common practice: progressive balance challenge,
        Giangregorio et al. 2014).
        """
        stage_len = BALANCE_STAGE_WEEKS_FALLS if self.falls else BALANCE_STAGE_WEEKS
        stage = (week - 1) // stage_len + (0 if self.falls else 1)
        pool = self.balance_pool
        offset = max(0, min(stage, len(pool) - 3))
        return sorted(pool[offset:offset + 3], key=lambda e: (e.balance_rank, e.order))

    # --- progression of impact work ----------------------------------------------------
    def _volume(self, level: int) -> tuple[int, int, int]:
        imp = self.tpl.impact
        if level == 0:
            return imp["level0_reps_start"], imp["level0_reps_step"], imp["level0_reps_full"]
        if level == 1:
            return imp["level1_minutes_start"], imp["level1_minutes_step"], imp["level1_minutes_full"]
        target = self.tpl.impacts_target(level)
        return min(imp["impacts_start"], target), imp["impacts_step"], target

    def impact_schedule(self) -> list[tuple[int, int, bool, bool, str, ResistancePhase]]:
        """Per week: (level, volume, step_up, weak_window, impact phase text, resistance phase).

        Impact and resistance are scheduled together: a new or larger stimulus of either
        kind (a step up in impact level, a move to the next resistance phase, and the start
        of the program) opens a window whose weeks 3 to 5 carry no escalation of any kind
        (rule 3; prescribe.safety rule weak_window).  There the impact level, its volume and
        the resistance phase are all held; a resistance phase that is due then starts after
        the window.
        """
        out = []
        hold = self.tpl.impact["hold_weeks_at_full"]
        requested = set(self.options.step_up_weeks) if self.options.step_up_weeks else None
        level, (vol, _, _) = self.start, self._volume(self.start)
        phases = self.phases
        ph_i, ph_weeks = 0, 0
        has_resistance = bool(self.chains or self.back or self.posture)
        starts: list[int] = [1] if (level > 0 or has_resistance) else []
        impact_start = 1 if level > 0 else None  # the last step-up of impact work
        at_full = 0

        def window_pos(w: int) -> int:
            """The largest position (3-5) of week w inside a window, else 0."""
            return max((w - s + 1 for s in starts if in_weak_window(w - s + 1)), default=0)

        for w in range(1, self.options.weeks + 1):
            step_up = False
            pos = window_pos(w)
            if w > 1:
                asked = requested is not None and w in requested
                if pos:
                    if asked:
                        first = max(s for s in starts if in_weak_window(w - s + 1))
                        self._refuse_step(w, "rule 3", f"week {w} is week {w - first + 1} after the new or larger "
                                          f"stimulus of week {first}: weeks 3 to 5 after it carry no escalation "
                                          "(resorption precedes formation; Eriksen 1986)")
                    # weak window: hold level, volume and resistance phase (rule 3)
                else:
                    _, step, full = self._volume(level)
                    blocked = self.falls and w <= BALANCE_FIRST_WEEKS and level + 1 >= 2
                    ready = vol >= full and at_full >= hold
                    if asked:
                        if level >= self.top:
                            self._refuse_step(w, "rule 1", f"week {w} is already at impact level {level}, the "
                                              f"highest allowed for this person with these exercises")
                        if blocked:
                            self._refuse_step(w, "rule 7", f"falls risk: balance comes first, so impact stays at "
                                              f"low impact until week {BALANCE_FIRST_WEEKS + 1}")
                        if not ready:
                            self._refuse_step(w, "rule 2", f"impact level {level} has not been held at full "
                                              f"volume for {hold} weeks by week {w}")
                    go = asked if requested is not None else (ready and level < self.top and not blocked)
                    if go:
                        level += 1
                        vol = self._volume(level)[0]
                        impact_start, step_up, at_full = w, True, 0
                        starts.append(w)
                    else:
                        vol = min(vol + step, full)
                    due = phases[ph_i].weeks and ph_weeks >= phases[ph_i].weeks and ph_i + 1 < len(phases)
                    if due and not go and requested is None and level < self.top:
                        # Wait (up to PHASE_WAIT_WEEKS) for an impact step-up that is close, so the
                        # two stimuli share one window instead of holding the program twice.
                        _, step, full = self._volume(level)
                        to_ready = (max(0, hold - at_full) if vol >= full
                                    else math.ceil((full - vol) / max(step, 1)) + hold)
                        if to_ready <= PHASE_WAIT_WEEKS and ph_weeks - phases[ph_i].weeks <= PHASE_WAIT_WEEKS \
                                and not (self.falls and w + to_ready <= BALANCE_FIRST_WEEKS):
                            due = False
                    if due and requested is not None and any(w + 2 <= r <= w + 4 for r in requested):
                        due = False  # a step-up the clinician asked for would fall in its window: wait
                    if due:
                        ph_i, ph_weeks = ph_i + 1, 0
                        if not starts or starts[-1] != w:
                            starts.append(w)
            else:
                step_up = level > 0
            ph_weeks += 1
            full = self._volume(level)[2]
            at_full = at_full + 1 if vol >= full else 0
            weak = bool(pos)
            label = IMPACT_LABELS[level]
            if weak:
                text = f"consolidate {label} (remodelling window: no increase)"
            elif step_up:
                text = f"start {label}" if w == 1 else f"step up to {label}"
            elif vol >= full:
                text = f"full volume at {label}"
            else:
                text = f"build {label}"
            out.append((level, vol, step_up, weak, text, phases[ph_i]))
        return out

    def _refuse_step(self, week: int, rule: str, reason: str) -> None:
        raise PlanRequestRefused(rule, f"a step up in week {week} was asked for, but {reason}",
                                 field="step_up_weeks", value=week)

    # --- sessions ----------------------------------------------------------------------
    def impact_exercises(self, level: int, vol: int) -> list[dict]:
        chosen = self.sets_by_level.get(level, [])
        if level == 0:
            return [_exercise(e, sets=2, reps=vol, rest_s=60, intensity="RPE 3-4",
                              notes="Weight-bearing, feet on the ground; hold a support if needed.")
                    for e in chosen]
        if level == 1:
            return [_exercise(e, minutes=float(vol), intensity="RPE 3-4",
                              notes="Steady pace; firm, even footfalls.") for e in chosen]
        split = self.tpl.impact["bout_split_above"]
        bouts = max(1, math.ceil(vol / split))
        gap = self.tpl.impact["bout_gap_hours"] if bouts > 1 else None
        k = min(len(chosen), vol)
        base, extra = divmod(vol, k)
        out = []
        for i, e in enumerate(chosen[:k]):
            n = base + (1 if i < extra else 0)
            note = (f"Sets of about {IMPACTS_PER_SET} with {IMPACT_REST_S} s rest; land with control.")
            if bouts > 1:
                note += (f" Split into {bouts} bouts at least {MIN_BOUT_GAP_H:g} h apart "
                         f"(about {gap:g} h is best).")
            out.append(_exercise(e, sets=math.ceil(n / IMPACTS_PER_SET), reps=None, impacts=n, bouts=bouts,
                                 intensity="maximal controlled effort" if e.impact_level == 3 else "RPE 5-6",
                                 rest_s=IMPACT_REST_S, bout_gap_hours=gap, notes=note))
        return out

    def resistance_mode(self, week: int, ph: ResistancePhase | None = None
                        ) -> tuple[ResistancePhase, bool, bool, bool]:
        """(phase, barbell lifts in use, lift practice week, body-weight only) for a week.

        ``ph`` is the phase the joint schedule gives the week (:meth:`impact_schedule`);
        without it, the template's fixed phase lengths.
        """
        ph = ph if ph is not None else _phase_at(self.phases, week)
        lifts = self.lift_from is not None and week >= self.lift_from
        practice = lifts and week < self.lift_from + LIFT_PRACTICE_WEEKS
        bodyweight = week <= self.bodyweight_until
        return ph, lifts and not bodyweight, practice, bodyweight

    def _time_lifts(self, schedule: list) -> None:
        """Lift practice and body-weight weeks from the scheduled phases (which the weeks 3-5
        rule may have lengthened): practice ends, and body-weight work ends, at a phase change."""
        phases = [row[-1] for row in schedule]
        heavy = [w for w, ph in enumerate(phases, start=1) if ph.pct_1rm is not None and ph.pct_1rm >= LIFT_LOAD_FROM_PCT]
        self.lift_from = max(1, heavy[0] - LIFT_PRACTICE_WEEKS) if heavy else None
        if self.frail:
            first = self.phases[0]
            technique = (sum(1 for ph in phases if ph is first)
                         if first.pct_1rm is None and first.weeks > 0 else 0)
            self.bodyweight_until = max(FRAIL_BODYWEIGHT_WEEKS, technique)

    def resistance_exercises(self, week: int, ph: ResistancePhase | None = None
                             ) -> tuple[list[dict], ResistancePhase]:
        ph, lifts, practice, bodyweight = self.resistance_mode(week, ph)
        rest = 60 if ph.pct_1rm is None else (90 if ph.pct_1rm < 80 else 150)
        by_effort = ph.pct_1rm is None and ph.name != "technique"
        note = f"{ph.name} phase: smooth, controlled lifting; breathe out on effort."
        if by_effort:
            note += (" Progress by effort: when every set feels easier than the effort asked in two sessions "
                     "running, add 2-10% to the load.")
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
            ex_note, ex_rest = note, rest
            if e.loaded_by_1rm and practice:
                # Light practice of the same barbell lift before it is loaded (Watson et al. 2018).
                sets, reps = LIFT_PRACTICE_SETS, LIFT_PRACTICE_REPS
                pct = LIFT_PRACTICE_PCT if pct is None else min(pct, LIFT_PRACTICE_PCT)
                ex_rest = 90
                ex_note = ("Light practice of this lift: learn the movement with a light load, supervised, "
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
        if self.back:
            extra.append(self.back[0] if ph.name == "technique" or len(self.back) == 1 else self.back[1])
        if self.posture:
            extra.append(self.posture[0])
        for e in extra:
            out.append(_exercise(e, sets=2, reps=8 if ph.name == "technique" else 10,
                                 intensity="RPE 3-4" if ph.name == "technique" else "RPE 5-6", rest_s=60,
                                 notes="Spine long and neutral throughout."))
        return out, ph

    def balance_exercises(self, week: int, minutes: float) -> list[dict]:
        chosen = self._balance_set(week)
        if not chosen:
            return []
        each = max(1.0, round(2 * minutes / len(chosen)) / 2)
        return [_exercise(e, minutes=each, rest_s=30, intensity="challenging but safe",
                          notes="Near a counter or stable support; hold 10-30 s at a time.") for e in chosen]

    def build(self, created: str) -> dict:
        opts, tpl = self.options, self.tpl
        k_i, k_r = opts.impact_sessions_per_week, opts.resistance_sessions_per_week
        k_b = opts.balance_sessions_per_week
        if k_b is None:
            k_b = (tpl.balance["sessions_falls_risk"] if self.falls
                   else OPTION_DEFAULTS["balance_sessions_per_week"])
        bal_minutes = tpl.balance["minutes_falls_risk"] if self.falls else None
        impact_days = _IMPACT_DAYS[k_i]
        res_days = _RESISTANCE_DAYS[k_r]
        bal_days = list(impact_days[:k_b])
        for d in _EXTRA_BALANCE_DAY_ORDER:
            if len(bal_days) >= k_b:
                break
            if d not in bal_days:
                bal_days.append(d)
        review = set(reassessment_weeks(opts.weeks))
        weeks = []
        c_imp: dict[tuple, tuple] = {}
        c_res: dict[tuple, tuple] = {}
        c_bal: dict[tuple, tuple] = {}
        used_l23 = False
        schedule = self.impact_schedule()
        self._time_lifts(schedule)
        for w, (level, vol, step_up, weak, text, ph) in enumerate(schedule, start=1):
            b_stage = (w - 1) // (BALANCE_STAGE_WEEKS_FALLS if self.falls else BALANCE_STAGE_WEEKS)
            minutes = bal_minutes or min(tpl.balance["minutes_start"] + 5 * ((w - 1) // 4), tpl.balance["minutes_full"])
            if (level, vol) not in c_imp:
                imp = self.impact_exercises(level, vol)
                c_imp[level, vol] = (imp, _session_oi(imp),
                                     sum(x["impacts"] for x in imp if x["impact_level"] >= 2))
            res_key = self.resistance_mode(w, ph)
            if res_key not in c_res:
                res = self.resistance_exercises(w, ph)[0]
                c_res[res_key] = (res, _session_oi(res), prescribed_pct_1rm(res))
            if (b_stage, minutes) not in c_bal:
                bal = self.balance_exercises(w, minutes)
                c_bal[b_stage, minutes] = (bal, _session_oi(bal))
            imp, oi_i, n_imp = c_imp[level, vol]
            res, oi_r, pct_r = c_res[res_key]
            bal, oi_b = c_bal[b_stage, minutes]
            used_l23 = used_l23 or n_imp > 0
            sup_i, sup_r, sup_b = (any(x["supervised"] for x in lst) for lst in (imp, res, bal))
            sessions = []
            for d in sorted(set(impact_days) | set(bal_days) | set(res_days)):
                if d in impact_days:
                    has_bal = d in bal_days
                    exs = ((bal, imp) if self.falls else (imp, bal)) if has_bal else imp
                    sessions.append({"day": d, "kind": "mixed" if has_bal and bal else "impact",
                                     "exercises": exs, "impacts": n_imp,
                                     "osteogenic_index": round(oi_i + (oi_b if has_bal else 0.0), 2),
                                     "supervised": sup_i or (has_bal and sup_b)})
                elif d in bal_days:
                    sessions.append({"day": d, "kind": "balance", "exercises": bal, "impacts": 0,
                                     "osteogenic_index": oi_b, "supervised": sup_b})
                if d in res_days:
                    sessions.append({"day": d, "kind": "resistance", "exercises": res, "impacts": 0,
                                     "osteogenic_index": oi_r, "supervised": sup_r})
            weeks.append({
                "week": w,
                "impact_level": max([x["impact_level"] for x in (*imp, *res, *bal)], default=0),
                "impacts_per_session": n_imp,
                "reassessment": w in review,
                "sessions": sessions,
                "phase": f"{'balance first; ' if self.falls and w <= BALANCE_FIRST_WEEKS else ''}{text}; "
                         f"resistance {ph.name}",
                "impact_phase": text,
                "resistance_phase": ph.name,
                "weak_window": weak,
                "step_up": step_up,
                "resistance_intensity_pct_1rm": pct_r,
                "weekly_osteogenic_index": round(sum(s["osteogenic_index"] for s in sessions), 2),
                "impact_volume": vol,
                "impact_volume_unit": {0: "reps", 1: "minutes"}.get(level, "impacts"),
                "balance_minutes_per_session": minutes,
            })
        # LIFTMOR is cited only where the program really prescribes its lifts or loads.
        lift_ids = {e.exercise_id for e in self.pool if e.loaded_by_1rm}
        if any(x["exercise_id"] in lift_ids for lst in c_res.values() for x in lst[0]) or \
                any((w["resistance_intensity_pct_1rm"] or 0) >= 80 for w in weeks):
            self.sources.append(SRC_WATSON)
        if used_l23:
            self.sources.append(SRC_TURNER_DIR)
            if any(w["impacts_per_session"] > tpl.impact["bout_split_above"] for w in weeks):
                self.sources.append(SRC_ROBLING)
        if any(w["impact_volume_unit"] == "minutes" for w in weeks):
            self.sources.append(SRC_CADENCE)
        self.cautions.append("Weeks 3 to 5 after each step up in impact or in strength work (and after the "
                             "start) are a consolidation window: do not add impacts, raise the level or add "
                             "weight then.")
        if any(x["supervised"] for lst in (*c_imp.values(), *c_res.values()) for x in lst[0]):
            # Supervised: 80% 1RM or more, or high impact (docs/safety.md); said in plain words
            # because the plan's cautions are printed on the person's pages too.
            self.cautions.append("Exercises marked supervised (heavy lifts and the hardest jumps) are done only "
                                 "with a clinician or trainer present.")
        if used_l23:
            self.cautions.append("Impact work: land with control on a firm, non-slip surface in supportive "
                                 "shoes; more than 50 impacts in a day are split into bouts at least 4 h apart.")
        if self.screening.refer:
            self.cautions.insert(0, "Screening asks that a clinician clear this person before any loading: "
                                    "do not start this program until then.")
        if self.screening.supervision:
            self.cautions.append("Supervised sessions are advised for this person, at least at first.")
        used_ids = {x["exercise_id"] for lst in (*c_imp.values(), *c_res.values(), *c_bal.values())
                    for x in lst[0]}
        ex_sources = [e.source for e in _views_by_id(self.pool, used_ids)]
        sources = []
        tpl_sources = [t for t in tpl.source_list() if not t.lower().startswith("common practice")]
        for s in (*self.sources, *tpl_sources, *ex_sources):
            if s and s not in sources:
                sources.append(s)
        fixed = sorted(opts.model_fields_set)
        return {
            "plan_format_version": PLAN_FORMAT_VERSION,
            "patient_id": self.record.patient_id,
            "created": created,
            "tool_version": __version__,
            "ruleset_version": self.screening.ruleset_version or _ruleset_version(),
            "screening": self.screening,
            "cautions": with_standard([*self.screening.cautions, *self.cautions]),
            "sources": sources,
            "weeks": weeks,
            "options": {**opts.model_dump(mode="json"), "template": tpl.name, "fixed": fixed,
                        "balance_sessions_per_week": k_b},
            "template": {"name": tpl.name, "title": tpl.title, "summary": tpl.summary,
                         "version": tpl.version, "origin": tpl.origin},
            "template_version": tpl.version,
            "max_impacts_per_session": tpl.impact["max_impacts_per_session"],
            "max_impacts_reason": tpl.max_impacts_reason,
            "start_level": self.start,
            "top_level": self.top,
            "max_impact_level": self.cap,
            "avoid": sorted(self.avoid),
            "spine_sparing": self.spine_sparing,
            # The record the plan was built from: the safety check screens it again with the
            # current rules and holds the plan to the stricter result (docs/safety.md).
            "record": self.record,
            # A person the screening refers is given a draft until a clinician clears it.
            "draft": bool(self.screening.refer),
            "cleared_by": None,
            "cleared_at": None,
        }


def _views_by_id(pool: Iterable[_Ex], ids: set[str]) -> list[_Ex]:
    return [e for e in pool if e.exercise_id in ids]


@lru_cache(maxsize=1)
def _ruleset_version() -> str:
    try:
        from ..screening import RULESET_VERSION
    except ImportError:  # the screening engine is optional for a caller giving a screening
        return "unknown"
    return str(RULESET_VERSION)


def _default_template(record: PatientRecord) -> str:
    """post_vertebral_fracture after a vertebral fracture (Brooke-Wavell et al. 2022), else standard."""
    return "post_vertebral_fracture" if any(f.site == "vertebra" for f in record.fractures) else "standard"


def build_plan(record: PatientRecord, screening: ScreeningResult | None = None,
               options: PlanOptions | None = None, catalogue=None, created: str | None = None,
               *, template: Template | None = None) -> Plan:
    """Build the graded program for one person.

    Parameters
    ----------
    record : PatientRecord
        The validated record.
    screening : ScreeningResult, optional
        The screening it is built from; screened here with
        :func:`prescribe.screening.screen` when omitted.
    options : PlanOptions, optional
        What the clinician fixed (weeks, start level, sessions, exclusions, template).
    catalogue : Catalogue, optional
        The exercise catalogue; the packaged one by default.
    created : str, optional
        ISO 8601 timestamp to stamp (default: now, UTC).
    template : Template, optional
        A template already resolved and validated (a clinic version from the store);
        it takes the place of ``options.template`` and the default choice.
    Returns
    -------
    Plan

    Raises
    ------
    InputError
        An option names an unknown exercise or template.
    PlanRequestRefused
        The request would break rule 1 (a start level above the cap; an included
        exercise above the cap or in the avoid list).

    References
    ----------
    Kohrt et al. 2004, Med Sci Sports Exerc 36:1985-1996; Beck et al. 2017, J Sci Med
    Sport 20(5):438-445; Watson et al. 2018, J Bone Miner Res 33:211-220;
    Giangregorio et al. 2014, Osteoporos Int 25:821-835; Robling, Burr & Turner 2001,
    J Exp Biol 204:3389-3399; Turner & Robling 2003, Exerc Sport Sci Rev 31(1):45-50.
    """
    options = options or PlanOptions()
    from .safety import rescreen, strictest_screening
    if screening is None:
        screening = rescreen(record)
    else:
        # A screening given by the caller (perhaps from an older rule set) is held to the
        # record's screening with the current rules: the plan follows the stricter of the two,
        # as the safety check does (docs/safety.md).
        screening = strictest_screening(screening, rescreen(record))
    if catalogue is None:
        from ..catalogue import default_catalogue
        catalogue = default_catalogue()
    tpl = template if template is not None else load_template(options.template or _default_template(record))
    created = created or datetime.now(timezone.utc).replace(microsecond=0).isoformat()
    data = _Builder(record, screening, options, catalogue, tpl).build(created)
    return _assemble(data)


def _assemble(data: dict) -> Plan:
    """The validated Plan model from the builder's dicts.

    The builder shares each exercise dict between the sessions of a week and between
    weeks; each distinct one is validated once and its model shared in the same way.
    Sessions, weeks and the plan are validated around those models (pydantic accepts
    the instances as they are).  This keeps a plan fast enough to rebuild on every
    change in the app.  Treat a plan as a value: edit it through
    :func:`replace_exercise` or a deep ``model_copy``, not in place.
    """
    ex_cache: dict[int, list] = {}

    def exercises(lst: list[dict]) -> list:
        got = ex_cache.get(id(lst))
        if got is None:
            got = ex_cache[id(lst)] = [PlannedExercise.model_validate(x) for x in lst]
        return got

    weeks = []
    for w in data["weeks"]:
        sessions = []
        for s in w["sessions"]:
            exs = s["exercises"]
            models = exercises(exs[0]) + exercises(exs[1]) if isinstance(exs, tuple) else list(exercises(exs))
            sessions.append(PlannedSession.model_validate({**s, "exercises": models}))
        weeks.append(PlannedWeek.model_validate({**w, "sessions": sessions}))
    return Plan.model_validate({**data, "weeks": weeks})


# =========================================================================================
# Reading and checking plans
# =========================================================================================

#: The rule number of docs/plan.md each rule of :mod:`prescribe.safety` belongs to (for check_plan's text).
_PLAN_RULE_NUMBER = {
    "impact_cap": "rule 1", "avoided_pattern": "rule 1", "week_level_matches": "rule 1",
    "one_level_at_a_time": "rule 2", "weak_window": "rule 3",
    "impact_counts_match": "rule 4", "session_ceiling": "rule 4", "bout_split": "rule 4",
    "two_directions": "rule 5",
}


def check_plan(plan: Plan, screening: ScreeningResult | None = None) -> list[str]:
    """The safety check's violations as text; empty when the plan is safe.

    A thin wrapper of :func:`prescribe.safety.check_program` (the one check, called at
    every door).  Each message starts with the rule: ``"rule 3: week 9 ..."`` for the
    planner's numbered rules 1-5 (docs/plan.md), or the safety rule's id for the others.

    Parameters
    ----------
    plan : Plan
    screening : ScreeningResult, optional
        A screening to hold the plan to, besides the one stored in the plan (the
        stricter of the two applies).
    """
    from .safety import check_program

    return [f"{_PLAN_RULE_NUMBER.get(v.rule, v.rule)}: {v.message}" for v in check_program(plan, screening)]


def replace_exercise(plan: Plan, old_id: str, new_id: str, catalogue=None) -> Plan:
    """A copy of ``plan`` with every use of ``old_id`` swapped for ``new_id``.

    The new exercise keeps the old one's dose (sets, reps, impacts, minutes, bouts,
    intensity) and brings its own level, force, directions and patterns; the week
    and session figures are recomputed.

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
    found = False
    for w in data["weeks"]:
        for s in w["sessions"]:
            for i, x in enumerate(s["exercises"]):
                if x["exercise_id"] != old_id:
                    continue
                found = True
                x.update(exercise_id=new.exercise_id, name=new.name, category=new.category,
                         impact_level=new.impact_level, peak_grf_bw=new.peak_grf_bw,
                         directions=list(new.directions), patterns=sorted(new.patterns))
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
    data["swaps"] = [*(data.get("swaps") or []), {"old": old_id, "new": new_id}]
    new_plan = Plan.model_validate(data)
    from .safety import assert_safe
    assert_safe(new_plan, door=f"replacing {old_id} with {new_id}", catalogue=catalogue)
    return new_plan
