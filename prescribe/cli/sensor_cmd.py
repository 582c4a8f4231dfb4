"""``prescribe sensor FILE``: the delivered dose of a worn-sensor recording.

The file is read and checked completely before anything is written, so a bad file
(exit 2) stores nothing.  With ``--patient`` the person's latest stored program gives
the planned impacts and osteogenic index of the same days, and the summary is stored
with the person (unless ``--no-store``).
"""

from __future__ import annotations

import sys
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
    from ..sensor import summarise_file, summarise_for_person
    from .._arrays import body_mass

    if args.body_mass_kg is not None:
        body_mass(args.body_mass_kg, "--body-mass-kg")
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
        saved_at = store.program_created(args.patient) if plan is not None else None
        summary = summarise_for_person(args.file, args.format, site=args.site, body_mass_kg=mass, start=args.start,
                                       plan=plan, plan_saved_at=saved_at)
        notes = summary["person_notes"]
        summary["patient_id"] = args.patient
        if plan is None:
            notes.append(f"{args.patient} has no stored program: nothing to compare with.")
        summary["notes"] = summary["notes"] + notes
        del summary["person_notes"]
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
    plan = summary.get("plan")
    if plan:
        share = plan.get("delivered_share")
        print(f"delivered {plan['delivered_impacts']} of {plan['planned_impacts']} planned impacts"
              + (f" ({share:.0%})" if share is not None else ""))
        for f in plan.get("flags") or []:
            print(f"{'ATTENTION' if f['severity'] == 'attention' else 'note'} {f['date']}: {f['message']}")
    for n in summary.get("notes") or []:
        print(f"- {n}")
    for c in summary["cautions"]:
        print(f"* {c}")
