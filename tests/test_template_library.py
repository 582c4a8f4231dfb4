"""Clinic templates as versioned documents: four eyes, immutability, the draft refusal,
NAME@VERSION resolution, field checks and the reference-panel safety check.

The four-eyes rule (the approver of a clinical document is never its author) is common
practice in clinical governance (published_facts J); GRADE's certainty levels are from
Guyatt et al. 2008, BMJ 336:924-926.
"""

from __future__ import annotations

import copy
import tomllib
from datetime import date, timedelta

import pytest

from prescribe.errors import FieldProblem, InputError
from prescribe.planning import build_plan, check_plan
from prescribe.planning.templates import CERTAINTY_LEVELS, TEMPLATE_DIR, template_fields, template_problems
from prescribe.records import parse_record
from prescribe.store import open_store
from prescribe.clinic.template_library import (add_document, check_document, document_text, list_versions, parse_document,
                                        parse_ref, program_template_notice, resolve)
from prescribe.planning.templates.review import (REFERENCE_PANEL, compare_templates, field_differences, random_records,
                                       reference_records)


def standard_doc(name: str = "riverside_standard") -> dict:
    doc = tomllib.loads((TEMPLATE_DIR / "standard.toml").read_text(encoding="utf-8"))
    doc["name"] = name
    return doc


@pytest.fixture
def store(tmp_path):
    with open_store(str(tmp_path / "t.db")) as s:
        yield s


# -- names and versions ------------------------------------------------------------------

@pytest.mark.parametrize("text, expected", [("gentle", ("gentle", None)), ("clinic_x@2", ("clinic_x", 2)),
                                            ("a.b-c@10", ("a.b-c", 10))])
def test_parse_ref(text, expected):
    assert parse_ref(text) == expected


@pytest.mark.parametrize("bad", ["", "x@", "x@0", "x@two", "@3", "has space", 7])
def test_parse_ref_refuses_bad_text_naming_the_field(bad):
    with pytest.raises(InputError) as err:
        parse_ref(bad, "--template")
    assert err.value.problems[0].field == "--template"


def test_shipped_templates_are_listed_read_only_and_approved():
    rows = [v.listing() for v in list_versions(None)]
    assert {r["name"] for r in rows} >= {"standard", "gentle", "post_vertebral_fracture"}
    assert all(r["origin"] == "shipped" and r["status"] == "approved" and r["read_only"] for r in rows)


def test_a_shipped_name_cannot_be_added_to_the_store(store):
    with pytest.raises(InputError, match="read-only"):
        add_document(store, standard_doc("standard"), "Lead A")
    assert store.templates() == []


def test_bare_name_is_the_newest_approved_version_and_drafts_are_refused(store):
    doc = standard_doc()
    assert add_document(store, doc, "Lead A").version == 1
    with pytest.raises(InputError, match="no approved version"):
        resolve("riverside_standard", store)
    store.approve_template("riverside_standard", 1, "Lead B")
    doc["impact"]["impacts_step"] = 15
    assert add_document(store, doc, "Lead A").version == 2
    # The newest approved is still 1: version 2 is a draft.
    assert resolve("riverside_standard", store).version == 1
    with pytest.raises(InputError, match="draft and cannot build programs") as err:
        resolve("riverside_standard@2", store)
    assert err.value.problems[0].field == "--template"
    store.approve_template("riverside_standard", 2, "Lead C")
    assert resolve("riverside_standard", store).version == 2
    store.retire_template("riverside_standard", 2, "Lead B")
    with pytest.raises(InputError, match="retired and cannot build programs"):
        resolve("riverside_standard@2", store)
    assert resolve("riverside_standard", store).version == 1
    # Reading is allowed whatever the status.
    assert resolve("riverside_standard@2", store, purpose="read").status == "retired"
    with pytest.raises(InputError, match="a stored version of riverside_standard"):
        resolve("riverside_standard@9", store)
    with pytest.raises(InputError, match="standard@1"):
        resolve("standard@2", store)


# -- four eyes and immutability ----------------------------------------------------------

def test_the_author_never_approves_their_own_version(store):
    add_document(store, standard_doc(), "Lead A")
    for same in ("Lead A", "lead a", "  Lead   A "):
        with pytest.raises(InputError, match="never its author"):
            store.approve_template("riverside_standard", 1, same)
    assert store.get_template("riverside_standard", 1)["status"] == "draft"
    row = store.approve_template("riverside_standard", 1, "Lead B")
    assert (row["status"], row["approved_by"], row["created_by"]) == ("approved", "Lead B", "Lead A")


