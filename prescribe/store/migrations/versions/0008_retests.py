"""Retests: what was measured at a review, against the baseline, and the decision it led to.

Revision ID: 0008
Revises: 0007
"""

from alembic import op
import sqlalchemy as sa

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "retests",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("patient_id", sa.String(64), sa.ForeignKey("people.patient_id"), nullable=False),
        sa.Column("retest_date", sa.String(10), nullable=False),
        sa.Column("created", sa.String(40), nullable=False),
        sa.Column("clinician", sa.Text, nullable=False),
        sa.Column("retest_json", sa.Text, nullable=False),
        sa.Column("previous_json", sa.Text, nullable=False),
        sa.Column("result_json", sa.Text, nullable=False),
        sa.Column("decision", sa.String(16), nullable=False),
        sa.Column("template", sa.String(120), nullable=True),
        sa.Column("verdicts_json", sa.Text, nullable=False),
        sa.Column("program_version", sa.Integer, nullable=True),
    )
    op.create_index("ix_retests_patient", "retests", ["patient_id", "retest_date", "id"])


def downgrade() -> None:
    op.drop_index("ix_retests_patient", table_name="retests")
    op.drop_table("retests")
