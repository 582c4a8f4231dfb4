"""The stored caseload as a batch CSV, and the what-if of a draft rule library or template.

The what-if is checked against screening and planning each invented person one by one
(the per-record evaluator, `prescribe.screening.screen`, and `build_plan`), not against
its own vectorised path.
"""

from __future__ import annotations

import json
import shutil
import tomllib

import pandas as pd
import pytest

from prescribe.screening.batch_io import read_batch_csv, records_to_frame
from prescribe.clinic.caseload import PROGRAM_FIELDS, SCREENING_FIELDS, frame_from_dicts, whatif
from prescribe.planning.templates import TEMPLATE_DIR
from prescribe.screening.rules import DEFAULT_RULES_DIR, load_rules
from prescribe.screening import screen
from prescribe.store import open_store
from prescribe.clinic.template_library import add_document, resolve
from prescribe.planning.templates.review import random_records, reference_records

from conftest import run_cli


def _v2_people() -> list:
    """Invented people with version-2 fields (medicines, operations, Z-scores, cognition, a handout name)."""
    from prescribe.records import parse_record
    base = {"body_mass_kg": 62.0, "height_cm": 161.0, "record_version": 2}
    return [parse_record({**base, **d}) for d in (
        {"patient_id": "V2-0001", "age_years": 68, "sex": "female", "menopause": "postmenopausal",
         "t_scores": {"lumbar_spine": -2.6}, "display_name": "Ada Example",
         "medications": [{"class": "denosumab", "months_on": 36.0, "months_since_last_dose": 8.0}]},
        {"patient_id": "V2-0002", "age_years": 45, "sex": "male", "z_scores": {"lumbar_spine": -2.3},
         "surgeries": [{"procedure": "hip_replacement", "side": "left", "months_ago": 6.0}],
         "medications": [{"class": "anticoagulant", "months_since_last_dose": 0.0}]},
        {"patient_id": "V2-0003", "age_years": 81, "sex": "female", "cognition": "moderate", "lives_alone": True,
         "has_carer": True, "cancer": {"active": True}, "falls_past_year": 2,
         "medications": [{"class": "aromatase_inhibitor", "months_on": 20.0, "months_since_last_dose": 0.0}],
         "fractures": [{"site": "vertebra", "months_ago": 10.0, "low_trauma": True, "level": "L1"}]},
        {"patient_id": "V2-0004", "age_years": 42, "sex": "female", "menopause": "premenopausal",
         "display_name": "Bea Sample",
         "medications": [{"class": "denosumab", "months_since_last_dose": 8.5}]},
    )]


@pytest.fixture
def caseload(tmp_path):
    """A store with the reference panel, 60 random invented people and four with version-2 fields."""
    path = tmp_path / "caseload.db"
    people = reference_records() + random_records(60, seed=7) + _v2_people()
    with open_store(str(path)) as store:
        for rec in people:
            store.save_patient(rec, screen(rec), clinician="Demo Physio (invented)")
    return path, people


@pytest.fixture
def draft_rules(tmp_path):
    """The shipped rules with the osteopenia boundary moved from -2.5 to -2.0 (a draft to test)."""
    folder = tmp_path / "rules"
    shutil.copytree(DEFAULT_RULES_DIR, folder)
    f = folder / "bone_density.toml"
    text = f.read_text()
    assert '{ feature = "lowest_t_score", op = ">", value = -2.5 }' in text
    f.write_text(text.replace('{ feature = "lowest_t_score", op = ">", value = -2.5 }',
                              '{ feature = "lowest_t_score", op = ">", value = -2.0 }', 1))
    return folder


def _fields(result) -> dict:
    out = {k: (sorted(v) if isinstance(v, list) and k != "flags" else v) for k, v in result.items()}
    out["flags"] = sorted(f["rule"] for f in result["flags"])
    return out


def test_frame_from_stored_dicts_equals_the_batch_frame(caseload):
    _, people = caseload
    expected = records_to_frame(people)
    got = frame_from_dicts([r.model_dump(mode="json") for r in people])
    pd.testing.assert_frame_equal(got, expected)


