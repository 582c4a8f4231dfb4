"""The app's panels without a browser: build the widgets, set values, click, assert on the results.

People here are invented.  Clinical numbers are the engines' business (tested against their
sources in the screening and planner tests); these tests check that the app shows them,
refuses what the engines refuse and loses nothing.
"""

from __future__ import annotations

import base64
import html
import re

import pytest

from prescribe.ui import ClinicApp, ClinicSession

# An invented woman of 62 with a femoral-neck T-score of -2.6: osteoporosis by the WHO
# categories (WHO 1994, Technical Report Series 843: T-score -2.5 or below).
PERSON = {"patient_id": "DEMO-UI-1", "age_years": "62", "sex": "female", "body_mass_kg": "64",
          "height_cm": "163", "t_scores.femoral_neck": "-2.6"}


def make_app(db: str) -> ClinicApp:
    return ClinicApp(ClinicSession(store_url=db))


def type_person(app: ClinicApp, person: dict = PERSON) -> None:
    for key, value in person.items():
        app.intake.inputs[key].value = value
    app.submit_button.click()
    assert app.errors.last == "", app.errors.last


@pytest.fixture
def app(tmp_db):
    app = make_app(tmp_db)
    type_person(app)
    return app


def test_screening_shows_category_cap_and_every_flag_with_its_source(app):
    s = app.session.screening
    text = html.unescape(app.screening_view.value)
    assert s.bone_density_category == "osteoporosis"  # WHO 1994 (see PERSON)
    assert "osteoporosis (lowest T-score -2.6 at femoral neck)" in text
    assert f"{s.max_impact_level} - " in text
    assert len(s.flags) >= 1
    for flag in s.flags:
        assert flag.message in text and f"Source: {flag.source}" in text


def test_program_table_and_charts_follow_the_plan(app):
    plan = app.session.plan
    assert app.charts is not None
    assert list(app.charts.level_line.y) == [w.impact_level for w in plan.weeks]
    assert list(app.charts.impact_bars.y) == [w.impacts_per_session for w in plan.weeks]
    weak = [bool(w.weak_window) for w in plan.weeks]
    # The shading outline is two points a week (its start and end), 1 over weak weeks.
    assert [bool(v) for v in app.charts.shade2.y[::2]] == weak
    assert [bool(v) for v in app.charts.shade2.y[1::2]] == weak
    assert app.week_table.value.count("<tr") == len(plan.weeks) + 1
    assert f"weeks: <b>{len(plan.weeks)}</b>" in app.dose.value


def test_changing_the_start_level_rebuilds_the_program_and_charts_at_once(app):
    cap = app.session.screening.max_impact_level
    first = app.session.plan.weeks[0].impact_level
    new = next(level for level in range(cap + 1) if level != first)
    app.start_level.value = new
    assert app.session.refusal is None
    assert app.session.plan.weeks[0].impact_level == new
    assert app.charts.level_line.y[0] == new


def test_an_unsafe_start_level_is_refused_with_the_reason_and_the_program_kept(app):
    cap = app.session.screening.max_impact_level
    if cap >= 3:
        pytest.fail("the invented person should have an impact cap below 3")
    before = app.session.plan
    app.start_level.value = cap + 1
    refusal = html.unescape(app.refusal.value)
    assert "Refused" in refusal and str(cap) in refusal
    assert app.session.plan is before
    assert app.start_level.value == before.weeks[0].impact_level  # the control shows what is in force


def test_bad_weeks_are_refused_naming_the_option(app):
    before = app.session.plan
    app.weeks.value = "5"
    assert "weeks must be" in html.unescape(app.refusal.value) and "not 5" in app.refusal.value
    assert app.session.plan is before


def test_sessions_per_week_change_the_program(app):
    app.sessions["impact"].value = 2
    assert app.session.refusal is None
    assert app.session.options["impact_sessions_per_week"] == 2


