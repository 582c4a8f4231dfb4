"""The record store's API: people, screenings, program versions, audit, bundles,
migrations and refusing files that are not a store.  All data here is invented.

Tests taking ``store`` or ``new_db`` run twice: on SQLite and on a real PostgreSQL
server (tests/conftest.py); the file checks, the pragmas and the backup are SQLite's own.
"""

from __future__ import annotations

import json
import sqlite3
import sys

import pytest
from sqlalchemy import create_engine, inspect, text

from prescribe.errors import ConflictError, InputError, NotFoundError, StoreError
from prescribe.store import HEAD_REVISION, open_store, parse_bundle
from prescribe.store import api as store_api
from prescribe.store import models
from test_store_support import plan, record, screening, sha256, with_record


@pytest.fixture
def store(new_db):
    s = open_store(new_db("clinic"))
    yield s
    s.close()


@pytest.fixture
def sqlite_store(tmp_path):
    s = open_store(str(tmp_path / "clinic.db"))
    yield s
    s.close()


def test_every_connection_gets_wal_foreign_keys_busy_timeout_and_full_sync(sqlite_store):
    store = sqlite_store
    with store.engine.connect() as conn:
        pragmas = {p: conn.exec_driver_sql(f"PRAGMA {p}").scalar()
                   for p in ("journal_mode", "foreign_keys", "busy_timeout", "synchronous")}
    assert pragmas == {"journal_mode": "wal", "foreign_keys": 1, "busy_timeout": 10000, "synchronous": 2}


def test_default_location_comes_from_the_environment(tmp_path, monkeypatch):
    path = tmp_path / "env.db"
    monkeypatch.setenv("PRESCRIBE_DB", str(path))
    with open_store() as s:
        assert s.path == path.resolve()
    assert path.exists()
    # A named store in a folder that does not exist is refused, never created somewhere new.
    missing = tmp_path / "nested" / "folder" / "env.db"
    monkeypatch.setenv("PRESCRIBE_DB", str(missing))
    with pytest.raises(InputError, match="PRESCRIBE_DB"):
        open_store()
    assert not (tmp_path / "nested").exists()
    # Only the documented default location gets its folders made.
    monkeypatch.delenv("PRESCRIBE_DB")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    with open_store() as s:
        assert s.path == (tmp_path / "data" / "prescribe" / "prescribe.db").resolve()
    assert s.path.exists()


def test_save_get_list_and_screenings(store):
    first = store.save_patient(record(), screening(), clinician="AB")
    assert first["status"] == "created" and first["screening_id"] == 1
    assert store.get_patient("TEST-0001") == record()
    again = store.save_patient(record(), screening(category="osteoporosis", ruleset="test-rules-2"), "CD")
    assert again["status"] == "unchanged" and again["created"] == first["created"]
    screens = store.screenings("TEST-0001")
    assert [s["ruleset_version"] for s in screens] == ["test-rules-1", "test-rules-2"]
    assert screens[1]["result"]["bone_density_category"] == "osteoporosis"
    [row] = store.list_patients()
    assert row["latest_category"] == "osteoporosis" and row["latest_program_version"] is None


def test_an_update_records_who_changed_which_fields(store):
    store.save_patient(record(), None, clinician="AB")
    out = store.save_patient(record(falls_past_year=2, pain_score=3), None, clinician="CD")
    assert out["status"] == "updated" and out["changed_fields"] == ["falls_past_year", "pain_score"]
    assert store.get_patient("TEST-0001").falls_past_year == 2
    audit = store.audit("TEST-0001")
    assert [a["action"] for a in audit] == ["person_created", "person_updated"]
    assert audit[1]["clinician"] == "CD" and audit[1]["detail"]["changed_fields"] == ["falls_past_year", "pain_score"]


