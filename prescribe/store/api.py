"""The clinic record store: people, screenings, program versions and an audit log.

SQLAlchemy 2 (Core) over SQLite by default; the same code runs on PostgreSQL
given its URL.  Every save is one transaction.  On SQLite each connection runs
in WAL mode with foreign keys on, a 10 s busy timeout and ``synchronous=FULL``,
and write transactions start with ``BEGIN IMMEDIATE`` so that two writers queue
for the lock instead of failing with "database is locked" when a read lock is
upgraded.  Schema migrations (Alembic, shipped in ``migrations/``) run on open;
a database already at the newest revision skips Alembic entirely.

A file that is not a prescribe store (random bytes, another program's SQLite
database, a store from a newer version) is refused with :class:`StoreError`
before anything is written to it.

Nothing is ever overwritten silently: a program save names the version it was
based on and is refused (:class:`ConflictError`) when that is not the latest; a
person's record carries a ``record_version`` and a save that names the record
version it started from is refused the same way when someone changed the record
in between.  An update keeps the replaced values in its audit entry.
"""

from __future__ import annotations

import json
import os
import sqlite3
import tempfile
from datetime import date, datetime, timezone
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sqlalchemy import func, select
from sqlalchemy.engine import Connection
from sqlalchemy.exc import IntegrityError

from .. import __version__
from ..cautions import STANDARD_CAUTIONS
from ..errors import ConflictError, InputError, NotFoundError, StoreError
from ..plan_schema import parse_plan
from ..records import PatientRecord, ScreeningResult, parse_record
from ..safety import assert_safe
from ..settings import db_url
from . import models as m
from .bundle import BUNDLE_FORMAT_VERSION, BUNDLE_KIND, parse_bundle
from .engine import (BUSY_TIMEOUT_MS, HEAD_REVISION, KNOWN_REVISIONS, MIGRATIONS_DIR, SQLITE_MAGIC,
                     SQLITE_SYNCHRONOUS, StoreBase, now_utc)
from .rows import _audit, _clinician, _dumps, _iso_date, _lock_person, _person, _text

if TYPE_CHECKING:
    from ..sessions.records import SessionRecord

__all__ = ["Store", "open_store", "now_utc", "plan_summary", "check_bundle_programs", "db_url", "_audit",
           "HEAD_REVISION", "KNOWN_REVISIONS", "MIGRATIONS_DIR", "BUSY_TIMEOUT_MS", "SQLITE_SYNCHRONOUS",
           "SQLITE_MAGIC", "LOCAL_ONLY_ACTIONS", "TEMPLATE_STATUSES", "TEMPLATE_REVIEW_MAX_DAYS",
           "TEMPLATE_REVIEW_DEFAULT_DAYS"]

#: Audit actions; "bundle_imported" rows describe this store, not the person, so an
#: export leaves them out (export(import(export(x))) == export(x)).
LOCAL_ONLY_ACTIONS = ("bundle_imported",)
TEMPLATE_STATUSES = ("draft", "approved", "retired")
#: Longest review interval accepted for an approved template version [days] (common practice:
#: guidance is checked against new evidence at least every few years; NICE PMG20 ch. 13).
TEMPLATE_REVIEW_MAX_DAYS = 3 * 366
#: Default review interval when the approver gives no review-by date [days] (common practice).
TEMPLATE_REVIEW_DEFAULT_DAYS = 365


def open_store(url: str | None = None, *, create: bool = True) -> "Store":
    """Open (and, if needed, create or migrate) the store.

    Parameters
    ----------
    url
        A path or an SQLAlchemy URL; None uses ``PRESCRIBE_DB`` then the default
        location (:func:`prescribe.settings.db_url`).
    create
        When False, a SQLite file that does not exist is an error instead of
        being created (for read-only commands such as ``prescribe export``).
    """
    return Store(db_url(url), create=create)