def test_swap_and_leave_out_an_exercise(app):
    ids = [i for i, _ in app.session.plan_exercises()]
    swappable = next(i for i in ids if app.session.swap_candidates(i))
    app.exercise_select.value = swappable
    replacement = app.replacement_select.options[0][1]
    app.swap_button.click()  # asks first; nothing changes until confirmed
    assert swappable in [i for i, _ in app.session.plan_exercises()]
    app.program_view.swap.confirm_button.click()
    assert app.errors.last == "" and app.session.refusal is None, app.session.refusal
    now = [i for i, _ in app.session.plan_exercises()]
    assert swappable not in now and replacement in now
    # Leave one out: a strength exercise (the planner has others of its kind) is left out and
    # the planner rebuilds without it.
    target = next(x.exercise_id for w in app.session.plan.weeks for s in w.sessions for x in s.exercises
                  if x.category == "resistance")
    app.exercise_select.value = target
    app.exclude_button.click()
    assert app.session.refusal is None, app.session.refusal
    assert target not in [i for i, _ in app.session.plan_exercises()]


def test_handout_preview_and_pdf_download_link(app):
    shown = []
    app.download.observe(lambda change: shown.append(change["new"]), names="value")
    app.preview_button.click()
    assert "pr-handout-iframe" in app.preview.value and "DEMO-UI-1" in html.unescape(app.preview.value)
    app.pdf_button.click()
    match = re.search(r'href="data:application/pdf;base64,([^"]+)"', app.download.value)
    assert match, app.errors.last
    assert base64.b64decode(match.group(1)).startswith(b"%PDF")
    assert 'download="handout-DEMO-UI-1.pdf"' in app.download.value
    # While the PDF is being made the clinician sees that it is on its way.
    assert any("Preparing the PDF" in v for v in shown) and shown[-1] == app.download.value


def test_save_needs_a_clinician_then_keeps_every_version(app, tmp_db):
    app.save_button.click()
    assert "clinician" in app.errors.last
    app.clinician.value = "AB"
    app.save_button.click()
    assert "program version 1" in app.store_status.value
    app.start_level.value = 0
    app.save_button.click()
    assert "program version 2" in app.store_status.value
    rows = app.session.versions()
    assert [r["version"] for r in rows] == [1, 2] and rows[1]["based_on_version"] == 1
    assert app.history.value.count("<tr") == 3  # the heading and two versions, the one on the page marked
    assert app.history.value.count("pr-history-shown") == 1
    # A new app over the same store lists and reopens the person with the latest program.
    other = make_app(tmp_db)
    assert "DEMO-UI-1" in [v for _, v in other.load_select.options]
    other.load_select.value = "DEMO-UI-1"
    other.load_button.click()
    assert other.intake.inputs["t_scores.femoral_neck"].value == "-2.6"
    assert other.intake.inputs["sex"].value == "female"
    assert other.session.saved_version == 2
    assert other.session.plan.weeks[0].impact_level == 0


def test_a_stale_save_is_refused_and_the_program_stays_open(app, tmp_db):
    app.clinician.value = "AB"
    app.save_button.click()
    other = make_app(tmp_db)
    other.load_select.value = "DEMO-UI-1"
    other.load_button.click()
    other.clinician.value = "CD"
    other.save_button.click()                 # version 2, by CD
    app.start_level.value = 0
    kept = app.session.plan
    app.save_button.click()                   # AB's save was based on version 1
    assert "Not saved" in html.unescape(app.store_status.value)
    assert app.session.plan is kept
    assert [r["clinician"] for r in app.session.versions()] == ["AB", "CD"]


def test_new_person_clears_the_form_and_the_program(app):
    app.clinician.value = "AB"
    app.save_button.click()  # saved: nothing would be lost, so nothing is asked
    app.new_button.click()
    assert app.session.record is None and app.session.plan is None
    assert app.intake.inputs["patient_id"].value == ""
    assert "Check the person's details" in app.screening_view.value
    assert list(app.charts.level_line.y) == []


def test_a_change_made_while_the_background_loading_redraws_is_not_lost(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db), warm_up=True)
    type_person(app)                      # typing starts the background loading
    cap = app.session.screening.max_impact_level
    for level in (cap, 0, cap, 0):
        app.start_level.value = level
    app.warm_thread.join(timeout=60)
    assert not app.warm_thread.is_alive()
    assert app.session.plan.weeks[0].impact_level == 0 == app.start_level.value
    assert app.charts.level_line.y[0] == 0


