"""``prescribe sensor FILE``: the delivered dose of a worn-sensor recording.

The file is read and checked completely before the store is opened, so a bad file
(exit 2) stores nothing.  With ``--patient`` the person's latest stored program gives
the planned impacts and osteogenic index of the same days, and the summary is stored
with the person (unless ``--no-store``).
"""

from __future__ import annotations

import sys
from datetime import date, datetime

from ..errors import InputError, NotFoundError
from .output import emit_json, emit_table
from .store_cmd import DB_HELP


def register(sub) -> None:
    p = sub.add_parser("sensor", help="count bone-loading impacts in a worn sensor's recording (CSV, .cwa, .bin)",
                       description="Impacts per band and per day, wear time and a daily osteogenic index from a "
                                   "worn accelerometer's file; with --patient, set beside the stored program. "
                                   "See docs/sensors.md for every band, threshold and source.")
    p.add_argument("file", metavar="FILE", help="CSV with columns time_s, x_g, y_g, z_g; or Axivity .cwa / "
                                                "GENEActiv .bin (needs: pip install 'prescribe[sensors]')")
    p.add_argument("--format", choices=("csv", "cwa", "bin"), help="the file's format (default: from its suffix)")
    p.add_argument("--site", choices=("hip", "wrist"), default="hip", help="where it was worn (default: hip)")
    p.add_argument("--body-mass-kg", type=float, help="body mass for the force estimate (default: the person's "
                                                      "record with --patient, else 70 kg)")
    p.add_argument("--start", help="start of a recording whose times are relative (YYYY-MM-DD[THH:MM], UTC)")
    p.add_argument("--patient", metavar="PATIENT_ID", help="compare with this stored person's latest program and "
                                                          "store the summary with them")
    p.add_argument("--no-store", action="store_true", help="with --patient: compare, but do not store the summary")
    p.add_argument("--clinician", default="", help="who is storing the summary (free text, for the audit log)")
    p.add_argument("--table", action="store_true", help="a table of the days instead of JSON")
    p.add_argument("--db", help=DB_HELP)
    p.set_defaults(func=run_sensor)


def run_sensor(args) -> int:
    from ..sensor import summarise_file
    from .._arrays import checked

    if args.body_mass_kg is not None:
        checked("--body-mass-kg", args.body_mass_kg, low=25, high=300, allowed="a body mass from 25 to 300 kg")
    if args.patient is None:
        summary = summarise_file(args.file, args.format, site=args.site, body_mass_kg=args.body_mass_kg,
                                 start=args.start)
        _print(summary, args.table)
        return 0

    from ..store import open_store
    with open_store(args.db, create=False) as store:
        try:
            record = store.get_patient(args.patient)
        except NotFoundError:
            raise InputError.single("--patient", args.patient, f"the id of a person in the store at {store.where}") from None
        mass = args.body_mass_kg if args.body_mass_kg is not None else record.body_mass_kg
        try:
            plan = store.get_program(args.patient)
        except NotFoundError:
            plan = None
        notes: list[str] = []
        start_day = None
        if plan is not None:
            start_day, note = program_start(plan, store.program_created(args.patient))
            if note:
                notes.append(note)
        start = args.start
        summary = summarise_file(args.file, args.format, site=args.site, body_mass_kg=mass, start=start)
        if summary.get("start") is None and start_day is not None and start is None:
            # Relative times and no --start: the recording is taken to begin on the program's first day.
            summary = summarise_file(args.file, args.format, site=args.site, body_mass_kg=mass,
                                     start=start_day.isoformat())
            notes.append(f"The file's times are relative and no --start was given: the recording was taken to "
                         f"begin on the program's start date, {start_day.isoformat()} 00:00 UTC.")
        summary["patient_id"] = args.patient
        if plan is None:
            notes.append(f"{args.patient} has no stored program: nothing to compare with.")
            summary["plan"] = None
        else:
            from ..sensor.compare import compare_with_plan
            summary["plan"] = compare_with_plan(summary, plan, start_day)
            summary["plan"]["program_created"] = plan.get("created")
            _lift_plan_figures(summary)
        summary["notes"] = summary["notes"] + notes
        if args.no_store:
            summary["stored"] = False
        else:
            summary["sensor_summary_id"] = store.add_sensor_summary(args.patient, summary, args.clinician)
            summary["stored"] = True
            summary["db"] = store.where
    _print(summary, args.table)
    for note in notes:
        print(f"prescribe sensor: {note}", file=sys.stderr)
    return 0


def program_start(plan: dict, saved_at: str | None) -> tuple[date, str]:
    """The program's start date, and a note when it had to be taken from elsewhere."""
    raw = plan.get("start_date")
    if raw:
        try:
            return date.fromisoformat(str(raw)), ""
        except ValueError:
            raise InputError.single("start_date", raw, "a date as YYYY-MM-DD in the stored program") from None
    for value, what in ((saved_at, "the day its program version was saved"), (plan.get("created"), "the day it was created")):
        if value:
            try:
                day = datetime.fromisoformat(str(value)).date()
            except ValueError:
                continue
            return day, (f"The stored program has no start_date: week 1 was taken to start on {what}, "
                         f"{day.isoformat()}.")
    raise InputError.single("start_date", None, "a start date in the stored program")


def _lift_plan_figures(summary: dict) -> None:
    """Put the planned figures beside each day (and the totals at the top), as the contract reads them."""
    plan = summary["plan"]
    by_date = {d["date"]: d for d in plan["days"]}
    for d in summary["days"]:
        p = by_date.get(d.get("date"))
        if p is None:
            continue
        for k in ("week", "in_program", "weak_window", "planned_impacts", "delivered_impacts",
                  "planned_osteogenic_index", "beyond_plan"):
            d[k] = p[k]
    for k in ("planned_impacts", "delivered_impacts", "delivered_share", "planned_osteogenic_index",
              "delivered_osteogenic_index", "delivered_share_osteogenic_index"):
        summary[k] = plan[k]


def _print(summary: dict, table: bool) -> None:
    if not table:
        emit_json(summary)
        return
    rows = []
    for d in summary["days"]:
        row = {"date": d.get("date") or f"day {d['day']}", "wear_h": d["wear_time_h"], **d["impacts_by_band"],
               ">4g": d["impacts_above_4g"], "OI": d["osteogenic_index"]}
        if "planned_impacts" in d:
            row.update({"planned": d["planned_impacts"], "delivered": d["delivered_impacts"],
                        "planned_OI": d["planned_osteogenic_index"], "beyond": d["beyond_plan"]})
        rows.append(row)
    emit_table(rows, list(rows[0]) if rows else ["date"])
    for c in summary["cautions"]:
        print(f"* {c}")
