"""``prescribe resume PATIENT_ID --clinician NAME --reason TEXT``: lift a pause.

A paused program (stop_and_refer advice applied) stays paused until a clinician records
the resumption: who (the login under JupyterHub), when and why.  The next program
version is stored with the pause lifted, based on the paused one, and the audit log
keeps the entry (docs/sessions.md).  JSON on stdout: patient_id, program_version,
resumed_by, resumed_at, reason, cautions.  Bad input (exit 2) stores nothing: an unknown
person, no program, a program that is not paused, a blank or too long reason, no
clinician outside the hub.
"""

from __future__ import annotations

from ..errors import NotFoundError
from ..sessions.pause import REASON_MAX_CHARS, checked_reason
from ..clinic.advice import resume_person
from .output import emit_json
from .session_cmd import DB_HELP, _open, _unknown, clinician_of


def register(sub) -> None:
    p = sub.add_parser("resume", help="record that a clinician lifts the pause of a person's program",
                       description="A paused program stays paused until a clinician records the resumption "
                                   "with a reason. This stores the next program version with the pause lifted "
                                   "(based on the paused one) and records who, when and why in the audit log. "
                                   "Decision support only.")
    p.add_argument("patient_id", metavar="PATIENT_ID")
    p.add_argument("--clinician", default=None, help="who records the resumption (required outside JupyterHub; "
                   "under JupyterHub the login is used and a different name is refused)")
    p.add_argument("--reason", default=None, metavar="TEXT",
                   help=f"why the program may go on (required, at most {REASON_MAX_CHARS} characters)")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_resume)


def run_resume(args) -> int:
    reason = checked_reason(args.reason, "--reason")  # bad input stops here, before the store is opened
    clinician = clinician_of(args, required=True)
    with _open(args, args.patient_id) as store:
        try:
            out = resume_person(store, args.patient_id, clinician=clinician, reason=reason)
        except NotFoundError:
            raise _unknown(args.patient_id, store) from None
    emit_json(out)
    return 0
