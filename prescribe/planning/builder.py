"""The builder: a record, its screening and the options -> a validated :class:`~prescribe.plan_schema.Plan`.

:func:`build_plan` checks the request against rule 1 (the screening's cap and the
patterns to avoid), then lets :class:`_Builder` choose the exercises
(:mod:`.selection`), schedule the progression (:mod:`.progression`), dose the sessions
(:mod:`.dosing`) and lay out the weeks (:mod:`.layout`), and assembles the plan with the
sources it uses and its cautions.  :func:`check_plan` is the one safety check
(:mod:`prescribe.safety`) as text with the planner's rule numbers.
"""

from __future__ import annotations

from datetime import datetime, timezone
from functools import lru_cache

from .. import __version__
from ..cautions import with_standard
from ..catalogue import IMPACT_LEVEL_LABELS
from ..errors import InputError, PlanRequestRefused
from ..languages import N_
from ..plan_schema import PLAN_FORMAT_VERSION, Plan, PlannedExercise, PlannedSession, PlannedWeek
from ..records import PatientRecord, ScreeningResult
from .dosing import _Dosing
from .layout import _Layout
from .options import PlanOptions
from .progression import _Progression
from .templates import Template, load_template
from .selection import _Selection, _views, _views_by_id
from .why import _Why
from .sources import (CARER_LED_MAX_DAYS, CARER_LED_MAX_EXERCISES, SRC_BECK, SRC_CADENCE, SRC_CARER_LED,
                      SRC_HOLD_VOLUME, SRC_KOHRT, SRC_REMODEL, SRC_ROBLING, SRC_TURNER_DIR, SRC_TURNER_OI,
                      SRC_WATSON)

__all__ = ["build_plan", "check_plan", "IMPACT_LABELS"]

IMPACT_LABELS = IMPACT_LEVEL_LABELS  # the catalogue's, next to the level boundaries