class Store(StoreBase):
    """One clinic's records.  Open it with :func:`open_store`; close it with :meth:`close`."""

    # -- people and screenings ---------------------------------------------------------

    def save_patient(self, record: PatientRecord, screening: ScreeningResult | None = None,
                     clinician: str = "", *, plan: dict | None = None, plan_note: str = "",
                     based_on_version: int | None = None) -> dict:
        """Create or update a person and, if given, append a screening and store ``plan`` as
        the person's next program version; one transaction (all of it or nothing).

        ``based_on_version`` is the ``record_version`` the clinician opened (0 when they
        started a new person).  If the stored record has moved on since, and this save
        would change it, the save is refused with :class:`ConflictError` naming both
        versions, who changed the record and when; nothing is written.  ``None`` skips the
        check (a record file saved from the command line without ``--based-on-version``);
        even then the replaced values are kept in the audit entry.

        Returns ``{patient_id, status (created | updated | unchanged), created, updated,
        changed_fields, screening_id, record_version}`` and, with a plan, ``program_version``.
        """
        if not isinstance(record, PatientRecord):
            raise InputError.single("record", record, "a validated PatientRecord (prescribe.records.parse_record)")
        clinician = _clinician(clinician, required=False)
        if based_on_version is not None and (isinstance(based_on_version, bool)
                                             or not isinstance(based_on_version, int) or based_on_version < 0):
            raise InputError.single("based_on_version", based_on_version,
                                    "the record version the clinician opened (0 for a new person), or None")
        if screening is not None:
            if not isinstance(screening, ScreeningResult):
                raise InputError.single("screening", screening, "a ScreeningResult or None")
            if screening.patient_id != record.patient_id:
                raise InputError.single("screening.patient_id", screening.patient_id,
                                        f"the record's patient_id {record.patient_id!r}")
        pid = record.patient_id
        if plan is not None:
            plan_clinician = _clinician(clinician, required=True)
            parsed, plan_json, summary_json = _checked_plan(pid, plan)
            # Defence in depth: the program is stored only if it passes the one safety check
            # against the record saved with it (docs/safety.md).
            assert_safe(parsed, door=f"store: saving a program for {pid!r}", record=record)
            plan_note = _text(plan_note, "note")
        record_dict = record.model_dump(mode="json")
        record_json = _dumps(record_dict, "record")
        at = now_utc()
        with self._write() as conn:
            row = _lock_person(conn, pid)
            if row is None:
                try:
                    with conn.begin_nested():  # another server may create the same person this instant
                        conn.execute(m.people.insert().values(patient_id=pid, record_json=record_json,
                                                              created=at, updated=at, record_version=1))
                except IntegrityError:
                    row = _lock_person(conn, pid)
                    if row is None:
                        raise
            changed: list[str] = []
            if row is None:
                status, created, updated, version = "created", at, at, 1
                _audit(conn, at, "person_created", pid, clinician, {"record_version": 1})
            elif row.record_json != record_json:
                if based_on_version is not None and based_on_version != row.record_version:
                    raise _record_conflict(conn, pid, based_on_version, row)
                old = json.loads(row.record_json)
                changed = [k for k in record_dict if old.get(k) != record_dict[k]]
                version = row.record_version + 1
                status, created, updated = "updated", row.created, at
                done = conn.execute(m.people.update().where(m.people.c.patient_id == pid,
                                                            m.people.c.record_version == row.record_version)
                                    .values(record_json=record_json, updated=at, record_version=version))
                if done.rowcount != 1:  # belt and braces: the row lock makes this unreachable
                    raise _record_conflict(conn, pid, based_on_version, _lock_person(conn, pid))
                _audit(conn, at, "person_updated", pid, clinician,
                       {"changed_fields": changed, "previous": {k: old.get(k) for k in changed},
                        "record_version": version, "based_on_version": based_on_version})
            else:
                status, created, updated, version = "unchanged", row.created, row.updated, row.record_version
            screening_id = None
            if screening is not None:
                screening_id = _insert_screening(conn, pid, at, clinician, screening.model_dump(mode="json"))
                _audit(conn, at, "screening_saved", pid, clinician,
                       {"screening_id": screening_id, "ruleset_version": screening.ruleset_version,
                        "bone_density_category": screening.bone_density_category})
            program_version = None
            if plan is not None:
                latest = _latest_program(conn, pid)
                program_version = _insert_program(conn, pid, at, plan_clinician, plan_json, summary_json,
                                                  latest.version if latest else None, plan_note)
        out = {"patient_id": pid, "status": status, "created": created, "updated": updated,
               "changed_fields": changed, "screening_id": screening_id, "record_version": version}
        if plan is not None:
            out["program_version"] = program_version
        return out

    def record_version(self, patient_id: str) -> int:
        """The stored version of a person's record (pass it back as ``based_on_version``)."""
        with self._read() as conn:
            return int(_person(conn, patient_id).record_version)

    def get_patient(self, patient_id: str) -> PatientRecord:
        """The stored record of one person (NotFoundError naming the id)."""
        with self._read() as conn:
            row = _person(conn, patient_id)
        return parse_record(json.loads(row.record_json), source=f"store record {patient_id!r}")

    def has_patient(self, patient_id: str) -> bool:
        with self._read() as conn:
            return conn.execute(select(m.people.c.patient_id).where(m.people.c.patient_id == patient_id)).first() is not None

    def list_patients(self) -> list[dict]:
        """Everyone in the store, most recently updated first, with the latest screening
        category and program version."""
        with self._read() as conn:
            latest_screen = (select(m.screenings.c.patient_id, func.max(m.screenings.c.id).label("sid"))
                             .group_by(m.screenings.c.patient_id).subquery())
            latest_prog = (select(m.program_versions.c.patient_id,
                                  func.max(m.program_versions.c.version).label("version"))
                           .group_by(m.program_versions.c.patient_id).subquery())
            query = (select(m.people.c.patient_id, m.people.c.created, m.people.c.updated,
                            m.people.c.record_version, m.screenings.c.bone_density_category,
                            m.screenings.c.created.label("screened"), latest_prog.c.version)
                     .select_from(m.people)
                     .outerjoin(latest_screen, latest_screen.c.patient_id == m.people.c.patient_id)
                     .outerjoin(m.screenings, m.screenings.c.id == latest_screen.c.sid)
                     .outerjoin(latest_prog, latest_prog.c.patient_id == m.people.c.patient_id)
                     .order_by(m.people.c.updated.desc(), m.people.c.patient_id))
            rows = conn.execute(query).all()
        return [{"patient_id": r.patient_id, "created": r.created, "updated": r.updated,
                 "latest_category": r.bone_density_category, "latest_screening": r.screened,
                 "latest_program_version": r.version, "record_version": r.record_version} for r in rows]

    def caseload(self) -> list[tuple[str, dict]]:
        """Everyone's stored record as ``(patient_id, record dict)``, by id, in one read.

        The records were validated when saved; callers that need models parse them.
        """
        with self._read() as conn:
            rows = conn.execute(select(m.people.c.patient_id, m.people.c.record_json)
                                .order_by(m.people.c.patient_id)).all()
        return [(r.patient_id, json.loads(r.record_json)) for r in rows]

    def latest_program_templates(self) -> dict[str, tuple[str | None, int | None]]:
        """Each person's latest program's template name and version, as its summary records them."""
        with self._read() as conn:
            latest = (select(m.program_versions.c.patient_id, func.max(m.program_versions.c.version).label("v"))
                      .group_by(m.program_versions.c.patient_id).subquery())
            rows = conn.execute(select(m.program_versions.c.patient_id, m.program_versions.c.summary_json)
                                .join(latest, (latest.c.patient_id == m.program_versions.c.patient_id)
                                      & (latest.c.v == m.program_versions.c.version))).all()
        out = {}
        for r in rows:
            summary = json.loads(r.summary_json)
            out[r.patient_id] = (summary.get("template"), summary.get("template_version"))
        return out

    def screenings(self, patient_id: str) -> list[dict]:
        """Every screening of one person, oldest first."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.screenings).where(m.screenings.c.patient_id == patient_id)
                                .order_by(m.screenings.c.created, m.screenings.c.id)).all()
        return [{"screening_id": r.id, "created": r.created, "ruleset_version": r.ruleset_version,
                 "clinician": r.clinician, "result": json.loads(r.result_json)} for r in rows]

    # -- programs -------------------------------------------------------------------------

    def save_program(self, patient_id: str, plan: dict, clinician: str, based_on_version: int | None,
                     note: str = "", *, action: str = "program_saved", audit_detail: dict | None = None) -> int:
        """Save a new version of a person's program and return its number.

        ``based_on_version`` is the version the clinician started from (None for the
        first version).  When it is not the latest stored version the save is refused
        with :class:`ConflictError` naming both versions: nothing is overwritten.
        """
        clinician = _clinician(clinician, required=True)
        note = _text(note, "note")
        if based_on_version is not None and (isinstance(based_on_version, bool)
                                             or not isinstance(based_on_version, int) or based_on_version < 1):
            raise InputError.single("based_on_version", based_on_version,
                                    "a program version number (1 or more) or None for the first version")
        parsed, plan_json, summary_json = _checked_plan(patient_id, plan)
        at = now_utc()
        with self._write() as conn:
            row = _person(conn, patient_id, lock=True)
            # Defence in depth: whoever calls, a program is stored only if it passes the one
            # safety check against the person's stored record (docs/safety.md).
            assert_safe(parsed, door=f"store: saving a program for {patient_id!r}",
                        record=parse_record(json.loads(row.record_json), source=f"store record {patient_id!r}"))
            latest = _latest_program(conn, patient_id)
            latest_version = latest.version if latest else None
            if based_on_version != latest_version:
                raise _conflict(patient_id, based_on_version, latest)
            return _insert_program(conn, patient_id, at, clinician, plan_json, summary_json, based_on_version,
                                   note, action=action, audit_detail=audit_detail)

    def program_versions(self, patient_id: str) -> list[dict]:
        """Every saved version of a person's program, oldest first (without the plans)."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.program_versions).where(m.program_versions.c.patient_id == patient_id)
                                .order_by(m.program_versions.c.version)).all()
        return [{"version": r.version, "based_on_version": r.based_on_version, "clinician": r.clinician,
                 "created": r.created, "note": r.note, "summary": json.loads(r.summary_json)} for r in rows]

    def latest_program_version(self, patient_id: str) -> int | None:
        with self._read() as conn:
            _person(conn, patient_id)
            return conn.execute(select(func.max(m.program_versions.c.version))
                                .where(m.program_versions.c.patient_id == patient_id)).scalar()

    def get_program(self, patient_id: str, version: int | None = None) -> dict:
        """The plan JSON of one version (the latest when ``version`` is None)."""
        with self._read() as conn:
            _person(conn, patient_id)
            query = select(m.program_versions.c.plan_json).where(m.program_versions.c.patient_id == patient_id)
            if version is None:
                query = query.order_by(m.program_versions.c.version.desc()).limit(1)
            else:
                query = query.where(m.program_versions.c.version == version)
            row = conn.execute(query).first()
        if row is None:
            what = "no saved program" if version is None else f"no program version {version}"
            raise NotFoundError(f"{patient_id!r} has {what} in the store")
        return json.loads(row.plan_json)

    # -- session logs and clinic templates (built on by later features) -------------------

    def add_session_log(self, patient_id: str, session_date: str | date, done: Any, *,
                        program_version: int | None = None, rpe: int | None = None, pain: int | None = None,
                        notes: str = "", clinician: str = "") -> int:
        """Record what a person did in one session; returns the log's id.

        ``rpe`` is the session rating of perceived exertion on the 0-10 (CR10) scale
        (Borg 1982, Med Sci Sports Exerc 14:377-381); ``pain`` is 0-10.
        """
        day = _iso_date(session_date, "session_date")
        for name, value in (("rpe", rpe), ("pain", pain)):
            if value is not None and (isinstance(value, bool) or not isinstance(value, int) or not 0 <= value <= 10):
                raise InputError.single(name, value, "a whole number from 0 to 10, or None")
        done_json = _dumps(done, "done")
        notes, clinician = _text(notes, "notes"), _clinician(clinician, required=False)
        at = now_utc()
        with self._write() as conn:
            _person(conn, patient_id, lock=True)
            if program_version is not None and conn.execute(
                    select(m.program_versions.c.id).where(m.program_versions.c.patient_id == patient_id,
                                                          m.program_versions.c.version == program_version)).first() is None:
                raise NotFoundError(f"{patient_id!r} has no program version {program_version} in the store")
            log_id = conn.execute(m.session_logs.insert().values(
                patient_id=patient_id, program_version=program_version, session_date=day, done_json=done_json,
                rpe=rpe, pain=pain, notes=notes, clinician=clinician, created=at)).inserted_primary_key[0]
            _audit(conn, at, "session_logged", patient_id, clinician,
                   {"session_log_id": log_id, "session_date": day, "program_version": program_version})
        return int(log_id)

    def add_session(self, session: "SessionRecord", clinician: str = "", *, today: date | None = None) -> dict:
        """Record one session (a validated :class:`prescribe.sessions.records.SessionRecord`).

        One transaction.  The program version defaults to the person's latest; the
        session date may not be in the future nor before that program's start_date.
        Returns ``{session_id, week, program_version, patient_id}``.  The person's intake
        record is never changed.

        Raises
        ------
        NotFoundError
            No such person.
        InputError
            No such program version, no program stored yet, or a date out of range.
        """
        from ..sessions.records import SessionRecord, check_session_dates
        from ..plan_schema import program_week
        if not isinstance(session, SessionRecord):
            raise InputError.single("session", session, "a validated SessionRecord (prescribe.sessions.records)")
        clinician = _clinician(clinician, required=False)
        pid = session.patient_id
        record = session.model_dump(mode="json")
        session_json = _dumps(record, "session")
        done_json = _dumps(record["exercises"], "exercises")
        at = now_utc()
        with self._write() as conn:
            _person(conn, pid, lock=True)
            query = select(m.program_versions.c.version, m.program_versions.c.created).where(
                m.program_versions.c.patient_id == pid)
            if session.program_version is None:
                row = conn.execute(query.order_by(m.program_versions.c.version.desc()).limit(1)).first()
                if row is None:
                    raise InputError.single("program_version", None,
                                            f"a stored program of {pid!r}: none is stored yet "
                                            "(store one with `prescribe save PATIENT.json --plan PLAN.json`)")
            else:
                row = conn.execute(query.where(m.program_versions.c.version == session.program_version)).first()
                if row is None:
                    have = conn.execute(select(func.max(m.program_versions.c.version))
                                        .where(m.program_versions.c.patient_id == pid)).scalar()
                    raise InputError.single("program_version", session.program_version,
                                            f"a stored program version of {pid!r} " +
                                            (f"(1 to {have})" if have else "(none is stored yet)"))
            hit = self._plan_cache.get((pid, row.version))
            if hit is not None and hit[0] == row.created:
                plan = hit[1]
            else:
                plan = json.loads(conn.execute(select(m.program_versions.c.plan_json).where(
                    m.program_versions.c.patient_id == pid, m.program_versions.c.version == row.version)).scalar())
                self._plan_cache[(pid, row.version)] = (row.created, plan)
            start = plan.get("start_date") or str(plan.get("created", ""))[:10] or None
            check_session_dates(session, start, today)
            week = program_week(start, session.session_date) if start else None
            sid = int(conn.execute(m.session_logs.insert().values(
                patient_id=pid, program_version=row.version, session_date=session.session_date, done_json=done_json,
                rpe=None if session.session_rpe is None else int(round(session.session_rpe)),
                pain=session.pain_during, notes=session.note, clinician=clinician, created=at,
                session_json=session_json, week=week)).inserted_primary_key[0])
            _audit(conn, at, "session_logged", pid, clinician,
                   {"session_id": sid, "session_date": session.session_date, "week": week,
                    "program_version": row.version, "symptoms": list(session.symptoms),
                    "fell_since_last": session.fell_since_last})
        return {"session_id": sid, "week": week, "program_version": row.version, "patient_id": pid}

    def sessions(self, patient_id: str) -> list[dict]:
        """The person's sessions, oldest first: the record's fields with session_id, week,
        program_version, clinician and created (older logs without a full record are given
        in the same shape, marked ``legacy``)."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.session_logs).where(m.session_logs.c.patient_id == patient_id)
                                .order_by(m.session_logs.c.session_date, m.session_logs.c.id)).all()
        return [_session_out(r) for r in rows]

    def logged_sessions(self, patient_id: str) -> list:
        """The person's sessions with a full record, oldest first, as
        :class:`prescribe.sessions.engine.LoggedSession` (for the engine; shared, read-only)."""
        with self._read() as conn:
            _person(conn, patient_id)
            return self._logged_sessions(conn, patient_id)

    def program_for_reading(self, patient_id: str, version: int | None = None) -> tuple[int, dict]:
        """(version, plan) of one program version (the latest when ``version`` is None).

        The plan is a shared parsed copy: read it, never change it (use :meth:`get_program`
        for a copy of your own).  Versions never change once stored, so repeated reads
        (the session engine's) skip parsing the JSON again.
        """
        with self._read() as conn:
            _person(conn, patient_id)
            return self._program_for_reading(conn, patient_id, version)

    def session_context(self, patient_id: str) -> tuple[PatientRecord, int | None, dict | None, list]:
        """What the session engine needs, in one read: (record, latest program version, its plan
        (shared, read-only) or None, the logged sessions)."""
        with self._read() as conn:
            row = _person(conn, patient_id)
            try:
                version, plan = self._program_for_reading(conn, patient_id, None)
            except NotFoundError:
                version, plan = None, None
            sessions = self._logged_sessions(conn, patient_id)
        record = parse_record(json.loads(row.record_json), source=f"store record {patient_id!r}")
        return record, version, plan, sessions

    def _logged_sessions(self, conn: Connection, patient_id: str) -> list:
        from ..sessions.engine import LoggedSession
        from ..sessions.records import SessionRecord
        t = m.session_logs.c
        keys = conn.execute(select(t.id, t.created).where(t.patient_id == patient_id, t.session_json.is_not(None))
                            .order_by(t.session_date, t.id)).all()
        missing = [k.id for k in keys if (k.id, k.created) not in self._session_cache]
        if missing:
            rows = conn.execute(select(t.id, t.created, t.week, t.program_version, t.session_json)
                                .where(t.id.in_(missing))).all()
            for r in rows:
                rec = SessionRecord.model_validate_json(r.session_json)
                self._session_cache[(r.id, r.created)] = LoggedSession(rec, r.week or 0, r.program_version, r.id)
        return [self._session_cache[(k.id, k.created)] for k in keys]

    def _program_for_reading(self, conn: Connection, patient_id: str, version: int | None) -> tuple[int, dict]:
        t = m.program_versions.c
        query = select(t.version, t.created).where(t.patient_id == patient_id)
        query = query.order_by(t.version.desc()).limit(1) if version is None else query.where(t.version == version)
        row = conn.execute(query).first()
        if row is None:
            what = "no saved program" if version is None else f"no program version {version}"
            raise NotFoundError(f"{patient_id!r} has {what} in the store")
        hit = self._plan_cache.get((patient_id, row.version))
        if hit is not None and hit[0] == row.created:
            return row.version, hit[1]
        plan = json.loads(conn.execute(select(t.plan_json).where(t.patient_id == patient_id,
                                                                 t.version == row.version)).scalar())
        self._plan_cache[(patient_id, row.version)] = (row.created, plan)
        return row.version, plan

    def session_logs(self, patient_id: str) -> list[dict]:
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.session_logs).where(m.session_logs.c.patient_id == patient_id)
                                .order_by(m.session_logs.c.session_date, m.session_logs.c.id)).all()
        return [_session_row(r) for r in rows]

    def add_template(self, name: str, body: dict, created_by: str, note: str = "") -> int:
        """Save a new draft version of a clinic template; returns its version number.

        Versions are numbered 1, 2, ... per name.  A stored version is never changed:
        editing a template means adding its next version (a draft) with a change note.
        """
        name = _text(name, "name", required=True, max_len=120)
        created_by = _clinician(created_by, required=True)
        note = _text(note, "change_note", max_len=2000)
        if not isinstance(body, dict):
            raise InputError.single("body", body, "a JSON object (the template)")
        body_json = _dumps(body, "body")
        at = now_utc()
        with self._write() as conn:
            latest = conn.execute(select(func.max(m.clinic_templates.c.version))
                                  .where(m.clinic_templates.c.name == name)).scalar()
            version = (latest or 0) + 1
            conn.execute(m.clinic_templates.insert().values(name=name, version=version, body_json=body_json,
                                                            status="draft", created=at, created_by=created_by,
                                                            change_note=note))
            _audit(conn, at, "template_saved", None, created_by, {"name": name, "version": version,
                                                                  "change_note": note})
        return version

    def approve_template(self, name: str, version: int, approved_by: str,
                         review_by: str | date | None = None) -> dict:
        """Approve one draft version: a named clinician who is not its author (four eyes).

        ``review_by`` (YYYY-MM-DD) is when the version must be reviewed again: after
        today and at most :data:`TEMPLATE_REVIEW_MAX_DAYS` ahead; by default a year
        from today.  Refused (InputError) for a version that is not a draft or an
        approver who is the author.  Returns the stored version's row.
        """
        approved_by = _clinician(approved_by, required=True)
        today = datetime.now(timezone.utc).date()
        if review_by is None:
            review = today.fromordinal(today.toordinal() + TEMPLATE_REVIEW_DEFAULT_DAYS).isoformat()
        else:
            review = _iso_date(review_by, "review_by")
            days = date.fromisoformat(review).toordinal() - today.toordinal()
            if not 0 < days <= TEMPLATE_REVIEW_MAX_DAYS:
                raise InputError.single("review_by", review, f"a date after today ({today.isoformat()}) and at "
                                        f"most {TEMPLATE_REVIEW_MAX_DAYS // 366} years ahead")
        at = now_utc()
        with self._write() as conn:
            row = _template_row(conn, name, version)
            if row.status != "draft":
                raise InputError.single("NAME@VERSION", f"{name}@{version}", _not_draft(row))
            if _same_person(row.created_by, approved_by):
                raise InputError.single("clinician", approved_by,
                                        f"a clinician other than the author of {name}@{version} "
                                        f"({row.created_by}): the approver of a template is never its author")
            conn.execute(m.clinic_templates.update().where(m.clinic_templates.c.id == row.id,
                                                           m.clinic_templates.c.status == "draft")
                         .values(status="approved", approved_by=approved_by, approved_at=at, review_by=review))
            _audit(conn, at, "template_approved", None, approved_by,
                   {"name": name, "version": version, "review_by": review})
            return _template_dict(_template_row(conn, name, version))

    def retire_template(self, name: str, version: int, retired_by: str) -> dict:
        """Retire a draft or approved version: it can no longer be used for new programs.

        Programs already built from it keep saying which version they came from (the
        app marks them).  A retired version stays in the store, unchanged.
        """
        retired_by = _clinician(retired_by, required=True)
        at = now_utc()
        with self._write() as conn:
            row = _template_row(conn, name, version)
            if row.status == "retired":
                raise InputError.single("NAME@VERSION", f"{name}@{version}",
                                        f"a draft or approved version (this one was retired by {row.retired_by} "
                                        f"at {row.retired_at})")
            conn.execute(m.clinic_templates.update().where(m.clinic_templates.c.id == row.id)
                         .values(status="retired", retired_by=retired_by, retired_at=at))
            _audit(conn, at, "template_retired", None, retired_by,
                   {"name": name, "version": version, "was": row.status})
            return _template_dict(_template_row(conn, name, version))

    def get_template(self, name: str, version: int | None = None) -> dict:
        """One stored version (the newest when ``version`` is None); NotFoundError naming it."""
        with self._read() as conn:
            if version is None:
                version = conn.execute(select(func.max(m.clinic_templates.c.version))
                                       .where(m.clinic_templates.c.name == name)).scalar()
                if version is None:
                    raise NotFoundError(f"no clinic template {name!r} in the store")
            return _template_dict(_template_row(conn, name, version))

    def templates(self, name: str | None = None) -> list[dict]:
        """Every stored template version (of one name when given), by name and version."""
        with self._read() as conn:
            query = select(m.clinic_templates).order_by(m.clinic_templates.c.name, m.clinic_templates.c.version)
            if name is not None:
                query = query.where(m.clinic_templates.c.name == name)
            rows = conn.execute(query).all()
        return [_template_dict(r) for r in rows]

    # -- worn-sensor summaries (revision 0005) ------------------------------------------------

    def add_sensor_summary(self, patient_id: str, summary: dict, clinician: str = "") -> int:
        """Store the summary of one worn-sensor recording with the person; returns its id.

        Only the summary is stored (counts per band and per day, the planned comparison),
        never the raw signal.
        """
        if not isinstance(summary, dict) or "days" not in summary:
            raise InputError.single("summary", summary, "a sensor summary as printed by `prescribe sensor`")
        clinician = _clinician(clinician, required=False)
        summary_json = _dumps(summary, "summary")
        at = now_utc()
        with self._write() as conn:
            _person(conn, patient_id, lock=True)
            sid = conn.execute(m.sensor_summaries.insert().values(
                patient_id=patient_id, created=at, clinician=clinician, file_name=str(summary.get("file") or ""),
                recorded_from=summary.get("start"), recorded_to=summary.get("end"),
                summary_json=summary_json)).inserted_primary_key[0]
            _audit(conn, at, "sensor_summary_saved", patient_id, clinician,
                   {"sensor_summary_id": sid, "file": summary.get("file"), "start": summary.get("start")})
        return int(sid)

    def sensor_summaries(self, patient_id: str) -> list[dict]:
        """Every stored sensor summary of one person, oldest first."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.sensor_summaries).where(m.sensor_summaries.c.patient_id == patient_id)
                                .order_by(m.sensor_summaries.c.created, m.sensor_summaries.c.id)).all()
        return [{"sensor_summary_id": r.id, "created": r.created, "clinician": r.clinician,
                 "summary": json.loads(r.summary_json)} for r in rows]

    def program_created(self, patient_id: str, version: int | None = None) -> str | None:
        """When a program version (the latest by default) was saved."""
        with self._read() as conn:
            query = select(m.program_versions.c.created).where(m.program_versions.c.patient_id == patient_id)
            query = (query.order_by(m.program_versions.c.version.desc()).limit(1) if version is None
                     else query.where(m.program_versions.c.version == version))
            return conn.execute(query).scalar()

    # -- audit, export, import, backup -----------------------------------------------------

    def audit(self, patient_id: str | None = None) -> list[dict]:
        """The audit log (of one person when ``patient_id`` is given), oldest first."""
        with self._read() as conn:
            query = select(m.audit_log).order_by(m.audit_log.c.id)
            if patient_id is not None:
                query = query.where(m.audit_log.c.patient_id == patient_id)
            rows = conn.execute(query).all()
        return [{"id": r.id, "at": r.at, "action": r.action, "patient_id": r.patient_id,
                 "clinician": r.clinician, "detail": json.loads(r.detail_json)} for r in rows]

    def export_patient(self, patient_id: str) -> dict:
        """A person with every screening, program version, session log and audit entry."""
        with self._read() as conn:
            return _export(conn, patient_id)

    def import_bundle(self, bundle: dict) -> dict:
        """Add a person from an exported bundle, timestamps and version numbers kept.

        All or nothing.  A malformed bundle is an :class:`InputError`; a person who is
        already here with different content is a :class:`ConflictError` (nothing is
        changed); the same content again is reported ``unchanged``.
        """
        b = parse_bundle(bundle)
        pid = b["person"]["patient_id"]
        check_bundle_programs(b)
        at = now_utc()
        with self._write() as conn:
            exists = conn.execute(select(m.people.c.patient_id).where(m.people.c.patient_id == pid)
                                  .with_for_update()).first()
            if exists is not None:
                if _comparable(_export(conn, pid)) == _comparable(b):
                    return {"patient_id": pid, "status": "unchanged", **_counts(b)}
                raise ConflictError(
                    f"{pid!r} is already in the store at {self.where} with different content; importing "
                    "would overwrite it, so nothing was imported. Export the stored person first, or "
                    "import into another store.")
            person = b["person"]
            conn.execute(m.people.insert().values(patient_id=pid, record_json=_dumps(person["record"], "record"),
                                                  created=person["created"], updated=person["updated"]))
            for s in b["screenings"]:
                _insert_screening(conn, pid, s["created"], s["clinician"], s["result"])
            for p in b["programs"]:
                conn.execute(m.program_versions.insert().values(
                    patient_id=pid, version=p["version"], based_on_version=p["based_on_version"],
                    created=p["created"], clinician=p["clinician"], note=p["note"],
                    summary_json=_dumps(plan_summary(p["plan"]), "plan"), plan_json=_dumps(p["plan"], "plan")))
            for s in b["session_logs"]:
                conn.execute(m.session_logs.insert().values(
                    patient_id=pid, program_version=s["program_version"], session_date=s["session_date"],
                    done_json=_dumps(s["done"], "done"), rpe=s["rpe"], pain=s["pain"], notes=s["notes"],
                    clinician=s["clinician"], created=s["created"]))
            for s in b.get("sessions") or []:
                rec = s["session"]
                conn.execute(m.session_logs.insert().values(
                    patient_id=pid, program_version=s["program_version"], session_date=rec["session_date"],
                    done_json=_dumps(rec["exercises"], "exercises"),
                    rpe=None if rec.get("session_rpe") is None else int(round(rec["session_rpe"])),
                    pain=rec["pain_during"], notes=rec.get("note", ""), clinician=s["clinician"], created=s["created"],
                    session_json=_dumps(rec, "session"), week=s["week"]))
            for s in b.get("sensor_summaries") or []:
                summary = s["summary"]
                conn.execute(m.sensor_summaries.insert().values(
                    patient_id=pid, created=s["created"], clinician=s["clinician"],
                    file_name=str(summary.get("file") or ""), recorded_from=summary.get("start"),
                    recorded_to=summary.get("end"), summary_json=_dumps(summary, "summary")))
            for a in b["audit"]:
                _audit(conn, a["at"], a["action"], pid, a["clinician"], a["detail"])
            _audit(conn, at, "bundle_imported", pid, "", {"bundle_format_version": b["bundle_format_version"],
                                                          "tool_version": b["tool_version"], **_counts(b)})
        return {"patient_id": pid, "status": "imported", **_counts(b)}

    def backup(self, path: str | os.PathLike, force: bool = False) -> dict:
        """A consistent copy of the store while others keep writing (SQLite's online backup).

        Refuses to replace an existing file unless ``force``.  The copy is written
        to a temporary file beside the target, checked with ``PRAGMA integrity_check``
        and then moved into place, so a failed backup never leaves a half file.
        """
        if not self.is_sqlite or self.path is None:
            raise StoreError(f"backup copies SQLite stores only; back up {self.url} with the database's own tools "
                             "(for PostgreSQL, pg_dump)")
        target = Path(path).expanduser()
        if target.resolve() == self.path.resolve():
            raise InputError.single("backup file", str(path), "a file other than the store itself")
        if target.exists() and not force:
            raise InputError.single("backup file", str(path), "a file that does not exist yet (or pass --force)")
        if target.is_dir():
            raise InputError.single("backup file", str(path), "a file name, not a directory")
        try:
            target.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=target.name + ".", suffix=".partial", dir=target.parent)
            os.close(fd)
        except OSError as exc:
            raise StoreError(f"cannot write the backup {target}: {exc}") from None
        try:
            with self._errors():
                raw = self.engine.raw_connection()
                try:
                    dst = sqlite3.connect(tmp)
                    try:
                        raw.driver_connection.backup(dst)
                        check = dst.execute("PRAGMA integrity_check").fetchone()[0]
                        people = dst.execute("SELECT count(*) FROM people").fetchone()[0]
                        versions = dst.execute("SELECT count(*) FROM program_versions").fetchone()[0]
                    finally:
                        dst.close()
                finally:
                    raw.close()
            if check != "ok":
                raise StoreError(f"the backup copy failed its integrity check ({check}); {target} was not written")
            os.replace(tmp, target)
        finally:
            if os.path.exists(tmp):
                os.unlink(tmp)
        return {"backup": str(target.resolve()), "bytes": target.stat().st_size, "integrity_check": check,
                "people": people, "program_versions": versions, "revision": HEAD_REVISION}


