"""The store's commands end to end: db init, db backup, save, export, import.

Bad input exits 2 and writes nothing; a conflict exits 1 naming what conflicts;
never a traceback.  The person here is invented."""

from __future__ import annotations

import json
import sqlite3

import pytest

from conftest import run_cli
from prescribe.cli import main
from prescribe.store import HEAD_REVISION, open_store
from test_store_support import plan, sha256, with_record


class _Result:
    def __init__(self, returncode, stdout, stderr):
        self.returncode, self.stdout, self.stderr = returncode, stdout, stderr


@pytest.fixture
def cli_here(capsys):
    """The same command line, run in this process (a new interpreter per call is slow);
    the tests marked "subprocess" run the installed entry point itself."""
    def run(*args):
        capsys.readouterr()
        try:
            code = main(list(args))
        except SystemExit as exc:  # argparse usage errors
            code = exc.code
        out, err = capsys.readouterr()
        return _Result(code, out, err)
    return run

PERSON = {"patient_id": "CLI-0001", "age_years": 72, "sex": "female", "body_mass_kg": 58.0, "height_cm": 160.0,
          "t_scores": {"lumbar_spine": -2.7, "total_hip": -2.2}, "falls_past_year": 1, "timed_up_and_go_s": 11.0}


@pytest.fixture
def store_db(new_db, monkeypatch) -> str:
    """A fresh store on each backend (SQLite file, PostgreSQL schema), set as PRESCRIBE_DB."""
    where = new_db("cli")
    monkeypatch.setenv("PRESCRIBE_DB", where)
    return where


@pytest.fixture
def person_file(tmp_path):
    path = tmp_path / "person.json"
    path.write_text(json.dumps(PERSON))
    return path


def _ok(result):
    assert result.returncode == 0, result.stderr
    assert "Traceback" not in result.stderr
    return json.loads(result.stdout)


def _fails(result, code, *words):
    assert result.returncode == code, (result.returncode, result.stdout, result.stderr)
    assert "Traceback" not in result.stderr and result.stdout == ""
    for word in words:
        assert word in result.stderr, result.stderr


def test_db_init_creates_and_is_repeatable(cli_here, store_db):
    first = _ok(cli_here("db", "init"))
    assert first["revision"] == first["head_revision"] == HEAD_REVISION
    if "://" in store_db:  # a database URL is shown without its password
        password = store_db.split("://", 1)[1].split("@", 1)[0].split(":", 1)[1]
        assert "***" in first["db"] and password not in first["db"] and password not in json.dumps(first)
    else:
        assert first["db"] == store_db
    assert _ok(cli_here("db", "init"))["people"] == 0


def test_save_screens_stores_and_prints_cautions(store_db, person_file):
    out = _ok(run_cli("save", str(person_file), "--clinician", "Demo Physio (invented)"))
    assert out["patient_id"] == "CLI-0001" and out["status"] == "created" and out["screening_id"] == 1
    assert out["screening"]["bone_density_category"] == "osteoporosis"  # lowest T-score -2.7 (WHO 1994 cut-off -2.5)
    assert any("clinical judgment" in c for c in out["cautions"])
    with open_store(store_db) as store:
        [screen] = store.screenings("CLI-0001")
        assert screen["ruleset_version"] == out["screening"]["ruleset_version"] != ""
        assert store.audit("CLI-0001")[0]["clinician"] == "Demo Physio (invented)"
    assert _ok(run_cli("save", str(person_file)))["status"] == "unchanged"


@pytest.mark.parametrize("content, words", [
    ({**PERSON, "age_years": 12}, ["age_years must be a whole number from 18 to 110", "not 12"]),
    ("{not json", ["well-formed JSON"]),
    ({**PERSON, "conditions": ["flu"]}, ["conditions"]),
])
def test_save_with_bad_input_exits_2_and_writes_nothing(tmp_path, content, words):
    bad = tmp_path / "bad.json"
    bad.write_text(content if isinstance(content, str) else json.dumps(content))
    db = tmp_path / "never.db"
    _fails(run_cli("save", str(bad), "--db", str(db)), 2, *words)
    assert not db.exists()


def test_export_then_import_round_trips_exactly(cli_here, tmp_path, store_db, new_db, person_file):
    _ok(cli_here("save", str(person_file), "--clinician", "AB"))
    with open_store(store_db) as store:
        store.save_program("CLI-0001", plan("CLI-0001", marker="<b>v1</b>"), "AB", None, note="start")
        store.save_program("CLI-0001", plan("CLI-0001", weeks=3), "CD", 1, note="'); DROP TABLE people;--")
    bundle = _ok(cli_here("export", "CLI-0001"))
    assert [p["version"] for p in bundle["programs"]] == [1, 2] and bundle["cautions"]
    bundle_file = tmp_path / "bundle.json"
    assert _ok(cli_here("export", "CLI-0001", "--out", str(bundle_file)))["program_versions"] == 2
    assert json.loads(bundle_file.read_text()) == bundle
    other = new_db("other")
    assert _ok(cli_here("import", str(bundle_file), "--db", str(other)))["status"] == "imported"
    assert _ok(cli_here("export", "CLI-0001", "--db", str(other))) == bundle
    assert _ok(cli_here("import", str(bundle_file), "--db", str(other)))["status"] == "unchanged"


