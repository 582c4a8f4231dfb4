"""Seed a store with an invented clinic's invented people, for the demo app.

``python -m prescribe.demo`` (run by ``make app`` after ``prescribe db init``, with
``PRESCRIBE_DB`` set, and ``--settings FILE`` so that the app's handouts carry the
invented clinic's name and phone) saves each person in :data:`DEMO_RECORDS`, screens them and,
when the planner is installed, saves a first program version for each by
:data:`DEMO_CLINICIAN`.  Running it again adds nothing twice: people already in the
store are left as they are (a person with no program yet gets one once the
planner is available).

Everyone here is made up: the ids, the clinic, the phone number.  The five
records cover the usual kinds of people a bone-health exercise service sees.
"""

from __future__ import annotations

import argparse
import sys
from datetime import date, timedelta

from .cautions import with_standard
from .errors import PlanRequestRefused, PrescribeError
from .records import parse_record
from .plan_schema import Plan, start_day
from .settings import Clinic

#: An invented clinic (555-01xx numbers are reserved for fiction; example.invalid is not a real domain).
DEMO_CLINIC = Clinic(name="Riverside Bone Health Clinic (demo)",
                     contact="555-0100 · reception@riverside-bone-health.example.invalid")
DEMO_CLINICIAN = "Demo Physio (invented)"

#: Invented people; every value is made up to look like a plausible clinic record.
DEMO_RECORDS: list[dict] = [
    {   # Osteopenia, no fracture, active and steady on her feet.
        "patient_id": "DEMO-0001", "age_years": 58, "sex": "female", "body_mass_kg": 66.0, "height_cm": 165.0,
        "t_scores": {"lumbar_spine": -1.6, "femoral_neck": -1.9, "total_hip": -1.4},
        "fractures": [], "falls_past_year": 0, "timed_up_and_go_s": 7.8, "chair_stand_30s": 14,
        "tandem_stance_s": 10.0, "conditions": [], "pain_score": 1,
    },
    {   # Osteoporosis with a low-trauma vertebral fracture 14 months ago and a rounded upper back.
        "patient_id": "DEMO-0002", "age_years": 71, "sex": "female", "body_mass_kg": 54.0, "height_cm": 156.0,
        "t_scores": {"lumbar_spine": -3.1, "femoral_neck": -2.6, "total_hip": -2.4},
        "fractures": [{"site": "vertebra", "months_ago": 14, "low_trauma": True}],
        "falls_past_year": 0, "timed_up_and_go_s": 10.5, "chair_stand_30s": 10, "tandem_stance_s": 10.0,
        "conditions": ["thoracic_kyphosis"], "pain_score": 2,
    },
    {   # Falls risk: two falls this year, a slow Timed Up and Go and a short tandem stance.
        "patient_id": "DEMO-0003", "age_years": 79, "sex": "male", "body_mass_kg": 74.0, "height_cm": 172.0,
        "t_scores": {"femoral_neck": -2.2, "total_hip": -1.9},
        "fractures": [], "falls_past_year": 2, "timed_up_and_go_s": 14.0, "chair_stand_30s": 8,
        "tandem_stance_s": 4.5, "conditions": [], "pain_score": 1,
    },
    {   # Long-term oral glucocorticoids (7.5 mg/day prednisolone for 18 months) and an old wrist fracture.
        "patient_id": "DEMO-0004", "age_years": 64, "sex": "female", "body_mass_kg": 70.0, "height_cm": 162.0,
        "t_scores": {"lumbar_spine": -2.3, "femoral_neck": -2.0},
        "fractures": [{"site": "wrist", "months_ago": 40, "low_trauma": True}],
        "falls_past_year": 0, "timed_up_and_go_s": 8.9, "chair_stand_30s": 12, "tandem_stance_s": 10.0,
        "glucocorticoids": {"mg_per_day": 7.5, "months": 18}, "conditions": [], "pain_score": 0,
    },
    {   # Knee osteoarthritis and pelvic floor dysfunction: impact needs adapting, not avoiding loading.
        "patient_id": "DEMO-0005", "age_years": 67, "sex": "female", "body_mass_kg": 82.0, "height_cm": 160.0,
        "t_scores": {"lumbar_spine": -1.8, "total_hip": -2.0},
        "fractures": [], "falls_past_year": 0, "timed_up_and_go_s": 9.6, "chair_stand_30s": 11,
        "tandem_stance_s": 10.0, "conditions": ["knee_osteoarthritis", "pelvic_floor_dysfunction"],
        "pain_score": 3,
    },
]