# ---------------------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------------------

def check_bundle_programs(b: dict) -> None:
    """Every program version of a bundle passes the safety check against the bundle's record.

    Raises :class:`~prescribe.errors.UnsafeProgram` (nothing is stored) naming the version.
    """
    record = parse_record(b["person"]["record"], source="bundle person.record")
    for p in b["programs"]:
        plan = parse_plan(p["plan"], source=f"bundle program version {p['version']}")
        assert_safe(plan, door=f"bundle program version {p['version']} of {b['person']['patient_id']!r}",
                    record=record)


def _record_conflict(conn: Connection, pid: str, based_on: int | None, row) -> ConflictError:
    last = conn.execute(select(m.audit_log.c.clinician, m.audit_log.c.at)
                        .where(m.audit_log.c.patient_id == pid,
                               m.audit_log.c.action.in_(("person_created", "person_updated")))
                        .order_by(m.audit_log.c.id.desc()).limit(1)).first()
    who = (last.clinician or "an unnamed clinician") if last else "another clinician"
    when = last.at if last else row.updated
    start = "as a new person" if not based_on else f"on record version {based_on}"
    err = ConflictError(
        f"the record of {pid!r} is now at version {row.record_version} (changed by {who} at {when}), but this "
        f"save was based {start}. Nothing was overwritten: reload the record, reapply your changes and save again")
    err.patient_id, err.based_on_version, err.latest_version = pid, based_on, int(row.record_version)
    return err