def test_export_is_the_batch_csv_the_batch_screen_reads(caseload, tmp_path):
    path, people = caseload
    out = tmp_path / "caseload.csv"
    done = run_cli("caseload", "export", "--out", str(out), "--db", str(path))
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["people"] == len(people)
    frame = read_batch_csv(out)
    by_id = {r.patient_id: r for r in people}
    assert sorted(frame["patient_id"]) == sorted(by_id)
    back = records_to_frame(sorted(people, key=lambda r: r.patient_id))
    # The name each handout uses stays out of the file unless asked for (PRODUCT.md, record version 2).
    assert "display_name" not in out.read_text().splitlines()[0].split(",")
    assert "Ada Example" not in out.read_text()
    assert (back["display_name"] != "").sum() == 2
    back["display_name"] = pd.Series("", index=back.index, dtype=object)
    pd.testing.assert_frame_equal(frame, back)
    screened = run_cli("screen", "--batch", str(out), "--out", str(tmp_path / "r.csv"))
    assert screened.returncode == 0, screened.stderr


def test_export_with_display_name_writes_every_field(caseload, tmp_path):
    path, people = caseload
    out = tmp_path / "named.csv"
    done = run_cli("caseload", "export", "--with-display-name", "--out", str(out), "--db", str(path))
    assert done.returncode == 0, done.stderr
    assert json.loads(done.stdout)["display_name"] is True
    back = records_to_frame(sorted(people, key=lambda r: r.patient_id))
    pd.testing.assert_frame_equal(read_batch_csv(out), back)
    from prescribe.screening.batch_io import frame_to_records
    assert frame_to_records(read_batch_csv(out)) == sorted(people, key=lambda r: r.patient_id)


def test_export_carries_the_version_2_cells(caseload, tmp_path):
    path, _ = caseload
    out = tmp_path / "c.csv"
    assert run_cli("caseload", "export", "--out", str(out), "--db", str(path)).returncode == 0
    import csv
    rows = {r["patient_id"]: r for r in csv.DictReader(out.open(encoding="utf-8"))}
    assert rows["V2-0001"]["medications"] == "denosumab:36:8" and rows["V2-0001"]["record_version"] == "2"
    assert rows["V2-0002"]["surgeries"] == "hip_replacement:left:6:n"
    assert rows["V2-0002"]["z_score_lumbar_spine"] == "-2.3"
    assert rows["V2-0003"]["fractures"] == "vertebra:10:y:L1"
    assert (rows["V2-0003"]["cancer_active"], rows["V2-0003"]["cancer_bone_metastases"]) == ("true", "unknown")
    assert (rows["V2-0003"]["cognition"], rows["V2-0003"]["lives_alone"]) == ("moderate", "true")
    assert rows["RAND-0001"]["record_version"] == "" and rows["RAND-0001"]["medications"] == ""


def test_whatif_reads_the_version_2_fields(caseload, tmp_path):
    # A draft that moves the overdue-denosumab boundary from 7 to 9 months changes the two people whose
    # last injection was 8 and 8.5 months ago (Tsourdi et al. 2017, Bone 105:11-17: not more than
    # 4 weeks late), and nobody else; checked against screening each person one by one.
    path, people = caseload
    folder = tmp_path / "rules"
    shutil.copytree(DEFAULT_RULES_DIR, folder)
    f = folder / "medication.toml"
    text = f.read_text()
    old = '{ feature = "months_since_last_dose:denosumab", op = ">", value = 7.0 }'
    assert old in text
    f.write_text(text.replace(old, old.replace("7.0", "9.0"), 1))
    rules = load_rules(folder)
    with open_store(str(path)) as store:
        result = whatif(store, rules=rules, rules_label=str(folder))
    expected = {}
    for rec in people:
        before = _fields(screen(rec).model_dump(mode="json"))
        after = _fields(screen(rec, rules).model_dump(mode="json"))
        diff = {f"screening.{k}": (before[k], after[k]) for k in SCREENING_FIELDS if before[k] != after[k]}
        if diff:
            expected[rec.patient_id] = diff
    got = {p["patient_id"]: {c["field"]: (c["before"], c["after"]) for c in p["changes"]} for p in result.changes}
    assert got == expected
    assert set(got) == {"V2-0001", "V2-0004"}
    assert got["V2-0001"]["screening.refer"] == (True, False)


