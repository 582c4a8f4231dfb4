"""``prescribe exercises`` (the catalogue) and ``prescribe dose`` (one session's dose figures)."""

from __future__ import annotations

import sys

from ..catalogue import CATEGORIES, default_catalogue
from ..cautions import SHORT_CAUTION, STANDARD_CAUTIONS
from ..loading.dose import MAX_BOUTS, session_dose
from ..records import BODY_MASS_RANGE_KG, MOVEMENT_PATTERNS
from .output import emit_json, emit_table

TABLE_COLUMNS = ["exercise_id", "name", "category", "impact_level", "peak_grf_bw",
                 "loading_rate_bw_s", "directions", "patterns", "dose_unit"]
DOSE_TABLE_KEYS = ["exercise_id", "name", "impact_level", "peak_grf_bw", "loading_rate_bw_s",
                   "cycles", "bouts", "gap_hours", "cycles_per_bout", "osteogenic_index",
                   "osteogenic_index_one_session", "osteogenic_index_separate_sessions",
                   "recovered_sensitivity", "direction_variety", "peak_force_n"]


def register(sub) -> None:
    p = sub.add_parser(
        "exercises", help="list the exercise catalogue (JSON; --table for text)",
        description="The exercise catalogue: each entry with its impact level, peak ground "
                    "reaction force (BW), loading rate (BW/s), loading directions, movement "
                    "patterns and the source of its load figure.")
    p.add_argument("--level", type=int, choices=range(4), metavar="N",
                   help="only entries of impact level N (0-3)")
    p.add_argument("--max-level", type=int, choices=range(4), metavar="N",
                   help="only entries up to impact level N (0-3)")
    p.add_argument("--category", choices=list(CATEGORIES), metavar="C",
                   help="only one category: " + ", ".join(CATEGORIES))
    p.add_argument("--exclude-pattern", action="append", default=[], metavar="CODE",
                   choices=list(MOVEMENT_PATTERNS),
                   help="leave out entries with this movement pattern (repeatable)")
    p.add_argument("--table", action="store_true", help="a text table instead of JSON")
    p.set_defaults(func=run_exercises)

    d = sub.add_parser(
        "dose", help="dose figures of one exercise session (JSON)",
        description="Turner's osteogenic index of a day's cycles of one exercise, split into "
                    "bouts with the documented recovery model between them, plus the share of "
                    "stimulus of the first cycles and (with --body-mass-kg) the peak force in "
                    "newtons.  Cycles are split evenly over bouts; remainders go to the earliest.")
    d.add_argument("exercise_id", metavar="EXERCISE_ID",
                   help="a catalogue id (see `prescribe exercises`)")
    d.add_argument("--cycles", type=int, required=True, metavar="N",
                   help="loading cycles in the day (impacts, steps or repetitions)")
    d.add_argument("--bouts", type=int, default=1, metavar="K",
                   help=f"bouts the cycles are split into (1-{MAX_BOUTS}, default 1)")
    d.add_argument("--gap-hours", type=float, default=8.0, metavar="H",
                   help="rest between bouts in hours (0-24, default 8)")
    d.add_argument("--body-mass-kg", type=float, default=None, metavar="M",
                   help="body mass in kg ({}-{}): adds the peak force in newtons".format(*BODY_MASS_RANGE_KG))
    d.add_argument("--table", action="store_true", help="key figures as text instead of JSON")
    d.set_defaults(func=run_dose)


def run_exercises(args) -> int:
    cat = default_catalogue()
    entries = cat.filter(level=args.level, category=args.category, max_level=args.max_level,
                         exclude_patterns=args.exclude_pattern)
    rows = [ex.summary() for ex in entries]
    if args.table:
        emit_table(rows, TABLE_COLUMNS)
        sys.stdout.write(f"\n{len(rows)} of {len(cat)} exercises. {SHORT_CAUTION}\n")
    else:
        emit_json(rows)
        for text in STANDARD_CAUTIONS:
            print(f"caution: {text}", file=sys.stderr)
    return 0


def run_dose(args) -> int:
    result = session_dose(args.exercise_id, args.cycles, bouts=args.bouts,
                          gap_hours=args.gap_hours, body_mass_kg=args.body_mass_kg)
    if args.table:
        emit_table([{"figure": k, "value": result[k]} for k in DOSE_TABLE_KEYS if k in result],
                   ["figure", "value"])
        for note in result["notes"]:
            sys.stdout.write(f"note: {note}\n")
        for text in result["cautions"]:
            sys.stdout.write(f"caution: {text}\n")
    else:
        emit_json(result)
    return 0