def _insert_screening(conn: Connection, pid: str, at: str, clinician: str, result: dict) -> int:
    return int(conn.execute(m.screenings.insert().values(
        patient_id=pid, created=at, ruleset_version=str(result.get("ruleset_version") or ""),
        bone_density_category=str(result.get("bone_density_category") or "unknown"),
        clinician=clinician, result_json=_dumps(result, "screening"))).inserted_primary_key[0])


def _checked_plan(patient_id: str, plan: dict):
    """The parsed plan (for the safety check) and its stored JSON and summary."""
    parsed = parse_plan(plan, source="program")
    if parsed.patient_id != patient_id:
        raise InputError.single("plan.patient_id", parsed.patient_id, f"the person's id {patient_id!r}")
    return parsed, _dumps(plan, "plan"), _dumps(plan_summary(plan), "plan")


def _latest_program(conn: Connection, pid: str):
    return conn.execute(select(m.program_versions.c.version, m.program_versions.c.clinician,
                               m.program_versions.c.created)
                        .where(m.program_versions.c.patient_id == pid)
                        .order_by(m.program_versions.c.version.desc()).limit(1)).first()


def _insert_program(conn: Connection, pid: str, at: str, clinician: str, plan_json: str, summary_json: str,
                    based_on_version: int | None, note: str, *, action: str = "program_saved",
                    audit_detail: dict | None = None) -> int:
    latest = conn.execute(select(func.max(m.program_versions.c.version))
                          .where(m.program_versions.c.patient_id == pid)).scalar()
    version = (latest or 0) + 1
    conn.execute(m.program_versions.insert().values(
        patient_id=pid, version=version, based_on_version=based_on_version, created=at,
        clinician=clinician, note=note, summary_json=summary_json, plan_json=plan_json))
    _audit(conn, at, action, pid, clinician,
           {"version": version, "based_on_version": based_on_version, "note": note, **(audit_detail or {})})
    return version


