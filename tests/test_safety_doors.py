"""Every door refuses an unsafe program and writes or stores nothing (docs/safety.md).

Doors: `prescribe plan` (with --exclude and --cleared-by), `prescribe handout`, `prescribe
import`, Store.save_program, replace_exercise, and every edit in the app (swap, leave out,
start level, sessions, weeks), its handout and its save.  People are invented.  The rules
themselves are tested against their sources in tests/test_safety.py.
"""

from __future__ import annotations

import html
import json
import shutil
import subprocess

import pytest

from prescribe.catalogue import default_catalogue
from prescribe.errors import UnsafeProgram
from prescribe.plan_schema import parse_plan
from prescribe.records import parse_record
from prescribe.ui import ClinicApp, ClinicSession

from signin_support import give_passphrase, sign_in
from test_safety import PEOPLE, catalogue_fields, exercises, person, recount

BALANCE_IDS = [e.exercise_id for e in default_catalogue().all() if e.category == "balance"]


def write_json(path, data) -> str:
    path.write_text(json.dumps(data), encoding="utf-8")
    return str(path)


def unsafe_edit(data: dict) -> None:
    """The issue's hand edit: a level-3 jump at 150 impacts a session, in the last week."""
    week = data["weeks"][-1]["week"]
    for _, _, x in exercises(data, week=week, exercise_id="brisk_walking"):
        x.update(catalogue_fields("stride_jump"), minutes=None, impacts=150, sets=15, bouts=3, bout_gap_hours=8.0)
    recount(data)


# --------------------------------------------------------------------------------------
# prescribe plan
# --------------------------------------------------------------------------------------

def test_plan_exclude_removing_all_balance_work_at_falls_risk_is_refused(cli, tmp_path):
    patient = write_json(tmp_path / "p.json", PEOPLE["falls"])
    result = cli("plan", patient, "--exclude", *BALANCE_IDS)
    assert result.returncode == 2, result.stderr
    assert result.stdout == ""  # nothing printed
    assert "balance_every_week" in result.stderr and "week 1" in result.stderr
    assert "allowed: balance work on at least 2 days every week" in result.stderr
    assert "Traceback" not in result.stderr
    # Leaving out one balance exercise is fine: the planner picks others.
    ok = cli("plan", patient, "--exclude", BALANCE_IDS[0])
    assert ok.returncode == 0, ok.stderr


def test_plan_is_a_draft_until_cleared_by_name(cli, tmp_path):
    patient = write_json(tmp_path / "p.json", PEOPLE["falls"])  # the screening refers this person
    draft = json.loads(cli("plan", patient).stdout)
    assert draft["draft"] is True and draft["cleared_by"] is None and draft["cleared_at"] is None
    assert draft["record"]["patient_id"] == "ELM-0103"
    cleared = cli("plan", patient, "--cleared-by", "Dr A. Example")
    assert cleared.returncode == 0, cleared.stderr
    plan = json.loads(cleared.stdout)
    assert plan["draft"] is False and plan["cleared_by"] == "Dr A. Example" and plan["cleared_at"]
    bad = cli("plan", patient, "--cleared-by", " ")
    assert bad.returncode == 2 and "--cleared-by" in bad.stderr


# --------------------------------------------------------------------------------------
# prescribe handout
# --------------------------------------------------------------------------------------

@pytest.fixture
def vertebral_plan():
    record, plan = person("vertebral", weeks=12)
    return record, plan.model_dump(mode="json")


@pytest.mark.parametrize("edit, rule", [
    (unsafe_edit, "impact_cap"),
    (lambda d: (d["screening"].update(max_impact_level=3, avoid=[]), d.update(max_impact_level=3),
                unsafe_edit(d)), "impact_cap"),
])
def test_handout_of_a_hand_edited_plan_is_refused_and_writes_nothing(cli, tmp_path, vertebral_plan, edit, rule):
    _, data = vertebral_plan
    edit(data)
    plan_file = write_json(tmp_path / "plan.json", data)
    out = tmp_path / "h.pdf"
    out.write_bytes(b"last week's handout")
    result = cli("handout", plan_file, "--out", str(out))
    assert result.returncode == 2, result.stderr
    assert f"rule {rule}, week 12, exercise stride_jump" in result.stderr
    assert "allowed: impact level 1 (low impact) or lower" in result.stderr
    assert out.read_bytes() == b"last week's handout"
    fresh = tmp_path / "new.html"
    assert cli("handout", plan_file, "--out", str(fresh)).returncode == 2 and not fresh.exists()