def test_export_of_an_unknown_person_exits_2_naming_the_id(cli_here, store_db, person_file):
    _ok(cli_here("save", str(person_file)))
    _fails(cli_here("export", "NOBODY-42"), 2, "PATIENT_ID", "NOBODY-42")


def test_export_from_a_missing_store_does_not_create_it(cli_here, tmp_path):
    db = tmp_path / "absent.db"
    _fails(cli_here("export", "X", "--db", str(db)), 1, "prescribe db init")
    assert not db.exists()


@pytest.mark.parametrize("how", ["env", "--db", "url"])
@pytest.mark.parametrize("command", [("db", "init"), ("save", "PERSON"), ("export", "CLI-0001")])
def test_a_store_in_a_folder_that_does_not_exist_exits_2_and_creates_nothing(cli_here, tmp_path, person_file,
                                                                              monkeypatch, how, command):
    folder = tmp_path / "no" / "such" / "folder"
    db = folder / "x.db"
    args = [str(person_file) if a == "PERSON" else a for a in command]
    monkeypatch.delenv("PRESCRIBE_DB", raising=False)
    if how == "env":
        monkeypatch.setenv("PRESCRIBE_DB", str(db))
    else:
        args += ["--db", str(db) if how == "--db" else "sqlite:///" + str(db)]
    _fails(cli_here(*args), 2, str(db), "PRESCRIBE_DB" if how == "env" else "--db", "folder", "must exist")
    assert not (tmp_path / "no").exists()


def test_db_init_creates_the_store_file_in_an_existing_folder(cli_here, tmp_path):
    db = tmp_path / "new.db"
    assert _ok(cli_here("db", "init", "--db", str(db)))["db"] == str(db)
    assert db.is_file()


def test_import_over_a_different_person_exits_1_and_changes_nothing(cli_here, tmp_path, store_db, new_db,
                                                                  person_file):
    _ok(cli_here("save", str(person_file), "--clinician", "AB"))
    bundle_file = tmp_path / "bundle.json"
    _ok(cli_here("export", "CLI-0001", "--out", str(bundle_file)))
    changed = tmp_path / "changed.json"
    changed.write_text(json.dumps({**PERSON, "falls_past_year": 3}))
    other = new_db("other")
    _ok(cli_here("save", str(changed), "--db", str(other)))
    before = _ok(cli_here("export", "CLI-0001", "--db", str(other)))
    _fails(cli_here("import", str(bundle_file), "--db", str(other)), 1, "CLI-0001", "already in the store")
    assert _ok(cli_here("export", "CLI-0001", "--db", str(other))) == before


def test_import_of_a_malformed_bundle_exits_2_and_writes_nothing(cli_here, tmp_path, tmp_db, person_file):
    _ok(cli_here("save", str(person_file)))
    bundle = _ok(cli_here("export", "CLI-0001"))
    bundle["screenings"][0]["created"] = "last Tuesday"
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps(bundle))
    db = tmp_path / "never.db"
    _fails(cli_here("import", str(bad), "--db", str(db)), 2, "screenings[0].created")
    assert not db.exists()


def test_backup_copies_and_refuses_to_overwrite(cli_here, tmp_path, tmp_db, person_file):
    _ok(cli_here("save", str(person_file)))
    target = tmp_path / "copy.db"
    out = _ok(cli_here("db", "backup", str(target)))
    assert out["integrity_check"] == "ok" and out["people"] == 1
    conn = sqlite3.connect(target)
    assert conn.execute("SELECT patient_id FROM people").fetchall() == [("CLI-0001",)]
    conn.close()
    before = sha256(target)
    _fails(cli_here("db", "backup", str(target)), 2, "--force")
    assert sha256(target) == before
    assert _ok(cli_here("db", "backup", str(target), "--force"))["people"] == 1


@pytest.mark.parametrize("kind", ["random bytes", "foreign sqlite"])
def test_a_file_that_is_not_a_store_gives_a_clear_message(cli_here, tmp_path, person_file, kind):
    db = tmp_path / "given.db"
    if kind == "random bytes":
        db.write_bytes(bytes((i * 37 + 11) % 256 for i in range(8192)))
    else:
        conn = sqlite3.connect(db)
        conn.execute("CREATE TABLE recipes (id INTEGER PRIMARY KEY, title TEXT)")
        conn.commit()
        conn.close()
    before = sha256(db)
    _fails(run_cli("db", "init", "--db", str(db)), 1, "not a prescribe store", "left unchanged")
    for args in (["save", str(person_file)], ["export", "CLI-0001"], ["import", str(person_file)]):
        result = cli_here(*args, "--db", str(db))
        assert result.returncode in (1, 2) and result.stdout == ""
        if args[0] != "import":  # import refuses the person file itself first (not a bundle)
            assert result.returncode == 1 and "not a prescribe store" in result.stderr
    assert sha256(db) == before