def test_whatif_rules_lists_exactly_the_people_whose_screening_changes_one_by_one(caseload, draft_rules):
    path, people = caseload
    rules = load_rules(draft_rules)
    with open_store(str(path)) as store:
        result = whatif(store, rules=rules, rules_label=str(draft_rules))
    expected = {}
    for rec in people:  # the per-record evaluator, person by person
        before = _fields(screen(rec).model_dump(mode="json"))
        after = _fields(screen(rec, rules).model_dump(mode="json"))
        diff = {f"screening.{k}": (before[k], after[k]) for k in SCREENING_FIELDS if before[k] != after[k]}
        if diff:
            expected[rec.patient_id] = diff
    got = {p["patient_id"]: {c["field"]: (c["before"], c["after"]) for c in p["changes"]} for p in result.changes}
    assert got == expected
    assert expected, "the draft should change someone in this caseload"
    # The rule-set version differs, and is not a change by itself.
    assert result.before_ruleset_version != result.after_ruleset_version
    assert all(c["field"] != "screening.ruleset_version" for p in result.changes for c in p["changes"])
    assert result.people_checked == len(people)


def test_whatif_with_the_shipped_rules_changes_nobody(caseload):
    path, _ = caseload
    with open_store(str(path)) as store:
        assert whatif(store, rules=load_rules()).changes == []


def test_whatif_template_cached_equals_uncached_and_names_program_fields(caseload):
    path, people = caseload
    doc = tomllib.loads((TEMPLATE_DIR / "standard.toml").read_text())
    doc["name"] = "riverside_standard"
    doc["impact"]["impacts_target_level2"] = 40
    with open_store(str(path)) as store:
        add_document(store, doc, "Lead A")
        tv = resolve("riverside_standard@1", store, purpose="read")
        cached = whatif(store, template=tv, template_label=tv.ref)
        plain = whatif(store, template=tv, template_label=tv.ref, use_cache=False)
    assert cached.changes == plain.changes
    fields = {c["field"] for p in cached.changes for c in p["changes"]}
    assert fields and fields <= {f"program.{k}" for k in PROGRAM_FIELDS}
    changed = {p["patient_id"] for p in cached.changes}
    # A person whose cap is moderate impact (PANEL-03, osteoporosis) meets the lower target.
    assert "PANEL-03" in changed


def test_whatif_command_writes_the_changes_csv(caseload, draft_rules, tmp_path):
    path, _ = caseload
    out = tmp_path / "changes.csv"
    done = run_cli("caseload", "whatif", "--rules", str(draft_rules), "--out", str(out), "--db", str(path))
    assert done.returncode == 0, done.stderr
    report = json.loads(done.stdout)
    lines = out.read_text().splitlines()
    assert lines[0] == "patient_id,field,before,after"
    assert len(lines) - 1 == report["rows_written"] == sum(len(p["changes"]) for p in report["changes"])
    assert "\r[" not in done.stderr  # no progress bar when stderr is not a terminal
    bad = run_cli("caseload", "whatif", "--rules", str(tmp_path / "nowhere"), "--db", str(path))
    assert bad.returncode == 2 and "--rules" in bad.stderr
    bad = run_cli("caseload", "whatif", "--template", "nosuch@1", "--db", str(path))
    assert bad.returncode == 2 and "--template" in bad.stderr


def test_text_progress_draws_one_line_and_ends_it():
    import io
    from prescribe.clinic.caseload import text_progress
    out = io.StringIO()
    show = text_progress(out)
    for done in (0, 50, 50, 100):
        show(done, 100)
    text = out.getvalue()
    assert text.count("\r[") == 3  # the repeated 50% is not redrawn
    assert "[##########..........]  50%  50 / 100 people" in text and text.endswith("100 / 100 people\n")


def test_export_never_writes_a_cell_a_spreadsheet_would_run(tmp_path):
    # OWASP CSV Injection guidance: a text cell starting with = + - @ is marked as text.
    from prescribe.records import parse_record
    path = tmp_path / "c.db"
    rec = parse_record({"patient_id": "=HYPERLINK(1)", "age_years": 70, "sex": "female", "body_mass_kg": 60,
                        "height_cm": 160})
    with open_store(str(path)) as store:
        store.save_patient(rec, screen(rec))
    out = tmp_path / "c.csv"
    assert run_cli("caseload", "export", "--out", str(out), "--db", str(path)).returncode == 0
    assert out.read_text().splitlines()[1].startswith("'=HYPERLINK(1)")
    assert read_batch_csv(out)["patient_id"].tolist() == ["=HYPERLINK(1)"]