def test_one_box_keeps_the_standard_cautions_and_each_section_shows_its_own(app):
    from prescribe.cautions import STANDARD_CAUTIONS
    top = html.unescape(app.top_cautions.value)
    assert all(c in top for c in STANDARD_CAUTIONS) and "pr-cautions-always" in app.top_cautions._dom_classes
    screening_own = [c for c in app.session.screening.cautions if c not in STANDARD_CAUTIONS]
    plan_own = [c for c in app.session.plan.cautions if c not in STANDARD_CAUTIONS and c not in screening_own]
    assert screening_own and plan_own  # the invented person's osteoporosis brings cautions of its own
    boxes = {css: html.unescape(box.value) for css, box in app.section_caution_boxes.items()}
    assert all(c in boxes["pr-section-screening"] for c in screening_own)
    assert all(c in boxes["pr-section-program"] for c in plan_own)
    # Every caution of the screening and the plan is on the page; none of the standard ones is repeated.
    everything = " ".join(boxes.values())
    assert all(c in everything or c in top for c in app.session.cautions)
    assert not any(c in text for c in STANDARD_CAUTIONS for text in boxes.values())


def test_a_reopened_program_keeps_its_options_and_swaps_when_changed(app, tmp_db):
    # The clinician sets 30 weeks and 2 impact sessions, swaps an exercise and saves.
    app.weeks.value = "30"
    app.sessions["impact"].value = 2
    ids = [i for i, _ in app.session.plan_exercises()]
    swappable = next(i for i in ids if app.session.swap_candidates(i))
    app.exercise_select.value = swappable
    replacement = app.replacement_select.options[0][1]
    app.swap_button.click()
    app.program_view.swap.confirm_button.click()
    assert app.session.refusal is None, app.session.refusal
    app.clinician.value = "AB"
    app.save_button.click()
    # Reopened elsewhere, one change (the start level) rebuilds that program, not the defaults.
    other = make_app(tmp_db)
    other.load_select.value = "DEMO-UI-1"
    other.load_button.click()
    assert other.session.options["weeks"] == 30 and other.session.options["impact_sessions_per_week"] == 2
    assert other.session.swaps == [(swappable, replacement)]
    assert other.weeks.value == "30" and other.sessions["impact"].value == 2
    other.start_level.value = 0
    assert other.session.refusal is None, other.session.refusal
    plan = other.session.plan
    used = {e.exercise_id for w in plan.weeks for s in w.sessions for e in s.exercises}
    assert len(plan.weeks) == 30 and plan.weeks[0].impact_level == 0
    assert replacement in used and swappable not in used


def test_session_choices_are_exactly_what_the_planner_accepts(app):
    from prescribe.planning import PlanOptions

    from prescribe.errors import InputError
    from prescribe.planning import option_range

    for kind, dd in app.sessions.items():
        name = f"{kind}_sessions_per_week"
        offered = [v for _, v in dd.options if isinstance(v, int)]
        for n in offered:  # each offered number builds
            PlanOptions(**{name: n})
        for n in (offered[0] - 1, offered[-1] + 1):  # and the numbers just outside are refused
            with pytest.raises(InputError):
                PlanOptions(**{name: n})
        assert offered == app.session.session_choices(kind)
        assert (offered[0], offered[-1]) == option_range(name)
    assert app.session.session_choices("resistance") == [1, 2, 3]


def test_back_to_the_planners_choice_clears_a_session_count(app):
    app.sessions["resistance"].value = 3
    assert app.session.options["resistance_sessions_per_week"] == 3
    app.sessions["resistance"].value = app.sessions["resistance"].options[0][1]  # "planner's choice"
    assert "resistance_sessions_per_week" not in app.session.options
    assert app.session.refusal is None


def test_a_swap_whose_exercise_is_gone_is_dropped_with_a_note(app):
    ids = [i for i, _ in app.session.plan_exercises()]
    swappable = next(i for i in ids if app.session.swap_candidates(i))
    replacement = app.session.swap_candidates(swappable)[0][0]
    assert app.session.swap(swappable, replacement)
    # Leaving out the replacement makes the planner choose afresh; the old swap no longer applies.
    assert app.session.build(exclude=[replacement, swappable]), app.session.refusal
    assert app.session.swaps == []
    assert swappable in (app.session.program_note or "")
    app.refresh(store=False)
    assert "no longer applies" in html.unescape(app.refusal.value)


