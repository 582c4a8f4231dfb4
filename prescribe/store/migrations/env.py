"""Alembic environment of the store: always run from code (prescribe.store.engine).

The caller hands over an open connection already inside a write transaction
(``config.attributes["connection"]``), so a migration is one transaction that
either applies completely or not at all, and two processes opening the same old
file at once migrate it once.
"""

from __future__ import annotations

from alembic import context

from prescribe.store.models import metadata

connection = context.config.attributes.get("connection")
if connection is None:  # pragma: no cover - only reachable by running alembic by hand
    raise RuntimeError("prescribe's migrations run from prescribe.store.open_store(), "
                       "which passes the connection in; `prescribe db init` runs them.")

context.configure(connection=connection, target_metadata=metadata,
                  render_as_batch=connection.dialect.name == "sqlite")
with context.begin_transaction():
    context.run_migrations()
