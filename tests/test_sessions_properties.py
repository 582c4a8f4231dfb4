"""Properties of the next-step engine over random programs and random session histories.

* an adjusted program always passes the safety check (the planner's check_plan, and the
  project-wide check where it is installed);
* a red-flag symptom or a fall in the latest session always gives stop_and_refer
  (Riebe et al. 2015, Med Sci Sports Exerc 47(11):2473-2479; Han et al. 2023, Cochrane
  CD014461.pub2);
* a progress decision never lands in weeks 3-5 after a step-up (Eriksen 1986, Endocr Rev
  7:379-408), and the adjusted program raises nothing there (the window restarts at every
  step-up of the new sequence).
All people are invented.
"""

from __future__ import annotations

from datetime import timedelta

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from prescribe.plan_schema import parse_plan
from prescribe.planning import PlanOptions, build_plan, check_plan
from prescribe.sessions.engine import LoggedSession, assess, step_up_weeks, week_dose, window_position
from prescribe.sessions.records import SYMPTOMS, parse_session
from session_support import START
from strategies import valid_records

RED = ["chest_pain", "dizziness", "unusual_breathlessness", "palpitations", "new_back_pain"]
SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])

_plans: dict = {}


def _plan_for(record, weeks: int) -> dict:
    key = (record.model_dump_json(), weeks)
    if key not in _plans:
        plan = build_plan(record, options=PlanOptions(weeks=weeks), created="2026-06-01T08:00:00+00:00")
        _plans[key] = plan.model_copy(update={"start_date": START.isoformat()}).model_dump(mode="json")
    return _plans[key]


def _safety(plan: dict) -> list:
    parsed = parse_plan(plan)
    problems = list(check_plan(parsed))
    try:
        from prescribe.safety import check_program
    except ImportError:
        return problems
    return problems + [v.message for v in check_program(parsed)]


@st.composite
def histories(draw, pid: str, weeks: int):
    n = draw(st.integers(0, 25))
    days = sorted(draw(st.lists(st.integers(0, 7 * weeks - 1), min_size=n, max_size=n)))
    out = []
    for i, d in enumerate(days):
        data = {"patient_id": pid, "session_date": (START + timedelta(days=d)).isoformat(),
                "pain_during": draw(st.integers(0, 10)),
                "pain_next_morning": draw(st.one_of(st.none(), st.integers(0, 10))),
                "session_rpe": draw(st.one_of(st.none(), st.sampled_from([2, 5, 7, 8, 8.5, 9, 10]))),
                "symptoms": draw(st.lists(st.sampled_from(list(SYMPTOMS)), unique=True, max_size=2)),
                "fell_since_last": draw(st.booleans()) if draw(st.integers(0, 9)) == 0 else False,
                "exercises": [{"exercise_id": draw(st.sampled_from(["goblet_box_squat", "back_squat"])),
                               "load_kg": draw(st.sampled_from([8.0, 12.0, 16.0])),
                               "reps_done": draw(st.integers(5, 14)), "rpe": draw(st.sampled_from([4, 6, 9]))}]}
        out.append(LoggedSession(parse_session(data), d // 7 + 1, 1, i + 1))
    return out


@st.composite
def cases(draw):
    record = draw(valid_records())
    weeks = draw(st.integers(8, 30))
    plan = _plan_for(record, weeks)
    sessions = draw(histories(record.patient_id, weeks))
    first = sessions[-1].record.day if sessions else START
    today = first + timedelta(days=draw(st.integers(0, 30)))
    return plan, sessions, today, draw(st.integers(0, 10))


@SETTINGS
@given(cases())
def test_an_adjusted_program_always_passes_the_safety_check(case):
    plan, sessions, today, baseline = case
    advice = assess(plan, sessions, today=today, baseline_pain=baseline, program_version=1)
    problems = _safety(advice.program)
    assert problems == [], (advice.decision, advice.week, problems[:3])
    # weeks already done are kept as they were
    assert advice.program["weeks"][:advice.week - 1] == plan["weeks"][:advice.week - 1]


@SETTINGS
@given(cases(), st.sampled_from(RED + ["fall"]))
def test_a_red_flag_always_gives_stop_and_refer(case, flag):
    plan, sessions, today, baseline = case
    day = today - timedelta(days=0)
    data = {"patient_id": plan["patient_id"], "session_date": max(day, START).isoformat(), "pain_during": 0,
            "symptoms": [] if flag == "fall" else [flag], "fell_since_last": flag == "fall"}
    last = LoggedSession(parse_session(data), max(1, (max(day, START) - START).days // 7 + 1), 1, 10_000)
    advice = assess(plan, [*sessions, last], today=max(today, START), baseline_pain=baseline, program_version=1)
    assert advice.decision == "stop_and_refer"
    assert advice.program["paused"]["from_week"] == advice.week
    assert _safety(advice.program) == []


@SETTINGS
@given(cases())
def test_no_progress_in_a_weak_window_and_nothing_rises_there(case):
    plan, sessions, today, baseline = case
    advice = assess(plan, sessions, today=today, baseline_pain=baseline, program_version=1)
    s, pos = window_position(plan["weeks"], advice.week)
    if s is not None and 3 <= pos <= 5:
        assert advice.decision != "progress"
    if advice.decision == "stop_and_refer":
        return  # paused: no week is composed anew (the safety check still applies, above)
    weeks = advice.program["weeks"]
    ups = step_up_weeks(weeks)
    for up in ups:  # 1-based week of a step-up = 0-based index of its window week 2
        base = week_dose(weeks[up]) if up < len(weeks) else None  # window week 2 (0-based index up)
        for k in range(up + 1, min(up + 4, len(weeks))):  # window weeks 3-5
            if k + 1 < advice.week:
                continue  # weeks already done are kept as they were
            assert all(a <= b + 1e-9 for a, b in zip(week_dose(weeks[k]), base)), (up, k + 1, advice.decision)
