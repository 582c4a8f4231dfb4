"""Session logs (what a person did in a session) and the clinic's program templates.

Revision ID: 0002
Revises: 0001
"""

from alembic import op
import sqlalchemy as sa

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "session_logs",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("patient_id", sa.String(64), sa.ForeignKey("people.patient_id"), nullable=False),
        sa.Column("program_version", sa.Integer, nullable=True),
        sa.Column("session_date", sa.String(10), nullable=False),
        sa.Column("done_json", sa.Text, nullable=False),
        sa.Column("rpe", sa.Integer, nullable=True),
        sa.Column("pain", sa.Integer, nullable=True),
        sa.Column("notes", sa.Text, nullable=False),
        sa.Column("clinician", sa.Text, nullable=False),
        sa.Column("created", sa.String(40), nullable=False),
        sa.ForeignKeyConstraint(["patient_id", "program_version"],
                                ["program_versions.patient_id", "program_versions.version"],
                                name="fk_session_logs_program_version"),
    )
    op.create_index("ix_session_logs_patient", "session_logs", ["patient_id", "session_date"])
    op.create_table(
        "clinic_templates",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("name", sa.String(120), nullable=False),
        sa.Column("version", sa.Integer, nullable=False),
        sa.Column("body_json", sa.Text, nullable=False),
        sa.Column("status", sa.String(16), nullable=False),
        sa.Column("created", sa.String(40), nullable=False),
        sa.Column("created_by", sa.Text, nullable=False),
        sa.Column("approved_by", sa.Text, nullable=True),
        sa.Column("approved_at", sa.String(40), nullable=True),
        sa.UniqueConstraint("name", "version", name="uq_clinic_templates_name_version"),
    )


def downgrade() -> None:
    op.drop_table("clinic_templates")
    op.drop_index("ix_session_logs_patient", "session_logs")
    op.drop_table("session_logs")
