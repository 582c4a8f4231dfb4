"""The store's plumbing: the database URL and engine, SQLite's settings, read and write
transactions, the database's errors turned into ours, and schema migrations.

On SQLite each connection runs in WAL mode with foreign keys on, a 10 s busy timeout
and ``synchronous=FULL``, and write transactions start with ``BEGIN IMMEDIATE`` so
that two writers queue for the lock instead of failing with "database is locked"
when a read lock is upgraded.  Schema migrations (Alembic, shipped in
``migrations/``) run on open; a database already at the newest revision skips
Alembic entirely.

A file that is not a prescribe store (random bytes, another program's SQLite
database, a store from a newer version) is refused with :class:`StoreError`
before anything is written to it.

:class:`StoreBase` holds the connection; the methods of each table build on it
(people.py, programs.py, sessions.py, templates.py, sensors.py, exchange.py) and
``prescribe.store.api.Store`` assembles them.
"""

from __future__ import annotations

import sqlite3
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Iterator, Self

from sqlalchemy import create_engine, event, text
from sqlalchemy.engine import Connection, Engine, make_url
from sqlalchemy.exc import ArgumentError, DBAPIError, IntegrityError, NoSuchModuleError, OperationalError

from ..errors import ConflictError, InputError, StoreError
from . import models as m

#: The newest schema revision this version knows (a test checks it against Alembic's head).
HEAD_REVISION = "0009"
#: Every revision this version can open, oldest first, with the tables each has.
KNOWN_REVISIONS: dict[str, tuple[str, ...]] = {"0001": m.TABLES_0001, "0002": m.TABLES_0002,
                                               "0003": m.TABLES_0003, "0004": m.TABLES_0004,
                                               "0005": m.TABLES_0005, "0006": m.TABLES_0005,
                                               "0007": m.TABLES_0005,
                                               "0008": m.TABLES_0009,
                                               "0009": m.TABLES_REV0009}
MIGRATIONS_DIR = Path(__file__).with_name("migrations")

#: SQLite settings on every connection (see docs/store.md for why FULL).
BUSY_TIMEOUT_MS = 10_000
SQLITE_SYNCHRONOUS = "FULL"
SQLITE_MAGIC = b"SQLite format 3\x00"


def now_utc() -> str:
    """The current time as ISO 8601 text in UTC with microseconds."""
    return datetime.now(timezone.utc).isoformat(timespec="microseconds")


