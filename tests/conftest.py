"""Shared fixtures.  Browser fixtures live in tests/browser/conftest.py only."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
ARTIFACTS = ROOT / "test-artifacts"


@pytest.fixture
def artifacts_dir() -> Path:
    """Where tests keep files a reviewer can open (screenshots, rendered pages)."""
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS


@pytest.fixture
def tmp_db(tmp_path, monkeypatch) -> str:
    """A fresh store for one test, set through PRESCRIBE_DB."""
    path = tmp_path / "store.db"
    monkeypatch.setenv("PRESCRIBE_DB", str(path))
    return str(path)


def run_cli(*args: str, input: str | None = None, env: dict | None = None, cwd=None):
    """Run the real ``prescribe`` entry point in a subprocess."""
    full_env = dict(os.environ)
    if env:
        full_env.update(env)
    exe = Path(sys.executable).with_name("prescribe")
    cmd = [str(exe), *args] if exe.exists() else [sys.executable, "-m", "prescribe.cli", *args]
    return subprocess.run(cmd, input=input, capture_output=True, text=True, env=full_env, cwd=cwd, timeout=300)


@pytest.fixture
def cli():
    return run_cli


# -- database backends: every store test runs on SQLite and on PostgreSQL -----------------

BACKENDS = ("sqlite", "postgresql")


def _in_ci() -> bool:
    return os.environ.get("CI", "").strip().lower() in ("1", "true", "yes")


def pg_missing(exc: BaseException) -> None:
    """PostgreSQL cannot run here: fail in CI (CI=true), skip on a developer machine."""
    if _in_ci():
        pytest.fail(f"PostgreSQL is required in CI and could not be started: {exc}")
    pytest.skip(f"PostgreSQL not available here ({exc}); `make pg-deps` installs it")


@pytest.fixture(scope="session")
def pg_url():
    """The URL of a PostgreSQL database for the tests.

    ``PRESCRIBE_TEST_PG_URL`` names one you run yourself; otherwise a private server is
    started for the session (tests/pg_server.py: initdb in a temporary folder, 127.0.0.1,
    a free port) and stopped at the end.  Where PostgreSQL cannot run, the PostgreSQL
    variants are skipped on a developer machine and FAIL in CI (CI=true).
    """
    given = os.environ.get("PRESCRIBE_TEST_PG_URL")
    if given:
        yield given
        return
    from pg_server import PgServer, PgUnavailable
    try:
        import psycopg  # noqa: F401
        server = PgServer(fsync=False)  # the kill tests kill processes, not the machine
        url = server.start()
    except (PgUnavailable, ImportError, OSError) as exc:
        pg_missing(exc)
    try:
        yield url
    finally:
        server.stop()


@pytest.fixture(params=BACKENDS)
def backend(request) -> str:
    return request.param


@pytest.fixture
def new_db(backend, tmp_path, request):
    """A factory of fresh, empty store locations on this test's backend.

    ``new_db("name")`` is a SQLite file in the test's folder, or on PostgreSQL a URL whose
    search path is a new schema of the session's database (dropped after the test).
    """
    schemas: list[str] = []
    url = request.getfixturevalue("pg_url") if backend == "postgresql" else None

    def make(name: str = "store") -> str:
        if backend == "sqlite":
            return str(tmp_path / f"{name}.db")  # the store makes missing folders itself
        import uuid

        from pg_server import create_schema, with_schema
        schema = f"t_{uuid.uuid4().hex[:16]}"
        create_schema(url, schema)
        schemas.append(schema)
        return with_schema(url, schema)

    yield make
    if schemas:
        from pg_server import drop_schema
        for schema in schemas:
            try:
                drop_schema(url, schema)
            except Exception:  # the server is thrown away at the end of the session anyway
                pass
