"""``prescribe why PLAN.json [--week N]``: why each planned exercise is there, with its sources."""

from __future__ import annotations

import sys

from ..fileio import read_json_file
from ..plan_schema import parse_plan


def register(sub) -> None:
    p = sub.add_parser(
        "why", help="say why each planned exercise is there, and why the limits are what they are",
        description="Print the plan's limits with the rule behind each, and for each exercise why it was "
                    "chosen, why this dose and why this week changes or holds, each with its source. The plan "
                    "passes the one safety check first (its limits are worked out again from its record). "
                    "Decision support only: a licensed clinician reviews every program.")
    p.add_argument("plan", metavar="PLAN.json", help="a plan as printed by `prescribe plan`")
    p.add_argument("--week", type=int, default=None, metavar="N",
                   help="only week N (default: each exercise at each dose once, with its weeks)")
    p.add_argument("--json", action="store_true", help="print the rows as JSON instead of text")
    p.set_defaults(func=run)


def run(args) -> int:
    from ..errors import InputError
    from ..planning.why import limit_rows, why_rows, why_text
    from ..safety import assert_safe, plan_limits
    from .output import emit_json

    plan = parse_plan(read_json_file(args.plan, "PLAN.json"), source=args.plan)
    if args.week is not None and not 1 <= args.week <= len(plan.weeks):
        raise InputError.single("--week", args.week, f"a week of the program, 1 to {len(plan.weeks)}")
    # The reasons are printed only for a plan that passes the one check (its limits as its record gives them).
    assert_safe(plan, door=str(args.plan), require_record=True)
    limits = plan_limits(plan)
    if args.json:
        emit_json({"patient_id": plan.patient_id, "week": args.week, "limits": limit_rows(limits),
                   "exercises": why_rows(plan, args.week),
                   "cautions": list(plan.cautions)})
        return 0
    sys.stdout.write(why_text(plan, limits, args.week))
    return 0
