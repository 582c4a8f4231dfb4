"""``prescribe plan``: the graded program for one person (JSON, or a weekly table)."""

from __future__ import annotations

import argparse
import sys
from datetime import date

from ..errors import FieldProblem, InputError
from ..planning.options import OPTION_DEFAULTS, range_text
from ..plan_schema import parse_day
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
    p.add_argument("--weeks", type=_whole, default=None, metavar="N",
                   help=f"program length, {range_text('weeks')} weeks (default {OPTION_DEFAULTS['weeks']})")
    p.add_argument("--template", default=None, metavar="NAME[@VERSION]",
                   help="template: a shipped one (standard, gentle or post_vertebral_fracture) or an approved "
                        "clinic version from the store; a bare NAME is its newest approved version (default: "
                        "post_vertebral_fracture after a vertebral fracture, else standard)")
    p.add_argument("--db", help="the store holding the clinic's templates (default: $PRESCRIBE_DB, else "
                                "~/.local/share/prescribe/prescribe.db); read only for a clinic template")
    p.add_argument("--start-level", type=_whole, default=None, metavar="L",
                   help=f"impact level to start at, {range_text('start_level')} (never above the screening's cap)")
    p.add_argument("--impact-sessions", type=_whole, default=None, metavar="K",
                   help=f"impact sessions a week, {range_text('impact_sessions_per_week')} "
                        f"(default {OPTION_DEFAULTS['impact_sessions_per_week']})")
    p.add_argument("--resistance-sessions", type=_whole, default=None, metavar="K",
                   help=f"resistance sessions a week, {range_text('resistance_sessions_per_week')} "
                        f"(default {OPTION_DEFAULTS['resistance_sessions_per_week']})")
    p.add_argument("--balance-sessions", type=_whole, default=None, metavar="K",
                   help=f"balance sessions a week, {range_text('balance_sessions_per_week')} "
                        f"(default {OPTION_DEFAULTS['balance_sessions_per_week']}; 4 when falls risk is flagged)")
    p.add_argument("--exclude", nargs="+", default=[], metavar="ID", help="exercise ids to leave out")
    p.add_argument("--include", nargs="+", default=[], metavar="ID", help="exercise ids to prefer")
    p.add_argument("--step-up-weeks", nargs="+", type=_whole, default=[], metavar="W",
                   help="weeks where the impact level should rise (refused where a safety rule forbids it)")
    p.add_argument("--start-date", default=None, metavar="YYYY-MM-DD",
                   help="first day of week 1 (default: today); week N starts 7(N-1) days later")
    p.add_argument("--cleared-by", default=None, metavar="NAME",
                   help="record that clinician NAME has cleared this person for the program (with the time); "
                        "until then a person the screening refers gets a draft program")
    p.add_argument("--table", action="store_true", help="print the weekly summary table instead of JSON")
    p.set_defaults(func=run)


def _options(args):
    from ..planning import PlanOptions

    given = {"weeks": args.weeks, "start_level": args.start_level,
             "impact_sessions_per_week": args.impact_sessions,
             "resistance_sessions_per_week": args.resistance_sessions,
             "balance_sessions_per_week": args.balance_sessions}
    if getattr(args, "template_name", None):
        given["template"] = args.template_name
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


def resolve_template(ref: str | None, db: str | None):
    """The template ``--template`` names: (shipped name for PlanOptions, or None; clinic Template, or None).

    Shipped templates never touch the store; a clinic name is looked up read-only and
    must be an approved version (drafts and retired versions are refused, exit 2).
    """
    if ref is None:
        return None, None
    from ..planning.templates import template_names
    from ..clinic.template_library import parse_ref, resolve

    name, _ = parse_ref(ref, "--template")
    if name in template_names():
        return resolve(ref, None, purpose="plan").name, None
    from ..errors import StoreError
    from ..store import open_store
    try:
        store = open_store(db, create=False)
    except StoreError as exc:
        raise InputError.single("--template", ref, "a shipped template (" + ", ".join(template_names()) +
                                f") or an approved clinic version in the store ({exc})") from None
    with store:
        tv = resolve(ref, store, purpose="plan")
    return None, tv.template()


def run(args) -> int:
    from ..planning import build_plan
    from ..tables import weekly_summary
    from ..screening import screen

    shipped, clinic_template = resolve_template(args.template, args.db)
    args.template_name = shipped
    options = _options(args)
    start = date.today() if args.start_date is None else parse_day(args.start_date, "--start-date")
    record = load_record(args.patient)
    from ..safety import assert_safe, record_clearance

    try:
        # A clearance recorded with the plan lifts what the screening held until then (docs/safety.md).
        cleared = args.cleared_by is not None
        plan = build_plan(record, screen(record, cleared=cleared), options, template=clinic_template,
                          cleared=cleared)
    except InputError as exc:
        raise _named_as_options(exc) from None
    plan = plan.model_copy(update={"start_date": start.isoformat()})
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
    tpl = plan.template
    tpl_text = "?" if tpl is None else tpl.name + (f"@{tpl.version}" if tpl.version else "")
    from ..planning.why import limit_rows
    from ..safety import plan_limits
    out.write(f"Program for {plan.patient_id}: {len(plan.weeks)} weeks from {plan.start_date}, template "
              f"{tpl_text} (screening rule set {plan.ruleset_version})\nLimits (`prescribe why` gives the reasons):\n")
    for row in limit_rows(plan_limits(plan)):
        out.write(f"  {row['label']}: {row['value']}\n")
    out.write("\n")
    table = weekly_summary(plan)
    rows = table.astype(object).where(table.notna(), None).to_dict("records")
    emit_table(rows, list(table.columns), out)
    out.write("\nCautions:\n")
    for text in plan.cautions:
        out.write(f"  - {text}\n")
    return 0
