"""Program versions.

A program save names the version it was based on and is refused
(:class:`ConflictError`) when that is not the latest: nothing is overwritten.
"""

from __future__ import annotations

import json

from sqlalchemy import func, select
from sqlalchemy.engine import Connection

from ..errors import ConflictError, InputError, NotFoundError
from ..plan_schema import parse_plan
from ..records import parse_record
from ..planning.safety import assert_safe
from . import models as m
from .engine import StoreBase, now_utc
from .rows import _audit, _clinician, _dumps, _person, _text


class ProgramsMixin(StoreBase):
    """Program versions."""

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
