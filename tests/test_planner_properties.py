"""Property tests: rules 1, 3, 4 and 5 hold in every plan, over 10,000 clinic-like random records
(with the coverage of moderate and high impact, split bouts and refusals asserted).

Each plan is held to the rules twice: by :func:`prescribe.planning.check_plan` and by
the independent checks written out below, so a bug in one is caught by the other.

Sources of the rules: rule 1, the screening's own limits; rule 3, resorption precedes
formation after a new stimulus (Eriksen 1986, Endocr Rev 7:379; Heaney, Yates &
Santora 1997, J Bone Miner Res 12:1143); rule 4, about 50-100 impacts a session
(Clissold et al. 2022, Arch Sports Med Physiother 7(1):7-15, 10-100 jumps a day; Jämsä et al. 2011, Front
Physiol 2:73) and bouts about 8 h apart (Robling, Burr & Turner 2001, J Exp Biol
204:3389-3399; at least 4 h is our documented minimum, common practice); rule 5,
varied loading directions (Turner 1998, Bone 23:399-407).
"""

from __future__ import annotations

import math
import random

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from prescribe.errors import PlanRequestRefused
from prescribe.plan_schema import parse_plan
from prescribe.planning import PlanOptions, build_plan, check_plan
from prescribe.planning.templates import load_template
from prescribe.records import CONDITIONS, FRACTURE_SITES, parse_record
from prescribe.screening import screen
from strategies import valid_records

TEMPLATES = [None, "standard", "gentle", "post_vertebral_fracture"]


#: Published boundaries drawn on purpose in about one record in six: WHO T-score -1 and -2.5;
#: CDC STEADI TUG 12 s (13.5 s in Shumway-Cook et al. 2000) and tandem stance 10 s; Kanis et
#: al. 2011 glucocorticoids 5 and 7.5 mg/day for 3 months; pain 5/10 (Thomee 1997); fracture
#: within 3 and 12 months (common practice).
EDGES = {"t": (-1.0, -2.5), "tug": (12.0, 13.5), "tandem": (10.0,), "mg": (2.5, 5.0, 7.5),
         "months_gc": (3.0,), "pain": (5, 6), "fx_months": (3.0, 12.0)}
FRACTURE_WEIGHTS = {"wrist": 30, "vertebra": 20, "hip": 10, "humerus": 10, "rib": 10, "pelvis": 5, "other": 15}


def _edge(rnd: random.Random, key: str, value):
    """Half the time in an 'edge' record, the value sits at or just beside a published boundary."""
    if rnd.random() < 0.5:
        e = rnd.choice(EDGES[key])
        return e if isinstance(e, int) else round(e + rnd.choice((-0.1, 0.0, 0.0, 0.1)), 2)
    return value


