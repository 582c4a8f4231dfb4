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
    p.add_argument("--sensor", metavar="SUMMARY.json", help="a worn-sensor summary printed by `prescribe sensor "
                                                           "--patient`: the clinician page shows planned against delivered")
    p.set_defaults(func=run)


def run(args) -> int:
    # Imported here so `prescribe --help` stays quick (the renderer pulls in Jinja2).
    from ..handout.render import check_options, check_out_path, write_handout

    check_out_path(args.out)  # refuse a bad --out before reading the plan
    check_options(args.audience, args.paper, ("--audience", "--paper"))
    plan = parse_plan(read_json_file(args.plan, "PLAN.json"), source=args.plan)
    sensor = _sensor_summary(args.sensor, plan.patient_id) if args.sensor else None
    out = write_handout(plan, args.out, audience=args.audience, paper=args.paper, sensor_summary=sensor)
    emit_json({
        "out": str(out), "format": out.suffix.lower().lstrip("."), "bytes": out.stat().st_size,
        "patient_id": plan.patient_id, "audience": args.audience, "paper": args.paper,
        "weeks": len(plan.weeks), "cautions": list(STANDARD_CAUTIONS),
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