def test_a_save_based_on_an_older_record_version_exits_1_and_changes_nothing(cli_here, tmp_path, store_db,
                                                                           person_file):
    first = _ok(cli_here("save", str(person_file), "--clinician", "AB"))
    assert first["record_version"] == 1
    changed = tmp_path / "changed.json"
    changed.write_text(json.dumps({**PERSON, "falls_past_year": 3}))
    second = _ok(cli_here("save", str(changed), "--clinician", "CD", "--based-on-version", "1"))
    assert second["status"] == "updated" and second["record_version"] == 2
    stale = tmp_path / "stale.json"
    stale.write_text(json.dumps({**PERSON, "pain_score": 4}))
    _fails(cli_here("save", str(stale), "--clinician", "AB", "--based-on-version", "1"), 1,
           "record version 1", "version 2", "CD", "Nothing was overwritten")
    _fails(cli_here("save", str(stale), "--based-on-version", "x"), 2, "--based-on-version")
    with open_store(store_db) as store:
        kept = store.get_patient("CLI-0001")
        assert kept.falls_past_year == 3 and kept.pain_score != 4 and store.record_version("CLI-0001") == 2


def test_under_the_hub_save_records_the_login_and_refuses_another_name(cli_here, store_db, person_file, monkeypatch):
    monkeypatch.setenv("JUPYTERHUB_USER", "mara.teal")
    _fails(cli_here("save", str(person_file), "--clinician", "otto.fenn"), 2, "otto.fenn", "mara.teal")
    _ok(cli_here("save", str(person_file)))
    with open_store(store_db) as store:
        assert {a["clinician"] for a in store.audit("CLI-0001")} == {"mara.teal"}


# An invented version-2 person: a postmenopausal woman on a bisphosphonate, whose handout calls her "Nell".
PERSON_V2 = {**PERSON, "patient_id": "CLI-V2-01", "display_name": "Nell", "menopause": "postmenopausal",
             "z_scores": {"lumbar_spine": -1.2}, "cognition": "none", "lives_alone": False, "has_carer": True,
             "medications": [{"class": "bisphosphonate", "months_on": 30, "months_since_last_dose": 0}]}


def test_a_version_2_record_saves_and_the_store_counts_records_by_schema(cli_here, tmp_path, store_db,
                                                                         person_file):
    v2_file = tmp_path / "v2.json"
    v2_file.write_text(json.dumps(PERSON_V2))
    _ok(cli_here("save", str(person_file), "--clinician", "AB"))
    saved = _ok(cli_here("save", str(v2_file), "--clinician", "AB"))
    assert saved["status"] == "created" and saved["screening"]["flags"]
    assert _ok(cli_here("db", "init"))["people_by_record_schema"] == {"1": 1, "2": 1}
    with open_store(store_db) as store:
        assert store.get_patient("CLI-V2-01").display_name == "Nell"


def test_export_leaves_the_handouts_name_out_unless_asked_and_import_keeps_the_stored_one(cli_here, tmp_path,
                                                                                          store_db, new_db):
    v2_file = tmp_path / "v2.json"
    v2_file.write_text(json.dumps(PERSON_V2))
    _ok(cli_here("save", str(v2_file), "--clinician", "AB"))
    with open_store(store_db) as store:
        p = with_record(plan("CLI-V2-01"), store.get_patient("CLI-V2-01"))
        store.save_program("CLI-V2-01", p, "AB", None, note="start")
    plain = _ok(cli_here("export", "CLI-V2-01"))
    assert "Nell" not in json.dumps(plain) and "display_name" not in json.dumps(plain)
    assert plain["person"]["record"]["record_version"] == 2 and plain["programs"][0]["plan"]["record"]["menopause"]
    named = _ok(cli_here("export", "CLI-V2-01", "--with-display-name"))
    assert named["person"]["record"]["display_name"] == "Nell" == named["programs"][0]["plan"]["record"]["display_name"]
    out_file = tmp_path / "bundle.json"
    assert _ok(cli_here("export", "CLI-V2-01", "--out", str(out_file)))["with_display_name"] is False
    assert json.loads(out_file.read_text()) == plain
    # Importing the bundle without the name where the person is stored: the same person, the name kept.
    assert _ok(cli_here("import", str(out_file)))["status"] == "unchanged"
    assert _ok(cli_here("export", "CLI-V2-01", "--with-display-name")) == named
    # Into another store: the person without a name, re-screened the same.
    other = new_db("other")
    assert _ok(cli_here("import", str(out_file), "--db", str(other)))["status"] == "imported"
    with open_store(other) as store:
        assert store.get_patient("CLI-V2-01").display_name is None
        assert store.get_patient("CLI-V2-01").medications[0].class_ == "bisphosphonate"