def test_two_clinicians_changing_the_same_person_never_overwrite_each_other(app, tmp_db):
    app.clinician.value = "AB"
    app.save_button.click()
    other = make_app(tmp_db)
    other.load_select.value = "DEMO-UI-1"
    other.load_button.click()
    other.clinician.value = "CD"
    other.intake.inputs["body_mass_kg"].value = "66"
    other.submit_button.click()
    other.save_button.click()                 # CD changes the record: record version 2
    app.intake.inputs["body_mass_kg"].value = "61"
    app.submit_button.click()
    app.save_button.click()                   # AB's change was based on record version 1
    status = html.unescape(app.store_status.value)
    assert "Not saved" in status and "record version 1" in status and "CD" in status
    assert app.session.record.body_mass_kg == 61  # AB's change stays open, nothing lost
    from prescribe.store import open_store
    with open_store(tmp_db) as store:
        assert store.get_patient("DEMO-UI-1").body_mass_kg == 66
        assert store.record_version("DEMO-UI-1") == 2


def test_under_the_hub_the_clinician_is_the_login_and_cannot_be_edited(tmp_db, monkeypatch):
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    app = make_app(tmp_db)
    assert app.clinician.value == "mara.teal" and app.clinician.disabled
    type_person(app)
    app.save_button.click()
    assert "program version 1" in app.store_status.value, app.errors.last
    assert [r["clinician"] for r in app.session.versions()] == ["mara.teal"]
    app.clinician.value = "someone.else"      # a changed value (the field is disabled) is refused
    app.save_button.click()
    assert "mara.teal" in app.errors.last and "someone.else" in app.errors.last
    assert [r["clinician"] for r in app.session.versions()] == ["mara.teal"]


def _draft(tmp_db, name="Osteopenia start (invented clinic)"):
    from prescribe.store import open_store
    with open_store(tmp_db) as store:
        return store.add_template(name, {"weeks": 12}, "rui.amsel")


def test_a_clinician_may_not_approve_a_template_and_a_lead_may(tmp_db, monkeypatch):
    _draft(tmp_db)
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    monkeypatch.setenv("PRESCRIBE_HUB_ROLE", "clinician")
    app = make_app(tmp_db)
    app.refresh()
    panel = app.templates_view
    panel.open()  # the clinic templates section is built when it is opened
    assert "role: <b class='pr-role'>clinician</b>" in panel.role.value
    panel.drafts.value = "Osteopenia start (invented clinic)@1"
    panel.approve_draft_button.click()
    # Refused beside the button pressed (not at the top of the page), naming who may.
    refusal = html.unescape(panel.draft_status.value)
    assert "Not approved" in refusal and "mara.teal" in refusal and "clinic lead" in refusal
    assert app.errors.last == ""
    assert [t["status"] for t in app.session.store.templates()] == ["draft"]
    monkeypatch.setenv("JUPYTERHUB_USER", "lena.vos")
    monkeypatch.setenv("PRESCRIBE_HUB_ROLE", "lead")
    lead = make_app(tmp_db)
    lead.refresh()
    lead.templates_view.open()
    assert "lead" in lead.templates_view.role.value
    lead.templates_view.drafts.value = "Osteopenia start (invented clinic)@1"
    lead.templates_view.approve_draft_button.click()
    assert lead.errors.last == "", lead.errors.last
    [row] = lead.session.store.templates()
    assert row["status"] == "approved" and row["approved_by"] == "lena.vos"
    assert "Approved" in lead.templates_view.draft_status.value
    assert lead.templates_view.drafts.options == (("- no drafts -", None),)


def test_the_program_starts_today_or_on_the_chosen_day(app):
    # PRODUCT.md: week N runs from start_date + 7(N-1) days; today unless the clinician chooses.
    import datetime
    assert app.session.plan.start_date == datetime.date.today().isoformat()
    assert app.start_date.value == datetime.date.today()
    app.start_date.value = datetime.date(2026, 12, 7)
    assert app.session.refusal is None, app.session.refusal
    assert app.session.plan.start_date == "2026-12-07"
    # Not a date: refused naming the value, the program keeps its start.
    assert not app.session.set_start_date("next Monday")
    assert "next Monday" in app.session.refusal and app.session.plan.start_date == "2026-12-07"


def _widget_models() -> int:
    import warnings
    import ipywidgets
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # Widget.widgets: the registry of live models
        return len(ipywidgets.Widget.widgets)


