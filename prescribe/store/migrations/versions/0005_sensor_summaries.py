"""Summaries of worn-sensor recordings, stored with the person (never the raw signal).

Revision ID: 0005
Revises: 0004
"""

from alembic import op
import sqlalchemy as sa

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "sensor_summaries",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("patient_id", sa.String(64), sa.ForeignKey("people.patient_id"), nullable=False),
        sa.Column("created", sa.String(40), nullable=False),
        sa.Column("clinician", sa.Text, nullable=False),
        sa.Column("file_name", sa.Text, nullable=False),
        sa.Column("recorded_from", sa.String(40), nullable=True),
        sa.Column("recorded_to", sa.String(40), nullable=True),
        sa.Column("summary_json", sa.Text, nullable=False),
    )
    op.create_index("ix_sensor_summaries_patient", "sensor_summaries", ["patient_id", "created"])


def downgrade() -> None:
    op.drop_index("ix_sensor_summaries_patient", "sensor_summaries")
    op.drop_table("sensor_summaries")
