"""Session records and the older session logs, and the session engine's reads."""

from __future__ import annotations

import json
from datetime import date
from typing import TYPE_CHECKING, Any

from sqlalchemy import func, select
from sqlalchemy.engine import Connection

from ..errors import InputError, NotFoundError
from ..plan_schema import Plan, start_day
from ..records import PatientRecord, parse_record
from . import models as m
from .engine import StoreBase, now_utc
from .programs import _stored_plan
from .rows import _audit, _clinician, _dumps, _iso_date, _person, _text

if TYPE_CHECKING:
    from ..sessions.records import SessionRecord


def _catalogue_ids() -> set[str]:
    from ..catalogue import default_catalogue
    return {e.exercise_id for e in default_catalogue().all()}


class SessionsMixin(StoreBase):
    """Session records and logs."""

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
            No such program version, no program stored yet, a date out of range, or an
            exercise the catalogue or that program version does not have.
        """
        from ..sessions.records import SessionRecord, check_session_dates, check_session_exercises
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
            _, plan = self._program_for_reading(conn, pid, row.version)
            start = start_day(plan)
            check_session_dates(session, start, today)
            check_session_exercises(session, plan, _catalogue_ids(), row.version)
            week = program_week(start, session.session_date)
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

    def program_for_reading(self, patient_id: str, version: int | None = None) -> tuple[int, Plan]:
        """(version, plan) of one program version (the latest when ``version`` is None).

        The plan is a shared validated copy: read it, never change it (use :meth:`get_program`
        for a copy of your own).  Versions never change once stored, so repeated reads
        (the session engine's) skip validating the JSON again.
        """
        with self._read() as conn:
            _person(conn, patient_id)
            return self._program_for_reading(conn, patient_id, version)

    def session_context(self, patient_id: str) -> tuple[PatientRecord, int | None, Plan | None, list]:
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
        from ..sessions.records import LoggedSession, SessionRecord
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

    def _program_for_reading(self, conn: Connection, patient_id: str, version: int | None) -> tuple[int, Plan]:
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
        plan = _stored_plan(conn.execute(select(t.plan_json).where(t.patient_id == patient_id,
                                                                   t.version == row.version)).scalar(),
                            patient_id, row.version)
        self._plan_cache[(patient_id, row.version)] = (row.created, plan)
        return row.version, plan

    def session_logs(self, patient_id: str) -> list[dict]:
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.session_logs).where(m.session_logs.c.patient_id == patient_id)
                                .order_by(m.session_logs.c.session_date, m.session_logs.c.id)).all()
        return [_session_row(r) for r in rows]


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
