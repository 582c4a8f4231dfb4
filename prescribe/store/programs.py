"""Program versions.

A program save names the version it was based on and is refused
(:class:`ConflictError`) when that is not the latest: nothing is overwritten.

A paused program binds (docs/sessions.md): every door that stores a program
(``save_program``, ``save_patient(plan=...)``, ``import_bundle``, and through them the
command line and the app) goes through :func:`refuse_replacing_pause`, which refuses
(:class:`ProgramPaused`, exit 2) a program that would replace a paused one, unless it
keeps the same pause; only :meth:`ProgramsMixin.resume_program` lifts it, with a reason.
"""

from __future__ import annotations

import json

from sqlalchemy import func, select
from sqlalchemy.engine import Connection

from ..errors import ConflictError, InputError, NotFoundError, ProgramPaused
from ..plan_schema import Plan, parse_plan
from ..records import parse_record
from ..safety import assert_safe
from ..sessions.pause import active_pause, checked_reason, keeps_pause, lift_pause
from . import models as m
from .engine import StoreBase, now_utc
from .rows import _audit, _clinician, _dumps, _person, _text


class ProgramsMixin(StoreBase):
    """Program versions."""

    def save_program(self, patient_id: str, plan: Plan | dict, clinician: str, based_on_version: int | None,
                     note: str = "", *, action: str = "program_saved", audit_detail: dict | None = None) -> int:
        """Save a new version of a person's program and return its number.

        ``based_on_version`` is the version the clinician started from (None for the
        first version).  When it is not the latest stored version the save is refused
        with :class:`ConflictError` naming both versions: nothing is overwritten.  ``plan`` is
        the typed plan, or plan JSON data (validated here, once).
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
            return _insert_program(conn, patient_id, at, clinician, parsed, plan_json, summary_json,
                                   based_on_version, note, action=action, audit_detail=audit_detail)

    def resume_program(self, patient_id: str, clinician: str, reason: str) -> dict:
        """Record the resumption of a paused program: the next version, with the pause lifted.

        Who (the login under JupyterHub), when and why go on the new version (``resumed``)
        and in the audit log (``program_resumed``).  The new version is based on the paused
        one and passes the safety check against the stored record.  Returns
        ``{patient_id, program_version, based_on_version, resumed_by, resumed_at, reason,
        paused_since, paused_from_week}``.

        Raises
        ------
        NotFoundError
            No such person.
        InputError
            No program stored, the latest program is not paused, a blank or too long
            reason, no clinician (outside the hub).
        """
        clinician = _clinician(clinician, required=True)
        reason = checked_reason(reason)
        at = now_utc()
        with self._write() as conn:
            row = _person(conn, patient_id, lock=True)
            latest = conn.execute(select(m.program_versions.c.version, m.program_versions.c.plan_json)
                                  .where(m.program_versions.c.patient_id == patient_id)
                                  .order_by(m.program_versions.c.version.desc()).limit(1)).first()
            if latest is None:
                raise InputError.single("patient_id", patient_id, "a person with a stored program that is paused "
                                        "(this person has no stored program)")
            plan = _stored_plan(latest.plan_json, patient_id, latest.version)
            pause = active_pause(plan)
            if pause is None:
                raise InputError.single("program", f"version {latest.version} of {patient_id!r} (not paused)",
                                        "a paused program: only a paused program is resumed (a program is paused "
                                        "when a clinician applies stop_and_refer advice with `prescribe adjust --apply`)")
            new = lift_pause(plan, by=clinician, at=at, reason=reason, paused_version=latest.version)
            parsed, plan_json, summary_json = _checked_plan(patient_id, new)
            assert_safe(parsed, door=f"store: resuming the program of {patient_id!r}",
                        record=parse_record(json.loads(row.record_json), source=f"store record {patient_id!r}"))
            version = _insert_program(
                conn, patient_id, at, clinician, parsed, plan_json, summary_json, latest.version,
                f"resumed: {reason}", action="program_resumed", lifts_pause=True,
                audit_detail={"reason": reason, "paused_version": latest.version,
                              "paused_since": pause.since, "paused_from_week": pause.from_week,
                              "pause_reason": pause.reason})
        return {"patient_id": patient_id, "program_version": version, "based_on_version": latest.version,
                "resumed_by": clinician, "resumed_at": at, "reason": reason,
                "paused_since": pause.since, "paused_from_week": pause.from_week}

    def last_resumption(self, patient_id: str) -> dict | None:
        """The latest recorded resumption of the person's program (its audit entry's detail
        with ``at`` and ``clinician``), or None."""
        with self._read() as conn:
            _person(conn, patient_id)
            row = conn.execute(select(m.audit_log).where(m.audit_log.c.patient_id == patient_id,
                                                         m.audit_log.c.action == "program_resumed")
                               .order_by(m.audit_log.c.id.desc()).limit(1)).first()
        if row is None:
            return None
        return {**json.loads(row.detail_json), "at": row.at, "clinician": row.clinician}

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

    def get_program(self, patient_id: str, version: int | None = None) -> Plan:
        """The plan of one version (the latest when ``version`` is None), validated from its row."""
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
        return _stored_plan(row.plan_json, patient_id, version)

    def program_created(self, patient_id: str, version: int | None = None) -> str | None:
        """When a program version (the latest by default) was saved."""
        with self._read() as conn:
            query = select(m.program_versions.c.created).where(m.program_versions.c.patient_id == patient_id)
            query = (query.order_by(m.program_versions.c.version.desc()).limit(1) if version is None
                     else query.where(m.program_versions.c.version == version))
            return conn.execute(query).scalar()

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


def _checked_plan(patient_id: str, plan: Plan | dict):
    """The typed plan (for the safety check) and its stored JSON and summary.

    Plan JSON data (a plan file's, a bundle's) is validated here, once, and kept as it came; a
    typed plan is kept as ``prescribe plan`` prints one (every field).
    """
    parsed = plan if isinstance(plan, Plan) else parse_plan(plan, source="program")
    if parsed.patient_id != patient_id:
        raise InputError.single("plan.patient_id", parsed.patient_id, f"the person's id {patient_id!r}")
    data = parsed.model_dump(mode="json") if isinstance(plan, Plan) else plan
    return parsed, _dumps(data, "plan"), _dumps(plan_summary(parsed), "plan")


def _stored_plan(text: str, patient_id: str, version: int | None) -> Plan:
    """A stored program row's plan, validated: the one place a stored plan becomes a Plan."""
    where = f"stored program of {patient_id!r}" + (f", version {version}" if version is not None else "")
    return parse_plan(json.loads(text), source=where, share=True)   # stored versions are read, never changed


