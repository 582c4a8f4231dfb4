"""The PostgreSQL test server helper: it finds Debian's binaries or says how to get them,
and a missing PostgreSQL fails the run in CI instead of skipping."""

from __future__ import annotations

import os

import pytest

import pg_server
from conftest import pg_missing


def test_missing_binaries_are_named_with_the_package_to_install(monkeypatch):
    monkeypatch.setattr(pg_server.shutil, "which", lambda name: None)
    monkeypatch.setattr(pg_server.glob, "glob", lambda pattern: [])
    with pytest.raises(pg_server.PgUnavailable, match="postgresql"):
        pg_server.pg_bindir()


@pytest.mark.parametrize("ci, outcome", [("true", pytest.fail.Exception), ("1", pytest.fail.Exception),
                                         ("", pytest.skip.Exception), ("false", pytest.skip.Exception)])
def test_without_postgresql_ci_fails_and_a_developer_machine_skips(monkeypatch, ci, outcome):
    monkeypatch.setenv("CI", ci)
    with pytest.raises(outcome, match="PostgreSQL"):
        pg_missing(pg_server.PgUnavailable("initdb not found"))


def test_a_schema_url_puts_the_schema_first_on_the_search_path():
    url = "postgresql+psycopg://u:p@127.0.0.1:5555/db"
    assert pg_server.with_schema(url, "t_1") == url + "?options=-csearch_path%3Dt_1"
    assert pg_server.with_schema(url + "?sslmode=disable", "t_2").endswith("&options=-csearch_path%3Dt_2")


@pytest.mark.skipif(bool(os.environ.get("PRESCRIBE_TEST_PG_URL")), reason="a server of your own, not ours")
def test_the_private_server_listens_on_loopback_only(pg_url):
    from sqlalchemy import create_engine, text
    assert "@127.0.0.1:" in pg_url
    engine = create_engine(pg_url)
    try:
        with engine.connect() as conn:
            assert conn.execute(text("SHOW listen_addresses")).scalar() == "127.0.0.1"
            assert conn.execute(text("SHOW password_encryption")).scalar() == "scram-sha-256"
    finally:
        engine.dispose()
