"""``prescribe db init | db backup``, ``prescribe save``, ``prescribe export`` and ``prescribe import``.

Input is checked completely before the store is opened, so bad input (exit 2)
writes nothing, not even a new empty store.  A person who is not in the store is
bad input too (exit 2, naming the id); a conflict with what is stored exits 1
with a message naming the versions.
"""

from __future__ import annotations

import json
from pathlib import Path

from ..errors import InputError, NotFoundError
from ..fileio import BUNDLE_MAX_BYTES, read_json_file, write_atomically
from ..records import load_record
from .output import emit_json

DB_HELP = ("the store: a file path or a database URL (default: $PRESCRIBE_DB, else "
           "~/.local/share/prescribe/prescribe.db)")


def register(sub) -> None:
    db = sub.add_parser("db", help="create, migrate or back up the record store")
    db_sub = db.add_subparsers(dest="db_command", metavar="DB_COMMAND")
    db_sub.required = True
    p = db_sub.add_parser("init", help="create the store, or migrate an older one to this version")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_init)
    p = db_sub.add_parser("backup", help="a consistent copy of the store, safe while the app is in use")
    p.add_argument("file", metavar="FILE", help="where to write the copy (must not exist unless --force)")
    p.add_argument("--force", action="store_true", help="replace FILE if it exists")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_backup)

    p = sub.add_parser("save", help="store a person's record and its screening (and, with --plan, a program)")
    p.add_argument("patient_file", metavar="PATIENT.json", help="the patient record (JSON)")
    p.add_argument("--plan", default=None, metavar="PLAN.json",
                   help="also store this program as the person's next program version (the safety check applies)")
    p.add_argument("--clinician", default="", help="who is saving, for the audit log (free text; under "
                   "JupyterHub the login is used and a different name is refused)")
    p.add_argument("--based-on-version", type=_version_arg, default=None, metavar="N",
                   help="the record_version you started from (0 for a new person): if someone changed the "
                        "record since, nothing is saved and the command exits 1 with a conflict")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_save)

    p = sub.add_parser("export", help="a person with all screenings and program versions, as one JSON bundle")
    p.add_argument("patient_id", metavar="PATIENT_ID")
    p.add_argument("--out", help="write the bundle to this file instead of stdout")
    p.add_argument("--with-display-name", action="store_true",
                   help="keep the name the person's handout uses (left out of every copy of the record by default)")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_export)

    p = sub.add_parser("import", help="add a person from a bundle written by `prescribe export`")
    p.add_argument("bundle_file", metavar="BUNDLE.json")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_import)


def _version_arg(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        value = -1
    if value < 0:
        import argparse
        raise argparse.ArgumentTypeError(f"must be a record version number (0 for a new person), not {text!r}")
    return value


def _open(args, create: bool = True):
    from ..store import open_store  # SQLAlchemy loads only for the store's commands
    return open_store(args.db, create=create)


def run_init(args) -> int:
    from ..store import HEAD_REVISION
    with _open(args) as store:
        people = store.list_patients()
        schemas = {str(v): sum(1 for p in people if p["record_schema"] == v) for v in (1, 2)}
        emit_json({"db": store.where, "revision": store.revision(), "head_revision": HEAD_REVISION,
                   "people": len(people), "people_by_record_schema": schemas})
    return 0


def run_backup(args) -> int:
    with _open(args, create=False) as store:
        emit_json(store.backup(args.file, force=args.force))
    return 0


def run_save(args) -> int:
    from ..settings import current_clinician
    clinician = current_clinician(args.clinician)
    record = load_record(args.patient_file)  # bad input stops here, before the store is touched
    from ..screening import screen
    screening = screen(record)
    plan = None
    if getattr(args, "plan", None):
        from .session_cmd import checked_plan_file
        plan = checked_plan_file(args.plan, record, screening)  # refused: exit 2, nothing stored
    with _open(args) as store:
        if plan is None:
            saved = store.save_patient(record, screening, clinician=clinician,
                                       based_on_version=args.based_on_version)
        else:
            from .session_cmd import clinician_of  # a program needs a name: a marker when none is given
            saved = store.save_patient(record, screening, clinician=clinician_of(args), plan=plan,
                                       plan_note="saved with prescribe save --plan",
                                       based_on_version=args.based_on_version)
    out = {**saved, "db": store.where}
    out["screening"] = {k: getattr(screening, k) for k in (
        "bone_density_category", "falls_risk", "max_impact_level", "avoid", "refer", "ruleset_version")}
    out["screening"]["flags"] = [f.rule for f in screening.flags]
    out["cautions"] = list(screening.cautions)
    emit_json(out)
    return 0


def run_export(args) -> int:
    with _open(args, create=False) as store:
        try:
            bundle = store.export_patient(args.patient_id, with_display_name=args.with_display_name)
        except NotFoundError:
            raise InputError.single("PATIENT_ID", args.patient_id,
                                    f"the id of a person in the store at {store.where}") from None
    if args.out:
        write_atomically(Path(args.out), json.dumps(bundle, indent=2, ensure_ascii=False) + "\n", "--out")
        emit_json({"patient_id": args.patient_id, "out": args.out, "screenings": len(bundle["screenings"]),
                   "program_versions": len(bundle["programs"]), "with_display_name": args.with_display_name})
    else:
        emit_json(bundle)
    return 0


def run_import(args) -> int:
    from ..store import parse_bundle
    data = read_json_file(args.bundle_file, "bundle file", max_bytes=BUNDLE_MAX_BYTES)
    bundle = parse_bundle(data, source=args.bundle_file)  # bad input stops here, before the store is touched
    from ..store.api import check_bundle_programs
    check_bundle_programs(bundle)  # an unsafe program stops here too (exit 2, docs/safety.md)
    with _open(args) as store:
        result = store.import_bundle(bundle)
        result["db"] = store.where
    emit_json(result)
    return 0