def test_a_record_save_based_on_an_older_version_is_a_conflict_and_keeps_both(store):
    """Two clinicians open version 1 of the same person; the first save wins, the second
    is refused naming both versions and who saved, and nothing is overwritten."""
    first = store.save_patient(record(), screening(), clinician="AB", based_on_version=0)
    assert first["record_version"] == 1
    cd = store.save_patient(record(falls_past_year=2), None, clinician="CD", based_on_version=1)
    assert cd["status"] == "updated" and cd["record_version"] == 2
    with pytest.raises(ConflictError) as info:
        store.save_patient(record(pain_score=5), screening(), clinician="EF", based_on_version=1)
    message = str(info.value)
    assert "version 2" in message and "record version 1" in message and "CD" in message
    assert info.value.latest_version == 2
    assert store.get_patient("TEST-0001").falls_past_year == 2 and store.get_patient("TEST-0001").pain_score != 5
    assert len(store.screenings("TEST-0001")) == 1  # the refused save's screening was not stored either
    # A stale version that changes nothing is not a conflict; the current one saves.
    assert store.save_patient(record(falls_past_year=2), None, "EF", based_on_version=1)["status"] == "unchanged"
    assert store.save_patient(record(falls_past_year=2, pain_score=5), None, "EF",
                              based_on_version=2)["record_version"] == 3
    # Starting a "new" person whose id someone else already stored is a conflict too.
    with pytest.raises(ConflictError, match="as a new person"):
        store.save_patient(record(age_years=90), None, "GH", based_on_version=0)
    assert [p["record_version"] for p in store.list_patients()] == [3]


def test_an_unchecked_update_keeps_the_replaced_values_in_the_audit(store):
    store.save_patient(record(), None, clinician="AB")
    store.save_patient(record(falls_past_year=4), None, clinician="CD")
    [_, update] = store.audit("TEST-0001")
    assert update["detail"]["previous"] == {"falls_past_year": record().falls_past_year}
    assert update["detail"]["record_version"] == 2 and update["detail"]["based_on_version"] is None


@pytest.mark.parametrize("bad", [-1, True, "2", 1.0])
def test_a_bad_record_version_names_the_field(store, bad):
    with pytest.raises(InputError, match="based_on_version"):
        store.save_patient(record(), None, "AB", based_on_version=bad)
    assert store.list_patients() == []


def test_unknown_person_is_not_found_naming_the_id(store):
    with pytest.raises(NotFoundError, match="NOBODY-9"):
        store.get_patient("NOBODY-9")
    with pytest.raises(NotFoundError, match="NOBODY-9"):
        store.save_program("NOBODY-9", plan("NOBODY-9"), "AB", None)


def test_program_versions_are_all_kept(store):
    store.save_patient(record(), screening())
    assert store.save_program("TEST-0001", plan(marker="v1"), "AB", None, note="first") == 1
    assert store.save_program("TEST-0001", plan(weeks=3, marker="v2"), "CD", 1, note="longer") == 2
    versions = store.program_versions("TEST-0001")
    assert [(v["version"], v["based_on_version"], v["clinician"], v["note"]) for v in versions] == [
        (1, None, "AB", "first"), (2, 1, "CD", "longer")]
    assert versions[1]["summary"]["weeks"] == 3 and versions[1]["summary"]["max_impact_level"] == 1  # brisk walking
    assert store.get_program("TEST-0001").marker == "v2"  # a field of another tool: kept
    assert store.get_program("TEST-0001", 1).model_dump(mode="json", exclude_unset=True) == plan(marker="v1")
    with pytest.raises(NotFoundError, match="version 7"):
        store.get_program("TEST-0001", 7)
    assert store.list_patients()[0]["latest_program_version"] == 2


def test_second_clinician_saving_from_an_older_version_is_refused(store):
    """Two clinicians open version 1; the first saves version 2; the second's save,
    still based on version 1, must be refused and overwrite nothing."""
    store.save_patient(record(), screening())
    store.save_program("TEST-0001", plan(marker="v1"), "AB", None)
    store.save_program("TEST-0001", plan(marker="by AB"), "AB", based_on_version=1)
    with pytest.raises(ConflictError) as err:
        store.save_program("TEST-0001", plan(marker="by CD"), "CD", based_on_version=1)
    message = str(err.value)
    assert "version 2" in message and "based on version 1" in message and "AB" in message
    assert err.value.latest_version == 2
    assert [v["version"] for v in store.program_versions("TEST-0001")] == [1, 2]
    assert store.get_program("TEST-0001").marker == "by AB"


def test_a_first_version_when_one_exists_is_a_conflict_too(store):
    store.save_patient(record(), None)
    store.save_program("TEST-0001", plan(), "AB", None)
    with pytest.raises(ConflictError, match="as a first version"):
        store.save_program("TEST-0001", plan(), "CD", None)
    with pytest.raises(ConflictError, match="based on version 5"):
        store.save_program("TEST-0001", plan(), "CD", 5)


