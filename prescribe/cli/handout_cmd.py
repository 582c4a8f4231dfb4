"""``prescribe handout PLAN.json --out FILE.pdf|FILE.html``: the printable handout of a plan."""

from __future__ import annotations

from ..cautions import STANDARD_CAUTIONS
from ..plan_schema import parse_plan
from ..fileio import read_json_file
from .output import emit_json


def register(sub) -> None:
    p = sub.add_parser(
        "handout", help="write the printable handout of a plan (HTML or PDF)",
        description="Write the handout of a plan made by `prescribe plan`: pages for the person "
                    "(goals, week-by-week table, how to do each exercise, safety) and a clinician page "
                    "(screening flags, dose figures, evidence, versions). The format follows the suffix "
                    "of --out. Decision support only: a licensed clinician reviews every handout.")
    p.add_argument("plan", metavar="PLAN.json", help="a plan as printed by `prescribe plan`")
    p.add_argument("--out", required=True, metavar="FILE.pdf|FILE.html", help="where to write the handout")
    p.add_argument("--paper", default="a4", metavar="a4|letter", help="paper size (default a4)")
    p.add_argument("--audience", default="both", metavar="person|clinician|both",
                   help="which pages to print (default both)")
    p.add_argument("--db", default=None,
                   help="also check the plan against the person's record in this store (a file path or a "
                        "database URL; default: $PRESCRIBE_DB when it is set)")
    p.set_defaults(func=run)


def run(args) -> int:
    # Imported here so `prescribe --help` stays quick (the renderer pulls in Jinja2).
    from ..handout.render import check_options, check_out_path, write_handout

    check_out_path(args.out)  # refuse a bad --out before reading the plan
    check_options(args.audience, args.paper, ("--audience", "--paper"))
    plan = parse_plan(read_json_file(args.plan, "PLAN.json"), source=args.plan)
    # A plan file can be edited by hand: the one safety check runs before anything is
    # written (exit 2 and no file on a refusal; docs/safety.md).
    from ..safety import assert_safe
    assert_safe(plan, door=str(args.plan), record=_stored_record(args.db, plan.patient_id),
                require_record=True)
    out = write_handout(plan, args.out, audience=args.audience, paper=args.paper)
    emit_json({
        "out": str(out), "format": out.suffix.lower().lstrip("."), "bytes": out.stat().st_size,
        "patient_id": plan.patient_id, "audience": args.audience, "paper": args.paper,
        "weeks": len(plan.weeks), "cautions": list(STANDARD_CAUTIONS),
    })
    return 0


def _stored_record(db: str | None, patient_id: str):
    """The person's record from the store named by --db or $PRESCRIBE_DB, or None.

    Only an existing store is read (none is created); a store without the person gives None.
    """
    import os

    if db is None and not os.environ.get("PRESCRIBE_DB"):
        return None
    from ..errors import NotFoundError, StoreError
    from ..store import open_store
    try:
        store = open_store(db, create=False)
    except StoreError:
        if db is not None:
            raise  # the store asked for by name must be there
        return None  # $PRESCRIBE_DB names no store yet: nothing stored to check against
    with store:
        try:
            return store.get_patient(patient_id)
        except NotFoundError:
            return None
