"""People and their screenings.

A person's record carries a ``record_version``; a save that names the record version
it started from is refused (:class:`ConflictError`) when someone changed the record in
between, and an update keeps the replaced values in its audit entry.
"""

from __future__ import annotations

import json

from sqlalchemy import func, select
from sqlalchemy.engine import Connection
from sqlalchemy.exc import IntegrityError

from ..errors import ConflictError, InputError
from ..plan_schema import Plan
from ..records import PatientRecord, ScreeningResult, parse_record
from ..safety import assert_safe
from . import models as m
from .engine import StoreBase, now_utc
from .programs import _checked_plan, _insert_program, _latest_program
from .rows import _audit, _clinician, _dumps, _lock_person, _person, _text


class PeopleMixin(StoreBase):
    """People and screenings."""

    def save_patient(self, record: PatientRecord, screening: ScreeningResult | None = None,
                     clinician: str = "", *, plan: Plan | dict | None = None, plan_note: str = "",
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
                                                              created=at, updated=at, record_version=1,
                                                              record_schema=record.version))
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
                                    .values(record_json=record_json, updated=at, record_version=version,
                                            record_schema=record.version))
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
                program_version = _insert_program(conn, pid, at, plan_clinician, parsed, plan_json, summary_json,
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
        category and program version, the record's edit counter (``record_version``) and
        its schema version (``record_schema``: 1 or 2)."""
        with self._read() as conn:
            latest_screen = (select(m.screenings.c.patient_id, func.max(m.screenings.c.id).label("sid"))
                             .group_by(m.screenings.c.patient_id).subquery())
            latest_prog = (select(m.program_versions.c.patient_id,
                                  func.max(m.program_versions.c.version).label("version"))
                           .group_by(m.program_versions.c.patient_id).subquery())
            query = (select(m.people.c.patient_id, m.people.c.created, m.people.c.updated,
                            m.people.c.record_version, m.people.c.record_schema,
                            m.screenings.c.bone_density_category,
                            m.screenings.c.created.label("screened"), latest_prog.c.version)
                     .select_from(m.people)
                     .outerjoin(latest_screen, latest_screen.c.patient_id == m.people.c.patient_id)
                     .outerjoin(m.screenings, m.screenings.c.id == latest_screen.c.sid)
                     .outerjoin(latest_prog, latest_prog.c.patient_id == m.people.c.patient_id)
                     .order_by(m.people.c.updated.desc(), m.people.c.patient_id))
            rows = conn.execute(query).all()
        return [{"patient_id": r.patient_id, "created": r.created, "updated": r.updated,
                 "latest_category": r.bone_density_category, "latest_screening": r.screened,
                 "latest_program_version": r.version, "record_version": r.record_version,
                 "record_schema": r.record_schema} for r in rows]

    def caseload(self) -> list[tuple[str, dict]]:
        """Everyone's stored record as ``(patient_id, record dict)``, by id, in one read.

        The records were validated when saved; callers that need models parse them.
        """
        with self._read() as conn:
            rows = conn.execute(select(m.people.c.patient_id, m.people.c.record_json)
                                .order_by(m.people.c.patient_id)).all()
        return [(r.patient_id, json.loads(r.record_json)) for r in rows]

    def screenings(self, patient_id: str) -> list[dict]:
        """Every screening of one person, oldest first."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.screenings).where(m.screenings.c.patient_id == patient_id)
                                .order_by(m.screenings.c.created, m.screenings.c.id)).all()
        return [{"screening_id": r.id, "created": r.created, "ruleset_version": r.ruleset_version,
                 "clinician": r.clinician, "result": json.loads(r.result_json)} for r in rows]


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