def _conflict(pid: str, based_on: int | None, latest) -> ConflictError:
    if latest is None:
        msg = (f"the program of {pid!r} has no saved version yet, but this save was based on version "
               f"{based_on}; save it as the first version (based on none)")
    else:
        by = f"version {latest.version} (saved by {latest.clinician or 'an unnamed clinician'} at {latest.created})"
        start = "as a first version" if based_on is None else f"on version {based_on}"
        msg = (f"the program of {pid!r} is now at {by}, but this save was based {start}. "
               f"Nothing was overwritten: reload version {latest.version}, reapply your changes and save again")
    err = ConflictError(msg)
    err.patient_id, err.based_on_version = pid, based_on
    err.latest_version = latest.version if latest is not None else None
    return err


def plan_summary(plan: dict) -> dict:
    """The few plan figures a version list shows."""
    weeks = plan.get("weeks") or []
    levels = [w.get("impact_level", 0) for w in weeks if isinstance(w, dict)]
    return {"weeks": len(weeks), "max_impact_level": max(levels) if levels else None,
            "ruleset_version": plan.get("ruleset_version"), "plan_created": plan.get("created"),
            "plan_format_version": plan.get("plan_format_version"),
            "template": tpl.get("name") if isinstance(tpl := plan.get("template"), dict) else None,
            "template_version": plan.get("template_version")}