def seeded_record(seed: int):
    """A random valid record as a bone-health clinic sees them, from one seed.

    Invented distributions (common practice, not from a published cohort): age about
    70 +- 8 years, four in five women; T-scores about -1.6 +- 0.8 at each measured site (most
    people referred have osteopenia or osteoporosis); no fracture in about two thirds, the
    rest mostly old wrist and vertebral fractures, 70% low-trauma; falls a year Poisson with
    mean 0.35; TUG about 9 s (log-normal, about one in ten at 12 s or more); 30-s chair stand
    about 12 +- 3.5; tandem stance held for 10 s by three in four; glucocorticoids in 8%;
    each condition in 5%; pain mostly 0-3.  About one record in six has its values drawn at
    or beside the published boundaries of :data:`EDGES`.  Built with :mod:`random` (about 6 ms
    a record cheaper than the shared hypothesis strategy) and reproducible from the seed.
    """
    rnd = random.Random(seed)
    edgy = rnd.random() < 1 / 6
    maybe = (lambda key, v: _edge(rnd, key, v)) if edgy else (lambda key, v: v)
    data = {"patient_id": f"PRP-{seed % 1_000_000}",
            "age_years": int(min(100, max(40, round(rnd.gauss(70, 8))))),
            "sex": "female" if rnd.random() < 0.8 else "male",
            "body_mass_kg": round(min(140, max(38, rnd.gauss(68, 12))), 1),
            "height_cm": round(min(195, max(135, rnd.gauss(163, 8))), 1)}
    sites = ("lumbar_spine", "femoral_neck", "total_hip")
    data["t_scores"] = {k: maybe("t", round(min(3, max(-6, rnd.gauss(-1.6, 0.8))), 1))
                        for k in sites if rnd.random() < 0.85}
    n_fx = rnd.choices([0, 1, 2], weights=[65, 25, 10])[0]
    data["fractures"] = [{"site": rnd.choices(list(FRACTURE_WEIGHTS), weights=list(FRACTURE_WEIGHTS.values()))[0],
                          "months_ago": maybe("fx_months", round(min(1200, rnd.expovariate(1 / 48)), 1)),
                          "low_trauma": rnd.random() < 0.7} for _ in range(n_fx)]
    # Poisson(0.35) falls by inversion.
    falls, p, u = 0, math.exp(-0.35), rnd.random()
    cum = p
    while u > cum:
        falls += 1
        p *= 0.35 / falls
        cum += p
    data["falls_past_year"] = falls
    if rnd.random() < 0.7:
        data["timed_up_and_go_s"] = maybe("tug", round(min(60, 9.0 * math.exp(rnd.gauss(0, 0.25))), 1))
    if rnd.random() < 0.6:
        data["chair_stand_30s"] = int(min(30, max(0, round(rnd.gauss(12, 3.5)))))
    if rnd.random() < 0.6:
        held = 10.0 if rnd.random() < 0.75 else round(rnd.uniform(2, 10), 1)
        data["tandem_stance_s"] = min(10.0, maybe("tandem", held))
    if rnd.random() < 0.08:
        data["glucocorticoids"] = {"mg_per_day": maybe("mg", round(rnd.uniform(2.5, 15), 1)),
                                   "months": maybe("months_gc", float(rnd.randint(1, 60)))}
    data["conditions"] = [c for c in CONDITIONS if rnd.random() < 0.05]
    data["pain_score"] = maybe("pain", rnd.choices(range(11), weights=[40, 15, 15, 10, 8, 5, 3, 2, 1, 0.5, 0.5])[0])
    return parse_record(data)


@st.composite
def plan_options(draw) -> PlanOptions:
    return PlanOptions(
        weeks=draw(st.sampled_from([8, 26, 52]) | st.integers(8, 52)),
        start_level=draw(st.none() | st.integers(0, 3)),
        impact_sessions_per_week=draw(st.sampled_from([3]) | st.integers(1, 7)),
        resistance_sessions_per_week=draw(st.integers(1, 3)),
        balance_sessions_per_week=draw(st.none() | st.integers(2, 7)),
        template=draw(st.sampled_from(TEMPLATES)),
    )


def direct_violations(plan, screening) -> list[str]:
    """Rules 1, 3, 4 and 5, checked straight from the issue's wording."""
    bad: list[str] = []
    cap, avoid = screening.max_impact_level, set(screening.avoid)
    level, per_session = [], []
    for wk in plan.weeks:
        highest, largest, dirs = 0, 0, set()
        days: dict[int, list] = {}
        for s in wk.sessions:
            count = 0
            for x in s.exercises:
                highest = max(highest, x.impact_level)
                # Rule 1: not above the cap, nothing from the avoid list.
                if x.impact_level > cap:
                    bad.append(f"rule 1 level, week {wk.week}")
                if avoid.intersection(x.patterns):
                    bad.append(f"rule 1 avoid, week {wk.week}")
                if x.impact_level >= 2:
                    count += x.impacts
                    dirs.update(x.directions)
                    days.setdefault(s.day, []).append(x)
                elif x.impacts:  # level 0-1 work carries no impacts (PRODUCT.md)
                    bad.append(f"week {wk.week} counts impacts of level 0-1 work")
            if count != s.impacts:
                bad.append(f"week {wk.week} session impacts do not add up")
            largest = max(largest, count)
        # The week's figures are what its sessions say (contract: highest level, largest session).
        if wk.impact_level > cap:
            bad.append(f"rule 1 level, week {wk.week}")
        if wk.impact_level != highest or wk.impacts_per_session != largest:
            bad.append(f"week {wk.week} figures do not match its sessions")
        # Rule 4: at most 100 a session (no template here allows more); over 50 a day, bouts >= 4 h apart.
        if largest > 100:
            bad.append(f"rule 4 over 100, week {wk.week}")
        for day, xs in days.items():
            total = sum(x.impacts for x in xs)
            if total > 50:
                for x in xs:
                    gap = x.bout_gap_hours
                    if x.impacts and (x.bouts < math.ceil(total / 50) or gap is None or gap < 4):
                        bad.append(f"rule 4 bouts, week {wk.week} day {day}")
        # Rule 5: from moderate impact on, at least two loading directions in the week.
        if highest >= 2 and len(dirs) < 2:
            bad.append(f"rule 5, week {wk.week}")
        level.append(wk.impact_level)
        per_session.append(wk.impacts_per_session)
    # Rule 3: a step-up week (the first week counts, from no impact) is window week 1;
    # window weeks 3-5 carry no higher level and no more impacts than window week 2.
    for i in range(len(level)):
        if level[i] > (level[i - 1] if i else 0) and i + 1 < len(level):
            for j in range(i + 2, min(i + 5, len(level))):
                if level[j] > level[i + 1] or per_session[j] > per_session[i + 1]:
                    bad.append(f"rule 3, week {j + 1} after step-up in week {i + 1}")
    return bad


