"""The retest record, each measure against its minimal detectable change, the decision and the
next block (prescribe/outcomes/).  Every person invented; each threshold names its source."""

from __future__ import annotations

from datetime import date, timedelta

import pytest

from prescribe.errors import InputError
from prescribe.outcomes.decide import decide, next_block
from prescribe.outcomes.measures import compare, dxa_lsc_sd, height_loss_cm, measure_rules, snapshot
from prescribe.outcomes.retest import RETEST_FIELD_META, RetestRecord, check_retest_date, parse_retest
from prescribe.plan_schema import program_week, week_start
from prescribe.stimulus import in_weak_window, week_stages
from prescribe.safety import check_program, rescreen
from prescribe.records import FIELD_META, PatientRecord
from session_support import START, person, program


def retest(**fields) -> RetestRecord:
    data = {"patient_id": "SES-0001", "date": "2026-09-01", "falls_since_last": 0}
    data.update(fields)
    return parse_retest(data)


# -- the retest record ----------------------------------------------------------------------

@pytest.mark.parametrize("name", ["timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "pain_score",
                                  "body_mass_kg", "height_cm"])
def test_shared_fields_are_the_records_own(name):
    """Bounds, unit and help of a measure the record also has come from the record (one place)."""
    mine, theirs = RETEST_FIELD_META[name], FIELD_META[name]
    assert (mine["minimum"], mine["maximum"], mine["unit"]) == (theirs["minimum"], theirs["maximum"], theirs["unit"])
    assert RetestRecord.model_fields[name].metadata == PatientRecord.model_fields[name].metadata
    assert not mine["required"]


def test_a_bad_retest_names_each_field_value_and_what_is_allowed():
    with pytest.raises(InputError) as err:
        parse_retest({"patient_id": "A", "date": "2026-02-30", "falls_since_last": -1, "tandem_stance_s": 12,
                      "t_scores": {"femoral_neck": -9}, "grip_kg": 20})
    text = str(err.value)
    assert "date must be a date as YYYY-MM-DD" in text and "'2026-02-30'" in text
    assert "falls_since_last must be a whole number of falls from 0 to 1000, not -1" in text
    # the tandem stance bound is the record's: the test stops at 10 s
    assert "tandem_stance_s must be a number from 0 to 10 (s), or null when not measured, not 12" in text
    assert "t_scores.femoral_neck must be a number from -7 to 5 (SD), or null, not -9" in text
    assert "grip_kg is not a field here" in text


def test_falls_since_last_must_be_given():
    with pytest.raises(InputError, match="falls_since_last is required"):
        parse_retest({"patient_id": "A", "date": "2026-02-01"})


def test_the_date_is_not_in_the_future_nor_before_the_start():
    r = retest(date="2026-09-01")
    check_retest_date(r, "2026-06-01", today=date(2026, 9, 1))
    with pytest.raises(InputError, match="date must be a date not in the future"):
        check_retest_date(r, "2026-06-01", today=date(2026, 8, 31))
    with pytest.raises(InputError, match="on or after the program's start_date 2026-09-02"):
        check_retest_date(r, "2026-09-02", today=date(2026, 9, 30))


@pytest.mark.parametrize("text", ["20260901", "2026-W36-2", "2026-9-1", "2026-09-31", "２０２６-09-01",
                                  " 2026-09-01"])
def test_a_day_is_written_yyyy_mm_dd_in_the_retest_and_the_session_alike(text):
    """One check of a written day (prescribe/records.py ``day_text``) for the retest's ``date`` and the
    session record's ``session_date``: the same refusal, naming each field (ISO 8601 calendar date,
    extended format; common practice for a form's dates)."""
    from prescribe.sessions.records import parse_session
    with pytest.raises(InputError) as by_retest:
        parse_retest({"patient_id": "RT-DAY-1", "date": text, "falls_since_last": 0})
    with pytest.raises(InputError) as by_session:
        parse_session({"patient_id": "RT-DAY-1", "session_date": text, "pain_during": 0})
    assert [(p.field, p.value) for p in by_retest.value.problems] == [("date", text)]
    assert [(p.field, p.value) for p in by_session.value.problems] == [("session_date", text)]
    assert "a date as YYYY-MM-DD" in str(by_retest.value) and "a date as YYYY-MM-DD" in str(by_session.value)
    assert parse_retest({"patient_id": "RT-DAY-1", "date": "2026-09-01", "falls_since_last": 0}).day == date(2026, 9, 1)


