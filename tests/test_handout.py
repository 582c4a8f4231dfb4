"""Handout content, charts and escaping, without rendering PDF (fast)."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import pytest
from markupsafe import escape

from handout_fixtures import make_plan, planner_plan
from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.catalogue import default_catalogue
from prescribe.errors import InputError, PlanFileError
from prescribe.handout import charts, content, render_html, write_handout
from prescribe.plan_schema import parse_plan
from prescribe.settings import Clinic

DEMO_CLINIC = Clinic("Riverside Bone Health Clinic (demo)", "555-0100")
SVG = "{http://www.w3.org/2000/svg}"


def _plan(start_date=None, **kw):
    data = make_plan(**kw)
    if start_date is not None:
        data["start_date"] = start_date
    return parse_plan(data)


# --- weak window, step-ups and loads -------------------------------------------------

def test_weak_window_is_derived_as_weeks_3_to_5_after_each_new_or_larger_stimulus():
    # Resorption runs ahead of formation for about 3 weeks after a new stimulus, so bone is
    # transiently weaker in weeks 3-5 counted from the stimulus week (Eriksen 1986, Endocr Rev 7:379;
    # Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143).  The start counts as a new stimulus
    # (PRODUCT.md: "weeks 3 to 5 after a new or larger stimulus").  The resistance load is held
    # (70% 1RM throughout), so the impact level alone steps up, in week 9.
    facts = content.week_facts(_plan(weeks=26, step_ups=(9,), start_level=2, resistance_pct=(70, 70)))
    assert [f.week for f in facts if f.step_up] == [1, 9]
    assert [f.week for f in facts if f.weak_window] == [3, 4, 5, 11, 12, 13]


def test_a_rise_in_resistance_load_opens_a_window_as_the_check_holds_it():
    # PRODUCT.md: no escalation of any kind in weeks 3-5 after a new or larger stimulus, impact or
    # resistance.  The fixture raises the load by 5% 1RM every 4 weeks (70, 75, 80, 85% from weeks
    # 1, 5, 9 and 13): each rise is a new stimulus, though the impact level stays at 2.
    plan = _plan(weeks=20, step_ups=(), start_level=2, resistance_pct=(70, 85))
    facts = content.week_facts(plan)
    assert [f.week for f in facts if f.step_up] == [1]  # the triangle marks impact step-ups only
    assert [f.week for f in facts if f.weak_window] == [3, 4, 5, 7, 8, 9, 11, 12, 13, 15, 16, 17]
    # The page holds the weeks the safety check holds: a rise of the landings in week 16 (weeks 3-5
    # after the rise to 85% in week 13) is refused by the check's rule weak_window.
    from prescribe.safety import check_program
    data = plan.model_dump(mode="json")
    for s in data["weeks"][15]["sessions"]:
        for x in s["exercises"]:
            if x["impact_level"] >= 2:
                x["impacts"] += 10
        s["impacts"] = sum(x["impacts"] for x in s["exercises"] if x["impact_level"] >= 2)
    data["weeks"][15]["impacts_per_session"] = max(s["impacts"] for s in data["weeks"][15]["sessions"])
    assert any(v.rule == "weak_window" and v.week == 16 for v in check_program(parse_plan(data)))


def test_two_step_ups_give_two_weak_windows():
    facts = content.week_facts(_plan(weeks=30, step_ups=(5, 15), start_level=1, resistance_pct=(70, 70)))
    assert [f.week for f in facts if f.step_up] == [1, 5, 15]
    assert [f.week for f in facts if f.weak_window] == [3, 4, 5, 7, 8, 9, 17, 18, 19]


def test_the_plans_own_window_labels_add_held_weeks_and_never_remove_one():
    data = make_plan(weeks=12, step_ups=(5,), extra_weeks=True, resistance_pct=(70, 70))
    for week in data["weeks"]:  # the plan labels week 2 too, and not week 9: a label only adds
        week["weak_window"] = week["week"] in (2, 3, 4)
        week["step_up"] = week["week"] == 1
    facts = content.week_facts(parse_plan(data))
    assert [f.week for f in facts if f.weak_window] == [2, 3, 4, 5, 7, 8, 9]
    assert [f.week for f in facts if f.step_up] == [1, 5]


def test_resistance_intensity_is_parsed_from_the_exercises_when_absent():
    facts = content.week_facts(_plan(weeks=9, resistance_pct=(70, 85)))
    # 70% rising by 5 points every 4 weeks (the fixture's scheme), capped at 85%.
    assert [f.resistance_pct_1rm for f in facts] == [70, 70, 70, 70, 75, 75, 75, 75, 80]
    assert content.pct_1rm("80% 1RM") == 80
    assert content.pct_1rm("82.5 % of 1 RM") == 82.5
    assert content.pct_1rm("RPE 6") is None


def test_weekly_osteogenic_index_sums_sessions_when_the_planner_gives_none():
    plan = _plan(weeks=4)
    week = plan.weeks[0]
    # Turner & Robling 2003 (Exerc Sport Sci Rev 31:45-50): session indices add up over a week.
    expected = sum(s.osteogenic_index for s in week.sessions)
    assert content.week_facts(plan)[0].weekly_oi == pytest.approx(expected)


# --- wording -------------------------------------------------------------------------

def test_dose_text_says_how_many_and_how_to_split_them():
    plan = _plan(weeks=8)
    ex = next(e for w in plan.weeks for s in w.sessions for e in s.exercises if e.impacts >= 40 and e.bouts == 2)
    assert re.fullmatch(rf"{ex.impacts} landings in 2 bouts of \S+(\. Effort 7 out of 10: .+)?", content.dose_text(ex))


def test_identical_consecutive_weeks_are_grouped():
    table = content.week_table(_plan(weeks=52))
    assert len(table.rows) < 52
    labels = [r.label for r in table.rows]
    assert any(label.startswith("Weeks ") for label in labels)
    # Every week appears exactly once across the rows.
    covered = []
    for label in labels:
        numbers = [int(n) for n in re.findall(r"\d+", label)]
        covered += list(range(numbers[0], numbers[-1] + 1))
    assert covered == list(range(1, 53))


def test_week_tables_print_each_instruction_once_and_say_what_stays():
    table = content.week_table(planner_plan(26))
    for rows in (table.routine, table.rows):
        assert not rows[0].has_repeats  # the first row says everything
        assert any(r.has_repeats for r in rows[1:])
        for above, row in zip(rows, rows[1:]):
            for kept, same, kept_above, same_above in zip(row.columns, row.repeated, above.columns,
                                                          above.repeated or [()] * len(above.columns)):
                assert not set(kept) & set(same)
                # What a row leaves out was said in the row above (or left out there too).
                assert set(same) <= set(kept_above) | set(same_above)
    html = render_html(planner_plan(26), clinic=DEMO_CLINIC)
    assert "Same as above: " in html


def test_review_weeks_and_next_review_date():
    plan = _plan(weeks=16, reassess_every=8, start_date="2026-03-02")
    assert [w for w, _ in content.review_weeks(plan)] == [8, 16]
    # Starts 2026-03-02 (a Monday): week 8 starts 7 weeks later.
    assert content.next_review(plan) == "Your next review is in week 8 (around 20 April 2026)."


def test_review_dates_count_from_the_start_date_not_from_the_day_the_plan_was_made():
    # Made on 2 March, started on 1 June: week N runs from start_date + 7(N-1) days (PRODUCT.md),
    # so no review falls before the program begins.
    plan = _plan(weeks=16, reassess_every=8, start_date="2026-06-01")
    assert content.review_weeks(plan) == [(8, "20 July 2026"), (16, "14 September 2026")]
    assert content.next_review(plan) == "Your next review is in week 8 (around 20 July 2026)."
    html = render_html(plan, clinic=DEMO_CLINIC)
    assert "20 July 2026" in html and "20 April 2026" not in html


def test_a_plan_without_a_start_date_names_review_weeks_without_guessing_dates():
    plan = _plan(weeks=16, reassess_every=8)
    assert content.review_weeks(plan) == [(8, None), (16, None)]
    assert content.next_review(plan) == "Your next review is in week 8."


def test_guides_come_from_the_catalogue_with_its_easier_version():
    plan = _plan(weeks=8)
    guides = {g.exercise_id: g for g in content.exercise_guides(plan)}
    entry = default_catalogue().get("stamp_gentle")
    assert guides["stamp_gentle"].how_to == entry.instructions
    assert guides["stamp_gentle"].feel == entry.should_feel
    easier = default_catalogue().get(entry.regression)
    assert easier.name in guides["stamp_gentle"].if_hard


def test_an_exercise_missing_from_the_catalogue_falls_back_to_the_plan():
    data = make_plan(weeks=4)
    ex = data["weeks"][0]["sessions"][0]["exercises"][1]
    ex.update(exercise_id="clinic_custom_drill", name="Clinic drill (invented)", notes="Only with the physio.")
    guides = {g.exercise_id: g for g in content.exercise_guides(parse_plan(data))}
    guide = guides["clinic_custom_drill"]
    assert "Clinic drill (invented)" in guide.how_to and guide.feel and guide.if_hard
    assert guide.notes == ("Only with the physio.",)


def test_a_broken_catalogue_lookup_never_stops_the_handout():
    def lookup(_id):
        return None
    guides = content.exercise_guides(_plan(weeks=4), lookup=lookup)
    assert all(g.how_to and g.feel and g.if_hard for g in guides)


# --- HTML ------------------------------------------------------------------------------

def test_html_carries_cautions_clinic_exercises_and_counts():
    plan = _plan(weeks=26)
    html = render_html(plan, clinic=DEMO_CLINIC)
    for caution in STANDARD_CAUTIONS:
        assert html.count(caution.replace("'", "&#39;")) >= 2  # person pages and clinician page
    assert "Riverside Bone Health Clinic (demo)" in html and "555-0100" in html
    names = {e.name for w in plan.weeks for s in w.sessions for e in s.exercises}
    for name in names:
        assert name in html
    for week in plan.weeks:
        if week.impacts_per_session:
            assert f"{week.impacts_per_session} landings a session" in html
    assert "counter(pages)" in html and "Clinician page" in html
    assert "Clinician pages: program for" in html  # the clinician pages' own header


def test_clinic_comes_from_settings(monkeypatch):
    monkeypatch.setenv("PRESCRIBE_CLINIC_NAME", "Hillcrest Physio (demo)")
    monkeypatch.setenv("PRESCRIBE_CLINIC_CONTACT", "555-0199")
    html = render_html(make_plan(weeks=4))
    assert "Hillcrest Physio (demo)" in html and "555-0199" in html


def test_audiences_choose_the_pages_and_both_carry_cautions():
    plan = _plan(weeks=8)
    person = render_html(plan, audience="person", clinic=DEMO_CLINIC)
    clinician = render_html(plan, audience="clinician", clinic=DEMO_CLINIC)
    assert "Your goals" in person and "Clinician page" not in person
    assert "Clinician page" in clinician and "Your goals" not in clinician
    for html in (person, clinician):
        assert STANDARD_CAUTIONS[1] in html


@pytest.mark.parametrize("paper, size", [("a4", "size: A4"), ("letter", "size: letter")])
def test_paper_size(paper, size):
    assert size in render_html(_plan(weeks=4), paper=paper, clinic=DEMO_CLINIC)


def test_person_id_and_notes_are_escaped_in_html():
    data = make_plan(weeks=8, patient_id="<script>alert(1)</script>", note="<b>bold</b>")
    html = render_html(data, clinic=Clinic("<i>Clinic</i>", "<img src=x>"))
    assert not re.search(r"<\s*script", html, re.IGNORECASE)
    assert "<b>bold</b>" not in html and "<img" not in html and "<i>Clinic" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert "&lt;b&gt;bold&lt;/b&gt;" in html
    # The page header carries the id as an escaped CSS string, never raw markup.
    assert "</style" not in html.split("<style>", 1)[1].split("</style>", 1)[0]


@pytest.mark.parametrize("kw, field", [({"audience": "family"}, "audience"), ({"paper": "a5"}, "paper")])
def test_bad_options_name_the_field(kw, field):
    with pytest.raises(InputError) as err:
        render_html(make_plan(weeks=4), **kw)
    assert err.value.problems[0].field == field
    assert str(err.value).startswith(f"{field} must be one of")


def test_write_handout_refuses_other_suffixes_and_keeps_the_old_file(tmp_path):
    out = tmp_path / "handout.docx"
    with pytest.raises(InputError, match=r"--out must be a file name ending in \.html or \.pdf"):
        write_handout(make_plan(weeks=4), out)
    old = tmp_path / "old.html"
    old.write_text("kept")
    with pytest.raises(PlanFileError):
        write_handout({"plan_format_version": "1.0", "patient_id": "x"}, old)
    assert old.read_text() == "kept"
    assert [p.name for p in tmp_path.iterdir()] == ["old.html"]


def test_write_handout_html(tmp_path):
    out = write_handout(make_plan(weeks=4), tmp_path / "h.html", audience="person", paper="letter")
    text = out.read_text(encoding="utf-8")
    assert text.startswith("<!DOCTYPE html>") and "size: letter" in text


def test_plans_from_another_major_version_or_malformed_are_refused_clearly():
    data = make_plan(weeks=4)
    data["plan_format_version"] = "2.0"
    with pytest.raises(PlanFileError, match="plan_format_version"):
        render_html(data)
    bad = make_plan(weeks=4)
    bad["weeks"][0]["impact_level"] = 7
    with pytest.raises(PlanFileError, match=r"weeks\[0\]\.impact_level|impact_level"):
        render_html(bad)
    with pytest.raises(PlanFileError):
        render_html(["not", "a", "plan"])


# --- charts -----------------------------------------------------------------------------

def _svg(text: str) -> ET.Element:
    return ET.fromstring(text)  # must be well-formed XML


def _bar_count(root: ET.Element) -> int:
    path = next(p for p in root.iter(f"{SVG}path") if p.get("class") == "bars")
    return path.get("d").count("Z")


def test_impacts_chart_is_accessible_and_hatches_each_weak_window():
    plan = _plan(weeks=30, step_ups=(5, 15), start_level=1, resistance_pct=(70, 70))
    chart = charts.impacts_chart(plan)
    root = _svg(chart.svg)
    assert root.find(f"{SVG}title").text.startswith("Landings (impacts) per session")
    assert chart.title == root.find(f"{SVG}title").text
    assert "Hold weeks (weak window): 3-5, 7-9, 17-19." in root.find(f"{SVG}desc").text
    hatched = [p for p in root.iter(f"{SVG}path") if p.get("class") == "hatch"]
    assert len(hatched) == 3  # one per weak window (after the start and after each step-up)
    assert all(p.get("d").count("M") >= 3 for p in hatched)  # lines, not a colour fill
    texts = [t.text for t in root.iter(f"{SVG}text")]
    assert texts.count("hold") == 3 and "level 1" in texts
    # What the scales measure and the legend are printed beside the SVG, as page text.
    assert any("impacts per session" in s for s in chart.scales)
    assert any("impact level" in s for s in chart.scales) and any("week" in s for s in chart.scales)
    labels = [label for _, label in chart.legend]
    assert any("hatched" in label and "hold" in label for label in labels)
    assert any("step-up" in label for label in labels)
    swatches = [_svg(swatch) for swatch, _ in chart.legend]
    assert not any(list(s.iter(f"{SVG}text")) for s in swatches)  # shapes only
    assert sum(1 for s in swatches for p in s.iter(f"{SVG}path") if p.get("class") == "hatch") == 1
    assert _bar_count(root) == sum(1 for w in plan.weeks if w.impacts_per_session)


def test_intensity_chart_labels_loads_and_handles_plans_without_1rm():
    chart = charts.intensity_chart(_plan(weeks=12))
    root = _svg(chart.svg)
    texts = [t.text for t in root.iter(f"{SVG}text")]
    assert "70%" in texts and "100%" in texts
    assert any("% of the most you could lift once" in s for s in chart.scales)
    marks = next(p for p in root.iter(f"{SVG}path") if p.get("class") == "marks")
    assert marks.get("d").count("Z") == 12  # a circle for each week with a load
    data = make_plan(weeks=4)
    for week in data["weeks"]:
        for session in week["sessions"]:
            for ex in session["exercises"]:
                ex["intensity"] = "RPE 6"
    empty = _svg(charts.intensity_chart_svg(data))
    assert any("set by effort, not by a weight" in (t.text or "") for t in empty.iter(f"{SVG}text"))


def test_chart_text_is_escaped():
    facts = [content.WeekFacts(week=1, impact_level=1, impacts_per_session=0, step_up=False, weak_window=False,
                               resistance_pct_1rm=None, reassessment=False, phase="<x>", weekly_oi=0,
                               max_session_oi=0, peak_grf_bw=0, directions=(), sessions=1)]
    frame = charts._Frame(facts, "t", "a <b> & c", "d <script>")
    svg = frame.chart((), ()).svg
    assert "<b>" not in svg and "<script>" not in svg and "a &lt;b&gt; &amp; c" in svg
    _svg(svg)


def test_chart_title_scales_and_legend_are_printed_as_escaped_page_text():
    plan = _plan(weeks=12)
    html = render_html(plan, clinic=DEMO_CLINIC)
    chart = charts.impacts_chart(plan)
    assert f'<h3 class="chart-title">{chart.title}</h3>' in html
    for _, label in chart.legend:
        assert str(escape(label)) in html


def test_evidence_lists_plan_sources_once_and_adds_only_uncited_method_sources():
    data = make_plan(weeks=4)
    data["sources"] = data["sources"] + [data["sources"][0]]
    listed = content.evidence(parse_plan(data))
    assert listed.count(data["sources"][0]) == 1
    # The fixture cites Turner & Robling 2003 itself, so the handout does not add it again.
    assert sum("Exerc Sport Sci Rev 31(1):45-50" in s for s in listed) == 1
    assert any("J Exp Biol 204:3389-3399" in s for s in listed)  # Robling, Burr & Turner 2001


# Invented people covering the planner's main branches (no real records).
_VARIED_RECORDS = [
    {"patient_id": "NTC-0101", "age_years": 78, "sex": "female", "body_mass_kg": 52, "height_cm": 155,
     "t_scores": {"lumbar_spine": -3.4, "total_hip": -2.9},
     "fractures": [{"site": "vertebra", "months_ago": 14, "low_trauma": True}], "falls_past_year": 2,
     "timed_up_and_go_s": 14.2, "conditions": ["thoracic_kyphosis"], "pain_score": 3},
    {"patient_id": "NTC-0102", "age_years": 58, "sex": "male", "body_mass_kg": 84, "height_cm": 178,
     "t_scores": {"femoral_neck": -1.6}, "fractures": [], "falls_past_year": 0, "conditions": [],
     "pain_score": 0},
    {"patient_id": "NTC-0103", "age_years": 71, "sex": "female", "body_mass_kg": 66, "height_cm": 160,
     "t_scores": {"lumbar_spine": -2.6}, "fractures": [{"site": "wrist", "months_ago": 30, "low_trauma": True}],
     "falls_past_year": 1, "chair_stand_30s": 8, "conditions": ["knee_osteoarthritis"], "pain_score": 2},
]


@pytest.mark.parametrize("record", _VARIED_RECORDS, ids=lambda r: r["patient_id"])
def test_handouts_of_varied_real_plans_carry_cautions_and_every_exercise(record):

    plan = planner_plan(12, record)
    html = render_html(plan, clinic=DEMO_CLINIC)
    assert STANDARD_CAUTIONS[1] in html and record["patient_id"] in html
    for name in {e.name for w in plan.weeks for s in w.sessions for e in s.exercises}:
        assert name in html
    for svg in (charts.impacts_chart_svg(plan), charts.intensity_chart_svg(plan)):
        _svg(svg)


def test_review_weeks_read_as_a_phrase():
    assert content.weeks_phrase([]) == ""
    assert content.weeks_phrase([7]) == "week 7"
    assert content.weeks_phrase([7, 15]) == "weeks 7 and 15"
    assert content.weeks_phrase([7, 15, 22]) == "weeks 7, 15 and 22"