@pytest.mark.parametrize("kwargs, field", [
    ({"plan": {"patient_id": "TEST-0001"}}, "plan_format_version"),
    ({"plan": plan("SOMEONE-ELSE")}, "plan.patient_id"),
    ({"clinician": "  "}, "clinician"),
    ({"based_on_version": 0}, "based_on_version"),
    ({"plan": {**plan(), "bad": float("nan")}}, "plan"),
])
def test_bad_program_input_names_the_field_and_writes_nothing(store, kwargs, field):
    store.save_patient(record(), None)
    args = {"patient_id": "TEST-0001", "plan": plan(), "clinician": "AB", "based_on_version": None, **kwargs}
    with pytest.raises(InputError, match=field):
        store.save_program(**args)
    assert store.program_versions("TEST-0001") == []
    assert [a["action"] for a in store.audit()] == ["person_created"]


def test_sql_and_html_in_text_round_trip_unchanged_and_harm_nothing(store, new_db):
    pid = "Robert'); DROP TABLE people;--"
    html = "<script>alert(1)</script>"
    store.save_patient(record(pid), screening(pid), clinician=html)
    store.save_program(pid, plan(pid, marker=html + "' OR 1=1 --"), clinician=pid, based_on_version=None,
                       note="'); DELETE FROM program_versions;-- " + html)
    store.add_session_log(pid, "2026-02-03", {"done": html}, program_version=1, rpe=5, pain=1, notes=pid)
    assert store.get_patient(pid).patient_id == pid
    assert store.get_program(pid).marker == html + "' OR 1=1 --"
    [version] = store.program_versions(pid)
    assert version["clinician"] == pid and version["note"].startswith("'); DELETE")
    assert store.audit(pid)[0]["clinician"] == html
    assert store.session_logs(pid)[0]["notes"] == pid
    assert set(models.TABLES_0002) <= set(inspect(store.engine).get_table_names())
    copy = open_store(new_db("copy"))
    assert copy.import_bundle(store.export_patient(pid))["status"] == "imported"
    assert copy.export_patient(pid) == store.export_patient(pid)
    copy.close()


def _full_person(store, pid="TEST-0001"):
    store.save_patient(record(pid), screening(pid), clinician="AB")
    store.save_patient(record(pid, falls_past_year=1), screening(pid, ruleset="test-rules-2"), clinician="CD")
    store.save_program(pid, plan(pid, marker="v1"), "AB", None, note="start")
    store.save_program(pid, plan(pid, weeks=4, marker="v2"), "CD", 1, note="progress")
    store.add_session_log(pid, "2026-01-12", [{"exercise_id": "heel_drop", "impacts": 20}], program_version=2,
                          rpe=6, pain=2, notes="felt fine", clinician="CD")


def test_export_import_round_trip_is_exact(store, new_db):
    _full_person(store)
    bundle = store.export_patient("TEST-0001")
    assert bundle["bundle_format_version"] == "1" and bundle["cautions"]
    assert [p["version"] for p in bundle["programs"]] == [1, 2]
    assert len(bundle["screenings"]) == 2 and len(bundle["session_logs"]) == 1
    wire = json.loads(json.dumps(bundle))  # as written to and read from a file
    with open_store(new_db("other")) as other:
        out = other.import_bundle(wire)
        assert out == {"patient_id": "TEST-0001", "status": "imported", "screenings": 2, "program_versions": 2,
                       "session_logs": 1, "sessions": 0, "sensor_summaries": 0, "retests": 0,
                       "audit_entries": len(bundle["audit"])}
        assert other.export_patient("TEST-0001") == bundle
        assert other.program_versions("TEST-0001") == store.program_versions("TEST-0001")
        # The import itself is in the store's audit log, but not in the person's bundle.
        assert other.audit("TEST-0001")[-1]["action"] == "bundle_imported"
        # Importing the same bundle again changes nothing.
        assert other.import_bundle(wire)["status"] == "unchanged"
        assert other.export_patient("TEST-0001") == bundle


def test_import_over_a_different_person_is_refused_and_changes_nothing(store, new_db):
    _full_person(store)
    bundle = store.export_patient("TEST-0001")
    with open_store(new_db("other")) as other:
        other.save_patient(record(), screening(), clinician="EF")
        before = other.export_patient("TEST-0001")
        with pytest.raises(ConflictError, match="already in the store"):
            other.import_bundle(bundle)
        assert other.export_patient("TEST-0001") == before


