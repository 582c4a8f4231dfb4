"""Benchmark: the one safety check on a 52-week plan, as a ratio to building that plan.

For N invented random records (default 200) the script builds a 52-week plan with
``build_plan`` and runs ``check_program`` on it, and prints the median time of each and
the ratio check / build.  Goal: under 0.25x, so the check can run at every door (each
app edit, each handout, each save) without being felt.

Both sides are measured alike: the same records, the same warm-up (every record's plan
built and checked once before timing; this also fills the re-screening cache both sides
share, as at every door after the first), the same number of repeats, CPU time of this
process (``time.process_time``, less disturbed by other work on a shared machine), the
median over records of each record's median repeat.  The check is timed with the record
re-screened from cold as well (``--cold``), as at the first door a plan meets.
Exits 0 either way (a benchmark, not a test).
Run: ``.venv/bin/python benchmarks/bench_safety.py [--records 200] [--repeats 5]``.
"""

from __future__ import annotations

import argparse
import random
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))

from bench_planner import invented_record  # noqa: E402
from prescribe import safety  # noqa: E402
from prescribe.catalogue import default_catalogue  # noqa: E402
from prescribe.plan_schema import parse_plan  # noqa: E402
from prescribe.planning import PlanOptions, build_plan  # noqa: E402
from prescribe.screening import screen  # noqa: E402

GOAL_RATIO = 0.25


def _median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.process_time()
        fn()
        times.append(time.process_time() - t0)
    return statistics.median(times)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--records", type=int, default=200, help="invented records (default 200)")
    ap.add_argument("--repeats", type=int, default=5, help="timed repeats of each side per record (default 5)")
    ap.add_argument("--cold", action="store_true", help="also time the check with a cold re-screening cache")
    ap.add_argument("--parsed", action="store_true",
                    help="also time the check on each plan read back from its JSON (as at the handout door, "
                         "where no exercise model is shared)")
    args = ap.parse_args(argv)

    rnd = random.Random(20261202)
    catalogue = default_catalogue()
    options = PlanOptions(weeks=52)
    cases = []
    for i in range(args.records):
        record = invented_record(rnd, i)
        cases.append((record, screen(record)))
    # Warm-up, the same for both sides.
    plans = []
    for record, screening in cases:
        plan = build_plan(record, screening, options, catalogue=catalogue)
        safety.check_program(plan, catalogue=catalogue)
        plans.append(plan)

    build_ms, check_ms, cold_ms, parsed_ms = [], [], [], []
    for (record, screening), plan in zip(cases, plans):
        build_ms.append(1000 * _median_time(lambda: build_plan(record, screening, options, catalogue=catalogue),
                                            args.repeats))
        check_ms.append(1000 * _median_time(lambda: safety.check_program(plan, catalogue=catalogue), args.repeats))
        if args.parsed:
            read = parse_plan(plan.model_dump(mode="json"))
            safety.check_program(read, catalogue=catalogue)
            parsed_ms.append(1000 * _median_time(lambda: safety.check_program(read, catalogue=catalogue),
                                                 args.repeats))
        if args.cold:
            def cold():
                safety._rescreen_json.cache_clear()
                safety.check_program(plan, catalogue=catalogue)
            cold_ms.append(1000 * _median_time(cold, args.repeats))

    b, c = statistics.median(build_ms), statistics.median(check_ms)
    ratio = c / b
    print(f"records: {args.records}, weeks: 52, repeats: {args.repeats}")
    print(f"build_plan median: {b:.2f} ms")
    print(f"check_program median: {c:.2f} ms")
    print(f"ratio check / build: {ratio:.3f}x (goal under {GOAL_RATIO}x) -> {'met' if ratio < GOAL_RATIO else 'NOT met'}")
    if args.parsed:
        pc = statistics.median(parsed_ms)
        print(f"check_program on the plan read from JSON: {pc:.2f} ms ({pc / b:.3f}x build)")
    if args.cold:
        cc = statistics.median(cold_ms)
        print(f"check_program with the record re-screened from cold: {cc:.2f} ms ({cc / b:.3f}x build)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