def _latest_program(conn: Connection, pid: str):
    return conn.execute(select(m.program_versions.c.version, m.program_versions.c.clinician,
                               m.program_versions.c.created)
                        .where(m.program_versions.c.patient_id == pid)
                        .order_by(m.program_versions.c.version.desc()).limit(1)).first()


def refuse_replacing_pause(conn: Connection, pid: str, new_plan: Plan | None, door: str) -> None:
    """Refuse (:class:`ProgramPaused`) a program that would replace the person's paused one.

    The one test of every door that stores a program (called inside its transaction, with
    the person's row locked): allowed when the latest stored version is not paused, or
    when ``new_plan`` keeps the same pause (stop_and_refer advice applied again).
    """
    row = conn.execute(select(m.program_versions.c.version, m.program_versions.c.plan_json)
                       .where(m.program_versions.c.patient_id == pid)
                       .order_by(m.program_versions.c.version.desc()).limit(1)).first()
    if row is None or '"paused": {' not in row.plan_json:  # a pause is an object; null or absent: none
        return
    pause = active_pause(_stored_plan(row.plan_json, pid, row.version))
    if pause is not None and not keeps_pause(pause, new_plan):
        raise ProgramPaused(pid, row.version, pause.model_dump(mode="json"), door)


def _insert_program(conn: Connection, pid: str, at: str, clinician: str, plan: Plan, plan_json: str, summary_json: str,
                    based_on_version: int | None, note: str, *, action: str = "program_saved",
                    audit_detail: dict | None = None, lifts_pause: bool = False) -> int:
    if not lifts_pause:  # only resume_program lifts a pause
        refuse_replacing_pause(conn, pid, plan, f"store: saving a program for {pid!r}")
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


def plan_summary(plan: Plan) -> dict:
    """The few plan figures a version list shows."""
    return {"weeks": len(plan.weeks), "max_impact_level": max((w.impact_level for w in plan.weeks), default=None),
            "ruleset_version": plan.ruleset_version, "plan_created": plan.created,
            "plan_format_version": plan.plan_format_version,
            "template": plan.template.name if plan.template is not None else None,
            "template_version": plan.template_version}
