"""``prescribe caseload export | whatif | outcomes``: the stored caseload as a batch CSV, what a draft
rule library or template would change for the people in the store, and each measure's change across the
caseload."""

from __future__ import annotations

import sys

from ..errors import InputError
from .output import emit_json
from .store_cmd import DB_HELP


def register(sub) -> None:
    p = sub.add_parser("caseload", help="the stored caseload: export as a batch CSV, or see what a draft "
                                        "rule library or template would change",
                       description="The people in the store, as the batch CSV `prescribe screen --batch` reads "
                                   "(export), or re-screened and re-planned under a draft rule library or "
                                   "template, listing only the people who would change (whatif). See "
                                   "docs/templates.md.")
    c = p.add_subparsers(dest="caseload_command", metavar="CASELOAD_COMMAND")
    c.required = True
    q = c.add_parser("export", help="the store's people as a batch CSV")
    q.add_argument("--out", required=True, metavar="FILE.csv", help="where to write the CSV")
    q.add_argument("--with-display-name", action="store_true",
                   help="also write the name each person's handout uses (left out unless asked)")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_export)

    q = c.add_parser("whatif", help="who in the store would change under a draft rule library or template, "
                                    "and how")
    q.add_argument("--rules", metavar="DIR", help="a folder of draft rule files (default: the shipped library)")
    q.add_argument("--template", metavar="NAME@VERSION",
                   help="re-plan everyone with this template (any status, a draft included)")
    q.add_argument("--out", metavar="FILE.csv", help="also write the changes as CSV: patient_id, field, before, after")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_whatif)

    q = c.add_parser("outcomes", help="each measure's change across the caseload: how many improved, did not "
                                      "change or worsened, by template (docs/reassess.md)")
    q.add_argument("--out", metavar="FILE.csv", help="also write the counts as CSV")
    q.add_argument("--db", help=DB_HELP)
    q.set_defaults(func=run_outcomes)


def _open(args):
    from ..store import open_store
    return open_store(args.db, create=False)


def run_export(args) -> int:
    from ..clinic.caseload import write_caseload_csv

    with _open(args) as store:
        people = store.caseload()
        n = write_caseload_csv((d for _, d in people), args.out, with_display_name=args.with_display_name)
        where = store.where
    emit_json({"out": args.out, "people": n, "db": where, "display_name": bool(args.with_display_name),
               "cautions": ["The file holds pseudonymous clinical records: keep it as you keep the store."]})
    return 0


def run_whatif(args) -> int:
    from ..clinic.caseload import text_progress, whatif, write_whatif_csv

    rules = None
    if args.rules:
        from .screen_cmd import _rules
        rules = _rules(args)                       # a bad folder is exit 2, before the store is opened
    if args.out and not args.out.lower().endswith(".csv"):
        raise InputError.single("--out", args.out, "a file name ending in .csv")
    progress = text_progress(sys.stderr) if sys.stderr.isatty() else None
    with _open(args) as store:
        tv = None
        if args.template:
            from ..clinic.template_library import resolve
            tv = resolve(args.template, store, purpose="read", field="--template")
        result = whatif(store, rules=rules, rules_label=args.rules, template=tv,
                        template_label=tv.ref if tv else None, progress=progress)
    out = result.as_dict()
    if args.out:
        out["out"] = args.out
        out["rows_written"] = write_whatif_csv(result, args.out)
    emit_json(out)
    return 0


def run_outcomes(args) -> int:
    from ..clinic.caseload import outcomes, write_outcomes_csv

    if args.out and not args.out.lower().endswith(".csv"):
        raise InputError.single("--out", args.out, "a file name ending in .csv")
    with _open(args) as store:
        result = outcomes(store)
    if args.out:
        result["out"] = args.out
        result["rows_written"] = write_outcomes_csv(result, args.out)
    emit_json(result)
    return 0
