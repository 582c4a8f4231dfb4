"""Reassessment benchmark: a retest with its next block, and the caseload's outcomes.

Prints medians (min and max beside) measured in the same run on the same machine, both sides
alike (the same set-up before every run, untimed; one warm-up; the same number of timed runs):

- reassess + next block for a person with a year of sessions (52 weeks, 4 a week): read the
  person, the program and their retests, compare every measure, re-screen, decide, build and
  safety-check the next block (``assess_retest``, nothing written), against the store's bare
  read of the person's record.  Twice: the **first look** at the person in this process (the
  store's and the retest's parsed copies of the person's program dropped before every run: what
  ``prescribe reassess`` and the app's first Compare pay) and **again** (the app's Store after
  Compare, the parsed program kept).  Caches of what is the same for every person (catalogue,
  rules, templates) stay warm, as in any running app;
- the same with the retest, the record, the screening and the next block stored in one durable
  transaction (``reassess_person``), every run on a fresh copy of the same store (so every run
  does the same work), against a bare durable write plus that read;
- ``caseload outcomes`` over 10,000 stored people with one to three retests each (verdicts
  drawn with a fixed seed: most measures taken, some not, a DXA scan for about a third), against
  reading their retests (the same columns of every retest row) from the store.

Goals (issue 29): reassess + next block <= 20 ms (judged on the first look); outcomes within 3x
reading the retests.  Exits 0 either way (a benchmark, not a test).  Invented data only.
Run: ``.venv/bin/python benchmarks/bench_reassess.py [--runs 30] [--people 10000]``.
"""

from __future__ import annotations

import argparse
import json
import os
import random
import shutil
import statistics
import sys
import tempfile
import time
from datetime import date, timedelta
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from sqlalchemy import select  # noqa: E402

from prescribe.clinic import reassess as reassess_module  # noqa: E402
from prescribe.clinic.caseload import outcomes  # noqa: E402
from prescribe.clinic.reassess import assess_retest, reassess_person  # noqa: E402
from prescribe.outcomes.measures import VERDICTS  # noqa: E402
from prescribe.outcomes.retest import parse_retest  # noqa: E402
from prescribe.sessions.records import parse_session  # noqa: E402
from prescribe.store import models as m  # noqa: E402
from prescribe.store import open_store  # noqa: E402
from session_support import person, plan_dict  # noqa: E402

GOAL_MS = 20.0
GOAL_RATIO = 3.0
PID = "BENCH-RT-1"
MEASURES = ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "pain_score", "body_mass_kg", "height_cm")
DXA = ("t_scores.femoral_neck", "t_scores.total_hip", "t_scores.lumbar_spine")
TEMPLATES = ("standard", "post_vertebral_fracture", "gentle")


def _timed(fn, n: int, setup=None) -> tuple[float, float, float]:
    """Median, min and max [ms] of ``n`` runs after one warm-up; ``setup`` (untimed) before each."""
    if setup:
        setup()
    fn()  # one warm-up
    times = []
    for _ in range(n):
        if setup:
            setup()
        t0 = time.perf_counter()
        fn()
        times.append((time.perf_counter() - t0) * 1000)
    return statistics.median(times), min(times), max(times)


def _year_store(folder: Path):
    start = date.today() - timedelta(days=7 * 52)
    store = open_store(str(folder / "year.db"))
    store.save_patient(person(PID), None, "EP Bench", plan=plan_dict(PID, weeks=52, start=start))
    for week in range(1, 53):
        for offset in (0, 1, 2, 4):
            day = start + timedelta(days=7 * (week - 1) + offset)
            store.add_session(parse_session({
                "patient_id": PID, "session_date": day.isoformat(), "pain_during": 1, "session_rpe": 6,
                "exercises": [{"exercise_id": "goblet_box_squat", "load_kg": 12.0, "reps_done": 10, "sets_done": 3},
                              {"exercise_id": "brisk_walking", "minutes_done": 20}]}), "EP Bench")
    return store


def _verdicts(rng: random.Random, dxa: bool) -> dict:
    """One retest's verdicts: each measure taken 85% of the time, DXA sites only with a scan."""
    names = [n for n in MEASURES if rng.random() < 0.85] + (list(DXA[:rng.choice((1, 2, 3))]) if dxa else [])
    return {n: rng.choices(VERDICTS, weights=(35, 50, 15))[0] for n in names}


