"""Session records: the whole validated session (what was done, effort, pain, symptoms,
a fall, a note) and its program week, beside the columns of 0002.

Revision ID: 0003
Revises: 0002
"""

from alembic import op
import sqlalchemy as sa

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("session_logs", sa.Column("session_json", sa.Text, nullable=True))
    op.add_column("session_logs", sa.Column("week", sa.Integer, nullable=True))


def downgrade() -> None:
    with op.batch_alter_table("session_logs") as batch:
        batch.drop_column("week")
        batch.drop_column("session_json")
