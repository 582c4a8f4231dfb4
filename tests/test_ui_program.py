"""The program on screen, swaps, charts, words and clinic settings, without a browser.

People here are invented.  The words for effort and load are checked against the scales
they come from (Borg 1982, Med Sci Sports Exerc 14:377-381 for CR10 anchors; ACSM 2009,
Med Sci Sports Exerc 41:687-708 for % 1RM bands); the planner's numbers themselves are
tested in the planner's tests.
"""

from __future__ import annotations

import html
import re

import pytest

from prescribe.plan_schema import PlanLimits, PlannedExercise
from prescribe.ui import ClinicApp, ClinicSession
from prescribe.ui import program_model as pm
from prescribe.ui.charts import band_outline, weak_bands, whole_ticks
from prescribe.ui.history_view import history_html
from prescribe.ui.program_view import progression_html, stages_html
from prescribe.ui.wording import exercise_names, field_words, plain

# An invented woman of 62, femoral-neck T-score -2.6 (osteoporosis, WHO 1994): a program
# that starts at low impact (minutes of walking) and steps up to moderate impact later.
PERSON = {"patient_id": "DEMO-PV-1", "age_years": "62", "sex": "female", "body_mass_kg": "64",
          "height_cm": "163", "t_scores.femoral_neck": "-2.6"}


def _text(value: str) -> str:
    return html.unescape(re.sub(r"<[^>]+>", " ", value))


@pytest.fixture
def clinic_env(tmp_path, monkeypatch):
    """No clinic settings: an empty config folder and settings file of this test's own."""
    monkeypatch.setenv("XDG_CONFIG_HOME", str(tmp_path / "config"))
    monkeypatch.delenv("PRESCRIBE_SETTINGS", raising=False)
    monkeypatch.delenv("PRESCRIBE_CLINIC_NAME", raising=False)
    monkeypatch.delenv("PRESCRIBE_CLINIC_CONTACT", raising=False)
    return tmp_path / "config" / "prescribe" / "settings.toml"


@pytest.fixture
def app(tmp_db, clinic_env):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    for key, value in PERSON.items():
        app.intake.inputs[key].value = value
    app.submit_button.click()
    assert app.errors.last == "", app.errors.last
    return app


def _ex(**kw) -> PlannedExercise:
    base = dict(exercise_id="x_y", name="X", category="resistance", impact_level=0, peak_grf_bw=1.0)
    return PlannedExercise(**{**base, **kw})


# -- words for dose and load ---------------------------------------------------------------

def test_load_words_follow_the_scales_they_come_from():
    # ACSM 2009: 80% 1RM and more is heavy; 60-70% moderate.
    assert pm.load_words(_ex(intensity="80% 1RM")) == "heavy load, 80% 1RM"
    assert pm.load_words(_ex(intensity="65% 1RM")) == "moderate load, 65% 1RM"
    # Borg CR10 anchors: 3 moderate, 5 strong ("hard"), 7 very strong ("very hard").
    assert pm.load_words(_ex(intensity="RPE 3-4")) == "moderate effort (RPE 3-4)"
    assert pm.load_words(_ex(intensity="RPE 5-6")) == "hard effort (RPE 5-6)"
    assert pm.load_words(_ex(intensity="RPE 6-7")) == "hard to very hard effort (RPE 6-7)"
    # A working load where the program has one (an adjusted program carries load_kg).
    assert pm.load_words(_ex(intensity="70% 1RM", load_kg=32.5)) == "moderately heavy load, 70% 1RM, about 32.5 kg"
    assert pm.load_words(_ex(intensity="challenging but safe")) == "challenging but safe"


def test_dose_words_say_sets_reps_impacts_bouts_and_minutes():
    assert pm.dose_words(_ex(sets=3, reps=8)) == "3 sets x 8 reps"
    assert pm.dose_words(_ex(category="impact", impact_level=2, impacts=60, sets=6, bouts=2,
                             bout_gap_hours=8.0)) == "60 impacts in 6 sets, split into 2 bouts about 8 h apart"
    assert pm.dose_words(_ex(category="impact", impact_level=1, minutes=20.0)) == "20 minutes"


