"""Clinicians' passphrases: how the single-user app knows who approves, clears and resumes.

A clinic lead sets each clinician's passphrase at the command line (`prescribe clinician
passphrase NAME --clinician LEAD`); only a salted scrypt hash is kept, never the passphrase.

Revision ID: 0009
Revises: 0008
"""

from alembic import op
import sqlalchemy as sa

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "clinician_passphrases",
        sa.Column("clinician", sa.String(200), primary_key=True),
        sa.Column("scheme", sa.String(80), nullable=False),
        sa.Column("salt_hex", sa.String(128), nullable=False),
        sa.Column("hash_hex", sa.String(256), nullable=False),
        sa.Column("set_by", sa.Text, nullable=False),
        sa.Column("set_at", sa.String(40), nullable=False),
        sa.Column("failed_attempts", sa.Integer, nullable=False, server_default=sa.text("0")),
        sa.Column("locked_until", sa.String(40), nullable=True),
    )


def downgrade() -> None:
    op.drop_table("clinician_passphrases")