def test_handout_of_a_plan_without_its_record_needs_the_store(cli, tmp_path, vertebral_plan):
    record, data = vertebral_plan
    data.pop("record")
    plan_file = write_json(tmp_path / "plan.json", data)
    out = tmp_path / "h.html"
    result = cli("handout", plan_file, "--out", str(out), env={"PRESCRIBE_DB": ""})
    assert result.returncode == 2 and "record_on_file" in result.stderr and not out.exists()
    db = tmp_path / "store.db"
    from prescribe.store import open_store
    with open_store(str(db)) as store:
        store.save_patient(record)
    ok = cli("handout", plan_file, "--out", str(out), "--db", str(db))
    assert ok.returncode == 0, ok.stderr
    assert out.exists() and data["patient_id"] in out.read_text(encoding="utf-8")  # the handout was written
    # The store's record holds the plan too: a hand edit is refused against it.
    unsafe_edit(data)
    bad = cli("handout", write_json(tmp_path / "bad.json", data), "--out", str(tmp_path / "b.html"),
              "--db", str(db))
    assert bad.returncode == 2 and not (tmp_path / "b.html").exists()


# --------------------------------------------------------------------------------------
# The store and prescribe import
# --------------------------------------------------------------------------------------

def test_store_save_program_refuses_an_unsafe_program(tmp_path, vertebral_plan):
    from prescribe.store import open_store
    record, data = vertebral_plan
    with open_store(str(tmp_path / "s.db")) as store:
        store.save_patient(record)
        assert store.save_program(record.patient_id, data, "AB", None) == 1
        unsafe = json.loads(json.dumps(data))
        unsafe_edit(unsafe)
        with pytest.raises(UnsafeProgram, match="impact_cap"):
            store.save_program(record.patient_id, unsafe, "AB", 1)
        assert [v["version"] for v in store.program_versions(record.patient_id)] == [1]
        # The plan's own record loosened does not help: the store's record is the one held.
        loose = json.loads(json.dumps(data))
        loose["record"]["fractures"] = []
        loose["record"]["t_scores"] = {"lumbar_spine": 0.5}
        loose["screening"].update(max_impact_level=3, avoid=[])
        unsafe_edit(loose)
        with pytest.raises(UnsafeProgram, match="impact_cap"):
            store.save_program(record.patient_id, loose, "AB", 1)
        assert store.latest_program_version(record.patient_id) == 1


def test_import_of_a_bundle_with_an_unsafe_program_stores_nothing(cli, tmp_path, vertebral_plan):
    from prescribe.store import open_store
    record, data = vertebral_plan
    with open_store(str(tmp_path / "a.db")) as store:
        store.save_patient(record)
        store.save_program(record.patient_id, data, "AB", None)
        bundle = store.export_patient(record.patient_id)
    unsafe_edit(bundle["programs"][0]["plan"])
    target = tmp_path / "b.db"
    result = cli("import", write_json(tmp_path / "bundle.json", bundle), "--db", str(target))
    assert result.returncode == 2, result.stderr
    assert "rule impact_cap, week 12, exercise stride_jump" in result.stderr and "program version 1" in result.stderr
    assert not target.exists()  # refused before the store was opened
    with open_store(str(target)) as other:  # and the store's own door refuses it too
        with pytest.raises(UnsafeProgram):
            other.import_bundle(bundle)
        assert other.list_patients() == []


# --------------------------------------------------------------------------------------
# The app
# --------------------------------------------------------------------------------------

def _session(name: str, db: str) -> ClinicSession:
    s = ClinicSession(store_url=db)
    assert s.submit(json.loads(json.dumps(PEOPLE[name])))
    return s


def test_app_swap_calf_raise_for_back_squat_is_refused_in_plain_words(tmp_db):
    s = _session("severe_falls", tmp_db)
    before = s.plan
    assert not s.swap("calf_raise", "back_squat")
    assert s.plan is before and s.swaps == []
    assert s.refusal.startswith("Refused: ")
    assert "back_squat" in s.refusal and "Allowed:" in s.refusal and "previous program is kept" in s.refusal


def test_app_start_level_above_the_cap_in_plain_words(tmp_db):
    s = _session("falls", tmp_db)
    before = s.plan
    assert not s.build(start_level=2)
    assert "Start level 2 is above what the screening allows (1, low impact)" in s.refusal
    assert s.plan is before


def test_app_leaving_out_all_balance_work_is_refused(tmp_db):
    s = _session("falls", tmp_db)
    before = s.plan
    assert not s.build(exclude=BALANCE_IDS)
    assert "balance work" in s.refusal and s.plan is before and "exclude" not in s.options


