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
    p.set_defaults(func=run)


def run(args) -> int:
    # Imported here so `prescribe --help` stays quick (the renderer pulls in Jinja2).
    from ..handout.render import check_options, check_out_path, write_handout

    check_out_path(args.out)  # refuse a bad --out before reading the plan
    check_options(args.audience, args.paper, ("--audience", "--paper"))
    plan = parse_plan(read_json_file(args.plan, "PLAN.json"), source=args.plan)
    out = write_handout(plan, args.out, audience=args.audience, paper=args.paper)
    emit_json({
        "out": str(out), "format": out.suffix.lower().lstrip("."), "bytes": out.stat().st_size,
        "patient_id": plan.patient_id, "audience": args.audience, "paper": args.paper,
        "weeks": len(plan.weeks), "cautions": list(STANDARD_CAUTIONS),
    })
    return 0
