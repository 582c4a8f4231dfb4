"""A version number on each person's record, so a save based on an older record is a
conflict instead of a silent overwrite (two clinicians editing the same person).

Revision ID: 0006
Revises: 0005
"""

from alembic import op
import sqlalchemy as sa

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None


def upgrade() -> None:
    # Existing people start at version 1 (the server default fills the rows in).
    with op.batch_alter_table("people") as batch:
        batch.add_column(sa.Column("record_version", sa.Integer, nullable=False, server_default="1"))


def downgrade() -> None:
    with op.batch_alter_table("people") as batch:
        batch.drop_column("record_version")
