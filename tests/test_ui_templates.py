"""The clinic lead's section without a browser: build the widgets, set values, click, assert.

The clinic and the people are invented.  The four-eyes rule is common practice in
clinical governance (published_facts J); the figures compared are the planner's own
(checked against their sources in the planner and template-review tests).
"""

from __future__ import annotations

import html
import tomllib

import pytest

from prescribe.planning.templates import TEMPLATE_DIR, template_fields
from prescribe.planning.templates.review import random_records
from prescribe.ui import ClinicApp, ClinicSession
from prescribe.ui.templates_view import TemplatesView
from signin_support import PASSPHRASE, give_passphrase


def as_clinician(view, name: str) -> None:
    """Sign ``name`` in to the section's page (the passphrase set first, as a lead would)."""
    give_passphrase(view.session.store_url, name)
    view.signed.sign_out()
    assert view.signed.sign_in(view.session.store, name, PASSPHRASE).ok


@pytest.fixture
def view(tmp_db):
    v = TemplatesView(ClinicSession(store_url=tmp_db))
    v.widget.selected_index = 0          # opening the section loads the list
    assert v.loaded and v.error.value == ""
    return v


def text(widget) -> str:
    return html.unescape(widget.value)


def test_the_list_shows_shipped_templates_and_the_form_follows_the_metadata(view):
    listing = text(view.list_box)
    for title in ("Standard graded program", "Gentle graded program", "After a vertebral fracture"):
        assert title in listing
    assert "shipped with the tool" in listing
    # One input a number of the template, labelled with its bounds and unit from the metadata.
    assert set(view.inputs) == {f.path for f in template_fields()}
    # Labelled in words from the template's own metadata, never by its keys.
    form = text(view.form.children[3].children[0].children[0])
    assert "impact.default_start_level" not in form and "Impact level impact work starts at" in form
    view.select.value = "standard@1"
    view.open_button.click()
    shipped = tomllib.loads((TEMPLATE_DIR / "standard.toml").read_text())
    assert view.inputs["impact.impacts_target_level2"].value == str(shipped["impact"]["impacts_target_level2"])
    assert view.sources["impact.bout_gap_hours"].value == shipped["sources"]["bout_gap_hours"]
    assert view.name.value == "clinic_standard"   # shipped ones are read-only: a copy takes its own name
    assert "read-only" in text(view.doc_status)


def test_a_bad_value_is_named_beside_its_field_and_nothing_is_saved(view):
    view.select.value = "standard@1"
    view.open_button.click()
    as_clinician(view, "Lead A")
    view.inputs["impact.impacts_step"].value = "lots"
    view.inputs["impact.bout_gap_hours"].value = "2"
    view.sources["impact.hold_weeks_at_full"].value = ""
    assert view.on_save() is None
    # Beside its box, the value is "this value" (the box's label says which), never the template's key.
    assert "This value must be a whole number from 0 to 100 [impacts], not 'lots'." in \
        text(view.messages["impact.impacts_step"])
    assert "4 to 24" in text(view.messages["impact.bout_gap_hours"])
    assert "Its source" in text(view.messages["impact.hold_weeks_at_full"])
    assert "sources.hold_weeks_at_full" not in text(view.messages["impact.hold_weeks_at_full"])
    assert text(view.messages["impact.impacts_start"]) == ""
    assert "Not saved: 3 fields" in text(view.status)
    assert view.session.store.templates() == []


def test_save_approve_by_another_and_retire(view):
    view.select.value = "standard@1"
    view.open_button.click()
    assert view.on_save() is None  # nobody signed in: the author would be a typed name
    assert "signed-in clinician" in text(view.status) and view.session.store.templates() == []
    as_clinician(view, "Lead A")
    view.inputs["impact.impacts_target_level2"].value = "40"
    view.certainty["impact.impacts_target_level2"].value = "moderate"
    view.note.value = "Lower moderate target for our older caseload"
    tv = view.on_save()
    assert (tv.ref, tv.status, tv.author) == ("clinic_standard@1", "draft", "Lead A")
    assert tv.body["certainty"]["impacts_target_level2"] == "moderate"
    assert "<td>clinic_standard</td><td>1</td><td>draft</td>" in text(view.list_box)
    # Four eyes: the author's approval is refused, beside the button pressed.
    assert view.on_approve() is None
    assert "never its author" in text(view.status) and text(view.error) == ""
    as_clinician(view, "Lead B")
    row = view.on_approve()
    assert row["status"] == "approved" and row["approved_by"] == "Lead B"
    assert "approved by Lead B" in text(view.doc_status)
    # An approved version never changes: saving again makes version 2.
    view.inputs["impact.impacts_target_level2"].value = "45"
    assert view.on_save().version == 2
    assert view.session.store.get_template("clinic_standard", 1)["body"]["impact"]["impacts_target_level2"] == 40
    view.select.value = "clinic_standard@1"
    view.open_button.click()
    assert view.on_retire()["status"] == "retired"
    assert "retired" in text(view.doc_status)