def _weeks_at_full_before(plan, week: int) -> int:
    """How many weeks in a row before ``week`` the plan held its impact work at full volume."""
    n = 0
    for w in reversed(plan.weeks[:week - 1]):
        if not w.phase.startswith("full volume"):
            break
        n += 1
    return n


def refusal_is_justified(record, screening, options, refused) -> None:
    """A refused step-up week is checked, not accepted: rebuild the plan with only the
    step-ups asked for before it (which the planner accepted) and check, from that plan, that
    the week really breaks the rule the refusal names."""
    week = refused.value
    earlier = tuple(w for w in options.step_up_weeks if w < week)
    fields = {k: getattr(options, k) for k in options.model_fields_set if k != "step_up_weeks"}
    plan = build_plan(record, screening, PlanOptions(**fields, step_up_weeks=earlier),
                      created="2026-12-01T00:00:00+00:00")
    levels = [w.impact_level for w in plan.weeks]
    before = levels[week - 2]  # the level of the week before the refused step-up
    if refused.rule == "rule 1":  # already at the highest level allowed
        assert before >= plan.top_level, (week, before)
    elif refused.rule == "rule 3":  # inside weeks 3-5 after a new or larger stimulus of either kind
        # An impact step-up (the first week counts), or a change of the resistance work (a new
        # phase): no escalation of any kind in its weeks 3-5 (Eriksen 1986; Heaney et al. 1997).
        res = [tuple((x.exercise_id, x.sets, x.reps, x.intensity) for s in w.sessions if s.kind == "resistance"
                     for x in s.exercises) for w in plan.weeks]
        starts = [i + 1 for i in range(week - 1) if levels[i] > (levels[i - 1] if i else 0)
                  or (res[i] and (i == 0 or res[i] != res[i - 1]))]
        assert any(3 <= week - s + 1 <= 5 for s in starts), (week, starts)
    elif refused.rule == "rule 7":  # balance first with falls risk, for the first weeks
        assert (screening.falls_risk or screening.balance_first) and week <= 4 and before + 1 >= 2
    elif refused.rule == "hold_volume":  # the screening holds the starting dose until a clearance
        # (BMI under 18.5: WHO 2000 TRS 894; medical and dietetic review first, common practice)
        assert screening.hold_volume and not screening.cleared
        assert len({(w.impact_level, w.impact_volume) for w in plan.weeks}) == 1
    elif refused.rule == "rule 2":  # the level not yet held at full volume long enough
        hold = load_template(plan.template.name).impact["hold_weeks_at_full"]
        assert _weeks_at_full_before(plan, week) < hold, (week, _weeks_at_full_before(plan, week))
    else:
        raise AssertionError(f"a step-up refused under an unexpected rule: {refused.rule}")


