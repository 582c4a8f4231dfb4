"""The audit log, a person's bundle (export and import) and the backup copy."""

from __future__ import annotations

import json
import os
import sqlite3
import tempfile
from pathlib import Path

from sqlalchemy import select
from sqlalchemy.engine import Connection

from .. import __version__
from ..cautions import STANDARD_CAUTIONS
from ..errors import ConflictError, InputError, StoreError
from ..plan_schema import Plan, parse_plan
from ..records import parse_record
from ..safety import assert_safe
from . import models as m
from .bundle import BUNDLE_FORMAT_VERSION, BUNDLE_KIND, has_display_name, parse_bundle, without_display_name
from .engine import HEAD_REVISION, StoreBase, now_utc
from .people import _insert_screening
from .programs import plan_summary, refuse_replacing_pause
from .rows import _audit, _dumps, _person
from .sessions import _session_row

#: Audit actions; "bundle_imported" rows describe this store, not the person, so an
#: export leaves them out (export(import(export(x))) == export(x)).
LOCAL_ONLY_ACTIONS = ("bundle_imported",)


class ExchangeMixin(StoreBase):
    """Audit log, export, import and backup."""

    def audit(self, patient_id: str | None = None) -> list[dict]:
        """The audit log (of one person when ``patient_id`` is given), oldest first."""
        with self._read() as conn:
            query = select(m.audit_log).order_by(m.audit_log.c.id)
            if patient_id is not None:
                query = query.where(m.audit_log.c.patient_id == patient_id)
            rows = conn.execute(query).all()
        return [{"id": r.id, "at": r.at, "action": r.action, "patient_id": r.patient_id,
                 "clinician": r.clinician, "detail": json.loads(r.detail_json)} for r in rows]

    def export_patient(self, patient_id: str, *, with_display_name: bool = False) -> dict:
        """A person with every screening, program version, session log and audit entry.

        The name the person's handout uses (``display_name``) is left out of every copy of
        the record unless ``with_display_name`` (:func:`~prescribe.store.bundle.without_display_name`).
        """
        with self._read() as conn:
            bundle = _export(conn, patient_id)
        return bundle if with_display_name else without_display_name(bundle)

    def import_bundle(self, bundle: dict) -> dict:
        """Add a person from an exported bundle, timestamps and version numbers kept.

        All or nothing.  A malformed bundle is an :class:`InputError`; a person who is
        already here with different content is a :class:`ConflictError` (nothing is
        changed); the same content again is reported ``unchanged``.  A bundle exported
        without the person's name (the default) that matches the stored person apart from
        the name is the same content: ``unchanged``, and the stored name is kept.
        """
        b = parse_bundle(bundle)
        pid = b["person"]["patient_id"]
        plans = check_bundle_programs(b)
        at = now_utc()
        with self._write() as conn:
            exists = conn.execute(select(m.people.c.patient_id).where(m.people.c.patient_id == pid)
                                  .with_for_update()).first()
            if exists is not None:
                stored = _export(conn, pid)
                if not has_display_name(b):  # a bundle without the name never wipes the stored one
                    stored = without_display_name(stored)
                if _comparable(stored) == _comparable(b):
                    return {"patient_id": pid, "status": "unchanged", **_counts(b)}
                # A bundle whose latest program would replace a paused one: refused as such (exit 2).
                programs = sorted(b["programs"], key=lambda p: p["version"])
                refuse_replacing_pause(conn, pid, plans[programs[-1]["version"]] if programs else None,
                                       f"import of a bundle of {pid!r}")
                raise ConflictError(
                    f"{pid!r} is already in the store at {self.where} with different content; importing "
                    "would overwrite it, so nothing was imported. Export the stored person first, or "
                    "import into another store.")
            person = b["person"]
            conn.execute(m.people.insert().values(patient_id=pid, record_json=_dumps(person["record"], "record"),
                                                  created=person["created"], updated=person["updated"],
                                                  record_schema=parse_record(person["record"]).version))
            for s in b["screenings"]:
                _insert_screening(conn, pid, s["created"], s["clinician"], s["result"])
            for p in b["programs"]:
                conn.execute(m.program_versions.insert().values(
                    patient_id=pid, version=p["version"], based_on_version=p["based_on_version"],
                    created=p["created"], clinician=p["clinician"], note=p["note"],
                    summary_json=_dumps(plan_summary(plans[p["version"]]), "plan"),
                    plan_json=_dumps(p["plan"], "plan")))  # the bundle's plan JSON kept as exported
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
            for r in b.get("retests") or []:
                conn.execute(m.retests.insert().values(
                    patient_id=pid, retest_date=r["retest"]["date"], created=r["created"], clinician=r["clinician"],
                    retest_json=_dumps(r["retest"], "retest"), previous_json=_dumps(r["previous"], "previous"),
                    result_json=_dumps(r["result"], "result"), decision=r["decision"], template=r["template"],
                    verdicts_json=_dumps(r["verdicts"], "verdicts"), program_version=r["program_version"]))
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


def check_bundle_programs(b: dict) -> dict[int, Plan]:
    """Every program version of a bundle, validated (the file boundary: once) and passed through
    the safety check against the bundle's record: {version: plan}.

    Raises :class:`~prescribe.errors.UnsafeProgram` (nothing is stored) naming the version.
    """
    record = parse_record(b["person"]["record"], source="bundle person.record")
    plans = {}
    for p in b["programs"]:
        plan = parse_plan(p["plan"], source=f"bundle program version {p['version']}")
        assert_safe(plan, door=f"bundle program version {p['version']} of {b['person']['patient_id']!r}",
                    record=record)
        plans[p["version"]] = plan
    return plans


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
    retests = conn.execute(select(m.retests).where(m.retests.c.patient_id == pid)
                           .order_by(m.retests.c.retest_date, m.retests.c.id)).all()
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
        "retests": [{"created": r.created, "clinician": r.clinician, "retest": json.loads(r.retest_json),
                     "previous": json.loads(r.previous_json), "result": json.loads(r.result_json),
                     "decision": r.decision, "template": r.template, "verdicts": json.loads(r.verdicts_json),
                     "program_version": r.program_version} for r in retests],
        "audit": [{"at": a.at, "action": a.action, "clinician": a.clinician, "detail": json.loads(a.detail_json)}
                  for a in audit],
    }


def _comparable(bundle: dict) -> dict:
    return {k: v for k, v in bundle.items() if k not in ("tool_version", "cautions")}


def _counts(b: dict) -> dict:
    return {"screenings": len(b["screenings"]), "program_versions": len(b["programs"]),
            "session_logs": len(b["session_logs"]), "sessions": len(b.get("sessions") or []),
            "sensor_summaries": len(b.get("sensor_summaries") or []),
            "retests": len(b.get("retests") or []),
            "audit_entries": len(b["audit"])}
