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

The methods live by table (:mod:`.people`, :mod:`.programs`, :mod:`.sessions`,
:mod:`.templates`, :mod:`.sensors`, :mod:`.retests`, :mod:`.clinicians`, :mod:`.exchange`) over the plumbing in
:mod:`.engine`; this module assembles them into :class:`Store` and keeps every name
other modules import from here.
"""

from __future__ import annotations

from ..settings import db_url
from .engine import (BUSY_TIMEOUT_MS, HEAD_REVISION, KNOWN_REVISIONS, MIGRATIONS_DIR, SQLITE_MAGIC,
                     SQLITE_SYNCHRONOUS, now_utc)
from .clinicians import CliniciansMixin
from .exchange import LOCAL_ONLY_ACTIONS, ExchangeMixin, check_bundle_programs
from .people import PeopleMixin
from .programs import ProgramsMixin, plan_summary
from .retests import RetestsMixin
from .rows import _audit
from .sensors import SensorsMixin
from .sessions import SessionsMixin
from .templates import TEMPLATE_REVIEW_DEFAULT_DAYS, TEMPLATE_REVIEW_MAX_DAYS, TEMPLATE_STATUSES, TemplatesMixin

__all__ = ["Store", "open_store", "now_utc", "plan_summary", "check_bundle_programs", "db_url", "_audit",
           "HEAD_REVISION", "KNOWN_REVISIONS", "MIGRATIONS_DIR", "BUSY_TIMEOUT_MS", "SQLITE_SYNCHRONOUS",
           "SQLITE_MAGIC", "LOCAL_ONLY_ACTIONS", "TEMPLATE_STATUSES", "TEMPLATE_REVIEW_MAX_DAYS",
           "TEMPLATE_REVIEW_DEFAULT_DAYS"]


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


class Store(PeopleMixin, ProgramsMixin, SessionsMixin, TemplatesMixin, SensorsMixin, RetestsMixin,
            CliniciansMixin, ExchangeMixin):
    """One clinic's records.  Open it with :func:`open_store`; close it with :meth:`close`."""
