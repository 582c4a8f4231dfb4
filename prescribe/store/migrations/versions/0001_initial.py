"""The first store: people, screenings, program versions and the audit log.

Revision ID: 0001
Revises:
"""

from alembic import op
import sqlalchemy as sa

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "people",
        sa.Column("patient_id", sa.String(64), primary_key=True),
        sa.Column("record_json", sa.Text, nullable=False),
        sa.Column("created", sa.String(40), nullable=False),
        sa.Column("updated", sa.String(40), nullable=False),
    )
    op.create_table(
        "screenings",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("patient_id", sa.String(64), sa.ForeignKey("people.patient_id"), nullable=False),
        sa.Column("created", sa.String(40), nullable=False),
        sa.Column("ruleset_version", sa.String(64), nullable=False),
        sa.Column("bone_density_category", sa.String(32), nullable=False),
        sa.Column("clinician", sa.Text, nullable=False),
        sa.Column("result_json", sa.Text, nullable=False),
    )
    op.create_index("ix_screenings_patient", "screenings", ["patient_id", "created"])
    op.create_table(
        "program_versions",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("patient_id", sa.String(64), sa.ForeignKey("people.patient_id"), nullable=False),
        sa.Column("version", sa.Integer, nullable=False),
        sa.Column("based_on_version", sa.Integer, nullable=True),
        sa.Column("created", sa.String(40), nullable=False),
        sa.Column("clinician", sa.Text, nullable=False),
        sa.Column("note", sa.Text, nullable=False),
        sa.Column("summary_json", sa.Text, nullable=False),
        sa.Column("plan_json", sa.Text, nullable=False),
        sa.UniqueConstraint("patient_id", "version", name="uq_program_versions_patient_version"),
    )
    op.create_table(
        "audit_log",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("at", sa.String(40), nullable=False),
        sa.Column("action", sa.String(40), nullable=False),
        sa.Column("patient_id", sa.String(64), nullable=True),
        sa.Column("clinician", sa.Text, nullable=False),
        sa.Column("detail_json", sa.Text, nullable=False),
    )
    op.create_index("ix_audit_patient", "audit_log", ["patient_id", "id"])


def downgrade() -> None:
    op.drop_index("ix_audit_patient", "audit_log")
    op.drop_table("audit_log")
    op.drop_table("program_versions")
    op.drop_index("ix_screenings_patient", "screenings")
    op.drop_table("screenings")
    op.drop_table("people")