#: Demo programs started this many weeks ago; the first person has their sessions logged.
DEMO_WEEKS_DONE = 5
DEMO_SESSIONS_FOR = "DEMO-0001"


def _seed_sessions(store, pid: str, plan: Plan) -> int:
    """Log the first person's invented sessions of the weeks done (three session days a week,
    doses as prescribed, mild pain and moderate effort), so the live-session panel has a history."""
    from .sessions.records import parse_session
    start = start_day(plan)
    n = 0
    for week in plan.weeks[:DEMO_WEEKS_DONE]:
        days = sorted({s.day for s in week.sessions})[:4]
        for day in days:
            exercises = [{"exercise_id": x.exercise_id, **({"minutes_done": x.minutes} if x.minutes else {}),
                          **({"sets_done": x.sets} if x.sets else {}),
                          **({"reps_done": x.reps} if x.reps else {})}
                         for s in week.sessions if s.day == day for x in s.exercises]
            when = start + timedelta(days=7 * (week.week - 1) + day - 1)
            store.add_session(parse_session({
                "patient_id": pid, "session_date": when.isoformat(), "exercises": exercises,
                "pain_during": 1 + (n % 3 == 0), "session_rpe": 5 + (n % 2), "note": "demo seed (invented)"}),
                DEMO_CLINICIAN)
            n += 1
    return n


def seed(store) -> list[dict]:
    """Save the demo people and a first program each.

    Returns one line a person: what was done (``created`` or ``already present``)
    and the program version saved, if any.  Safe to run again.
    """
    from .planning import build_plan
    from .screening import screen

    done = []
    for data in DEMO_RECORDS:
        record = parse_record(data, source="prescribe.demo")
        pid = record.patient_id
        line = {"patient_id": pid}
        if store.has_patient(pid):
            line["person"] = "already present"
            record, screening = store.get_patient(pid), None
        else:
            screening = screen(record)
            store.save_patient(record, screening, clinician=DEMO_CLINICIAN)
            line["person"] = "created"
            line["bone_density_category"] = screening.bone_density_category
        line["program_version"] = store.latest_program_version(pid)
        if line["program_version"] is None:
            screening = screening or screen(record)
            try:
                plan = build_plan(record, screening)
            except PlanRequestRefused as exc:
                line["program"] = f"not planned: {exc}"
            else:
                plan = plan.model_copy(update={
                    "start_date": (date.today() - timedelta(days=7 * DEMO_WEEKS_DONE)).isoformat()})
                line["program_version"] = store.save_program(pid, plan, DEMO_CLINICIAN, None,
                                                             note="demo seed: first program")
                line["program"] = "created"
                if pid == DEMO_SESSIONS_FOR:
                    line["sessions"] = _seed_sessions(store, pid, plan)
        done.append(line)
    return done


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m prescribe.demo",
                                     description="Seed the store with an invented clinic's invented people.")
    parser.add_argument("--db", help="the store (default: $PRESCRIBE_DB, else the default location)")
    parser.add_argument("--settings", metavar="FILE",
                        help="also write the invented clinic's name and contact to this settings file "
                             "(make app does, so the demo handouts show them)")
    args = parser.parse_args(argv)
    from .cli.output import emit_json
    from .store import open_store

    try:
        if args.settings:
            from .settings import save_clinic
            save_clinic(DEMO_CLINIC.name, DEMO_CLINIC.contact, args.settings)
        with open_store(args.db) as store:
            people = seed(store)
            where = store.where
    except PrescribeError as exc:
        print(f"prescribe.demo: {exc}", file=sys.stderr)
        return exc.exit_code
    emit_json({"db": where, "clinic": {"name": DEMO_CLINIC.name, "contact": DEMO_CLINIC.contact},
               "clinician": DEMO_CLINICIAN, "people": people, "cautions": with_standard(
                   ["Demo data: every person, id and contact here is invented."])})
    return 0


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