@pytest.mark.parametrize("edit", [
    lambda s: s.swap("goblet_box_squat", "sit_to_stand"),
    lambda s: s.exclude("tandem_stance"),
    lambda s: s.build(start_level=0),
    lambda s: s.build(impact_sessions_per_week=2),
    lambda s: s.build(resistance_sessions_per_week=3),
    lambda s: s.build(balance_sessions_per_week=5),
    lambda s: s.build(weeks=12),
])
def test_every_app_edit_passes_the_safety_check(tmp_db, monkeypatch, edit):
    """Each edit goes through the one check: with a check that refuses everything, every
    edit is refused and the program kept; with the real check, it is applied."""
    import prescribe.safety as safety

    s = _session("falls", tmp_db)
    before = s.plan
    calls = []

    def refuse(plan, *args, **kwargs):
        calls.append(kwargs.get("door"))
        raise UnsafeProgram([safety.SafetyViolation("test_rule", 3, "x", "refused by the test", "nothing", "test")],
                            door=kwargs.get("door", ""))

    monkeypatch.setattr(safety, "assert_safe", refuse)
    assert not edit(s)
    assert calls and s.plan is before and "refused by the test" in s.refusal.lower()
    monkeypatch.undo()
    assert edit(s) and s.plan is not before and s.refusal is None


def test_app_handout_and_save_refuse_a_tampered_program(tmp_db):
    s = _session("vertebral", tmp_db)
    data = s.plan.model_dump(mode="json")
    unsafe_edit(data)
    s.plan = parse_plan(data)
    with pytest.raises(UnsafeProgram):
        s.handout("html")
    assert s.save("AB") is None
    assert s.notice.startswith("Not saved. Refused:")
    assert s.store.latest_program_version(s.record.patient_id) is None


def test_app_clearance_control_records_who_and_when(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    for key, value in {"patient_id": "ELM-0103", "age_years": "79", "sex": "female", "body_mass_kg": "62",
                       "height_cm": "158", "t_scores.femoral_neck": "-2.0", "falls_past_year": "2",
                       "timed_up_and_go_s": "14"}.items():
        app.intake.inputs[key].value = value
    app.submit_button.click()
    assert app.session.screening.refer and app.session.is_draft
    assert "DRAFT" in app.clearance.status.value and app.clearance.controls.layout.display is None
    assert "DRAFT" in app.session.handout("html").decode("utf-8")
    # The clearance is recorded under the signed-in clinician, never a typed name.
    give_passphrase(tmp_db, "Dr A. Example")
    sign_in(app, "Dr A. Example")
    app.clearance.button.click()
    assert not app.session.is_draft
    assert "Cleared by Dr A. Example" in html.unescape(app.clearance.status.value)
    assert app.clearance.controls.layout.display == "none"
    assert app.session.plan.cleared_at
    # The clearance stays through a later change, and the handout no longer says DRAFT.
    assert app.session.build(weeks=12) and app.session.plan.cleared_by == "Dr A. Example"
    assert "DRAFT:" not in app.session.handout("html").decode("utf-8")


def test_app_refused_swap_is_shown_in_the_refusal_box(tmp_db):
    app = ClinicApp(ClinicSession(store_url=tmp_db))
    app.session.submit(json.loads(json.dumps(PEOPLE["severe_falls"])))
    app.refresh(store=False)
    app.exercise_select.value = "calf_raise"
    app.replacement_select.value = "back_squat"
    before = app.session.plan
    app.swap_button.click()
    shown = html.unescape(app.refusal.value)
    # The exercises are named as the clinician knows them, never by their ids.
    assert "pr-refusal-box" in shown and "Refused:" in shown and "Back squat" in shown
    assert "back_squat" not in shown
    assert app.session.plan is before and app.program_view.swap.pending is None


# --------------------------------------------------------------------------------------
# The draft handout, page by page
# --------------------------------------------------------------------------------------

@pytest.mark.skipif(shutil.which("pdftotext") is None and not __import__("os").environ.get("CI"),
                    reason="pdftotext (poppler-utils) is not installed")
def test_every_page_of_a_draft_handout_says_draft_and_not_to_start(cli, tmp_path):
    patient = write_json(tmp_path / "p.json", PEOPLE["falls"])
    for cleared in (False, True):
        args = ["--cleared-by", "Dr A. Example"] if cleared else []
        plan_file = tmp_path / f"plan{cleared}.json"
        plan_file.write_text(cli("plan", patient, "--weeks", "12", *args).stdout)
        out = tmp_path / f"h{cleared}.pdf"
        result = cli("handout", str(plan_file), "--out", str(out), "--audience", "person")
        assert result.returncode == 0, result.stderr
        pages = int(next(line.split()[-1] for line in subprocess.run(
            ["pdfinfo", str(out)], capture_output=True, text=True, check=True).stdout.splitlines()
            if line.startswith("Pages:")))
        assert pages >= 2
        for page in range(1, pages + 1):
            text = subprocess.run(["pdftotext", "-f", str(page), "-l", str(page), str(out), "-"],
                                  capture_output=True, text=True, check=True).stdout
            text = " ".join(text.split())
            if cleared:
                assert "DRAFT" not in text, page
            else:
                assert "DRAFT" in text and "do not start this program" in text, page
        html_out = tmp_path / f"h{cleared}.html"
        assert cli("handout", str(plan_file), "--out", str(html_out)).returncode == 0
        assert ("DRAFT: do not start this program" in html_out.read_text(encoding="utf-8")) is not cleared