# -- each measure against its MDC -------------------------------------------------------------

BASE = {"timed_up_and_go_s": 10.0, "chair_stand_30s": 12, "tandem_stance_s": 6.0, "pain_score": 4,
        "body_mass_kg": 70.0, "height_cm": 160.0, "t_scores.femoral_neck": -2.5, "t_scores.lumbar_spine": -2.0}


def verdicts(now: dict) -> dict:
    measures, _ = compare([BASE], now)
    return {m["measure"]: m["verdict"] for m in measures}


def test_timed_up_and_go_mdc():
    # Alghadir, Anwer & Brismee 2015, BMC Musculoskelet Disord 16:174: MDC 1.14 s between raters.
    assert measure_rules()["timed_up_and_go_s"].mdc == 1.14
    assert verdicts({"timed_up_and_go_s": 8.86})["timed_up_and_go_s"] == "improved"      # 1.14 s faster
    assert verdicts({"timed_up_and_go_s": 8.9})["timed_up_and_go_s"] == "no real change"  # 1.1 s faster
    assert verdicts({"timed_up_and_go_s": 11.2})["timed_up_and_go_s"] == "worse"          # slower is worse


def test_chair_stand_mdc():
    # Gill et al. 2022, Musculoskeletal Care: MDC for an individual about 2.5 stands.
    assert verdicts({"chair_stand_30s": 14})["chair_stand_30s"] == "no real change"   # +2 < 2.5
    assert verdicts({"chair_stand_30s": 15})["chair_stand_30s"] == "improved"         # +3: more stands are better
    assert verdicts({"chair_stand_30s": 9})["chair_stand_30s"] == "worse"


def test_pain_and_tandem_stance():
    # Farrar et al. 2001, Pain 94:149-158 (from memory): about 2 points on the 0-10 scale.
    assert verdicts({"pain_score": 2})["pain_score"] == "improved"
    assert verdicts({"pain_score": 5})["pain_score"] == "no real change"
    assert verdicts({"pain_score": 6})["pain_score"] == "worse"
    # Tandem stance: common practice (no published MDC found), 3 s.
    assert verdicts({"tandem_stance_s": 9.0})["tandem_stance_s"] == "improved"
    assert verdicts({"tandem_stance_s": 4.0})["tandem_stance_s"] == "no real change"


def test_body_mass_and_height_count_only_a_loss():
    # Fried et al. 2001, J Gerontol A 56:M146 (from memory): a 5% loss; a gain is not "improved".
    v = verdicts({"body_mass_kg": 66.5, "height_cm": 161.0})
    assert v["body_mass_kg"] == "worse" and v["height_cm"] == "no real change"
    assert verdicts({"body_mass_kg": 80.0})["body_mass_kg"] == "no real change"
    assert verdicts({"body_mass_kg": 66.6})["body_mass_kg"] == "no real change"   # 4.9% loss


