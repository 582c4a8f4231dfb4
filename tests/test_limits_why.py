"""One derivation of the limits, and a reason with a source on every planned exercise.

The scenarios a clinician met: a template's lower cap printed as the screening's, a plan file
whose embedded screening was loosened printed without a word, "supervised" on the screen and
"on your own" on the page, and empty charts on a level-1 program's pages.
"""

from __future__ import annotations

import json
import re

import pytest

from handout_fixtures import DEMO_RECORD
from prescribe.cli import main
from prescribe.errors import PlanFileError, UnsafeProgram
from prescribe.handout import render_html
from prescribe.planning import PlanOptions, build_plan
from prescribe.planning.why import limit_rows, why_rows, why_text
from prescribe.plan_schema import parse_plan
from prescribe.records import parse_record
from prescribe.safety import assert_safe, derive_limits, plan_limits

CREATED = "2026-03-02T09:00:00+00:00"

#: Osteopenia at the femoral neck (T -1.8; WHO 1994: -1 to -2.5): the screening allows level 3
#: (Beck et al. 2017, J Sci Med Sport 20:438-445: impact scaled to fracture risk); the gentle
#: template stops at moderate impact (level 2, its own cap, common practice).
OSTEOPENIA = {"patient_id": "LIM-0001", "age_years": 62, "sex": "female", "body_mass_kg": 64, "height_cm": 163,
              "t_scores": {"femoral_neck": -1.8}, "fractures": [], "falls_past_year": 0,
              "timed_up_and_go_s": 8.0, "conditions": [], "pain_score": 0}

#: A woman of 70 after a vertebral fracture: no impact above brisk walking and no loaded flexion
#: or twisting (Brooke-Wavell et al. 2022, Br J Sports Med 56:837-846; Giangregorio et al. 2014,
#: Osteoporos Int 25:821-835).
VERTEBRAL = {"patient_id": "LIM-0002", "age_years": 70, "sex": "female", "body_mass_kg": 58, "height_cm": 155,
             "t_scores": {"lumbar_spine": -2.9, "femoral_neck": -2.4},
             "fractures": [{"site": "vertebra", "months_ago": 24, "low_trauma": True}], "falls_past_year": 0,
             "timed_up_and_go_s": 10.0, "conditions": [], "pain_score": 1}


def _plan(record: dict, template: str | None = None, weeks: int = 26):
    opts = PlanOptions(weeks=weeks, **({"template": template} if template else {}))
    return build_plan(parse_record(record), options=opts, created=CREATED)


def _visible(html: str) -> str:
    return " ".join(re.sub(r"<[^>]+>", " ", html).split())


def test_the_templates_cap_is_the_limit_every_reader_prints(capsys, tmp_path):
    plan = _plan(OSTEOPENIA, "gentle")
    assert plan.screening.max_impact_level == 3          # the screening alone would allow high impact
    assert plan.limits.max_impact_level == 2             # the gentle template holds it to moderate
    assert max(w.impact_level for w in plan.weeks) <= 2
    reason = plan.limits.reasons_for("max_impact_level")
    assert reason and all(r.source for r in reason) and "gentle" in " ".join(r.rule + r.reason for r in reason)
    # the same figure on the clinician's pages, in `prescribe why`, in the plan table and in FHIR
    row = next(r for r in limit_rows(plan.limits) if r["limit"] == "max_impact_level")
    assert row["value"].startswith("2 ")
    clinician = _visible(render_html(plan, audience="clinician"))
    assert "Highest impact level allowed 2 (" in clinician and "Highest impact level allowed 3" not in clinician
    assert "Highest impact level allowed: 2 (" in why_text(plan, plan.limits)
    rec = tmp_path / "p.json"
    rec.write_text(json.dumps(OSTEOPENIA))
    assert main(["plan", str(rec), "--template", "gentle", "--table"]) == 0
    out = capsys.readouterr().out
    assert "Highest impact level allowed: 2 (" in out and "allowed: 3" not in out
    from prescribe.fhir.writer import program_bundle
    bundle = program_bundle(plan, parse_record(OSTEOPENIA), "Dr Invented")
    care = next(e["resource"] for e in bundle["entry"] if e["resource"]["resourceType"] == "CarePlan")
    notes = " ".join(n["text"] for n in care["note"])
    assert "Highest impact level allowed: 2 (" in notes and "Highest impact level allowed: 3" not in notes