@pytest.mark.parametrize("mutate, field", [
    (lambda b: b["programs"][1].update(version=5), "programs[1].version"),
    (lambda b: b["programs"][1]["plan"].update(patient_id="X"), "programs[1].plan.patient_id"),
    (lambda b: b["person"]["record"].update(age_years=12), "person.record.age_years"),
    (lambda b: b["screenings"][0].update(created="yesterday"), "screenings[0].created"),
    (lambda b: b.update(bundle_format_version="9"), "bundle_format_version"),
    (lambda b: b.pop("programs"), "programs"),
    (lambda b: b["session_logs"][0].update(rpe=11), "session_logs[0].rpe"),
])
def test_a_malformed_bundle_names_the_field_and_writes_nothing(store, new_db, mutate, field):
    _full_person(store)
    bundle = json.loads(json.dumps(store.export_patient("TEST-0001")))
    mutate(bundle)
    with pytest.raises(InputError) as err:
        parse_bundle(bundle)
    assert field in str(err.value)
    with open_store(new_db("other")) as other:
        with pytest.raises(InputError):
            other.import_bundle(bundle)
        assert other.list_patients() == [] and other.audit() == []


def test_session_logs_and_clinic_templates(store):
    store.save_patient(record(), None)
    with pytest.raises(NotFoundError, match="program version 1"):
        store.add_session_log("TEST-0001", "2026-01-12", {}, program_version=1)
    with pytest.raises(InputError, match="rpe must be a whole number from 0 to 10"):
        store.add_session_log("TEST-0001", "2026-01-12", {}, rpe=12)
    with pytest.raises(InputError, match="session_date"):
        store.add_session_log("TEST-0001", "12/01/2026", {})
    log_id = store.add_session_log("TEST-0001", "2026-01-12", {"walk_minutes": 20}, rpe=4, pain=0)
    assert store.session_logs("TEST-0001")[0]["session_log_id"] == log_id
    assert store.add_template("Osteopenia start", {"weeks": 12}, "Lead A") == 1
    assert store.add_template("Osteopenia start", {"weeks": 16}, "Lead A") == 2
    store.approve_template("Osteopenia start", 2, "Lead B")
    with pytest.raises(InputError, match="approved by Lead B"):
        store.approve_template("Osteopenia start", 2, "Lead C")
    rows = store.templates("Osteopenia start")
    assert [(t["version"], t["status"], t["approved_by"]) for t in rows] == [(1, "draft", None), (2, "approved", "Lead B")]


# -- migrations -------------------------------------------------------------------------

def _alembic_upgrade(where, revision):
    from alembic import command
    from alembic.config import Config
    engine = create_engine(where if "://" in str(where) else f"sqlite:///{where}")
    with engine.begin() as conn:
        cfg = Config()
        cfg.set_main_option("script_location", str(store_api.MIGRATIONS_DIR))
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, revision)
    engine.dispose()


def test_head_revision_constant_matches_the_migrations():
    from alembic.config import Config
    from alembic.script import ScriptDirectory
    cfg = Config()
    cfg.set_main_option("script_location", str(store_api.MIGRATIONS_DIR))
    assert ScriptDirectory.from_config(cfg).get_current_head() == HEAD_REVISION
    assert list(store_api.KNOWN_REVISIONS)[-1] == HEAD_REVISION


def test_migrated_schema_matches_the_models(store):
    insp = inspect(store.engine)
    for table in models.metadata.sorted_tables:
        assert {c["name"] for c in insp.get_columns(table.name)} == set(table.columns.keys()), table.name