def _caseload_store(folder: Path, people: int):
    """``people`` people with one to three retests each (seeded); returns (store, number of retests)."""
    store = open_store(str(folder / "caseload.db"))
    rng = random.Random(29)
    at = "2026-11-01T09:00:00.000000+00:00"
    rec = person("X").model_dump(mode="json")
    with store._write() as conn:
        conn.execute(m.people.insert(), [{"patient_id": f"OC-{i:05d}", "record_json": json.dumps({**rec, "patient_id":
                                          f"OC-{i:05d}"}), "created": at, "updated": at, "record_version": 1}
                                         for i in range(people)])
        rows = []
        for i in range(people):
            template = rng.choice(TEMPLATES)
            dxa = rng.random() < 0.35
            for k in range(rng.choice((1, 1, 2, 3))):
                rows.append({"patient_id": f"OC-{i:05d}", "retest_date": (date(2026, 1, 12) + timedelta(
                                 days=90 * k + i % 60)).isoformat(), "created": at, "clinician": "EP",
                             "retest_json": "{}", "previous_json": "{}", "result_json": "{}", "decision": "continue",
                             "template": template, "verdicts_json": json.dumps(_verdicts(rng, dxa and k == 2)),
                             "program_version": None})
        conn.execute(m.retests.insert(), rows)
    return store, len(rows)


def _forget_the_person(store) -> None:
    """Drop this process's parsed copies of the person's program and sessions (a first look)."""
    store._plan_cache.clear()
    store._session_cache.clear()
    reassess_module._PARSED.clear()


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--runs", type=int, default=30)
    parser.add_argument("--people", type=int, default=10_000)
    args = parser.parse_args()
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        store = _year_store(folder)
        n_sessions = len(store.sessions(PID))
        retest = parse_retest({"patient_id": PID, "date": date.today().isoformat(), "falls_since_last": 0,
                               "timed_up_and_go_s": 6.8, "chair_stand_30s": 17, "tandem_stance_s": 10,
                               "pain_score": 0, "body_mass_kg": 66.0, "height_cm": 162.8})
        weeks = []

        def assess():
            out = assess_retest(store, retest)
            assert out["decision"] == "continue" and out["_plan"] is not None
            weeks.append(out["next_block"]["weeks"])

        def bare_read():
            store.get_patient(PID)

        first = _timed(assess, args.runs, lambda: _forget_the_person(store))
        first_read = _timed(bare_read, args.runs, lambda: _forget_the_person(store))
        again = _timed(assess, args.runs)
        again_read = _timed(bare_read, args.runs)
        store.close()

        # Stored: every run on a fresh copy of the same store, so every run does the same work.
        pristine = folder / "pristine.db"
        shutil.copyfile(folder / "year.db", pristine)
        held = {}

        def fresh_copy():
            if held.get("store") is not None:
                held["store"].close()
            for suffix in ("", "-wal", "-shm"):
                Path(str(folder / "work.db") + suffix).unlink(missing_ok=True)
            shutil.copyfile(pristine, folder / "work.db")
            held["store"] = open_store(str(folder / "work.db"))
            _forget_the_person(held["store"])

        def stored():
            out = reassess_person(held["store"], retest, clinician="EP Bench")
            assert out["next_block"]["program_version"] == 2

        def bare_write_and_read():
            with held["store"]._write() as conn:
                from prescribe.store.api import _audit, now_utc
                _audit(conn, now_utc(), "bench", PID, "EP Bench", {})
            held["store"].get_patient(PID)

        s = _timed(stored, args.runs, fresh_copy)
        w = _timed(bare_write_and_read, args.runs, fresh_copy)
        held["store"].close()

        cs, n_retests = _caseload_store(folder, args.people)

        def outcome():
            res = outcomes(cs)
            assert res["people"] == args.people

        def read_retests():
            with cs._read() as conn:
                rows = conn.execute(select(m.retests.c.patient_id, m.retests.c.template,
                                           m.retests.c.verdicts_json)).all()
            assert len(rows) == n_retests

        o = _timed(outcome, max(9, args.runs // 2))
        b = _timed(read_retests, max(9, args.runs // 2))
        cs.close()

    def row(name, t):
        return f"{name:40s} {t[0]:8.2f} ms  (min {t[1]:.2f}, max {t[2]:.2f})"

    def goal(t):
        return f"   goal <= {GOAL_MS:g} ms: {'met' if t[0] <= GOAL_MS else 'NOT met'}"
    print(f"load average {load:.2f}; person with {n_sessions} sessions over 52 weeks, next block of "
          f"{max(weeks)} weeks; {args.runs} runs each, medians")
    print(row("reassess + next block, first look", first) + goal(first))
    print(row("bare store read (same set-up)", first_read) + f"   ratio {first[0] / first_read[0]:6.1f} x")
    print(row("reassess + next block, again", again) + goal(again))
    print(row("bare store read", again_read) + f"   ratio {again[0] / again_read[0]:6.1f} x")
    print(row("reassess stored (one transaction)", s))
    print(row("bare durable write + read", w) + f"   ratio {s[0] / w[0]:6.1f} x")
    print(f"caseload of {args.people} people with {n_retests} retests")
    print(row("caseload outcomes", o) + f"   ratio {o[0] / b[0]:5.2f} x (goal within {GOAL_RATIO:g} x: "
          f"{'met' if o[0] / b[0] <= GOAL_RATIO else 'NOT met'})")
    print(row("reading their retests", b))


if __name__ == "__main__":
    main()
