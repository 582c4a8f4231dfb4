"""Row helpers and input checks shared by the store's tables."""

from __future__ import annotations

import json
from datetime import date, datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.engine import Connection

from ..errors import FieldProblem, InputError, NotFoundError
from ..identifiers import check_identifier
from ..settings import current_clinician, hub_login
from . import models as m


def _person(conn: Connection, patient_id: str, lock: bool = False):
    query = select(m.people).where(m.people.c.patient_id == patient_id)
    row = conn.execute(query.with_for_update() if lock else query).first()
    if row is None:
        raise NotFoundError(f"no person with patient_id {patient_id!r} in the store")
    return row


def _lock_person(conn: Connection, patient_id: str):
    """The person's row, locked until the transaction ends (FOR UPDATE on PostgreSQL), or None."""
    return conn.execute(select(m.people).where(m.people.c.patient_id == patient_id).with_for_update()).first()


def _audit(conn: Connection, at: str, action: str, pid: str | None, clinician: str, detail: dict) -> None:
    conn.execute(m.audit_log.insert().values(at=at, action=action, patient_id=pid, clinician=clinician,
                                             detail_json=_dumps(detail, "audit detail")))


def _dumps(value: Any, field: str) -> str:
    try:
        return json.dumps(value, ensure_ascii=False, allow_nan=False)
    except (TypeError, ValueError) as exc:
        raise InputError([FieldProblem(field, value, f"plain JSON data without NaN or infinity ({exc})")]) from None


def _text(value: Any, field: str, required: bool = False, max_len: int = 10_000) -> str:
    if not isinstance(value, str) or len(value) > max_len or (required and not value.strip()):
        need = "non-blank text" if required else "text"
        raise InputError.single(field, value, f"{need} of at most {max_len} characters")
    return value


def _clinician(value: Any, required: bool) -> str:
    """Who is writing.  Under JupyterHub it is always the login (JUPYTERHUB_USER), whatever
    the caller passed: an empty name becomes the login and a different one is refused
    (prescribe.settings.current_clinician), so every write records the login."""
    check_identifier(value, "clinician")  # no NUL, control or invisible direction characters
    try:
        value = _text(value, "clinician", required=required and hub_login() is None, max_len=200)
    except InputError:
        need = "the name or initials of the clinician (free text, 1 to 200 characters)"
        raise InputError.single("clinician", value, need if required else "free text of at most 200 characters") from None
    return current_clinician(value) if hub_login() is not None else value


def _iso_date(value: Any, field: str) -> str:
    if isinstance(value, date) and not isinstance(value, datetime):
        return value.isoformat()
    if isinstance(value, str):
        try:
            return date.fromisoformat(value).isoformat()
        except ValueError:
            pass
    raise InputError.single(field, value, "a date as YYYY-MM-DD")