def _template_row(conn: Connection, name: str, version: int):
    row = conn.execute(select(m.clinic_templates).where(m.clinic_templates.c.name == name,
                                                        m.clinic_templates.c.version == version)).first()
    if row is None:
        raise NotFoundError(f"no clinic template {name!r} version {version} in the store")
    return row


def _template_dict(r) -> dict:
    return {"name": r.name, "version": r.version, "status": r.status, "created": r.created,
            "created_by": r.created_by, "approved_by": r.approved_by, "approved_at": r.approved_at,
            "review_by": r.review_by, "retired_by": r.retired_by, "retired_at": r.retired_at,
            "change_note": r.change_note or "", "body": json.loads(r.body_json)}


def _same_person(a: str | None, b: str | None) -> bool:
    """Whether two clinician names are the same person (case and spacing ignored)."""
    def norm(x):
        return " ".join(str(x or "").split()).casefold()
    return bool(norm(a)) and norm(a) == norm(b)


def _not_draft(row) -> str:
    if row.status == "approved":
        return (f"a draft version (this one was approved by {row.approved_by} at {row.approved_at}; an approved "
                "version never changes: add a new draft version instead)")
    return f"a draft version (this one was retired by {row.retired_by} at {row.retired_at})"


def _session_row(r) -> dict:
    return {"session_log_id": r.id, "program_version": r.program_version, "session_date": r.session_date,
            "done": json.loads(r.done_json), "rpe": r.rpe, "pain": r.pain, "notes": r.notes,
            "clinician": r.clinician, "created": r.created}