def test_a_plan_file_with_a_loosened_screening_is_refused_naming_the_field(tmp_path, capsys):
    plan = _plan(VERTEBRAL)
    assert plan.limits.max_impact_level <= 1 and plan.limits.spine_sparing
    data = plan.model_dump(mode="json")
    data["screening"]["max_impact_level"] = 3
    data["screening"]["avoid"] = []
    edited = parse_plan(data)
    with pytest.raises(UnsafeProgram) as err:
        assert_safe(edited, door="test")
    text = str(err.value)
    assert "screening.max_impact_level" in text and "screening.avoid" in text
    # at the command line: exit 2, the field named, nothing printed on stdout
    f = tmp_path / "plan.json"
    f.write_text(json.dumps(data))
    out = tmp_path / "h.html"
    assert main(["handout", str(f), "--out", str(out)]) == 2
    captured = capsys.readouterr()
    assert "screening.max_impact_level" in captured.err and not out.exists()


def test_loosened_limits_are_refused_too():
    data = _plan(VERTEBRAL).model_dump(mode="json")
    data["limits"]["max_impact_level"] = 3
    data["limits"]["avoid"] = []
    with pytest.raises(UnsafeProgram, match=r"limits\.max_impact_level"):
        assert_safe(parse_plan(data), door="test")


def test_every_planned_exercise_says_why_with_a_source():
    for record, template in ((DEMO_RECORD, None), (OSTEOPENIA, "gentle"), (VERTEBRAL, None)):
        plan = _plan(record, template)
        for w in plan.weeks:
            for s in w.sessions:
                for x in s.exercises:
                    about = {y.about for y in x.why}
                    assert {"chosen", "dose", "week"} <= about, (w.week, x.exercise_id, about)
                    assert all(y.reason and y.source for y in x.why)
        rows = why_rows(plan, week=4)
        assert rows and all(r["why"] for r in rows)


def test_weeks_3_to_5_after_a_step_up_are_said_to_hold():
    # Weeks 3-5 after a new stimulus: resorption outpaces formation (Eriksen 1986, Endocr Rev 7:379-408).
    plan = _plan(DEMO_RECORD)
    weak = {w.week for w in plan.weeks if w.weak_window}
    assert weak
    for w in plan.weeks:
        for s in w.sessions:
            for x in s.exercises:
                if x.category == "balance":
                    continue
                week_reason = next(y.reason for y in x.why if y.about == "week")
                if w.week in weak and "held through" in week_reason:
                    assert "nothing rises" in week_reason or "Holds" in week_reason


def test_supervision_in_the_same_words_on_the_screen_and_the_page():
    from prescribe.ui import program_model as pm
    plan = _plan(VERTEBRAL)
    limits = plan_limits(plan)
    lines = [line for d in pm.week_days(plan, 1) for line in d.lines]
    marked = {line.supervised for line in lines}
    page = _visible(render_html(plan, audience="person"))
    if limits.supervision:
        assert marked == {True}
        assert "on your own" not in page
        assert "with your clinician or trainer there, at least at first" in page
    elif True in marked:
        assert "on your own" not in page
    else:
        assert "Exercise safely on your own" in page


def test_a_level_1_program_draws_its_minutes_and_no_empty_chart():
    plan = _plan(VERTEBRAL, "post_vertebral_fracture")
    assert max(w.impact_level for w in plan.weeks) <= 1 and not any(w.impacts_per_session for w in plan.weeks)
    html = render_html(plan, audience="person")
    assert 'id="chart-minutes-title"' in html and 'id="chart-impacts-title"' not in html
    has_load = any(x.intensity and "1RM" in x.intensity for w in plan.weeks for s in w.sessions for x in s.exercises)
    assert ('id="chart-intensity-title"' in html) == has_load
    # legends name only what is drawn
    assert "dashed line: impact level" not in _visible(html)
    assert "grey bar: minutes of walking in one session" in _visible(html)


def test_the_limits_come_from_one_function():
    # derive_limits is the one derivation: the planner's limits are what it gives for the record.
    plan = _plan(OSTEOPENIA, "gentle")
    from prescribe.planning.templates import load_template
    again = derive_limits(parse_record(OSTEOPENIA), load_template("gentle"))
    assert again.max_impact_level == plan.limits.max_impact_level
    assert again.avoid == plan.limits.avoid and again.supervision == plan.limits.supervision


def test_an_unreadable_plan_is_still_refused_with_the_usual_message():
    with pytest.raises(PlanFileError):
        parse_plan({"plan_format_version": "1.0"})


@pytest.mark.parametrize("language, title", [("es", "Minutos de caminar en una sesión"),
                                             ("zh-Hans", "每次锻炼的步行分钟数")])
def test_the_level_1_picture_is_in_the_persons_language(language, title):
    plan = _plan(VERTEBRAL, "post_vertebral_fracture")
    html = render_html(plan, audience="person", language=language)
    assert title in html
