"""``prescribe handout PLAN.json --out FILE.pdf|FILE.html``: the printable handout of a plan."""

from __future__ import annotations

from ..cautions import STANDARD_CAUTIONS
from ..fileio import read_json_file
from ..languages import LANGUAGES, SOURCE_LANGUAGE
from ..plan_schema import parse_plan
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
    p.add_argument("--audience", default=None, metavar="person|clinician|both",
                   help="which pages to print (default both; person with --large-print)")
    p.add_argument("--large-print", action="store_true",
                   help="the large-print edition of the person's pages (body text 15 pt, larger headings); "
                        "prints the person's pages only unless --audience says otherwise")
    p.add_argument("--language", default=SOURCE_LANGUAGE, metavar="|".join(LANGUAGES),
                   help="the language of the person's pages (default en); the clinician's pages stay in English "
                        "and say whether a qualified translator has reviewed that language's text")
    p.add_argument("--sensor", metavar="SUMMARY.json", help="a worn-sensor summary printed by `prescribe sensor "
                                                           "--patient`: the clinician page shows planned against delivered")
    p.add_argument("--db", default=None,
                   help="also check the plan against the person's record in this store (a file path or a "
                        "database URL; default: $PRESCRIBE_DB when it is set)")
    p.set_defaults(func=run)


def run(args) -> int:
    # Imported here so `prescribe --help` stays quick (the renderer pulls in Jinja2).
    from ..handout.render import check_options, check_out_path, write_handout

    check_out_path(args.out)  # refuse a bad --out before reading the plan
    # The large-print edition is the person's: without --audience it holds their pages only.
    audience = args.audience or ("person" if args.large_print else "both")
    check_options(audience, args.paper, ("--audience", "--paper", "--language"), args.language)
    plan = parse_plan(read_json_file(args.plan, "PLAN.json"), source=args.plan)
    # A plan file can be edited by hand: the one safety check runs before anything is
    # written (exit 2 and no file on a refusal; docs/safety.md).
    from ..safety import assert_safe
    assert_safe(plan, door=str(args.plan), record=_stored_record(args.db, plan.patient_id),
                require_record=True)
    sensor = _sensor_summary(args.sensor, plan.patient_id) if args.sensor else None
    out = write_handout(plan, args.out, audience=audience, paper=args.paper, large_print=args.large_print,
                        sensor_summary=sensor, language=args.language)
    emit_json({
        "out": str(out), "format": out.suffix.lower().lstrip("."), "bytes": out.stat().st_size,
        "patient_id": plan.patient_id, "audience": audience, "paper": args.paper,
        "weeks": len(plan.weeks), "large_print": args.large_print, "language": args.language,
        "cautions": list(STANDARD_CAUTIONS),
    })
    return 0


def _sensor_summary(path: str, patient_id: str) -> dict:
    from ..errors import InputError
    data = read_json_file(path, "--sensor")
    if not isinstance(data, dict) or not isinstance(data.get("days"), list):
        raise InputError.single("--sensor", path, "a summary printed by `prescribe sensor FILE --patient ID`")
    if data.get("patient_id") not in (None, patient_id):
        raise InputError.single("--sensor", data.get("patient_id"), f"a recording of the plan's person {patient_id!r}")
    return data


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