def test_supervision_follows_the_products_rule():
    # PRODUCT.md: supervision wherever 80% 1RM or more, or high impact, is prescribed.
    assert pm.supervised(_ex(intensity="80% 1RM")) is True
    assert pm.supervised(_ex(intensity="75% 1RM")) is False
    assert pm.supervised(_ex(category="impact", impact_level=3, peak_grf_bw=4.5)) is True
    assert pm.supervised(_ex(category="impact", impact_level=2, peak_grf_bw=3.0)) is False
    # Limits asking for supervised (or carer-led) sessions make every exercise supervised.
    limits = PlanLimits(max_impact_level=2, max_impacts_per_session=40, supervision=True)
    assert pm.supervised(_ex(), limits) is True
    assert pm.supervised(_ex(), limits.model_copy(update={"supervision": False, "carer_led": True})) is True
    assert pm.supervised(_ex(), limits.model_copy(update={"supervision": False})) is False
    # The program's own mark counts too; an unmarked heavy lift is still shown supervised.
    assert pm.supervised(_ex(intensity="RPE 3-4", supervised=True)) is True
    assert pm.supervised(_ex(intensity="85% 1RM", supervised=False)) is True


# -- the program on screen -----------------------------------------------------------------

def test_a_week_is_shown_day_by_day_with_each_exercise_its_dose_load_and_supervision(app):
    plan = app.session.plan
    view = app.program_view
    assert view.week_select.value == 1
    text = _text(view.days.value)
    week1 = plan.weeks[0]
    for session in week1.sessions:
        assert pm.DAY_NAMES[session.day - 1] in text
        for ex in session.exercises:
            assert ex.name in text and pm.dose_words(ex) in text and pm.load_words(ex) in text
    assert "Supervision" in text and ("on own" in text or "supervised" in text)
    # Walking-type work is in minutes at low impact.
    assert re.search(r"\d+ minutes", text)


def test_choosing_another_week_shows_that_week(app):
    plan = app.session.plan
    late = next(w for w in plan.weeks if w.impacts_per_session > 0)
    app.program_view.week_select.value = late.week
    text = _text(app.program_view.days.value)
    impact_ex = next(x for s in late.sessions for x in s.exercises if x.impacts)
    assert impact_ex.name in text and f"{impact_ex.impacts} impacts" in text
    # A change to the program keeps the chosen week.
    app.sessions["resistance"].value = 2
    assert app.program_view.week_select.value == late.week


def test_the_progression_at_a_glance_has_levels_work_strength_weak_windows_and_reviews(app):
    plan = app.session.plan
    rows = pm.progression(plan)
    covered = [w for r in rows for w in range(r.first, r.last + 1)]
    assert covered == [w.week for w in plan.weeks]  # every week once, in order
    assert len(rows) < len(plan.weeks)               # at a glance: consecutive same weeks merged
    stages = _text(app.program_view.stages.value)
    assert "minutes walking-type work" in stages and "impacts per session" in stages
    assert "weak window" in stages
    assert all(f"week {w.week}" in stages for w in plan.weeks if w.reassessment)
    table = _text(app.week_table.value)
    assert "resistance intensity" not in table and "_" not in table


def test_the_app_dates_each_review_from_the_programs_start_date(app):
    # PRODUCT.md: week N runs from start_date + 7(N-1) days.
    from datetime import date, timedelta

    plan = app.session.plan.model_copy(update={"start_date": "2026-06-01"})
    reviews = [w.week for w in plan.weeks if w.reassessment]
    assert reviews
    stages, weeks = _text(stages_html(plan)), _text(progression_html(plan))
    for week in reviews:
        when = date(2026, 6, 1) + timedelta(days=7 * (week - 1))
        words = f"{when.day} {when.strftime('%B %Y')}"
        assert words in stages and words in weeks


def test_weeks_where_impacts_do_not_apply_say_minutes_not_zero_impacts(app):
    for wk in app.session.plan.weeks:
        words = pm.impact_work_words(wk)
        if wk.impacts_per_session == 0:
            assert "0 impacts" not in words and "minutes" in words
        else:
            assert words == f"{wk.impacts_per_session} impacts per session"


