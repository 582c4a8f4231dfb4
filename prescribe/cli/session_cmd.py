"""``prescribe session add | list`` and ``prescribe adjust``: the living program.

``session add`` records one session (JSON on stdout: session_id, week, ...);
``session list`` prints the person's sessions oldest first; ``adjust`` prints the
next step (decision, reasons, changes, cautions) and, with ``--apply``, stores the
adjusted program as a new version based on the current one.  Input is checked
before the store is written: bad input (exit 2) stores nothing.
"""

from __future__ import annotations

import json
from datetime import date
from pathlib import Path

from ..errors import InputError, NotFoundError
from ..fileio import write_atomically
from ..records import read_json_file
from ..clinic.advice import adjust_person
from .output import emit_json, emit_table

DB_HELP = ("the store: a file path or a database URL (default: $PRESCRIBE_DB, else "
           "~/.local/share/prescribe/prescribe.db)")
#: Recorded when a program is saved from the command line without a clinician's name.
UNNAMED = "unnamed clinician (command line)"


def register(sub) -> None:
    p = sub.add_parser("session", help="record a session a person did, or list them")
    s_sub = p.add_subparsers(dest="session_command", metavar="SESSION_COMMAND")
    s_sub.required = True
    a = s_sub.add_parser("add", help="record one session from a session record (JSON); see docs/sessions.md")
    a.add_argument("session_file", metavar="SESSION.json")
    a.add_argument("--clinician", default=None, help="who logged it (for the audit log)")
    a.add_argument("--db", help=DB_HELP)
    a.set_defaults(func=run_add)
    ls = s_sub.add_parser("list", help="a person's sessions, oldest first")
    ls.add_argument("patient_id", metavar="PATIENT_ID")
    ls.add_argument("--table", action="store_true", help="a plain table instead of JSON")
    ls.add_argument("--db", help=DB_HELP)
    ls.set_defaults(func=run_list)

    p = sub.add_parser("adjust", help="the next step for a person, from the program and the logged sessions",
                       description="Evaluate the session rules (docs/sessions.md) and print the decision "
                                   "(progress, hold, step_back or stop_and_refer) with its reasons and what the "
                                   "adjusted program changes. --apply stores the adjusted program as a new "
                                   "version (the safety check applies). Decision support only.")
    p.add_argument("patient_id", metavar="PATIENT_ID")
    p.add_argument("--apply", action="store_true", help="store the adjusted program as the next version")
    p.add_argument("--clinician", default=None, help="who applies it (required with --apply)")
    p.add_argument("--date", default=None, metavar="YYYY-MM-DD", help="decide as of this day (default: today)")
    p.add_argument("--out", default=None, metavar="PLAN.json", help="also write the adjusted program to this file")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_adjust)


# -- shared helpers -----------------------------------------------------------------------

def clinician_of(args, required: bool = False) -> str:
    """The clinician: the hub login under JupyterHub (a different --clinician is refused),
    else --clinician; else, where a name is not required, a marker saying none was given."""
    from ..settings import current_clinician, hub_login
    explicit = (getattr(args, "clinician", None) or "").strip() or None
    if required and explicit is None and hub_login() is None:
        raise InputError.single("--clinician", explicit, "the name or initials of the clinician who applies "
                                                         "the change (it is recorded in the audit log)")
    return current_clinician(explicit) or UNNAMED


def checked_plan_file(path: str, record, screening) -> dict:
    """Read a plan file for ``save --plan``: the right person, and the safety check passed."""
    from ..plan_schema import parse_plan
    from ..sessions.gate import assert_program_safe
    data = read_json_file(path, "plan file")
    plan = parse_plan(data, source=path)
    if plan.patient_id != record.patient_id:
        raise InputError.single("plan.patient_id", plan.patient_id,
                                f"the patient record's patient_id {record.patient_id!r}", source=path)
    assert_program_safe(plan, screening, door=f"prescribe save --plan {path}", record=record)
    return data


def _open(args, patient_id: str):
    """Open an existing store; no store at all means the person is unknown (exit 2)."""
    from ..settings import db_url
    from ..store import open_store
    url = db_url(args.db)
    if url.startswith("sqlite:///") and not Path(url[len("sqlite:///"):]).exists():
        raise InputError.single("patient_id", patient_id,
                                f"a person in the store, but there is no store at {url[len('sqlite:///'):]} "
                                "(save the person with `prescribe save` first)")
    return open_store(url, create=False)


def _unknown(patient_id: str, store) -> InputError:
    return InputError.single("patient_id", patient_id, f"the id of a person in the store at {store.where}")


# -- commands -------------------------------------------------------------------------------

def run_add(args) -> int:
    from ..cautions import with_standard
    from ..sessions.records import parse_session
    session = parse_session(read_json_file(args.session_file, "session file"), source=args.session_file)
    clinician = clinician_of(args)
    with _open(args, session.patient_id) as store:
        try:
            out = store.add_session(session, clinician)
        except NotFoundError:
            raise _unknown(session.patient_id, store) from None
    flags = sorted(set(session.symptoms) & {"chest_pain", "dizziness", "unusual_breathlessness", "palpitations",
                                            "new_back_pain"})
    if session.fell_since_last:
        flags.append("fell_since_last")
    out.update(session_date=session.session_date, red_flags=flags,
               next_step="run `prescribe adjust " + session.patient_id + "` for the next step",
               cautions=with_standard())
    emit_json(out)
    return 0


LIST_COLUMNS = ["session_id", "session_date", "week", "program_version", "pain_during", "pain_next_morning",
                "session_rpe", "symptoms", "fell_since_last", "clinician"]


def run_list(args) -> int:
    with _open(args, args.patient_id) as store:
        try:
            rows = store.sessions(args.patient_id)
        except NotFoundError:
            raise _unknown(args.patient_id, store) from None
    if args.table:
        emit_table(rows, LIST_COLUMNS)
    else:
        emit_json(rows)
    return 0


def run_adjust(args) -> int:
    from ..plan_schema import parse_day
    today = date.today() if args.date is None else parse_day(args.date, "--date")
    if today > date.today():
        raise InputError.single("--date", args.date, f"a day not in the future (today is {date.today()})")
    clinician = clinician_of(args, required=True) if args.apply else None
    with _open(args, args.patient_id) as store:
        try:
            result = adjust_person(store, args.patient_id, today=today, apply=args.apply, clinician=clinician)
        except NotFoundError:
            raise _unknown(args.patient_id, store) from None
    if args.out:
        program = result.pop("_program").model_dump(mode="json")
        write_atomically(Path(args.out), json.dumps(program, indent=2, ensure_ascii=False) + "\n", "--out")
        result["out"] = args.out
    else:
        result.pop("_program")
    emit_json(result)
    return 0
