"""The schema version of each person's record (1 or 2), so a clinic can see who still has a
version-1 record.  Not the edit counter: ``people.record_version`` (revision 0006) counts
changes for optimistic concurrency and keeps that meaning.

Existing rows are filled from their stored JSON: the record writes ``"record_version": 2``
whenever it holds a version-2 field (prescribe/records.py), so a stored record that says 2
is version 2 and every other one is version 1.

Revision ID: 0007
Revises: 0006
"""

import json

from alembic import op
import sqlalchemy as sa

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None


def _schema_of(record_json: str) -> int:
    try:
        data = json.loads(record_json)
    except ValueError:
        return 1
    return 2 if isinstance(data, dict) and data.get("record_version") == 2 else 1


def upgrade() -> None:
    with op.batch_alter_table("people") as batch:
        batch.add_column(sa.Column("record_schema", sa.Integer, nullable=False, server_default="1"))
    people = sa.table("people", sa.column("patient_id", sa.String), sa.column("record_json", sa.Text),
                      sa.column("record_schema", sa.Integer))
    conn = op.get_bind()
    v2 = [pid for pid, record_json in conn.execute(sa.select(people.c.patient_id, people.c.record_json))
          if _schema_of(record_json) == 2]
    for pid in v2:
        conn.execute(people.update().where(people.c.patient_id == pid).values(record_schema=2))


def downgrade() -> None:
    with op.batch_alter_table("people") as batch:
        batch.drop_column("record_schema")
