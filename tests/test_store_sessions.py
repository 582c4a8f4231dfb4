"""The store's session records (revision 0003).  Invented people only."""

from __future__ import annotations

import json
import sqlite3
from datetime import date

import pytest
from sqlalchemy import create_engine

from prescribe.errors import InputError, NotFoundError
from prescribe.sessions.records import parse_session
from prescribe.store import HEAD_REVISION, open_store
from prescribe.store import api as store_api
from test_store_support import plan, record, screening


def _alembic_upgrade(path, revision):
    from alembic import command
    from alembic.config import Config
    engine = create_engine(f"sqlite:///{path}")
    with engine.begin() as conn:
        cfg = Config()
        cfg.set_main_option("script_location", str(store_api.MIGRATIONS_DIR))
        cfg.attributes["connection"] = conn
        command.upgrade(cfg, revision)
    engine.dispose()


def test_a_0002_store_with_session_logs_upgrades_and_keeps_them(tmp_path):
    path = tmp_path / "old.db"
    _alembic_upgrade(path, "0002")
    conn = sqlite3.connect(path)
    conn.execute("INSERT INTO people VALUES ('OLD-2', ?, '2026-01-01T00:00:00+00:00', '2026-01-01T00:00:00+00:00')",
                 (json.dumps(record("OLD-2").model_dump(mode="json")),))
    conn.execute("INSERT INTO program_versions (patient_id, version, based_on_version, created, clinician, note, "
                 "summary_json, plan_json) VALUES ('OLD-2', 1, NULL, '2026-01-05T09:00:00+00:00', 'AB', '', '{}', ?)",
                 (json.dumps(plan("OLD-2")),))
    conn.execute("INSERT INTO session_logs (patient_id, program_version, session_date, done_json, rpe, pain, notes, "
                 "clinician, created) VALUES ('OLD-2', 1, '2026-01-06', '[]', 5, 2, 'old log', 'AB', "
                 "'2026-01-06T10:00:00+00:00')")
    conn.commit()
    conn.close()
    with open_store(str(path)) as s:
        assert s.revision() == HEAD_REVISION
        old = s.sessions("OLD-2")
        assert len(old) == 1 and old[0]["legacy"] and old[0]["pain_during"] == 2 and old[0]["note"] == "old log"
        out = s.add_session(parse_session({"patient_id": "OLD-2", "session_date": "2026-01-20", "pain_during": 1}),
                            "CD", today=date(2026, 1, 21))
        # plan() has no start_date: the week counts from the day the program was created (2026-01-05)
        assert out == {"session_id": 2, "week": 3, "program_version": 1, "patient_id": "OLD-2"}
        assert [x["session_date"] for x in s.sessions("OLD-2")] == ["2026-01-06", "2026-01-20"]
        assert len(s.logged_sessions("OLD-2")) == 1  # the engine reads full records only


def test_add_session_refuses_unknown_people_and_versions_and_writes_nothing(tmp_path):
    with open_store(str(tmp_path / "s.db")) as s:
        s.save_patient(record("S-1"), screening("S-1"))
        sess = parse_session({"patient_id": "S-1", "session_date": "2026-01-20", "pain_during": 1})
        with pytest.raises(InputError, match="none is stored yet"):
            s.add_session(sess, today=date(2026, 1, 21))
        s.save_program("S-1", plan("S-1"), "AB", None)
        with pytest.raises(InputError, match=r"program_version must be a stored program version of 'S-1' \(1 to 1\)"):
            s.add_session(sess.model_copy(update={"program_version": 4}), today=date(2026, 1, 21))
        with pytest.raises(NotFoundError, match="S-404"):
            s.add_session(sess.model_copy(update={"patient_id": "S-404"}), today=date(2026, 1, 21))
        with pytest.raises(InputError, match="not in the future"):
            s.add_session(sess, today=date(2026, 1, 19))
        assert s.sessions("S-1") == []
        assert [a["action"] for a in s.audit("S-1")].count("session_logged") == 0


def test_save_patient_with_a_plan_is_one_transaction(tmp_path):
    with open_store(str(tmp_path / "s.db")) as s:
        bad = plan("S-2")
        bad["weeks"] = []
        with pytest.raises(InputError):
            s.save_patient(record("S-2"), screening("S-2"), "AB", plan=bad)
        assert not s.has_patient("S-2")
        out = s.save_patient(record("S-2"), screening("S-2"), "AB", plan=plan("S-2"))
        assert out["program_version"] == 1 and out["status"] == "created"
        assert s.save_patient(record("S-2"), None, "AB", plan=plan("S-2"))["program_version"] == 2
        assert s.program_versions("S-2")[1]["based_on_version"] == 1
