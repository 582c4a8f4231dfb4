"""``prescribe reassess`` and ``prescribe progress``: the months of a program.

``reassess RETEST.json`` stores a retest, compares each measure with its baseline and the
previous value against its minimal detectable change, re-screens the record with the
retest's values and decides: continue (the next block is stored as a new program version
that continues from the current levels), hold or refer (saying why).  ``progress
PATIENT_ID --out LETTER.pdf|.html`` writes the progress letter for the referring clinician.
Bad input (exit 2) stores nothing.  See docs/reassess.md.
"""

from __future__ import annotations

from datetime import date

from ..errors import NotFoundError
from ..records import read_json_file
from .output import emit_json
from .session_cmd import DB_HELP, _open, _unknown, clinician_of


def register(sub) -> None:
    p = sub.add_parser("reassess", help="store a retest; compare each measure; propose the next block",
                       description="Store a retest (docs/reassess.md), compare each measure with its baseline and "
                                   "previous value against its published minimal detectable change, re-screen the "
                                   "record with the retest's values and decide: continue (the next block, a new "
                                   "program version continuing from the current levels, through the safety "
                                   "check), hold or refer, saying why. Decision support only.")
    p.add_argument("retest_file", metavar="RETEST.json")
    p.add_argument("--clinician", default=None, help="who did the retest (recorded in the audit log)")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_reassess)

    q = sub.add_parser("progress", help="the progress letter for the referring clinician (PDF or HTML)",
                       description="One or two pages: measures over time with verdicts, sessions done against "
                                   "planned, delivered impacts from a worn sensor where stored, the next block and "
                                   "the cautions. The clinic comes from the clinic settings.")
    q.add_argument("patient_id", metavar="PATIENT_ID")
    q.add_argument("--out", required=True, metavar="LETTER.pdf|.html", help="where to write the letter")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_progress)


def run_reassess(args) -> int:
    from ..clinic.reassess import reassess_person
    from ..outcomes.retest import parse_retest
    retest = parse_retest(read_json_file(args.retest_file, "retest file"), source=args.retest_file)
    clinician = clinician_of(args)
    with _open(args, retest.patient_id) as store:
        try:
            out = reassess_person(store, retest, clinician=clinician, today=date.today(), source=args.retest_file)
        except NotFoundError:
            raise _unknown(retest.patient_id, store) from None
    emit_json(out)
    return 0


def run_progress(args) -> int:
    from ..handout.letter import LETTER_SUFFIXES, write_letter
    from ..errors import InputError
    if not args.out.lower().endswith(LETTER_SUFFIXES):
        raise InputError.single("--out", args.out, "a file name ending in .pdf or .html")
    with _open(args, args.patient_id) as store:
        try:
            out = write_letter(store, args.patient_id, args.out)
        except NotFoundError:
            raise _unknown(args.patient_id, store) from None
    out["patient_id"] = args.patient_id
    emit_json(out)
    return 0
