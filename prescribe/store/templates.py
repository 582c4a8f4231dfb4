"""Clinic templates: versioned drafts, approval by a second clinician, retirement."""

from __future__ import annotations

import json
from datetime import date, datetime, timezone

from sqlalchemy import func, select
from sqlalchemy.engine import Connection

from ..errors import InputError, NotFoundError
from . import models as m
from .engine import StoreBase, now_utc
from .rows import _audit, _clinician, _dumps, _iso_date, _text

TEMPLATE_STATUSES = ("draft", "approved", "retired")
#: Longest review interval accepted for an approved template version [days] (common practice:
#: guidance is checked against new evidence at least every few years; NICE PMG20 ch. 13).
TEMPLATE_REVIEW_MAX_DAYS = 3 * 366
#: Default review interval when the approver gives no review-by date [days] (common practice).
TEMPLATE_REVIEW_DEFAULT_DAYS = 365


class TemplatesMixin(StoreBase):
    """Clinic templates."""

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
