"""The store's tables (SQLAlchemy Core), portable across SQLite and PostgreSQL.

Every timestamp is an ISO 8601 text in UTC with microseconds
(``2026-03-02T09:15:00.000000+00:00``): it sorts as text, survives an export and
an import unchanged, and means the same on every database.  Documents (the
validated record, a screening result, a plan) are stored as JSON text, exactly
as they were saved.

The migrations in ``prescribe/store/migrations/versions`` create these tables;
this module is the reference the code reads and writes through.  A test checks
that the migrated database and this metadata agree.
"""

from __future__ import annotations

from sqlalchemy import (Column, ForeignKey, ForeignKeyConstraint, Index, Integer, MetaData, String, Table,
                        Text, UniqueConstraint, text)

metadata = MetaData()

#: One row a person: the validated record as JSON, pseudonymous id only.
people = Table(
    "people", metadata,
    Column("patient_id", String(64), primary_key=True),
    Column("record_json", Text, nullable=False),
    Column("created", String(40), nullable=False),
    Column("updated", String(40), nullable=False),
    # revision 0006: 1 when created, +1 on every change of the record (optimistic concurrency)
    Column("record_version", Integer, nullable=False, server_default=text("1")),
    # revision 0007: the record's schema version, 1 or 2 (PatientRecord.version), so a clinic
    # can list who still has a version-1 record; not the edit counter above
    Column("record_schema", Integer, nullable=False, server_default=text("1")),
)

#: Every screening ever saved for a person, with the rule-set version it came from.
screenings = Table(
    "screenings", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("patient_id", String(64), ForeignKey("people.patient_id"), nullable=False),
    Column("created", String(40), nullable=False),
    Column("ruleset_version", String(64), nullable=False),
    Column("bone_density_category", String(32), nullable=False),
    Column("clinician", Text, nullable=False, default=""),
    Column("result_json", Text, nullable=False),
    Index("ix_screenings_patient", "patient_id", "created"),
)

#: Every version of every person's program; a version is never changed or deleted.
program_versions = Table(
    "program_versions", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("patient_id", String(64), ForeignKey("people.patient_id"), nullable=False),
    Column("version", Integer, nullable=False),
    Column("based_on_version", Integer, nullable=True),
    Column("created", String(40), nullable=False),
    Column("clinician", Text, nullable=False),
    Column("note", Text, nullable=False, default=""),
    Column("summary_json", Text, nullable=False),
    Column("plan_json", Text, nullable=False),
    UniqueConstraint("patient_id", "version", name="uq_program_versions_patient_version"),
)

#: One row a write: what was done, to whom, by whom, when.
audit_log = Table(
    "audit_log", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("at", String(40), nullable=False),
    Column("action", String(40), nullable=False),
    Column("patient_id", String(64), nullable=True),
    Column("clinician", Text, nullable=False, default=""),
    Column("detail_json", Text, nullable=False, default="{}"),
    Index("ix_audit_patient", "patient_id", "id"),
)

# -- revision 0002: tables the session log and the clinic templates build on --------

#: What a person did in one session of a program version.
session_logs = Table(
    "session_logs", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("patient_id", String(64), ForeignKey("people.patient_id"), nullable=False),
    Column("program_version", Integer, nullable=True),
    Column("session_date", String(10), nullable=False),
    Column("done_json", Text, nullable=False),
    Column("rpe", Integer, nullable=True),
    Column("pain", Integer, nullable=True),
    Column("notes", Text, nullable=False, default=""),
    Column("clinician", Text, nullable=False, default=""),
    Column("created", String(40), nullable=False),
    # revision 0003: the whole session record (PRODUCT.md "Session record") and its program week
    Column("session_json", Text, nullable=True),
    Column("week", Integer, nullable=True),
    ForeignKeyConstraint(["patient_id", "program_version"],
                         ["program_versions.patient_id", "program_versions.version"],
                         name="fk_session_logs_program_version"),
    Index("ix_session_logs_patient", "patient_id", "session_date"),
)