def test_a_page_builds_only_what_a_first_visit_shows(tmp_db):
    # Every widget is a model the server sends and the browser builds when the page opens
    # (benchmarks/bench_app.py measures the time); the sections a first visit does not use
    # are built when opened, and default layouts and styles are shared.  Was 1,198 models
    # with every section built at once and a model of each kind for every widget.
    before = _widget_models()
    app = ClinicApp(ClinicSession(store_url=tmp_db), warm_up=True)
    opened = _widget_models() - before
    assert not (app.live.section.built or app.sensor_panel.section.built or app.templates_view.section.built)
    # The version-2 intake form (medicines, operations, cancer, Z-scores, the person's situation) and
    # the record-system upload added about 40 models to the first page (was under 300 before them).
    assert opened < 340, f"{opened} widget models at page open"
    app.templates_view.open()
    assert app.templates_view.section.built and _widget_models() - before > opened + 300
    assert "Standard graded program" in app.templates_view.list_box.value  # filled when opened


def test_opening_a_saved_program_opens_the_live_session_and_sensor_sections(app):
    app.clinician.value = "AB"
    app.save_button.click()
    assert app.errors.last == "", app.errors.last
    assert app.live.section.is_open and app.sensor_panel.section.is_open
    assert "this week: week 1" in app.live.status.value


def test_a_change_is_not_lost_to_a_redraw_that_ran_before_it_was_applied(app):
    # The warm-up's redraw may set the controls back to the program's options between the
    # clinician's choice arriving and its rebuild (both wait for the app's lock): the rebuild
    # uses the value the change carried.
    assert app.session.plan.weeks[0].impact_level == 1
    app._syncing = True
    app.start_level.value = 2  # the clinician's choice reaches the widget...
    app.start_level.value = 1  # ...and a redraw sets it back before the rebuild runs
    app._syncing = False
    app.on_option_change(app.start_level, 2)
    assert app.errors.last == "", app.errors.last
    assert app.session.plan.weeks[0].impact_level == 2 and app.start_level.value == 2


def test_widgets_share_their_default_layout_and_no_change_reaches_the_others(tmp_db):
    # Half the models a page opened with were default Layouts and Styles; they are shared now
    # (common.share_plain_models).  A layout the code changes (shown, hidden) must never be the
    # shared one, or hiding one box would hide every box: run the page's changes and look.
    import ipywidgets as w
    app = make_app(tmp_db)
    shared = app.screening_view.layout
    sharing = [x for x in (app.intake_status, app.refusal, app.dose, app.history, app.store_status)
               if x.layout is shared]
    assert len(sharing) >= 4
    defaults = {k: getattr(w.Layout(), k) for k in shared.keys if not k.startswith("_")}
    type_person(app)
    app.start_level.value = 2
    first = app.exercise_select.options[1][1]
    app.exercise_select.value = first
    if len(app.replacement_select.options) > 1:
        app.replacement_select.value = app.replacement_select.options[1][1]
        app.swap_button.click()
        app.program_view.swap.cancel_button.click()
    app.clinician.value = "AB"
    app.save_button.click()
    app.on_new()
    assert {k: getattr(shared, k) for k in defaults} == defaults
    assert app.clearance.controls.layout is not shared and app.program_view.swap.confirm_box.layout is not shared


def test_a_list_refreshed_with_its_options_keeps_the_clinicians_pick():
    # Common practice for forms: refreshing a list never moves the user's choice.
    import ipywidgets as w

    from prescribe.ui.common import set_options

    people = w.Dropdown(options=[])
    assert people.value is None
    assert set_options(people, [("- choose -", None), ("A", "A"), ("B", "B")])
    assert people.value is None  # the first option ("- choose -") is chosen
    week = w.Dropdown(options=[])
    assert set_options(week, [("Week 1", 1), ("Week 2", 2)]) and week.value == 1  # nothing chosen before
    week.value = 2
    changes = []
    week.observe(changes.append, names="value")
    assert not set_options(week, [("Week 1", 1), ("Week 2", 2)])  # the same list: left alone
    assert week.value == 2 and changes == []
    assert set_options(week, [("Week 1", 1), ("Week 2", 2), ("Week 3", 3)]) and week.value == 2  # still offered
    assert set_options(week, [("Week 1", 1), ("Week 3", 3)], fallback=3) and week.value == 3  # gone: the fallback
    assert set_options(week, [("Week 4", 4), ("Week 5", 5)], fallback=9) and week.value == 4  # no fallback: first


