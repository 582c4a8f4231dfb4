"""Session benchmark: ``session add`` + ``adjust`` in-process for a person with a year of sessions.

Prints medians measured in the same run on the same machine, both sides alike (a fresh
store per side, the same person, the same number of repetitions, each timed around one
call sequence from an open store):

- the work: add one session (a durable write) and work out the advice (read the person,
  the program and a year of sessions, run the rules, compose the adjusted program);
- the baseline: a bare durable write plus a bare store read (a one-row audit write through
  the same store, then reading the person's record back), i.e. the least any
  add-and-advise could cost with this store;
- and the advice alone against a bare read.

Goal (issue 13): session add + adjust under 20 ms median.  Exits 0 either way (a
benchmark, not a test).  Invented data only.
Run: ``.venv/bin/python benchmarks/bench_sessions.py [--runs 40]``.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from datetime import date, timedelta
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from prescribe.sessions.records import parse_session  # noqa: E402
from prescribe.store import open_store  # noqa: E402
from prescribe.clinic.advice import adjust_person  # noqa: E402
from session_support import person, plan_dict  # noqa: E402

GOAL_MS = 20.0
PID = "BENCH-SES-1"


def _median_ms(fn, n: int) -> float:
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        fn()
        times.append((time.perf_counter() - t0) * 1000)
    return statistics.median(times)


def _year_store(folder: Path):
    start = date.today() - timedelta(days=7 * 52)
    store = open_store(str(folder / "bench.db"))
    store.save_patient(person(PID), None, "EP Bench", plan=plan_dict(PID, weeks=52, start=start))
    for week in range(1, 53):
        for offset in (0, 1, 2, 4):
            day = start + timedelta(days=7 * (week - 1) + offset)
            store.add_session(parse_session({
                "patient_id": PID, "session_date": day.isoformat(), "pain_during": 1, "session_rpe": 6,
                "exercises": [{"exercise_id": "goblet_box_squat", "load_kg": 12.0, "reps_done": 10, "sets_done": 3},
                              {"exercise_id": "brisk_walking", "minutes_done": 20}]}), "EP Bench")
    return store, start


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--runs", type=int, default=40)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        store, start = _year_store(Path(tmp))
        today = date.today()
        session = parse_session({"patient_id": PID, "session_date": today.isoformat(), "pain_during": 2,
                                 "session_rpe": 6, "exercises": [{"exercise_id": "goblet_box_squat",
                                                                  "load_kg": 12.0, "reps_done": 10}]})
        n_sessions = len(store.sessions(PID))

        def work():
            store.add_session(session, "EP Bench")
            adjust_person(store, PID, today=today)

        def advice():
            adjust_person(store, PID, today=today)

        def bare_write_and_read():
            with store._write() as conn:  # the same durable write path, one audit row
                from prescribe.store.api import _audit, now_utc
                _audit(conn, now_utc(), "bench", PID, "EP Bench", {})
            store.get_patient(PID)

        def bare_read():
            store.get_patient(PID)

        for fn in (work, bare_write_and_read, advice, bare_read):  # one warm-up each
            fn()
        w = _median_ms(work, args.runs)
        b = _median_ms(bare_write_and_read, args.runs)
        a = _median_ms(advice, args.runs)
        r = _median_ms(bare_read, args.runs)
        store.close()
    print(f"person with {n_sessions} sessions over 52 weeks, {args.runs} runs each, medians")
    print(f"session add + adjust:        {w:7.2f} ms   (goal under {GOAL_MS:g} ms: "
          f"{'met' if w < GOAL_MS else 'NOT met'})")
    print(f"bare durable write + read:   {b:7.2f} ms   ratio {w / b:5.2f} x")
    print(f"adjust (advice) alone:       {a:7.2f} ms")
    print(f"bare store read:             {r:7.2f} ms   ratio {a / r:5.2f} x")


if __name__ == "__main__":
    main()
