"""Clinic templates under review: a change note per version, a review-by date, retirement.

Revision ID: 0004
Revises: 0003
"""

from alembic import op
import sqlalchemy as sa

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.add_column("clinic_templates", sa.Column("change_note", sa.Text, nullable=False, server_default=""))
    op.add_column("clinic_templates", sa.Column("review_by", sa.String(10), nullable=True))
    op.add_column("clinic_templates", sa.Column("retired_by", sa.Text, nullable=True))
    op.add_column("clinic_templates", sa.Column("retired_at", sa.String(40), nullable=True))
    op.create_index("ix_clinic_templates_status", "clinic_templates", ["name", "status"])


def downgrade() -> None:
    op.drop_index("ix_clinic_templates_status", "clinic_templates")
    with op.batch_alter_table("clinic_templates") as batch:
        for column in ("retired_at", "retired_by", "review_by", "change_note"):
            batch.drop_column(column)