# -- swaps ---------------------------------------------------------------------------------

def _swappable(app):
    ids = [i for i, _ in app.session.plan_exercises()]
    return next(i for i in ids if app.session.swap_candidates(i))


def test_a_swap_asks_first_saying_what_will_change_and_then_says_what_changed(app):
    old = _swappable(app)
    app.exercise_select.value = old
    new = app.replacement_select.value
    names = exercise_names()
    before = app.session.plan
    app.swap_button.click()
    panel = app.program_view.swap
    assert panel.pending == (old, new) and app.session.plan is before  # nothing changed yet
    preview = _text(panel.confirm_text.value)
    assert f"{names[old]} is replaced by {names[new]}" in preview and "dose stays as prescribed" in preview
    assert panel.confirm_box.layout.display == "flex"
    panel.confirm_button.click()
    assert app.errors.last == ""
    used = [i for i, _ in app.session.plan_exercises()]
    assert new in used and old not in used
    status = _text(panel.status.value)
    assert f"Swapped: {names[new]} now replaces {names[old]}" in status
    # The list keeps the swapped-in exercise chosen (not the first entry).
    assert app.exercise_select.value == new
    assert panel.confirm_box.layout.display == "none"


def test_a_harder_swap_in_weeks_3_to_5_of_a_running_program_is_refused_in_plain_words(app):
    # No increase of any kind in weeks 3-5 after a new stimulus (Eriksen 1986, Endocr Rev 7:379;
    # Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143): the program's start opens a window,
    # so a swap to a harder exercise made in its week 3 is refused, naming the rule and the week.
    from datetime import date, timedelta

    from prescribe.catalogue import default_catalogue
    from prescribe.safety.facts import _catalogue_entries
    from prescribe.safety.progression import harder_reason

    assert app.session.set_start_date(date.today() - timedelta(days=14))  # today is week 3
    entries = _catalogue_entries(default_catalogue())
    old, new = next((o, n) for o, _ in app.session.plan_exercises() for n, _ in app.session.swap_candidates(o)
                    if harder_reason(entries[n], entries[o]) and entries[n].family == entries[o].family)
    before = app.session.plan
    assert app.session.swap(old, new) is False
    assert app.session.plan is before
    refusal = app.session.refusal
    assert "safety rule: No escalation in weeks 3-5" in refusal and "week 3" in refusal and new in refusal
    assert "weak_window" not in refusal  # the rule by its title, never its id


def test_cancel_changes_nothing(app):
    app.exercise_select.value = _swappable(app)
    before = app.session.plan
    app.swap_button.click()
    app.program_view.swap.cancel_button.click()
    assert app.session.plan is before and app.program_view.swap.pending is None


def test_the_chosen_replacement_stays_chosen_after_a_redraw(app):
    old = _swappable(app)
    app.exercise_select.value = old
    options = [v for _, v in app.replacement_select.options]
    assert len(options) >= 2
    app.replacement_select.value = options[-1]
    app.refresh(store=False)
    assert app.exercise_select.value == old and app.replacement_select.value == options[-1]


def test_candidates_are_shown_by_name_with_level_and_force_never_by_id(app):
    app.exercise_select.value = _swappable(app)
    names = exercise_names()
    for label, cid in app.replacement_select.options:
        assert label.startswith(names[cid]) and "level " in label and "x body weight" in label
        assert cid not in label or "_" not in cid
    for label, eid in app.exercise_select.options:
        assert "_" not in label


def test_swapping_into_an_exercise_already_in_the_program_is_refused_not_merged(app):
    session = app.session
    used = [i for i, _ in session.plan_exercises()]
    from prescribe.catalogue import default_catalogue
    cat = default_catalogue()
    # Two exercises of the program of the same kind: swapping one into the other would merge them.
    old, new = next((a, b) for a in used for b in used
                    if a != b and cat.get(a).category == cat.get(b).category)
    before = session.plan
    assert session.swap(old, new) is False
    assert session.plan is before
    names = exercise_names()
    assert session.refusal.startswith(f"{names[new]} is already in the program")
    assert "merge" in session.refusal and "Nothing was changed" in session.refusal
    # In the app: the refusal is said at once, in words, with no confirmation asked.
    app.exercise_select.value = old
    app.replacement_select.options = [(names[new], new)]
    app.replacement_select.value = new
    app.swap_button.click()
    assert app.program_view.swap.pending is None
    shown = _text(app.refusal.value)
    assert f"{names[new]} is already in the program" in shown and "_" not in shown