def test_an_approved_version_never_changes_editing_makes_a_new_draft(store):
    doc = standard_doc()
    add_document(store, doc, "Lead A")
    store.approve_template("riverside_standard", 1, "Lead B", review_by=date.today() + timedelta(days=200))
    before = store.get_template("riverside_standard", 1)
    with pytest.raises(InputError, match="approved version never changes"):
        store.approve_template("riverside_standard", 1, "Lead C")
    edited = copy.deepcopy(doc)
    edited["impact"]["impacts_target_level2"] = 45
    tv = add_document(store, edited, "Lead C")
    assert (tv.version, tv.status) == (2, "draft")
    assert "impact.impacts_target_level2: 50 -> 45" in tv.change_note
    assert store.get_template("riverside_standard", 1) == before
    assert store.get_template("riverside_standard", 1)["body"]["impact"]["impacts_target_level2"] == 50
    store.retire_template("riverside_standard", 1, "Lead A")
    with pytest.raises(InputError, match="retired by Lead A"):
        store.retire_template("riverside_standard", 1, "Lead A")
    assert store.get_template("riverside_standard", 1)["body"] == before["body"]
    actions = [a["action"] for a in store.audit()]
    assert actions == ["template_saved", "template_approved", "template_saved", "template_retired"]


def test_review_by_must_be_in_the_future_and_defaults_to_a_year(store):
    add_document(store, standard_doc(), "Lead A")
    with pytest.raises(InputError, match="review_by"):
        store.approve_template("riverside_standard", 1, "Lead B", review_by="2020-01-01")
    with pytest.raises(InputError, match="review_by"):
        store.approve_template("riverside_standard", 1, "Lead B", review_by="31/12/2027")
    row = store.approve_template("riverside_standard", 1, "Lead B")
    assert (date.fromisoformat(row["review_by"]) - date.today()).days in (364, 365, 366)


def test_change_note_given_or_written_from_the_differences(store):
    assert add_document(store, standard_doc(), "Lead A").change_note == "first version"
    assert add_document(store, standard_doc(), "Lead A", note="Re-read after audit").change_note == \
        "Re-read after audit"
    doc = standard_doc()
    doc["change_note"] = "Lower the moderate target"
    assert add_document(store, doc, "Lead A").change_note == "Lower the moderate target"


# -- programs record the version ---------------------------------------------------------

def test_a_program_records_template_and_version_and_says_when_it_is_retired(store):
    add_document(store, standard_doc(), "Lead A")
    store.approve_template("riverside_standard", 1, "Lead B")
    tv = resolve("riverside_standard", store)
    rec = reference_records()[1]
    plan = build_plan(rec, template=tv.template())
    assert (plan.template.name, plan.template.version, plan.template_version) == ("riverside_standard", 1, 1)
    assert plan.template.origin == "clinic"
    assert check_plan(plan) == []
    assert program_template_notice(plan, store) is None
    past = date.today() + timedelta(days=400)
    assert "review was due" in program_template_notice(plan, store, today=past)
    store.retire_template("riverside_standard", 1, "Lead B")
    assert "retired by Lead B" in program_template_notice(plan, store)
    # A shipped template is never flagged.
    assert program_template_notice(build_plan(rec), store) is None


# -- field checks ------------------------------------------------------------------------

def test_every_bad_field_is_named_with_its_value_and_what_is_allowed():
    doc = standard_doc()
    doc["impact"]["impacts_step"] = -5
    doc["impact"]["bout_gap_hours"] = 2
    doc["balance"]["minutes_full"] = "fifteen"
    doc["resistance"]["phases"][1]["pct_1rm"] = 95
    del doc["sources"]["hold_weeks_at_full"]
    doc["certainty"] = {"impacts_target_level2": "fairly sure"}
    problems = {p.field: p for p in template_problems(doc)}
    assert set(problems) == {"impact.impacts_step", "impact.bout_gap_hours", "balance.minutes_full",
                             "resistance.phases[1].pct_1rm", "sources.hold_weeks_at_full",
                             "certainty.impacts_target_level2"}
    assert problems["impact.bout_gap_hours"].message == \
        "impact.bout_gap_hours must be a number from 4 to 24 [h], not 2."
    assert "high, moderate, low, very low" in problems["certainty.impacts_target_level2"].allowed


def test_shipped_templates_pass_the_field_check_and_certainty_vocabulary_is_grade():
    for tv in list_versions(None):
        assert template_problems(tv.body) == []
    # GRADE (Guyatt et al. 2008): high, moderate, low, very low.
    assert CERTAINTY_LEVELS[:4] == ("high", "moderate", "low", "very low")
    assert all(f.low <= f.high and f.unit and f.help for f in template_fields())


