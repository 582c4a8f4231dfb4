"""The clinician page shows the loads explained: the hardest exercise of each kind, as inline SVG."""

from __future__ import annotations

import re

import pytest

from handout_fixtures import make_plan
from prescribe.loading.explain import explain_exercise
from prescribe.handout import render_html
from prescribe.handout.explain_figures import (force_bars_svg, plan_explanations, stress_strain_svg)
from prescribe.loading.explain import force_bars, stress_strain_picture
from prescribe.plan_schema import parse_plan


@pytest.fixture(scope="module")
def plan():
    return parse_plan(make_plan(weeks=26))


def test_hardest_exercise_of_each_kind_is_picked(plan):
    items = {e.kind: e for e in plan_explanations(plan)}
    assert list(items) == ["impact", "resistance", "balance"]
    # The plan's impact work: marching, brisk walking, stamps, forceful heel drops and side
    # hops; the hardest on the hip is the one-leg side hop.
    ids = {ex.exercise_id for w in plan.weeks for s in w.sessions for ex in s.exercises if ex.category == "impact"}
    by_hip = {i: explain_exercise(i, t_score=-2.7)["joint_contact_force_bw"] for i in ids}
    assert items["impact"].result["exercise_id"] == max(by_hip, key=by_hip.get)
    assert items["resistance"].result["exercise_id"] == "goblet_box_squat"
    assert items["balance"].result["exercise_id"] == "tandem_stance"
    # The screening's lowest T-score is used; the body mass is the documented default.
    assert items["impact"].result["t_score"] == -2.7 and items["impact"].result["t_score_given"]
    assert not items["impact"].result["body_mass_given"]
    assert plan_explanations(plan, body_mass_kg=58)[0].result["body_mass_kg"] == 58


def test_clinician_page_carries_the_figures_and_the_person_page_does_not(plan):
    clinician = render_html(plan, audience="clinician")
    assert "The loads explained" in clinician
    assert clinician.count('class="chart pr-explain-stress-strain"') == 3
    assert clinician.count('class="chart pr-explain-bars"') == 3
    assert "In plain words:" in clinician and "does not replace clinical judgment" in clinician
    # Every SVG id is unique on the page (screen readers follow aria-labelledby).
    ids = re.findall(r'<title id="([^"]+)"', clinician)
    assert len(ids) == len(set(ids))
    person = render_html(plan, audience="person")
    assert "The loads explained" not in person and "pr-explain" not in person


def test_svg_draws_the_picture_points():
    r = explain_exercise("heel_drop_forceful", body_mass_kg=60, t_score=-2.5)
    pic = stress_strain_picture(r)
    svg = stress_strain_svg(pic).svg
    # Two curves of as many points as the data, and one marker.
    for key in ("healthy", "this_person"):
        pts = re.search(rf'class="pr-curve-{key}" points="([^"]+)"', svg).group(1).split()
        assert len(pts) == len(pic["curves"][key]["strain_pct"])
    assert svg.count('class="pr-explain-marker"') == 1
    assert f"{pic['marker']['stress_mpa']:.0f} MPa" in svg
    bars = force_bars(r)
    bar_svg = force_bars_svg(bars, "t").svg
    heights = {k: float(h) for k, h in re.findall(r'class="pr-bar-(\w+)" x="[^"]+" y="[^"]+" width="[^"]+" height="([^"]+)"',
                                                 bar_svg)}
    assert set(heights) == {b["key"] for b in bars}
    # Bar heights are in proportion to the forces.
    bw = {b["key"]: b["bw"] for b in bars}
    assert heights["joint_contact_force"] / heights["body_weight"] == pytest.approx(bw["joint_contact_force"], rel=0.01)


def test_text_is_escaped():
    r = dict(explain_exercise("walking"))
    r["name"] = "Walk <b>&</b>"
    svg = stress_strain_svg(stress_strain_picture(r)).svg
    assert "<b>" not in svg and "&lt;b&gt;" in svg