def test_dxa_least_significant_change_per_iscd():
    # ISCD: LSC = 2.77 x precision error; minimum acceptable precision femoral neck 2.5% (from memory);
    # NHANES III femoral neck 0.858 +/- 0.120 g/cm2 (Looker et al. 1998, from memory).
    # At T = -2.5: BMD = 0.858 - 2.5 x 0.120 = 0.558 g/cm2; LSC = 2.77 x 2.5% x 0.558 = 0.0386 g/cm2 = 0.32 SD.
    assert dxa_lsc_sd("femoral_neck", -2.5) == pytest.approx(0.0386 / 0.120, abs=0.01)
    # lumbar spine 1.9% at T = -2.0: BMD = 1.047 - 0.220 = 0.827; 2.77 x 1.9% x 0.827 / 0.110 = 0.40 SD
    assert dxa_lsc_sd("lumbar_spine", -2.0) == pytest.approx(0.40, abs=0.01)
    v = verdicts({"t_scores.femoral_neck": -2.2, "t_scores.lumbar_spine": -2.5})
    assert v["t_scores.femoral_neck"] == "no real change"   # +0.3 < 0.32
    assert v["t_scores.lumbar_spine"] == "worse"            # -0.5 beyond 0.40


def test_baseline_previous_and_the_first_measurement():
    history = [{"timed_up_and_go_s": 10.0}, {"timed_up_and_go_s": 8.0, "chair_stand_30s": 12}]
    measures, first = compare(history, {"timed_up_and_go_s": 9.5, "chair_stand_30s": 13, "tandem_stance_s": 8.0})
    tug = next(m for m in measures if m["measure"] == "timed_up_and_go_s")
    assert (tug["baseline"], tug["previous"], tug["now"], tug["change"]) == (10.0, 8.0, 9.5, -0.5)
    assert tug["verdict"] == "no real change" and tug["verdict_since_previous"] == "worse"
    assert [f["measure"] for f in first] == ["tandem_stance_s"]
    assert all(m["mdc_source"] for m in measures)


def test_every_measure_has_a_source_and_a_status():
    for rule in measure_rules().values():
        assert rule.source and rule.status in ("seen", "from memory", "common practice"), rule.name


# -- the decision -------------------------------------------------------------------------------

def _decide(now: dict, falls: int = 0, base=None, plan=None):
    base = base or snapshot(person().model_dump(mode="json"))
    measures, _ = compare([base], now)
    return decide(measures, falls, height_loss_cm([base], now), rescreen(person()), plan or program())


def test_height_loss_of_two_cm_refers():
    # Siminoski et al. 2006, Osteoporos Int 17:290; Cosman et al. 2014 (from memory): prospective loss >= 2 cm.
    assert _decide({"height_cm": 161.0}).decision == "refer"          # 163 -> 161: 2.0 cm
    d = _decide({"height_cm": 161.1})                                  # 1.9 cm
    assert d.decision == "continue" and not d.flags


def test_falls_hold_and_two_falls_refer():
    # AGS/BGS 2011 (from memory): two or more falls -> multifactorial assessment.
    assert _decide({}, falls=1).decision == "hold"
    assert _decide({}, falls=2).decision == "refer"
    assert _decide({}, falls=0).decision == "continue"


def test_a_worse_measure_or_more_pain_holds():
    d = _decide({"timed_up_and_go_s": 9.0})            # baseline 7.5 s: 1.5 s slower
    assert d.decision == "hold" and d.flags[0]["flag"] == "worse"
    d = _decide({"pain_score": 3})                      # baseline 0
    assert d.decision == "hold" and d.flags[0]["flag"] == "pain_up"


def test_a_paused_program_holds():
    from prescribe.plan_schema import PlanPause
    plan = program().model_copy(update={"paused": PlanPause(from_week=5, since="2026-07-01", reason="chest pain")})
    d = _decide({}, plan=plan)
    assert d.decision == "hold" and "paused since 2026-07-01" in d.reasons[0]["message"]


# -- the next block ---------------------------------------------------------------------------

def _stimulus_weeks(plan) -> list[int]:
    """The weeks of a new or larger stimulus, as the one derivation (prescribe.stimulus) finds them."""
    return [st.week for st in week_stages(plan.weeks) if st.stimulus]