def test_above_100_impacts_needs_a_reason():
    # Clissold et al. 2022: programs of 10-100 jumps a day; the ceiling (common practice) needs a reason to be passed.
    doc = standard_doc()
    doc["impact"]["max_impacts_per_session"] = 120
    assert [p.field for p in template_problems(doc)] == ["impact.max_impacts_per_session"]
    doc["max_impacts_reason"] = "supervised athletes' program"
    assert template_problems(doc) == []


# -- the safety check over the panel -----------------------------------------------------

def test_the_reference_panel_is_twenty_invented_people():
    assert len(REFERENCE_PANEL) == 20 and all(p["patient_id"].startswith("PANEL-") for p in REFERENCE_PANEL)
    assert random_records(5, seed=1) == random_records(5, seed=1)
    assert random_records(5, seed=1) != random_records(5, seed=2)


def test_check_document_passes_a_sound_draft_and_refuses_a_plan_that_breaks_a_rule(monkeypatch):
    report = check_document(standard_doc(), random_people=10)
    assert report["ok"] and report["people_checked"] == 30 and report["refusals"] == []
    # A program that breaks a rule is refused with the rule, the person and the week: make
    # the safety check see a rule-3 violation in week 4 for one person.
    import prescribe.planning.templates.review as review
    real = review.safety_violations

    def strict(plan, screening=None):
        found = real(plan, screening)
        if plan.patient_id == "PANEL-03":
            found.append({"rule": "rule 3", "week": 4, "exercise_id": "jump_two_feet", "message": "escalation",
                          "allowed": "", "source": ""})
        return found
    monkeypatch.setattr(review, "safety_violations", strict)
    report = check_document(standard_doc(), random_people=0)
    assert not report["ok"]
    assert report["refusals"] == [{"rule": "rule 3", "week": 4, "exercise_id": "jump_two_feet",
                                   "message": "escalation", "allowed": "", "source": "", "patient_id": "PANEL-03"}]


def _panel_plan(doc: dict, patient_id: str):
    """The program the template check builds for one reference person (as panel_outcomes builds it)."""
    from prescribe.planning.templates import parse_template
    from prescribe.screening import screen
    rec = next(r for r in reference_records() if r.patient_id == patient_id)
    return rec, build_plan(rec, screen(rec), created="2026-01-05T09:00:00+00:00", template=parse_template(doc))


def test_a_template_whose_spine_sparing_phase_is_too_heavy_is_refused_by_the_real_check():
    # A clinic template whose spine-sparing strength phase asks 5 sets of 5 at effort 9 of 10: for
    # the people whose spine must be spared that breaks the spine-sparing limits (Giangregorio et
    # al. 2014, Osteoporos Int 25:821-835: 8-12 repetitions; Brooke-Wavell et al. 2022, Br J Sports
    # Med 56:837-846: up to 3 sets; effort at most 8 of 10, Giangregorio et al. 2015).  The real
    # safety check, not a stand-in, refuses it over the reference panel.
    doc = standard_doc()
    doc["resistance"]["spine_sparing_phases"][-1] = {"name": "strength", "weeks": 0, "sets": 5, "reps": 5,
                                                     "intensity": "RPE 9"}
    assert template_problems(doc) == []  # every field within its bounds: only the panel can tell
    report = check_document(doc, random_people=0)
    assert not report["ok"] and report["refusals"]
    assert {r["rule"] for r in report["refusals"]} == {"spine_sparing_load"}
    # Each refusal checked independently: the person's program spares the spine, and the refused
    # week really prescribes the exercise at more than 3 sets or above effort 8.
    for refusal in report["refusals"][:5]:
        _, plan = _panel_plan(doc, refusal["patient_id"])
        assert plan.spine_sparing or {"loaded_spinal_flexion", "loaded_spinal_twisting"} & set(plan.screening.avoid)
        doses = [(x.sets, x.intensity) for s in plan.weeks[refusal["week"] - 1].sessions for x in s.exercises
                 if x.exercise_id == refusal["exercise_id"]]
        assert any(sets > 3 or intensity == "RPE 9" for sets, intensity in doses), (refusal, doses)
    # The shipped template, the same people: nothing refused.
    assert check_document(standard_doc(), random_people=0)["refusals"] == []


