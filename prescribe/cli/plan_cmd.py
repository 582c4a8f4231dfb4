"""``prescribe plan``: the graded program for one person (JSON, or a weekly table)."""

from __future__ import annotations

import argparse
import sys

from ..errors import FieldProblem, InputError
from ..records import load_record
from .output import emit_json, emit_table

#: Command-line option of each PlanOptions field (messages name the option the user typed).
_OPTION_OF = {
    "weeks": "--weeks", "start_level": "--start-level", "template": "--template",
    "impact_sessions_per_week": "--impact-sessions", "resistance_sessions_per_week": "--resistance-sessions",
    "balance_sessions_per_week": "--balance-sessions", "exclude": "--exclude", "include": "--include",
    "step_up_weeks": "--step-up-weeks", "cleared_by": "--cleared-by",
}


def _whole(text: str) -> int:
    try:
        return int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"must be a whole number, not {text!r}") from None


def register(sub) -> None:
    p = sub.add_parser(
        "plan", help="build the graded exercise program for a patient record",
        description="Screen a patient record and build a week-by-week program of impact, resistance and "
                    "balance work (JSON; --table for the weekly summary). Decision support only: a licensed "
                    "clinician reviews every program. The plan format is documented in docs/plan.md.")
    p.add_argument("patient", metavar="PATIENT.json", help="the patient record (JSON)")
    p.add_argument("--weeks", type=_whole, default=None, metavar="N", help="program length, 8-52 weeks (default 26)")
    p.add_argument("--template", default=None, metavar="NAME",
                   help="starting template: standard, gentle or post_vertebral_fracture "
                        "(default: post_vertebral_fracture after a vertebral fracture, else standard)")
    p.add_argument("--start-level", type=_whole, default=None, metavar="L",
                   help="impact level to start at, 0-3 (never above the screening's cap)")
    p.add_argument("--impact-sessions", type=_whole, default=None, metavar="K", help="impact sessions a week, 1-7 (default 3)")
    p.add_argument("--resistance-sessions", type=_whole, default=None, metavar="K",
                   help="resistance sessions a week, 1-3 (default 2)")
    p.add_argument("--balance-sessions", type=_whole, default=None, metavar="K",
                   help="balance sessions a week, 2-7 (default 3; 4 when falls risk is flagged)")
    p.add_argument("--exclude", nargs="+", default=[], metavar="ID", help="exercise ids to leave out")
    p.add_argument("--include", nargs="+", default=[], metavar="ID", help="exercise ids to prefer")
    p.add_argument("--step-up-weeks", nargs="+", type=_whole, default=[], metavar="W",
                   help="weeks where the impact level should rise (refused where a safety rule forbids it)")
    p.add_argument("--cleared-by", default=None, metavar="NAME",
                   help="record that clinician NAME has cleared this person for the program (with the time); "
                        "until then a person the screening refers gets a draft program")
    p.add_argument("--table", action="store_true", help="print the weekly summary table instead of JSON")
    p.set_defaults(func=run)


def _options(args):
    from ..planner import PlanOptions

    given = {"weeks": args.weeks, "template": args.template, "start_level": args.start_level,
             "impact_sessions_per_week": args.impact_sessions,
             "resistance_sessions_per_week": args.resistance_sessions,
             "balance_sessions_per_week": args.balance_sessions}
    kwargs = {k: v for k, v in given.items() if v is not None}
    if args.exclude:
        kwargs["exclude"] = list(args.exclude)
    if args.include:
        kwargs["include"] = list(args.include)
    if args.step_up_weeks:
        kwargs["step_up_weeks"] = list(args.step_up_weeks)
    try:
        return PlanOptions(**kwargs)
    except InputError as exc:
        raise _named_as_options(exc) from None


def _named_as_options(exc: InputError) -> InputError:
    """The same problems, each naming the command-line option rather than the field."""
    return InputError([FieldProblem(_OPTION_OF.get(p.field, p.field), p.value, p.allowed, p.kind)
                       for p in exc.problems], exc.source)


def run(args) -> int:
    from ..planner import build_plan, weekly_summary
    from ..screening import screen

    options = _options(args)
    record = load_record(args.patient)
    from ..safety import assert_safe, record_clearance

    try:
        plan = build_plan(record, screen(record), options)
    except InputError as exc:
        raise _named_as_options(exc) from None
    if args.cleared_by is not None:
        try:
            plan = record_clearance(plan, args.cleared_by)
        except InputError as exc:
            raise _named_as_options(exc) from None
    # The one safety check (docs/safety.md): an unsafe program is refused (exit 2), nothing printed.
    assert_safe(plan, door=f"the program for {record.patient_id}", record=record)
    if not args.table:
        emit_json(plan)
        return 0
    out = sys.stdout
    extra = plan.model_extra or {}
    out.write(f"Program for {plan.patient_id}: {len(plan.weeks)} weeks, template "
              f"{extra.get('template', {}).get('name', '?')}, highest impact level allowed "
              f"{plan.screening.max_impact_level} (screening rule set {plan.ruleset_version})\n\n")
    table = weekly_summary(plan)
    rows = table.astype(object).where(table.notna(), None).to_dict("records")
    emit_table(rows, list(table.columns), out)
    out.write("\nCautions:\n")
    for text in plan.cautions:
        out.write(f"  - {text}\n")
    return 0