# -- charts --------------------------------------------------------------------------------

def test_count_axes_have_whole_ticks_each_once_and_an_all_zero_axis_is_0_and_1():
    assert whole_ticks(0) == [0, 1]
    for top in (1, 3, 7, 38, 50, 100, 120):
        ticks = whole_ticks(top)
        assert ticks[0] == 0 and ticks[-1] >= top and len(set(ticks)) == len(ticks) <= 6
        assert all(isinstance(t, int) for t in ticks)


def test_weak_window_shading_is_continuous_bands():
    weeks = list(range(1, 11))
    weak = [False, False, True, True, True, False, False, True, True, False]
    assert weak_bands(weeks, weak) == [(2.5, 5.5), (7.5, 9.5)]
    x, y = band_outline(weeks, weak)
    # Where one weak week ends the next begins: no gap between them.
    assert list(x[5:7]) == [3.5, 3.5] and list(y[4:8]) == [1, 1, 1, 1]


def test_the_charts_show_minutes_where_impacts_do_not_apply_and_no_legend_over_the_lines(app):
    charts = app.charts
    plan = app.session.plan
    minutes = list(charts.minute_bars.y)
    for wk, n, m in zip(plan.weeks, charts.impact_bars.y, minutes):
        if wk.impacts_per_session == 0:
            assert n == 0 and m > 0   # low-impact weeks: minutes of walking-type work
        else:
            assert m == 0 and n == wk.impacts_per_session
    assert charts.minutes_axis.visible and charts.impacts_axis.visible
    assert list(charts.impacts_axis.tick_values) == whole_ticks(max(w.impacts_per_session for w in plan.weeks))
    assert not charts.level_line.display_legend and not charts.oi_line.display_legend
    # A program at low impact only: the impacts axis is not drawn, its ticks would be 0 and 1.
    from prescribe.ui.session import ChartSeries
    charts.update(ChartSeries(week=[1, 2, 3], impacts_per_session=[0, 0, 0], impact_level=[1, 1, 1],
                              osteogenic_index=[50.0, 55.0, 55.0], weak_window=[False, False, True],
                              impact_minutes=[10.0, 15.0, 15.0]))
    assert not charts.impacts_axis.visible and list(charts.impacts_axis.tick_values) == [0, 1]
    assert charts.minutes_axis.visible and list(charts.minute_bars.y) == [10, 15, 15]


# -- words ---------------------------------------------------------------------------------

def test_internal_names_become_plain_words():
    text = plain("Refused (rule 1): start_level 2 is above the screening's max_impact_level (1): "
                 "back_squat, saved 2026-12-02T09:41:12.123456+00:00")
    assert "_" not in text and "Back squat" in text and "start level 2" in text
    assert "2026-12-02T" not in text and ".123456" not in text and "Dec 2026" in text
    # One-word ids are words already: "Brisk walking" stays as it is.
    assert plain("Brisk walking is replaced by Walking") == "Brisk walking is replaced by Walking"
    assert field_words("age_years must be a whole number from 18 to 110 (years), not 12.") == \
        "Age must be a whole number from 18 to 110 (years), not 12."


def test_condition_boxes_show_the_meaning_from_the_record_vocabulary(app):
    from prescribe.records import CONDITIONS
    for code, box in app.intake.conditions.items():
        assert CONDITIONS[code]
        assert f'title="{html.escape(CONDITIONS[code], quote=True)}"' in box.description
        assert box.tooltip == CONDITIONS[code]
        assert "_" not in _text(box.description)