class _Builder(_Selection, _Progression, _Dosing, _Layout, _Why):
    """Holds one plan's choices; :meth:`build` lays them out week by week and assembles the plan."""

    def _fit_carer_led(self, options: PlanOptions) -> None:
        """A short program (screening ``carer_led``): at most CARER_LED_MAX_DAYS days a week.

        Sessions a week the clinician did not fix are lowered to fit; a fixed number that does
        not fit is refused, naming the option.
        """
        fixed = options.model_fields_set
        wanted = {"impact_sessions_per_week": 2, "resistance_sessions_per_week": 1, "balance_sessions_per_week": 2}
        update = {}
        for name, value in wanted.items():
            given = getattr(options, name)
            if name in fixed and given is not None and given > value:
                raise PlanRequestRefused("carer_led", f"{name} {given} is more than a short carer-led program "
                                         f"holds ({value}; at most {CARER_LED_MAX_DAYS} days a week)",
                                         field=name, value=given)
            if name not in fixed or given is None:     # None: the planner's choice
                update[name] = value
        if update:
            self.options = options = options.model_copy(update=update)

    def __init__(self, record: PatientRecord, screening: ScreeningResult, options: PlanOptions,
                 catalogue, tpl: Template, explain: bool = True):
        self.record, self.screening, self.options, self.tpl = record, screening, options, tpl
        self.explain = explain
        self.whys: dict[int, list] = {}
        self.cautions: list[str] = []
        self.sources: list[str] = [SRC_KOHRT, SRC_BECK, SRC_REMODEL, SRC_TURNER_OI]
        views = _views(catalogue)
        by_id = {e.exercise_id: e for e in views}
        for field in ("exclude", "include"):
            unknown = [x for x in getattr(options, field) if x not in by_id]
            if unknown:
                raise InputError.single(field, unknown[0] if len(unknown) == 1 else unknown,
                                        "exercise ids from the catalogue (list them with `prescribe exercises`)")
        # The limits: one derivation from the record, the screening and the template's own caps
        # (prescribe.safety.derive_limits); the plan carries them and every door works them out again.
        from ..safety import TemplateCaps, derive_limits
        self.limits = derive_limits(record, TemplateCaps.of(tpl), cleared=bool(screening.cleared),
                                    screenings=(screening,), screened=True)   # build_plan screened it
        self.screen_cap = int(screening.max_impact_level)
        self.cap = self.limits.max_impact_level
        self.avoid = frozenset(self.limits.avoid)
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
        self.falls = self.limits.balance_first
        # Version-2 limits (docs/plan.md "What the screening holds back"): the heaviest load,
        # a short carer-led program, and the starting dose held until the clearance.
        self.max_pct_1rm = self.limits.max_pct_1rm
        self.carer_led = self.limits.carer_led
        self.hold_volume = self.limits.hold_volume
        if self.carer_led:
            self._fit_carer_led(options)
        options = self.options
        excluded = set(options.exclude)
        self.prefer = frozenset(options.include)
        self.pool = [e for e in views if e.exercise_id not in excluded and not (e.patterns & self.avoid)
                     and e.impact_level <= self.cap]
        self._choose_impact()
        self._choose_resistance()
        self._choose_balance()

    def build(self, created: str) -> dict:
        opts, tpl = self.options, self.tpl
        weeks, used, used_l23 = self.lay_out_weeks()
        if self.explain:
            self.explain_weeks(weeks)   # why on every exercise (prescribe.planning.why)
        # LIFTMOR is cited only where the program really prescribes its lifts or loads.
        lift_ids = {e.exercise_id for e in self.pool if e.loaded_by_1rm}
        if any(x["exercise_id"] in lift_ids for lst in used["resistance"] for x in lst) or \
                any((w["resistance_intensity_pct_1rm"] or 0) >= 80 for w in weeks):
            self.sources.append(SRC_WATSON)
        if used_l23:
            self.sources.append(SRC_TURNER_DIR)
            if any(w["impacts_per_session"] > tpl.impact["bout_split_above"] for w in weeks):
                self.sources.append(SRC_ROBLING)
        if any(w["impact_volume_unit"] == "minutes" for w in weeks):
            self.sources.append(SRC_CADENCE)
        # Every caution is also printed on the person's pages, in the person's language: marked
        # with N_ for the translations, figures as named placeholders (prescribe.languages).
        self.cautions.append(N_("Weeks 3 to 5 after each step up in impact or in strength work (and after the "
                                "start) are a consolidation window: do not add impacts, raise the level or add "
                                "weight then."))
        if any(x["supervised"] for lst in (*used["impact"], *used["resistance"]) for x in lst):
            # Supervised: 80% 1RM or more, or high impact (docs/safety.md); said in plain words
            # because the plan's cautions are printed on the person's pages too.
            self.cautions.append(N_("Exercises marked supervised (heavy lifts and the hardest jumps) are done "
                                    "only with a clinician or trainer present."))
        if used_l23:
            self.cautions.append(N_("Impact work: land with control on a firm, non-slip surface in supportive "
                                    "shoes; more than 50 impacts in a day are split into bouts at least 4 h apart."))
        if self.limits.refer:
            self.cautions.insert(0, N_("Screening asks that a clinician clear this person before any loading: "
                                       "do not start this program until then."))
        if self.limits.supervision and not self.carer_led:
            self.cautions.append(N_("Supervised sessions are advised for this person, at least at first."))
        if self.carer_led:
            self.sources.append(SRC_CARER_LED)
            self.cautions.append(N_("Every session is done with a clinician or a carer present: a short program "
                                    "on at most %(days)s days a week, %(exercises)s exercises a session.")
                                 % {"days": CARER_LED_MAX_DAYS, "exercises": CARER_LED_MAX_EXERCISES})
        if self.hold_volume:
            self.sources.append(SRC_HOLD_VOLUME)
            self.cautions.append(N_("The program stays at its starting dose (no rise in volume, level or load) "
                                    "until a clinician records the clearance after the medical and dietetic review."))
        if self.max_pct_1rm is not None:
            self.cautions.append(N_("No resistance load above %(pct)s%% 1RM until a clinician records that the "
                                    "reason for this limit has gone (see the screening flags).")
                                 % {"pct": self.max_pct_1rm})
        used_ids = {x["exercise_id"] for lst in (*used["impact"], *used["resistance"], *used["balance"])
                    for x in lst}
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
                        "balance_sessions_per_week": self.balance_sessions()},
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
            "draft": bool(self.limits.refer),
            "limits": self.limits,
            "cleared_by": None,
            "cleared_at": None,
        }