#: A clinic's program template, versioned; draft until a named clinician approves it.
clinic_templates = Table(
    "clinic_templates", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("name", String(120), nullable=False),
    Column("version", Integer, nullable=False),
    Column("body_json", Text, nullable=False),
    Column("status", String(16), nullable=False, default="draft"),
    Column("created", String(40), nullable=False),
    Column("created_by", Text, nullable=False, default=""),
    Column("approved_by", Text, nullable=True),
    Column("approved_at", String(40), nullable=True),
    # revision 0004: review and retirement of template versions
    Column("change_note", Text, nullable=False, default="", server_default=""),
    Column("review_by", String(10), nullable=True),
    Column("retired_by", Text, nullable=True),
    Column("retired_at", String(40), nullable=True),
    UniqueConstraint("name", "version", name="uq_clinic_templates_name_version"),
    Index("ix_clinic_templates_status", "name", "status"),
)

#: Table names per revision (the open check recognises a store by them).
TABLES_0001 = ("people", "screenings", "program_versions", "audit_log")
TABLES_0002 = TABLES_0001 + ("session_logs", "clinic_templates")
TABLES_0003 = TABLES_0002
TABLES_0004 = TABLES_0003

# -- revision 0005: summaries of worn-sensor recordings (never the raw signal) ---------

#: One row a recording counted for a person: the summary printed by `prescribe sensor`.
sensor_summaries = Table(
    "sensor_summaries", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("patient_id", String(64), ForeignKey("people.patient_id"), nullable=False),
    Column("created", String(40), nullable=False),
    Column("clinician", Text, nullable=False, default=""),
    Column("file_name", Text, nullable=False),
    Column("recorded_from", String(40), nullable=True),
    Column("recorded_to", String(40), nullable=True),
    Column("summary_json", Text, nullable=False),
    Index("ix_sensor_summaries_patient", "patient_id", "created"),
)

TABLES_0005 = TABLES_0004 + ("sensor_summaries",)

# -- revision 0008: retests (docs/reassess.md) ---------------------------------------------

#: One row a retest: what was measured, the record's measures it replaced (so the intake
#: values stay the baseline), the comparison and decision, and the next block's version.
retests = Table(
    "retests", metadata,
    Column("id", Integer, primary_key=True, autoincrement=True),
    Column("patient_id", String(64), ForeignKey("people.patient_id"), nullable=False),
    Column("retest_date", String(10), nullable=False),
    Column("created", String(40), nullable=False),
    Column("clinician", Text, nullable=False, default=""),
    Column("retest_json", Text, nullable=False),
    # the record's measures before this retest was applied (the first row's: the intake values)
    Column("previous_json", Text, nullable=False),
    Column("result_json", Text, nullable=False),
    Column("decision", String(16), nullable=False),
    # the template of the program the person was on, and {measure: verdict}: the caseload's outcomes
    Column("template", String(120), nullable=True),
    Column("verdicts_json", Text, nullable=False, default="{}"),
    Column("program_version", Integer, nullable=True),
    Index("ix_retests_patient", "patient_id", "retest_date", "id"),
)

TABLES_0009 = TABLES_0005 + ("retests",)

# -- revision 0009: clinicians' passphrases (docs/app.md, "Who approves, clears and resumes") ------

#: One row a clinician who may sign in to the single-user app: a salted scrypt hash of the
#: passphrase a clinic lead set (never the passphrase), and the count of wrong attempts.
clinician_passphrases = Table(
    "clinician_passphrases", metadata,
    Column("clinician", String(200), primary_key=True),
    Column("scheme", String(80), nullable=False),
    Column("salt_hex", String(128), nullable=False),
    Column("hash_hex", String(256), nullable=False),
    Column("set_by", Text, nullable=False),
    Column("set_at", String(40), nullable=False),
    Column("failed_attempts", Integer, nullable=False, server_default=text("0")),
    Column("locked_until", String(40), nullable=True),
)

TABLES_REV0009 = TABLES_0009 + ("clinician_passphrases",)