def _session_out(r) -> dict:
    if r.session_json is not None:
        rec = json.loads(r.session_json)
        rec["program_version"] = r.program_version
        return {"session_id": r.id, "week": r.week, **rec, "clinician": r.clinician, "created": r.created}
    done = json.loads(r.done_json)
    return {"session_id": r.id, "week": r.week, "patient_id": r.patient_id, "session_date": r.session_date,
            "program_version": r.program_version, "exercises": done if isinstance(done, list) else [],
            "session_rpe": r.rpe, "pain_during": r.pain, "pain_next_morning": None, "symptoms": [],
            "fell_since_last": False, "note": r.notes, "clinician": r.clinician, "created": r.created,
            "legacy": True}


def _export(conn: Connection, pid: str) -> dict:
    person = _person(conn, pid)
    screenings = conn.execute(select(m.screenings).where(m.screenings.c.patient_id == pid)
                              .order_by(m.screenings.c.created, m.screenings.c.id)).all()
    programs = conn.execute(select(m.program_versions).where(m.program_versions.c.patient_id == pid)
                            .order_by(m.program_versions.c.version)).all()
    sessions = conn.execute(select(m.session_logs).where(m.session_logs.c.patient_id == pid)
                            .order_by(m.session_logs.c.session_date, m.session_logs.c.id)).all()
    sensors = conn.execute(select(m.sensor_summaries).where(m.sensor_summaries.c.patient_id == pid)
                           .order_by(m.sensor_summaries.c.created, m.sensor_summaries.c.id)).all()
    audit = conn.execute(select(m.audit_log).where(m.audit_log.c.patient_id == pid,
                                                   m.audit_log.c.action.not_in(LOCAL_ONLY_ACTIONS))
                         .order_by(m.audit_log.c.id)).all()
    return {
        "bundle_format_version": BUNDLE_FORMAT_VERSION,
        "kind": BUNDLE_KIND,
        "tool_version": __version__,
        "cautions": list(STANDARD_CAUTIONS),
        "person": {"patient_id": person.patient_id, "created": person.created, "updated": person.updated,
                   "record": json.loads(person.record_json)},
        "screenings": [{"created": s.created, "ruleset_version": s.ruleset_version, "clinician": s.clinician,
                        "result": json.loads(s.result_json)} for s in screenings],
        "programs": [{"version": p.version, "based_on_version": p.based_on_version, "created": p.created,
                      "clinician": p.clinician, "note": p.note, "plan": json.loads(p.plan_json)}
                     for p in programs],
        "session_logs": [{k: v for k, v in _session_row(s).items() if k != "session_log_id"}
                         for s in sessions if s.session_json is None],
        "sessions": [{"week": s.week, "program_version": s.program_version, "clinician": s.clinician,
                      "created": s.created, "session": json.loads(s.session_json)}
                     for s in sessions if s.session_json is not None],
        "sensor_summaries": [{"created": r.created, "clinician": r.clinician, "summary": json.loads(r.summary_json)}
                             for r in sensors],
        "audit": [{"at": a.at, "action": a.action, "clinician": a.clinician, "detail": json.loads(a.detail_json)}
                  for a in audit],
    }


def _comparable(bundle: dict) -> dict:
    return {k: v for k, v in bundle.items() if k not in ("tool_version", "cautions")}


def _counts(b: dict) -> dict:
    return {"screenings": len(b["screenings"]), "program_versions": len(b["programs"]),
            "session_logs": len(b["session_logs"]), "sessions": len(b.get("sessions") or []),
            "sensor_summaries": len(b.get("sensor_summaries") or []),
            "audit_entries": len(b["audit"])}