@lru_cache(maxsize=1)
def _ruleset_version() -> str:
    from ..screening import RULESET_VERSION  # here, not at the top: the screening engine imports pandas
    return str(RULESET_VERSION)


def _default_template(record: PatientRecord) -> str:
    """post_vertebral_fracture after a vertebral fracture (Brooke-Wavell et al. 2022), else standard."""
    return "post_vertebral_fracture" if any(f.site == "vertebra" for f in record.fractures) else "standard"


def build_plan(record: PatientRecord, screening: ScreeningResult | None = None,
               options: PlanOptions | None = None, catalogue=None, created: str | None = None,
               *, template: Template | None = None, cleared: bool = False, _explain: bool = True) -> Plan:
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
    cleared : bool
        A clinician records the clearance with this program: the referral, caps and volume
        hold that the screening rules held until a clearance are lifted (the caller records
        who and when with :func:`prescribe.safety.record_clearance`).
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
    from ..safety import rescreen, strictest_screening
    if screening is None or (cleared and not screening.cleared):
        screening = rescreen(record, cleared)
    else:
        # A screening given by the caller (perhaps from an older rule set) is held to the
        # record's screening with the current rules: the plan follows the stricter of the two,
        # as the safety check does (docs/safety.md).
        screening = strictest_screening(screening, rescreen(record, cleared))
    if catalogue is None:
        from ..catalogue import default_catalogue
        catalogue = default_catalogue()
    tpl = template if template is not None else load_template(options.template or _default_template(record))
    created = created or datetime.now(timezone.utc).replace(microsecond=0).isoformat()
    # _explain=False: without the reasons (benchmarks/bench_planner.py times their cost against it).
    builder = _Builder(record, screening, options, catalogue, tpl, _explain)
    data = builder.build(created)
    return _assemble(data, builder.whys)


def _assemble(data: dict, whys: dict[int, list] | None = None) -> Plan:
    """The validated Plan model from the builder's dicts.

    The builder shares each exercise dict between the sessions of a week and between
    weeks; each distinct one is validated once and its model shared in the same way.
    Sessions, weeks and the plan are validated around those models (pydantic accepts
    the instances as they are).  This keeps a plan fast enough to rebuild on every
    change in the app.  Treat a plan as a value: edit it through
    :func:`~prescribe.planning.editing.replace_exercise` or a deep ``model_copy``, not in place.
    """
    whys = whys or {}
    ex_cache: dict[int, list] = {}
    one_cache: dict[int, PlannedExercise] = {}

    def one(x: dict) -> PlannedExercise:
        got = one_cache.get(id(x))
        if got is None:
            got = one_cache[id(x)] = PlannedExercise.model_validate(x)
            why = whys.get(id(x))
            if why:   # the reasons (validated Why models of prescribe.planning.why) join the fresh model
                got.__dict__["why"] = why
                got.__pydantic_fields_set__.add("why")
        return got

    def exercises(lst: list[dict]) -> list:
        got = ex_cache.get(id(lst))
        if got is None:
            got = ex_cache[id(lst)] = [one(x) for x in lst]
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
    from ..safety import check_program

    return [f"{_PLAN_RULE_NUMBER.get(v.rule, v.rule)}: {v.message}" for v in check_program(plan, screening)]