def test_an_older_store_opens_and_upgrades_without_losing_rows(new_db):
    where = new_db("old")
    _alembic_upgrade(where, "0001")
    engine = create_engine(where if "://" in where else f"sqlite:///{where}")
    rec = json.dumps(record("OLD-1").model_dump(mode="json"))
    with engine.begin() as conn:
        conn.execute(text("INSERT INTO people VALUES ('OLD-1', :rec, '2025-01-01T00:00:00+00:00', "
                          "'2025-01-01T00:00:00+00:00')"), {"rec": rec})
        conn.execute(text("INSERT INTO program_versions (patient_id, version, based_on_version, created, clinician, "
                          "note, summary_json, plan_json) VALUES ('OLD-1', 1, NULL, '2025-01-02T00:00:00+00:00', "
                          "'AB', '', '{}', :plan)"), {"plan": json.dumps(plan("OLD-1"))})
    engine.dispose()
    with open_store(where) as s:
        assert s.revision() == HEAD_REVISION
        assert s.get_patient("OLD-1") == record("OLD-1")
        assert s.record_version("OLD-1") == 1  # revision 0006 numbers existing records from 1
        assert s.get_program("OLD-1").model_dump(mode="json", exclude_unset=True) == plan("OLD-1")
        assert s.save_program("OLD-1", plan("OLD-1"), "CD", 1) == 2
        assert s.add_session_log("OLD-1", "2026-01-01", {}, program_version=2) == 1


def test_opening_a_current_store_skips_alembic(new_db, monkeypatch):
    path = new_db("fast")
    open_store(path).close()
    import alembic.command

    def boom(*a, **k):
        raise AssertionError("alembic ran on a store already at head")

    monkeypatch.setattr(alembic.command, "upgrade", boom)
    with open_store(path) as s:
        assert s.revision() == HEAD_REVISION


# -- files that are not a store ---------------------------------------------------------

def _foreign_sqlite(path):
    conn = sqlite3.connect(path)
    conn.execute("CREATE TABLE invoices (id INTEGER PRIMARY KEY, amount REAL)")
    conn.execute("INSERT INTO invoices (amount) VALUES (12.5)")
    conn.commit()
    conn.close()


def _newer_store(path):
    open_store(str(path)).close()
    conn = sqlite3.connect(path)
    conn.execute("UPDATE alembic_version SET version_num = '9999'")
    conn.commit()
    conn.close()


@pytest.mark.parametrize("make, message", [
    (lambda p: p.write_bytes(bytes(range(256)) * 64), "not an SQLite database"),
    (lambda p: p.write_text("patient_id,age_years\nX,70\n"), "not an SQLite database"),
    (_foreign_sqlite, "holds other tables (invoices)"),
    (_newer_store, "newer or unknown schema revision ('9999'"),
    (lambda p: p.write_bytes(b"SQLite format 3\x00" + bytes(range(256)) * 16), "not a readable prescribe store"),
])
def test_a_file_that_is_not_a_store_is_refused_and_left_unchanged(tmp_path, make, message):
    path = tmp_path / "given.db"
    make(path)
    before = sha256(path)
    siblings = _siblings(tmp_path)
    with pytest.raises(StoreError) as err:
        open_store(str(path))
    assert message in str(err.value) and str(path) in str(err.value)
    assert sha256(path) == before
    assert _siblings(tmp_path) == siblings  # no rollback journal or new file left behind


def _siblings(folder):
    # SQLite's read-only open of a WAL-mode file may leave its -wal and -shm index files
    # (the main file is untouched); anything else would be a write.
    return sorted(p.name for p in folder.iterdir() if not p.name.endswith(("-wal", "-shm")))


def test_a_missing_store_is_not_created_when_asked_not_to(tmp_path):
    path = tmp_path / "absent.db"
    with pytest.raises(StoreError, match="prescribe db init"):
        open_store(str(path), create=False)
    assert not path.exists()


def test_a_directory_or_a_bad_url_is_a_clear_error(tmp_path):
    with pytest.raises(StoreError, match="is a directory"):
        open_store(str(tmp_path))
    with pytest.raises(StoreError, match="driver is not installed"):
        open_store("nosuchdb+nodriver://host/db")


# -- backup ------------------------------------------------------------------------------

def test_backup_is_a_working_store_and_never_overwrites_by_accident(sqlite_store, tmp_path):
    store = sqlite_store
    _full_person(store)
    target = tmp_path / "backups" / "copy.db"
    info = store.backup(target)
    assert info["integrity_check"] == "ok" and info["people"] == 1 and info["program_versions"] == 2
    with open_store(str(target)) as copy:
        assert copy.export_patient("TEST-0001") == store.export_patient("TEST-0001")
    before = sha256(target)
    with pytest.raises(InputError, match="does not exist yet"):
        store.backup(target)
    assert sha256(target) == before
    store.save_program("TEST-0001", plan(marker="v3"), "AB", 2)
    assert store.backup(target, force=True)["program_versions"] == 3
    assert not [p for p in target.parent.iterdir() if p.name.endswith(".partial")]