def test_the_history_is_readable_and_keeps_the_note_written_with_the_save(app):
    app.clinician.value = "AB"
    app.save_note.value = "First program after the DXA (invented)."
    app.save_button.click()
    assert app.errors.last == ""
    text = _text(app.history.value)
    assert "First program after the DXA (invented)." in text
    assert app.save_note.value == ""
    assert not re.search(r"\d{4}-\d{2}-\d{2}T", text) and "_" not in text
    assert re.search(r"\d{1,2} [A-Z][a-z]{2} \d{4}, \d{2}:\d{2}", text)
    rows = app.session.versions()
    assert rows[-1]["note"] == "First program after the DXA (invented)."
    assert "Saved on" in history_html(rows)


def test_the_intake_is_labelled_as_the_baseline(app):
    assert "baseline" in app.person_section.children[0].value.lower()
    intro = app.intake.widget.children[0].value
    assert "baseline" in intro and "live-session" in intro
    from prescribe.records import FIELD_META
    assert "baseline" in FIELD_META["pain_score"]["label"].lower()


# -- the clinic's settings -----------------------------------------------------------------

def test_without_a_clinic_name_the_app_asks_once_and_the_handout_then_shows_it(app, clinic_env):
    form = app.clinic_settings
    assert form.form.layout.display == "flex"
    form.name.value = "Hillside Bone Clinic (invented)"
    form.contact.value = ""
    assert form.save() is False
    assert "clinic contact" in form.message.value and not clinic_env.exists()
    form.contact.value = "555-0142"
    assert form.save() is True
    assert form.form.layout.display == "none" and clinic_env.exists()
    doc = app.session.handout("html").decode("utf-8")
    assert "Hillside Bone Clinic (invented)" in doc and "555-0142" in doc
    # A fresh page does not ask again.
    other = ClinicApp(ClinicSession(store_url=app.session.store_url))
    assert other.clinic_settings.form.layout.display == "none"


def test_the_demo_writes_the_invented_clinic_to_the_settings_file(tmp_path, monkeypatch, clinic_env):
    from prescribe import demo, settings
    target = tmp_path / "demo-settings.toml"
    assert demo.main(["--db", str(tmp_path / "demo.db"), "--settings", str(target)]) == 0
    monkeypatch.setenv("PRESCRIBE_SETTINGS", str(target))
    assert settings.clinic() == demo.DEMO_CLINIC
    assert "555-0100" in settings.clinic().contact


def test_a_rebuild_never_replays_a_swap_into_an_exercise_the_program_already_has(app):
    session = app.session
    used = [i for i, _ in session.plan_exercises()]
    from prescribe.catalogue import default_catalogue
    cat = default_catalogue()
    old, new = next((a, b) for a in used for b in used
                    if a != b and cat.get(a).category == cat.get(b).category)
    # A kept swap whose replacement the rebuilt program already uses (the planner chose it itself).
    session.swaps = [(old, new)]
    assert session.build(), session.refusal
    after = [i for i, _ in session.plan_exercises()]
    assert old in after and new in after  # both kept: nothing merged
    assert session.swaps == [] and old in session.program_note


def test_an_effort_with_its_own_note_reads_without_nested_brackets():
    assert pm.load_words(_ex(intensity="RPE 7-8 (an 8-12RM load)")) == "very hard effort, RPE 7-8 (an 8-12RM load)"


def test_each_line_of_the_week_says_why_with_its_sources():
    # The plan's own reasons (prescribe.planning.why), the same the clinician's pages print.
    from handout_fixtures import planner_plan
    from prescribe.ui.program_view import days_html
    plan = planner_plan(26)
    days = pm.week_days(plan, 4)
    assert days and all(line.why for d in days for line in d.lines)
    page = days_html(days)
    assert page.count("<tr>") - len(days) == sum(len(d.lines) for d in days)   # one row a line (and a heading row a day)
    assert page.count("Chosen:") >= sum(len(d.lines) for d in days)
    assert "This week:" in page and "<summary>Sources</summary>" in page
    sources = {src for d in days for line in d.lines for _a, _r, src in line.why}
    assert all(html.escape(src, quote=True) in page for src in sources)
