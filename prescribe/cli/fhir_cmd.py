"""``prescribe fhir import|export``: exchange with the clinic's record system in HL7 FHIR R4 (docs/fhir.md)."""

from __future__ import annotations

import json
import sys
from datetime import date
from pathlib import Path

from ..errors import InputError
from .output import emit_json


def register(sub) -> None:
    p = sub.add_parser(
        "fhir", help="bring a person in from the record system (FHIR R4) or send a program to it",
        description="Exchange with the clinic's record system in HL7 FHIR R4 (4.0.1). `import` reads a Bundle of "
                    "one person's resources into a patient record, or a bulk-data NDJSON export (a file or a folder "
                    "of per-type files) into a caseload CSV; `export` writes the person's current program as a "
                    "Bundle. Nothing here opens a network connection: the clinic's integration engine carries the "
                    "files. Decision support only: a licensed clinician checks what was brought in.")
    actions = p.add_subparsers(dest="fhir_action", metavar="import|export")
    actions.required = True
    imp = actions.add_parser(
        "import", help="a Bundle -> a patient record; bulk NDJSON -> a caseload CSV",
        description="Read FHIR R4 resources: a Bundle (JSON) becomes a version-2 patient record (printed, or "
                    "written to --out PATIENT.json) with where each field came from; an .ndjson file or a folder of "
                    "a bulk export's .ndjson files becomes the caseload CSV (--out CASELOAD.csv, required). Codes "
                    "not in the mapping files (prescribe/data/fhir) are listed as not used, never guessed.")
    imp.add_argument("file", metavar="FILE", help="a Bundle (.json), an .ndjson file, or a folder of .ndjson files")
    imp.add_argument("--out", metavar="PATIENT.json|CASELOAD.csv", help="where to write the record or the caseload")
    imp.add_argument("--as-of", metavar="YYYY-MM-DD", help="the day ages and months are counted to (default today)")
    imp.add_argument("--with-display-name", action="store_true",
                     help="also read Patient.name as the name the handout uses (left out by default)")
    imp.set_defaults(func=run_import)
    exp = actions.add_parser(
        "export", help="the person's current program as a FHIR R4 Bundle",
        description="Write the stored person's current program as a FHIR R4 Bundle (type collection): Patient, "
                    "the record's facts, a CarePlan (draft until the clearance is recorded), its Goals, the "
                    "handout as a DocumentReference (--with-handout) and a Provenance naming the clinician. "
                    "The Bundle is validated with fhirclient's FHIR R4 models before it is written.")
    exp.add_argument("patient_id", metavar="PATIENT_ID")
    exp.add_argument("--out", metavar="BUNDLE.json", help="where to write the Bundle (default: stdout)")
    exp.add_argument("--with-handout", action="store_true", help="include the handout PDF as a DocumentReference")
    exp.add_argument("--with-display-name", action="store_true",
                     help="include the name the handout uses as Patient.name (left out by default)")
    exp.add_argument("--version", type=int, default=None, help="the program version (default: the latest)")
    exp.add_argument("--clinician", default=None, help="who sends it (under JupyterHub: your login)")
    exp.add_argument("--db", default=None, help="the store (a file path or a database URL; default $PRESCRIBE_DB)")
    exp.set_defaults(func=run_export)


def _as_of(text: str | None) -> date | None:
    if text is None:
        return None
    from ..plan_schema import parse_day
    return parse_day(text, "--as-of")


def run_import(args) -> int:
    from ..fhir.bulk import bulk_to_caseload
    from ..fhir.reader import read_bundle
    from ..fileio import BUNDLE_MAX_BYTES, read_json_file

    path = Path(args.file)
    as_of = _as_of(args.as_of)
    if path.is_dir() or path.suffix.lower() == ".ndjson":
        if not args.out or not args.out.lower().endswith(".csv"):
            raise InputError.single("--out", args.out, "a CASELOAD.csv path: a bulk export becomes a caseload CSV")
        summary = bulk_to_caseload(path, args.out, as_of=as_of)
        for line in summary.broken_lines:
            print(f"prescribe fhir import: {line['file']} line {line['line']} not read: {line['problem']}",
                  file=sys.stderr)
        for person in summary.people_left_out:
            print(f"prescribe fhir import: {person['person']} left out: {person['why']}", file=sys.stderr)
        emit_json(summary.as_dict())
        if summary.broken_count or summary.left_out_count:
            # Bad input: the caseload holds everyone else, and the exit status says something was not read.
            print(f"prescribe fhir import: {summary.broken_count} line(s) not read and {summary.left_out_count} "
                  f"person(s) left out; {summary.written} written to {args.out}", file=sys.stderr)
            return 2
        return 0
    if args.out and not args.out.lower().endswith(".json"):
        raise InputError.single("--out", args.out, "a PATIENT.json path for one Bundle (a caseload CSV comes from "
                                "an .ndjson bulk export)")
    data = read_json_file(path, "FILE", max_bytes=BUNDLE_MAX_BYTES)
    result = read_bundle(data, as_of=as_of, with_name=args.with_display_name, source=str(path))
    record = result.record.model_dump(mode="json")
    # Where each field came from, the codes not used and the notes: on stderr as JSON.
    print(json.dumps({"fhir_import": result.report()}, ensure_ascii=False), file=sys.stderr)
    if args.out:
        from ..fileio import write_atomically
        write_atomically(args.out, json.dumps(record, indent=2, ensure_ascii=False) + "\n", "--out")
        emit_json({"out": args.out, **result.report()})
    else:
        emit_json(record)
    return 0


def run_export(args) -> int:
    from ..errors import NotFoundError
    from ..fhir.writer import program_bundle
    from ..settings import current_clinician
    from ..store import open_store

    clinician = current_clinician(args.clinician)
    with open_store(args.db, create=False) as store:
        record = store.get_patient(args.patient_id)
        try:
            plan = store.get_program(args.patient_id, args.version)
        except NotFoundError:
            raise InputError.single("PATIENT_ID", args.patient_id, "a person with a saved program "
                                    "(save a program first)") from None
        version = args.version or store.latest_program_version(args.patient_id)
    bundle = program_bundle(plan, record, clinician, version=version, with_handout=args.with_handout,
                            with_name=args.with_display_name)
    text = json.dumps(bundle, indent=2, ensure_ascii=False) + "\n"
    if args.out:
        from ..fileio import write_atomically
        write_atomically(args.out, text, "--out")
        emit_json({"out": args.out, "patient_id": args.patient_id, "version": version,
                   "resources": len(bundle["entry"]), "careplan_status": next(
                       e["resource"]["status"] for e in bundle["entry"] if e["resource"]["resourceType"] == "CarePlan"),
                   "validated_with": "fhirclient 4.4.0 (FHIR R4 4.0.1 models)"})
    else:
        sys.stdout.write(text)
    return 0