def _check_one(record, options) -> dict:
    """Build, check both ways, and say what the case covered (for the coverage assertions)."""
    screening = screen(record)
    try:
        plan = build_plan(record, screening, options, created="2026-12-01T00:00:00+00:00")
    except PlanRequestRefused as refused:
        if refused.field == "step_up_weeks":
            # A step-up week the clinician asked for, refused under the rule it would break.
            assert refused.value in options.step_up_weeks
            refusal_is_justified(record, screening, options, refused)
            return {"refused": "step_up_weeks"}
        if refused.rule == "carer_led":
            # A short carer-led program (Montero-Odasso et al. 2022, from memory; common practice):
            # refused only for a carer-led person asking for more sessions than it holds.
            assert screening.carer_led and refused.value > {"impact_sessions_per_week": 2,
                                                             "resistance_sessions_per_week": 1,
                                                             "balance_sessions_per_week": 2}[refused.field]
            return {"refused": "carer_led"}
        # Otherwise only a start level above the cap may be refused, and it must say so (rule 1).
        vertebral = any(f.site == "vertebra" for f in record.fractures)
        name = options.template or ("post_vertebral_fracture" if vertebral else "standard")
        cap = min(screening.max_impact_level, load_template(name).impact["max_level"])
        assert refused.rule == "rule 1" and refused.field == "start_level"
        assert options.start_level is not None and options.start_level > cap
        return {"refused": "start_level"}
    assert check_plan(plan, screening) == []
    assert direct_violations(plan, screening) == []
    assert len(plan.weeks) == options.weeks
    assert plan.cautions[:3] and all(c in plan.cautions for c in screening.cautions)
    return {"top": max(w.impact_level for w in plan.weeks),
            "split": any(x.bouts > 1 for w in plan.weeks for s in w.sessions for x in s.exercises),
            "over_50": max(w.impacts_per_session for w in plan.weeks) > 50}


def seeded_options(seed: int) -> PlanOptions:
    """Random clinician options from the same seed: mostly the planner's choices over 26-52
    weeks (as a clinic uses it), sometimes a start level, session counts, a template or
    step-up weeks of the clinician's own, some of which the planner must refuse."""
    rnd = random.Random(seed ^ 0x5EED)
    return PlanOptions(
        weeks=rnd.choice([26, 26, 52, 52, rnd.randint(8, 52)]),
        start_level=rnd.choice([None] * 10 + [0, 1, 2, 3]),
        impact_sessions_per_week=rnd.choice([3, 3, 3, rnd.randint(1, 7)]),
        resistance_sessions_per_week=rnd.randint(1, 3),
        balance_sessions_per_week=rnd.choice([None, None, rnd.randint(2, 7)]),
        template=rnd.choice([None, None, None, *TEMPLATES]),
        step_up_weeks=sorted(rnd.sample(range(2, 9), rnd.choice([0] * 10 + [1, 2]))),
    )


N_PLANS = 10_000


def test_rules_hold_in_10000_clinic_like_plans():
    """Seeds 0-9,999 (reproducible: a failure names its seed). The coverage is asserted, so the
    headline stays true. Measured on 2026-12-02 with the current rules and safety check: 22.7% of
    the plans reach moderate or high impact (27.5% before a 30-s chair stand below the norm capped
    impact at low and a fragility hip or vertebral fracture counted as osteoporosis), 5.5% split a
    day's impacts into bouts, 14.1% are refused a step-up week (each refusal checked) and 12.4% a
    start level above the cap."""
    seen = {"level_2_3": 0, "split": 0, "refused_step_up": 0, "refused_start": 0}
    for seed in range(N_PLANS):
        try:
            out = _check_one(seeded_record(seed), seeded_options(seed))
        except AssertionError as err:
            raise AssertionError(f"seed {seed}: {err}") from err
        seen["level_2_3"] += out.get("top", 0) >= 2
        seen["split"] += bool(out.get("split"))
        seen["refused_step_up"] += out.get("refused") == "step_up_weeks"
        seen["refused_start"] += out.get("refused") == "start_level"
    assert seen["level_2_3"] >= N_PLANS // 5, seen
    assert seen["split"] >= N_PLANS // 20, seen
    assert seen["refused_step_up"] >= N_PLANS // 100 and seen["refused_start"] >= N_PLANS // 100, seen


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(record=valid_records(), options=plan_options())
def test_rules_hold_for_shared_record_strategy(record, options):
    _check_one(record, options)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(record=valid_records(), options=plan_options())
def test_every_plan_is_a_valid_plan_file(record, options):
    if "refused" in _check_one(record, options):
        return  # refused, and _check_one checked that the refusal was justified
    plan = build_plan(record, screen(record), options, created="2026-12-01T00:00:00+00:00")
    again = parse_plan(plan.model_dump(mode="json"))
    assert again.model_dump(mode="json") == plan.model_dump(mode="json")