def test_a_template_that_changes_phase_every_week_is_refused_for_escalating_in_weeks_3_to_5():
    # Resistance phases of one week each bring harder lifts in while bone is transiently weaker:
    # no escalation of any kind in weeks 3-5 after a new or larger stimulus (PRODUCT.md; Eriksen
    # 1986, Endocr Rev 7:379; Heaney, Yates & Santora 1997, J Bone Miner Res 12:1143).
    doc = standard_doc()
    for phase in doc["resistance"]["phases"][:-1]:
        phase["weeks"] = 1
    assert template_problems(doc) == []
    report = check_document(doc, random_people=0)
    assert not report["ok"] and report["refusals"]
    assert {r["rule"] for r in report["refusals"]} == {"weak_window"}
    # Each refusal checked independently: the exercise it names is present at the refused week and
    # absent from one of the 3 weeks before it (the window's week 2 is 1 to 3 weeks before its weeks 3-5).
    for refusal in report["refusals"]:
        _, plan = _panel_plan(doc, refusal["patient_id"])
        ids = [{x.exercise_id for s in w.sessions for x in s.exercises} for w in plan.weeks]
        week = refusal["week"]
        assert refusal["exercise_id"] in ids[week - 1]
        assert any(refusal["exercise_id"] not in ids[w - 1] for w in range(max(1, week - 3), week)), refusal


def test_bad_fields_stop_the_check_before_the_panel():
    doc = standard_doc()
    doc["impact"]["max_level"] = 5
    report = check_document(doc, random_people=0)
    assert not report["ok"] and report["people_checked"] == 0
    assert [p["field"] for p in report["problems"]] == ["impact.max_level"]


# -- compare and show -------------------------------------------------------------------

def test_compare_names_the_fields_that_differ_and_the_people_who_change():
    a = standard_doc()
    b = copy.deepcopy(a)
    b["impact"]["impacts_target_level2"] = 40
    from prescribe.planning.templates import parse_template
    result = compare_templates(parse_template(a), parse_template(b), a, b)
    assert result["fields_differ"] == [{"field": "impact.impacts_target_level2", "a": 50, "b": 40}]
    by_id = {p["patient_id"]: p for p in result["people"]}
    # PANEL-03 (osteoporosis, cap at moderate impact) peaks at the moderate target.
    assert by_id["PANEL-03"]["a"]["peak_impacts"] == 50 and by_id["PANEL-03"]["b"]["peak_impacts"] == 40
    # PANEL-04 (vertebral fracture, brisk walking only) is not touched by a moderate-impact target.
    assert by_id["PANEL-04"]["differs"] == []
    assert field_differences(a, a) == []


def test_show_writes_toml_that_reads_back_to_the_same_template(store):
    add_document(store, standard_doc(), "Lead A")
    tv = resolve("riverside_standard@1", store, purpose="read")
    text = document_text(tv)
    back = parse_document(text)
    assert back["document"]["status"] == "draft" and back["document"]["author"] == "Lead A"
    assert field_differences(back, tv.body) == []
    assert template_problems(back) == []


def test_the_clinicians_handout_page_names_the_template_and_its_version(store):
    from prescribe.handout import render_html
    add_document(store, standard_doc(), "Lead A")
    store.approve_template("riverside_standard", 1, "Lead B")
    plan = build_plan(reference_records()[1], template=resolve("riverside_standard", store).template())
    page = render_html(plan, audience="clinician")
    assert "<th scope=\"row\">Template</th><td>riverside_standard@1 (clinic)</td>" in page
    assert "riverside_standard@1" not in render_html(plan, audience="person")


def test_a_store_at_the_previous_revision_keeps_its_templates(tmp_path):
    """A store made before revision 0004 opens, is migrated, and its template rows are found."""
    import sqlite3

    from test_store import _alembic_upgrade
    path = tmp_path / "old.db"
    _alembic_upgrade(path, "0003")
    conn = sqlite3.connect(path)
    conn.execute("INSERT INTO clinic_templates (name, version, body_json, status, created, created_by, approved_by, "
                 "approved_at) VALUES ('old_one', 1, '{\"name\": \"old_one\"}', 'approved', "
                 "'2026-01-05T09:00:00+00:00', 'Lead A', 'Lead B', '2026-01-06T09:00:00+00:00')")
    conn.commit()
    conn.close()
    with open_store(str(path)) as s:
        from prescribe.store import HEAD_REVISION
        assert s.revision() == HEAD_REVISION
        (row,) = s.templates()
        assert (row["name"], row["status"], row["approved_by"], row["change_note"], row["review_by"]) == \
            ("old_one", "approved", "Lead B", "", None)
        s.retire_template("old_one", 1, "Lead A")
        assert s.get_template("old_one", 1)["status"] == "retired"