class StoreBase:
    """The connection to one store: engine, transactions, errors and migrations."""

    def __init__(self, url: str, *, create: bool = True):
        try:
            self._url = make_url(url)
        except ArgumentError:
            raise InputError.single("db", url, "a file path or a database URL such as "
                                    "sqlite:////path/to/prescribe.db or postgresql+psycopg://user@host/db") from None
        self.url = self._url.render_as_string(hide_password=True)
        self.is_sqlite = self._url.get_backend_name() == "sqlite"
        self.path: Path | None = None
        # Program versions and session records never change once stored: parsed copies are
        # kept here for the session engine's reads (read-only; see program_for_reading).
        self._plan_cache: dict[tuple[str, int], tuple[str, Any]] = {}  # (created, Plan)
        self._session_cache: dict[tuple[int, str], Any] = {}
        revision: str | None | bool = False  # False: not known before connecting
        if self.is_sqlite:
            database = self._url.database
            if database and database != ":memory:" and not database.startswith("file:"):
                self.path = Path(database)
                revision = _check_sqlite_file(self.path, create)
        self.engine = self._make_engine()
        try:
            self._migrate(revision)
        except BaseException:
            self.engine.dispose()
            raise

    # -- plumbing -------------------------------------------------------------------

    @property
    def where(self) -> str:
        return str(self.path) if self.path else self.url

    def _make_engine(self) -> Engine:
        try:
            if not self.is_sqlite:
                return create_engine(self._url, pool_pre_ping=True)
            engine = create_engine(self._url, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
        except (NoSuchModuleError, ModuleNotFoundError, ImportError) as exc:
            raise StoreError(f"cannot use the database {self.url}: its driver is not installed ({exc}). "
                             "See docs/store.md for PostgreSQL.") from None

        @event.listens_for(engine, "connect")
        def _sqlite_settings(dbapi_conn, _record):
            # pysqlite's own BEGIN handling off: we emit BEGIN ourselves (below).
            dbapi_conn.isolation_level = None
            cur = dbapi_conn.cursor()
            cur.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
            if self.path is not None:
                cur.execute("PRAGMA journal_mode = WAL")
            cur.execute("PRAGMA foreign_keys = ON")
            cur.execute(f"PRAGMA synchronous = {SQLITE_SYNCHRONOUS}")
            cur.close()

        @event.listens_for(engine, "begin")
        def _sqlite_begin(conn):
            # IMMEDIATE takes the write lock at BEGIN (waiting up to the busy timeout),
            # so a writer never fails on upgrading a read lock.
            write = conn.get_execution_options().get("prescribe_write", False)
            conn.exec_driver_sql("BEGIN IMMEDIATE" if write else "BEGIN")

        return engine

    @contextmanager
    def _errors(self) -> Iterator[None]:
        """Turn the database's errors into StoreError with a plain message."""
        try:
            yield
        except IntegrityError as exc:
            raise ConflictError(f"the store at {self.where} refused the save because another save changed the "
                                f"same rows at the same moment; nothing was overwritten; reload and try again "
                                f"({exc.orig})") from None
        except OperationalError as exc:
            if "locked" in str(exc.orig) or "busy" in str(exc.orig):
                raise StoreError(f"the store at {self.where} stayed busy for more than "
                                 f"{BUSY_TIMEOUT_MS // 1000} s (another program is writing to it); "
                                 "nothing was saved; try again") from None
            raise StoreError(f"the store at {self.where} could not be used: {exc.orig}") from None
        except DBAPIError as exc:
            raise StoreError(f"the store at {self.where} could not be used: {exc.orig}") from None

    @contextmanager
    def _write(self) -> Iterator[Connection]:
        """One write transaction (BEGIN IMMEDIATE on SQLite): all of it commits or none."""
        with self._errors(), self.engine.connect() as conn:
            conn.execution_options(prescribe_write=True)
            with conn.begin():
                yield conn

    @contextmanager
    def _read(self) -> Iterator[Connection]:
        """One read transaction: a consistent snapshot."""
        with self._errors(), self.engine.connect() as conn, conn.begin():
            yield conn

    def _migrate(self, revision: str | None | bool) -> None:
        if revision is False:  # not a SQLite file: look before taking the write lock
            with self._read() as conn:
                revision = _classify(self.where, set(_table_names(conn)), _read_revision(conn))
        if revision == HEAD_REVISION:
            return  # fast path: no Alembic import, no write
        with self._write() as conn:
            if self._url.get_backend_name() == "postgresql":
                # One migrator at a time across processes (released at commit).
                conn.execute(text("SELECT pg_advisory_xact_lock(7011990)"))
            revision = _classify(self.where, set(_table_names(conn)), _read_revision(conn))
            if revision == HEAD_REVISION:
                return
            from alembic import command
            from alembic.config import Config

            cfg = Config()
            cfg.set_main_option("script_location", str(MIGRATIONS_DIR))
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, HEAD_REVISION)

    def revision(self) -> str | None:
        """The schema revision of the open store."""
        with self._read() as conn:
            return _read_revision(conn)

    def close(self) -> None:
        self.engine.dispose()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _check_sqlite_file(path: Path, create: bool) -> str | None:
    """Make sure ``path`` is a prescribe store (or nothing yet) without writing to it.

    Returns the schema revision found (None for a new or empty file).
    """
    if path.is_dir():
        raise StoreError(f"{path} is a directory, not a prescribe store file")
    if not path.exists():
        if not create:
            raise StoreError(f"there is no store at {path}; create it with `prescribe db init` "
                             "(or set PRESCRIBE_DB / --db to the right file)")
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"cannot create the folder for the store {path}: {exc}") from None
        return None
    try:
        with open(path, "rb") as fh:
            head = fh.read(len(SQLITE_MAGIC))
    except OSError as exc:
        raise StoreError(f"cannot read the store {path}: {exc}") from None
    if not head:
        return None  # an empty file is an empty SQLite database
    if head != SQLITE_MAGIC:
        raise StoreError(f"{path} is not a prescribe store: it is not an SQLite database "
                         "(it may be corrupted, or another kind of file). It was left unchanged.")
    try:
        conn = sqlite3.connect(f"{path.resolve().as_uri()}?mode=ro", uri=True, timeout=BUSY_TIMEOUT_MS / 1000)
        try:
            tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")}
            revision = None
            if "alembic_version" in tables:
                row = conn.execute("SELECT version_num FROM alembic_version").fetchone()
                revision = row[0] if row else None
        finally:
            conn.close()
    except sqlite3.DatabaseError as exc:
        raise StoreError(f"{path} is not a readable prescribe store ({exc}); it may be corrupted. "
                         "It was left unchanged.") from None
    return _classify(str(path), tables, revision)


def _classify(where: str, tables: set[str], revision: str | None) -> str | None:
    """The revision of a database with these tables, or StoreError when it is not ours."""
    tables = {t for t in tables if not t.startswith("sqlite_")}
    if not tables:
        return None
    if revision is not None and revision not in KNOWN_REVISIONS:
        raise StoreError(f"{where} is a prescribe store of a newer or unknown schema revision ({revision!r}; this "
                         f"version of prescribe knows up to {HEAD_REVISION!r}). Upgrade prescribe to open it. "
                         "It was left unchanged.")
    if revision is None or not set(KNOWN_REVISIONS[revision]) <= tables:
        shown = ", ".join(sorted(tables)[:8])
        raise StoreError(f"{where} is not a prescribe store: it holds other tables ({shown}). "
                         "It was left unchanged; give --db or PRESCRIBE_DB another file.")
    return revision


def _table_names(conn: Connection) -> list[str]:
    from sqlalchemy import inspect
    return inspect(conn).get_table_names()


def _read_revision(conn: Connection) -> str | None:
    if "alembic_version" not in _table_names(conn):
        return None
    return conn.execute(text("SELECT version_num FROM alembic_version")).scalar()
