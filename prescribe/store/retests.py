"""Retests (revision 0008): what was measured at a review and what it led to.

A retest is stored in one transaction with everything it changes: the person's record
takes the retest's measures (so the next screening and block are worked out on them;
the replaced values are kept in the retest's row and in the audit entry, and the first
row's are the intake values: the baseline is never lost), the re-screening, and the next
block as a new program version when there is one.  Nothing is stored when any part is
refused.
"""

from __future__ import annotations

import json

from sqlalchemy import and_, exists, func, or_, select

from ..errors import ConflictError, InputError
from ..plan_schema import Plan
from ..records import PatientRecord, ScreeningResult
from ..safety import assert_safe
from . import models as m
from .engine import StoreBase, now_utc
from .people import _insert_screening
from .programs import _checked_plan, _insert_program, _latest_program, refuse_replacing_pause
from .rows import _audit, _clinician, _dumps, _person


class RetestsMixin(StoreBase):
    """Retests and the caseload's outcomes."""

    def save_retest(self, retest: dict, record: PatientRecord, screening: ScreeningResult, clinician: str, *,
                    previous: dict, result: dict, based_on_record_version: int,
                    plan: Plan | dict | None = None, based_on_version: int | None = None, plan_note: str = "",
                    template: str | None = None, verdicts: dict | None = None) -> dict:
        """Store a retest with the updated record, its screening and (optionally) the next block.

        ``previous`` is the record's measures the retest replaces; ``result`` the comparison and
        decision (as printed); ``based_on_record_version`` the record version the comparison was
        worked out on (a change since is a :class:`ConflictError`); ``plan`` the next block (a
        plan file's JSON, or a :class:`~prescribe.plan_schema.Plan` built in this process), saved
        as the version after ``based_on_version`` (the latest) once it passes the safety check
        against the updated record.  A paused current program is never replaced: the store's one
        pause check (:func:`~prescribe.store.programs.refuse_replacing_pause`) refuses it with
        :class:`~prescribe.errors.ProgramPaused` (exit 2) as at every door, and nothing is stored.

        Returns ``{retest_id, record_version, screening_id, program_version}``.
        """
        clinician = _clinician(clinician, required=plan is not None)
        pid = record.patient_id
        if retest.get("patient_id") != pid:
            raise InputError.single("patient_id", retest.get("patient_id"), f"the record's patient_id {pid!r}")
        parsed = plan_json = summary_json = None
        if plan is not None:
            # A Plan built in this process is stored as it dumps, not validated a second time.
            parsed, plan_json, summary_json = _checked_plan(pid, plan)
            assert_safe(parsed, door=f"store: the next block of {pid!r}", record=record)
        record_json = _dumps(record.model_dump(mode="json"), "record")
        at = now_utc()
        with self._write() as conn:
            row = _person(conn, pid, lock=True)
            if row.record_version != based_on_record_version:
                raise ConflictError(f"the record of {pid!r} is now at version {row.record_version}, but the retest "
                                    f"was compared against version {based_on_record_version}; nothing was stored: "
                                    "run the retest again")
            program_version = None
            if plan is not None:
                # The store's one pause check, the same at every door (before the version check: a program
                # paused meanwhile is refused for its pause, with the store's words, not as a conflict).
                refuse_replacing_pause(conn, pid, parsed, f"store: the next block after the retest of "
                                                             f"{retest.get('date')} for {pid!r}")
                latest = _latest_program(conn, pid)
                latest_version = latest.version if latest else None
                if based_on_version != latest_version:
                    raise ConflictError(f"the program of {pid!r} is now at version {latest_version}, but the next "
                                        f"block was based on version {based_on_version}; nothing was stored: run "
                                        "the retest again")
            old = json.loads(row.record_json)
            new = json.loads(record_json)
            changed = [k for k in new if old.get(k) != new[k]] + [k for k in old if k not in new]
            version = row.record_version + (1 if changed else 0)
            if changed:
                conn.execute(m.people.update().where(m.people.c.patient_id == pid)
                             .values(record_json=record_json, updated=at, record_version=version))
                _audit(conn, at, "person_updated", pid, clinician,
                       {"changed_fields": changed, "previous": {k: old.get(k) for k in changed},
                        "record_version": version, "based_on_version": based_on_record_version,
                        "by": "retest"})
            screening_id = _insert_screening(conn, pid, at, clinician, screening.model_dump(mode="json"))
            if plan is not None:
                program_version = _insert_program(
                    conn, pid, at, clinician, parsed, plan_json, summary_json, based_on_version, plan_note,
                    action="program_next_block",
                    audit_detail={"after_retest": retest.get("date"), "decision": result.get("decision")})
            rid = conn.execute(m.retests.insert().values(
                patient_id=pid, retest_date=retest["date"], created=at, clinician=clinician,
                retest_json=_dumps(retest, "retest"), previous_json=_dumps(previous, "previous"),
                result_json=_dumps({**result, "next_block": {**(result.get("next_block") or {}),
                                                              "program_version": program_version}
                                    if result.get("next_block") else None}, "result"),
                decision=str(result.get("decision")), template=template,
                verdicts_json=_dumps(verdicts or {}, "verdicts"),
                program_version=program_version)).inserted_primary_key[0]
            _audit(conn, at, "retest_saved", pid, clinician,
                   {"retest_id": rid, "date": retest["date"], "decision": result.get("decision"),
                    "program_version": program_version, "record_version": version})
        return {"retest_id": int(rid), "record_version": version, "screening_id": screening_id,
                "program_version": program_version}

    def retests(self, patient_id: str) -> list[dict]:
        """Every retest of one person, oldest first: {retest_id, date, created, clinician, retest,
        previous, result, decision, program_version}."""
        with self._read() as conn:
            _person(conn, patient_id)
            rows = conn.execute(select(m.retests).where(m.retests.c.patient_id == patient_id)
                                .order_by(m.retests.c.retest_date, m.retests.c.id)).all()
        return [_row(r) for r in rows]

    def latest_retest_date(self, patient_id: str) -> str | None:
        with self._read() as conn:
            return conn.execute(select(func.max(m.retests.c.retest_date))
                                .where(m.retests.c.patient_id == patient_id)).scalar()

    def retest_verdicts(self) -> list[tuple[str, str | None, str]]:
        """Each person's latest retest (by date, then by id) as (patient_id, template, verdicts JSON),
        in one read (the caseload's outcomes): the database keeps only the rows no later retest of
        the same person follows, through the (patient_id, retest_date, id) index."""
        t = m.retests.c
        later = m.retests.alias("later")
        query = select(t.patient_id, t.template, t.verdicts_json).where(~exists().where(
            later.c.patient_id == t.patient_id,
            or_(later.c.retest_date > t.retest_date, and_(later.c.retest_date == t.retest_date, later.c.id > t.id))))
        with self._read() as conn:
            return [tuple(r) for r in conn.execute(query)]


def _row(r) -> dict:
    return {"retest_id": r.id, "date": r.retest_date, "created": r.created, "clinician": r.clinician,
            "retest": json.loads(r.retest_json), "previous": json.loads(r.previous_json),
            "result": json.loads(r.result_json), "decision": r.decision, "template": r.template,
            "verdicts": json.loads(r.verdicts_json), "program_version": r.program_version}