def test_the_next_block_continues_from_the_current_levels_and_passes_the_safety_check():
    """Over retests in every week of a 26-week program and after it: the next block starts at the
    level and phase of the last week done (never week 1 again), never inside weeks 3-5 after the
    old program's last stimulus, and passes the one safety check.  Kohrt et al. 2004; the weak
    window: Eriksen 1986, Endocr Rev 7:379."""
    plan = program(weeks=26)
    record = person()
    ups = _stimulus_weeks(plan)
    assert ups[0] == 1 and len(ups) >= 3
    continued_above_start = 0
    delayed = 0
    for week in range(2, 34):
        day = START + timedelta(days=7 * (week - 1) + 2)
        new, info = next_block(plan, record, day)
        starts = date.fromisoformat(info["starts_on"])
        assert starts >= day
        old_week = program_week(START, starts)
        last = max(s for s in ups if s <= min(week, 26))
        # the block starts after the weak window of the last stimulus before the retest
        assert not in_weak_window(old_week - last + 1), (week, old_week, last)
        delayed += starts > day
        done = plan.weeks[min(old_week - 1, 26) - 1]
        assert new.weeks[0].impact_level == done.impact_level
        assert new.weeks[0].resistance_phase == done.resistance_phase
        continued_above_start += new.weeks[0].impact_level > plan.weeks[0].impact_level
        assert new.block.continues_from_week == min(old_week - 1, 26)
        assert check_program(new, record=record) == []
        assert new.start_date == info["starts_on"]
    assert continued_above_start >= 20   # most retests continue above the first block's start
    assert delayed >= 5                  # and some wait for a window to end


def test_the_next_block_respects_a_lower_cap_after_rescreening():
    """Falls risk after a retest caps impact at level 2 (the screening rules): a block that stood at
    level 3 continues at 2, not above the re-screened cap."""
    plan = program(weeks=26)
    record = person(falls_past_year=2)
    assert rescreen(record).max_impact_level < 3
    day = START + timedelta(days=7 * 26 + 2)
    assert plan.weeks[25].impact_level == 3
    new, info = next_block(plan, record, day)
    assert new.weeks[0].impact_level <= rescreen(record).max_impact_level
    assert check_program(new, record=record) == []


def test_week_start_of_the_block_after_a_window():
    plan = program(weeks=26)
    ups = _stimulus_weeks(plan)
    s = ups[1]
    day = START + timedelta(days=7 * (s + 2 - 1))     # week 3 after the step-up
    _, info = next_block(plan, person(), day)
    assert info["starts_on"] == week_start(START, s + 5).isoformat()


def test_measure_series_baseline_first_then_each_retest_in_the_data_files_order():
    """The values the app's charts and the progress letter draw (one function for both): the intake
    values kept in the first retest's row at the program's start, then each retest's own; a measure
    never taken is left out, one taken once has a single point (common practice: no chart without
    two values)."""
    from prescribe.outcomes.measures import measure_series
    rows = [{"date": "2026-09-01", "previous": {"timed_up_and_go_s": 7.5, "pain_score": 2, "height_cm": 162.0},
             "retest": {"timed_up_and_go_s": 6.9, "chair_stand_30s": 16, "t_scores": {"femoral_neck": -2.2}}},
            {"date": "2026-12-01", "previous": {"timed_up_and_go_s": 6.9},
             "retest": {"timed_up_and_go_s": 6.4, "pain_score": None, "height_cm": 161.5}}]
    series = measure_series("2026-06-01", rows)
    assert series == {
        "timed_up_and_go_s": [("2026-06-01", 7.5), ("2026-09-01", 6.9), ("2026-12-01", 6.4)],
        "chair_stand_30s": [("2026-09-01", 16)],
        "pain_score": [("2026-06-01", 2)],
        "height_cm": [("2026-06-01", 162.0), ("2026-12-01", 161.5)],
        "t_scores.femoral_neck": [("2026-09-01", -2.2)]}
    order = list(measure_rules())
    assert list(series) == sorted(series, key=order.index)
    assert measure_series("2026-06-01", []) == {}