def test_unsaved_work_is_never_lost_without_a_word(app, tmp_db):
    from prescribe.store import open_store
    with open_store(tmp_db) as store:
        from prescribe.records import parse_record
        other = parse_record({"patient_id": "DEMO-UI-2", "age_years": 70, "sex": "female", "body_mass_kg": 60,
                              "height_cm": 160, "t_scores": {"femoral_neck": -2.0}})
        store.save_patient(other, None, "AB")
    app.refresh()
    # Checked but never saved: opening another person asks first; Keep working keeps it all.
    app.load_select.value = "DEMO-UI-2"
    app.load_button.click()
    assert "DEMO-UI-1, checked but never saved" in app.discard_text.value
    assert app.session.record.patient_id == "DEMO-UI-1"
    app.keep_button.click()
    assert app.pending.question == "" and app.session.record.patient_id == "DEMO-UI-1"
    # Saved, then changed: asked again, naming the change; Discard and continue opens the other.
    app.clinician.value = "AB"
    app.save_button.click()
    app.load_button.click()
    assert app.session.record.patient_id == "DEMO-UI-2"  # nothing unsaved: opened at once
    app.load_select.value = "DEMO-UI-1"
    app.load_button.click()
    app.start_level.value = 0
    app.intake.inputs["age_years"].value = "63"  # typed, not checked
    app.new_button.click()
    question = app.discard_text.value
    assert "changes to DEMO-UI-1 since program version 1" in question and "not yet checked" in question
    app.discard_button.click()
    assert app.session.record is None and app.pending.question == ""


def test_the_search_finds_people_by_id_or_by_the_name_on_the_handout(app, tmp_db):
    from prescribe.records import parse_record
    from prescribe.store import open_store
    with open_store(tmp_db) as store:
        for pid, name in (("OAK-101", "Marta Quill (invented)"), ("OAK-102", None), ("ELM-7", None)):
            data = {"patient_id": pid, "age_years": 70, "sex": "female", "body_mass_kg": 60, "height_cm": 160,
                    "t_scores": {"femoral_neck": -2.0}}
            if name:
                data.update(record_version=2, display_name=name)
            store.save_patient(parse_record(data), None, "AB")
    app.refresh()
    ids = lambda: [v for _, v in app.load_select.options]  # noqa: E731
    assert set(ids()) == {None, "OAK-101", "OAK-102", "ELM-7"}
    app.search.value = "oak"
    assert sorted(ids()) == ["OAK-101", "OAK-102"] and "2 of 3" in app.people_count.value
    app.search.value = "QUILL"
    assert ids() == ["OAK-101"] and app.load_select.value == "OAK-101"
    app.search.value = "nobody"
    assert ids() == [None]
    app.search.value = ""
    assert len(ids()) == 4


def test_an_earlier_version_opens_again_and_saves_as_the_next(app):
    app.clinician.value = "AB"
    app.save_button.click()
    app.weeks.value = "20"
    app.save_button.click()
    assert app.session.saved_version == 2 and len(app.session.plan.weeks) == 20
    assert [v for _, v in app.version_select.options] == [2, 1]
    app.version_select.value = 1
    app.version_button.click()
    s = app.session
    assert s.opened_version == 1 and len(s.plan.weeks) == 26 and s.unsaved
    assert "On the page: program version 1" in app.version_status.value
    assert '<tr class="pr-history-shown"><td>1</td>' in app.history.value
    assert not app.live._ready()  # sessions are logged against the program in force only
    app.save_button.click()
    assert s.saved_version == 3 and s.opened_version is None and not s.unsaved
    rows = s.versions()
    assert [r["version"] for r in rows] == [1, 2, 3] and rows[-1]["based_on_version"] == 2
    assert rows[-1]["weeks"] == 26


def test_the_replacement_offered_first_is_never_already_in_the_program(app):
    in_program = {i for i, _ in app.session.plan_exercises()}
    for exercise_id, _ in app.session.plan_exercises():
        app.exercise_select.value = exercise_id
        offered = [v for _, v in app.replacement_select.options]
        free = [c for c in offered if c not in in_program]
        assert app.replacement_select.value in free or not free, exercise_id
        # Those already in the program come last and say so.
        assert offered == free + [c for c in offered if c in in_program]
        labels = dict((v, k) for k, v in app.replacement_select.options)
        assert all(labels[c].endswith("already in the program") for c in offered if c in in_program)