def test_check_shows_a_pass_over_the_panel(view):
    report = view.on_check()
    assert report["ok"] and "Check passed" in text(view.check_result)


def test_compare_draws_charts_over_the_panel(view):
    view.compare_a.value, view.compare_b.value = "standard@1", "gentle@1"
    result = view.on_compare()
    assert len(result["people"]) == 20
    assert "PANEL-01" in text(view.compare_table)
    # Fields and figures in words, never the template's keys or the comparison's metric names.
    assert "Highest impact level this template ever reaches" in text(view.compare_fields)
    assert "impact.max_level" not in text(view.compare_fields)
    assert "weeks_to_full_volume" not in text(view.compare_table) and "weeks to full volume, A" in \
        text(view.compare_table)
    oi_a = [p["a"]["total_osteogenic_index"] for p in result["people"]]
    assert [float(v) for v in view.oi_bars.y[0]] == pytest.approx(oi_a)
    assert len(view.chart_box.children) == 2
    # Every scale has its whole domain (a bar scale without a maximum drew nothing) and the
    # impacts axis has whole-number ticks, each once.
    assert view.y_oi.max >= max(max(view.oi_bars.y[0]), max(view.oi_bars.y[1]))
    assert view.y_impacts.max >= max(max(view.impact_bars.y[0]), max(view.impact_bars.y[1]))
    ticks = list(view.impacts_axis.tick_values)
    assert ticks == sorted(set(ticks)) and all(float(t).is_integer() for t in ticks)


def test_whatif_fills_the_progress_bar_and_lists_only_who_changes(view):
    store = view.session.store
    from prescribe.screening import screen
    for rec in random_records(25, seed=11):
        store.save_patient(rec, screen(rec))
    view.whatif_template.value = "gentle@1"
    result = view.on_whatif()
    assert view.progress.value == view.progress.max == 25
    assert result.people_checked == 25 and 0 < len(result.changes) <= 25
    assert text(view.whatif_table).count("<tr>") == len(result.rows()) + 1


def test_the_app_has_the_section_and_marks_a_program_from_a_retired_version(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    assert app.templates_view.widget in app.widget.children
    tv = app.templates_view
    tv.widget.selected_index = 0
    tv.select.value = "standard@1"
    tv.open_button.click()
    as_clinician(tv, "Lead A")
    tv.on_save()
    as_clinician(tv, "Lead B")
    tv.on_approve()
    # A program built from clinic_standard@1, saved, then the version retired.
    from prescribe.planning import build_plan
    from prescribe.clinic.template_library import resolve
    store = app.session.store
    rec = random_records(1, seed=3)[0]
    plan = build_plan(rec, template=resolve("clinic_standard@1", store).template())
    store.save_patient(rec, plan.screening)
    store.save_program(rec.patient_id, plan.model_dump(mode="json"), "Lead A", None)
    app.session.load(rec.patient_id)
    app.refresh()
    assert "clinic_standard@1" in text(app.history)
    assert "pr-template-notice" not in app.history.value
    store.retire_template("clinic_standard", 1, "Lead B")
    app.refresh()
    assert "retired by Lead B" in text(app.history)


def test_a_program_from_a_clinic_template_keeps_it_when_changed_in_the_app(tmp_db):
    from prescribe.planning import build_plan
    from prescribe.clinic.template_library import resolve
    session = ClinicSession(store_url=tmp_db)
    view = TemplatesView(session)
    view.widget.selected_index = 0
    view.select.value = "standard@1"
    view.open_button.click()
    as_clinician(view, "Lead A")
    view.on_save()
    as_clinician(view, "Lead B")
    view.on_approve()
    store = session.store
    rec = random_records(1, seed=3)[0]
    plan = build_plan(rec, template=resolve("clinic_standard@1", store).template())
    store.save_patient(rec, plan.screening)
    store.save_program(rec.patient_id, plan.model_dump(mode="json"), "Lead A", None)
    session.load(rec.patient_id)
    assert session.build(weeks=20)
    assert (session.plan.template.name, session.plan.template_version) == ("clinic_standard", 1)
    store.retire_template("clinic_standard", 1, "Lead B")
    assert session.build(weeks=22)
    assert session.plan.template.origin == "shipped"
    assert "can no longer build programs" in session.program_note