def test_backup_of_a_postgresql_store_points_to_pg_dump(pg_url, tmp_path):
    from pg_server import create_schema, drop_schema, with_schema
    create_schema(pg_url, "t_backup_refused")
    with open_store(with_schema(pg_url, "t_backup_refused")) as store:
        with pytest.raises(StoreError, match="pg_dump"):
            store.backup(tmp_path / "copy.db")
    assert not (tmp_path / "copy.db").exists()
    drop_schema(pg_url, "t_backup_refused")


def test_store_does_not_load_ui_libraries(tmp_path):
    import subprocess  # a clean process: other tests may have imported the UI libraries
    code = ("import sys, prescribe.store; s = prescribe.store.open_store(sys.argv[1]); "
            "print('ipywidgets' in sys.modules, 'bqplot' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code, str(tmp_path / "l.db")], capture_output=True, text=True)
    assert out.stdout.split() == ["False", "False"], out.stderr


def test_one_store_object_can_be_shared_by_threads(store):
    """The app reads and writes one Store from more than one thread."""
    from concurrent.futures import ThreadPoolExecutor
    for i in range(4):
        store.save_patient(record(f"THREAD-{i}"), None)

    def work(i):
        pid = f"THREAD-{i}"
        for v in range(10):
            store.save_program(pid, plan(pid), "AB", v or None)
        return [x["version"] for x in store.program_versions(pid)]

    with ThreadPoolExecutor(4) as pool:
        assert list(pool.map(work, range(4))) == [list(range(1, 11))] * 4


def test_under_the_hub_every_write_records_the_login(store, monkeypatch):
    """Whatever a caller passes, a write made in a clinician's hub server records the login."""
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    store.save_patient(record(), screening())                      # no name given: the login
    store.save_program("TEST-0001", plan(), "mara.teal", None)     # the login itself: fine
    with pytest.raises(InputError, match="otto.fenn"):
        store.save_program("TEST-0001", plan(), "otto.fenn", 1)   # another name: refused, nothing saved
    store.add_session_log("TEST-0001", "2026-01-12", {}, program_version=1)
    store.add_template("Osteopenia start", {"weeks": 12}, "")
    assert [v["clinician"] for v in store.program_versions("TEST-0001")] == ["mara.teal"]
    assert {a["clinician"] for a in store.audit()} == {"mara.teal"}
    assert store.session_logs("TEST-0001")[0]["clinician"] == "mara.teal"
    assert store.templates()[0]["created_by"] == "mara.teal"
    # an imported bundle keeps the names it was exported with (history is not rewritten)
    monkeypatch.delenv("JUPYTERHUB_USER")
    bundle = store.export_patient("TEST-0001")
    assert bundle["programs"][0]["clinician"] == "mara.teal"


# -- version-2 records: the schema column, and the handout's name kept out of exports ------------

V2_FIELDS = {"display_name": "Rosa", "menopause": "postmenopausal", "z_scores": {"lumbar_spine": -0.9},
             "medications": [{"class": "bisphosphonate", "months_on": 24, "months_since_last_dose": 0}],
             "cognition": "none", "lives_alone": False, "has_carer": True}


def _v2_plan(pid: str, rec) -> dict:
    return with_record(plan(pid), rec)


def test_a_version_2_record_saves_reads_and_carries_its_schema_version(store):
    store.save_patient(record("V1-0001"), screening("V1-0001"), "AB")
    v2 = record("V2-0001", **V2_FIELDS)
    assert v2.version == 2
    store.save_patient(v2, screening("V2-0001"), "AB")
    assert store.get_patient("V2-0001").model_dump() == v2.model_dump() and store.get_patient("V2-0001").medications[0].class_ == "bisphosphonate"
    rows = {r["patient_id"]: r for r in store.list_patients()}
    assert (rows["V1-0001"]["record_schema"], rows["V2-0001"]["record_schema"]) == (1, 2)
    # The edit counter keeps its own meaning: a change is version 2 of the record, and a
    # version-1 record given a version-2 field moves to schema 2.
    out = store.save_patient(record("V1-0001", cognition="mild"), None, "CD", based_on_version=1)
    assert out["record_version"] == 2 and sorted(out["changed_fields"]) == ["cognition", "record_version"]
    rows = {r["patient_id"]: r for r in store.list_patients()}
    assert (rows["V1-0001"]["record_schema"], rows["V1-0001"]["record_version"]) == (2, 2)
    assert rows["V2-0001"]["record_version"] == 1


def test_revision_0007_fills_the_record_schema_from_the_stored_records(new_db):
    where = new_db("at0006")
    _alembic_upgrade(where, "0006")
    engine = create_engine(where if "://" in where else f"sqlite:///{where}")
    rows = {"OLD-V1": record("OLD-V1"), "OLD-V2": record("OLD-V2", **V2_FIELDS)}
    with engine.begin() as conn:
        for pid, rec in rows.items():
            conn.execute(text("INSERT INTO people (patient_id, record_json, created, updated, record_version) "
                              "VALUES (:pid, :rec, '2026-11-01T00:00:00+00:00', '2026-11-02T00:00:00+00:00', 3)"),
                         {"pid": pid, "rec": json.dumps(rec.model_dump(mode="json"))})
    engine.dispose()
    assert json.loads(json.dumps(rows["OLD-V2"].model_dump(mode="json")))["record_version"] == 2
    with open_store(where) as s:
        assert s.revision() == HEAD_REVISION  # 0007 and every revision after it applied
        listed = {r["patient_id"]: r for r in s.list_patients()}
        assert {p: r["record_schema"] for p, r in listed.items()} == {"OLD-V1": 1, "OLD-V2": 2}
        assert {p: r["record_version"] for p, r in listed.items()} == {"OLD-V1": 3, "OLD-V2": 3}  # untouched
        assert s.get_patient("OLD-V2").model_dump() == rows["OLD-V2"].model_dump()


def _names_in(bundle: dict) -> list[str]:
    text = json.dumps(bundle)
    return [m for m in ("Rosa", "Rosie") if m in text]


def test_an_export_leaves_out_the_handouts_name_unless_asked_and_an_import_keeps_the_stored_one(store, new_db):
    pid = "V2-0002"
    store.save_patient(record(pid, **{**V2_FIELDS, "display_name": "Rosie"}), screening(pid), "AB")
    rec = record(pid, **V2_FIELDS)  # the name corrected: the audit keeps the replaced value
    store.save_patient(rec, screening(pid), "AB", plan=_v2_plan(pid, rec))
    full = store.export_patient(pid, with_display_name=True)
    assert full["person"]["record"]["display_name"] == "Rosa"
    assert full["programs"][0]["plan"]["record"]["display_name"] == "Rosa"
    assert [a["detail"]["previous"] for a in full["audit"] if a["action"] == "person_updated"] == \
        [{"display_name": "Rosie"}]
    plain = store.export_patient(pid)
    assert _names_in(plain) == [] and _names_in(full) == ["Rosa", "Rosie"]
    assert plain["person"]["record"]["record_version"] == 2  # still a version-2 record
    assert plain["programs"][0]["plan"]["record"]["menopause"] == "postmenopausal"
    assert [a["detail"]["changed_fields"] for a in plain["audit"] if a["action"] == "person_updated"] == \
        [["display_name"]]
    # Round trip into another store: the same bundle back, without the name.
    with open_store(new_db("other")) as other:
        assert other.import_bundle(plain)["status"] == "imported"
        assert other.export_patient(pid) == plain and other.export_patient(pid, with_display_name=True) == plain
        assert other.get_patient(pid).display_name is None and other.get_patient(pid).version == 2
        assert other.list_patients()[0]["record_schema"] == 2
    # Back into the first store: the same person apart from the name, so nothing changes and
    # the stored name stays.
    assert store.import_bundle(plain)["status"] == "unchanged"
    assert store.get_patient(pid).display_name == "Rosa"
    assert store.import_bundle(full)["status"] == "unchanged"
    # A bundle that differs in anything else is still refused, name or no name.
    changed = json.loads(json.dumps(plain))
    changed["person"]["record"]["height_cm"] = 159.0
    with pytest.raises(ConflictError):
        store.import_bundle(changed)
    renamed = json.loads(json.dumps(full))
    renamed["person"]["record"]["display_name"] = "Rosalind"
    with pytest.raises(ConflictError):
        store.import_bundle(renamed)
    assert store.get_patient(pid).display_name == "Rosa"
