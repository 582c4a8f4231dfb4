"""Benchmark: how long one plan takes to build, against a baseline measured in the same run.

Builds plans for N invented random records (default 10,000; screened beforehand, so
the figure is the planner's own time) and prints the median time of one
``build_plan`` call.  Goal (issue 4): under 5 ms a plan on a 2-core machine.

Baseline, measured in the same run on the same plans: ``parse_plan`` of each plan's
JSON, that is pydantic validating a plan file of the same size.  The ratio
(build / baseline) says how the planner compares with merely reading its output back,
which moves with the machine much less than the raw figure.

Timing is CPU time of this process (``time.process_time``), so other work on a shared
machine disturbs it less.  Exits 0 either way (a benchmark, not a test).
Run: ``.venv/bin/python benchmarks/bench_planner.py [--plans 10000]``.
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

from prescribe.plan_schema import parse_plan  # noqa: E402
from prescribe.planning import build_plan  # noqa: E402
from prescribe.records import CONDITIONS, FRACTURE_SITES, parse_record  # noqa: E402
from prescribe.planning.templates import load_template  # noqa: E402
from prescribe.safety import TemplateCaps, derive_limits  # noqa: E402
from prescribe.screening import screen  # noqa: E402

GOAL_MS = 5.0
GOAL_WHY_RATIO = 1.25


def invented_record(rnd: random.Random, i: int):
    """A random invented adult of a bone-health caseload (no real person)."""
    t = lambda: round(rnd.uniform(-4.0, 0.5), 1)  # noqa: E731
    data = {
        "patient_id": f"BENCH-{i:05d}", "age_years": rnd.randint(45, 92),
        "sex": rnd.choice(["female", "female", "male"]),
        "body_mass_kg": round(rnd.uniform(42, 110), 1), "height_cm": round(rnd.uniform(145, 190), 1),
        "t_scores": {"lumbar_spine": t(), "femoral_neck": t()},
        "fractures": [{"site": rnd.choice(list(FRACTURE_SITES)), "months_ago": rnd.randint(1, 240),
                       "low_trauma": rnd.random() < 0.7} for _ in range(rnd.choice([0, 0, 0, 1, 2]))],
        "falls_past_year": rnd.choice([0, 0, 0, 1, 2]),
        "timed_up_and_go_s": round(rnd.uniform(6, 20), 1),
        "conditions": rnd.sample(list(CONDITIONS), rnd.choice([0, 0, 1])),
        "pain_score": rnd.choice([0, 1, 2, 3, 6]),
    }
    return parse_record(data)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--plans", type=int, default=10_000, help="plans to build (default 10000)")
    ap.add_argument("--baseline-every", type=int, default=10,
                    help="time the baseline on every k-th plan (default 10)")
    args = ap.parse_args(argv)
    rnd = random.Random(20261201)
    people = [invented_record(rnd, i) for i in range(args.plans)]
    screenings = [screen(p) for p in people]
    build_plan(people[0], screenings[0])  # warm-up: catalogue, templates, imports

    clock = time.process_time
    build_s, base_s, bare_s, limits_s = [], [], [], []
    for i, (person, screening) in enumerate(zip(people, screenings)):
        # Interleaved, so the machine's load falls on both alike: the plan as built today (limits and
        # a why on every exercise), and the plan without the reasons and without the limits' derivation.
        t0 = clock()
        plan = build_plan(person, screening, created="2026-12-01T00:00:00+00:00")
        build_s.append(clock() - t0)
        t0 = clock()
        build_plan(person, screening, created="2026-12-01T00:00:00+00:00", _explain=False)
        bare = clock() - t0
        t0 = clock()
        derive_limits(person, TemplateCaps.of(load_template(plan.template.name)), screenings=(screening,),
                      screened=True)   # as the builder derives them (build_plan has just screened the record)
        limits_s.append(clock() - t0)
        bare_s.append(bare - limits_s[-1])
        if i % args.baseline_every == 0:
            data = plan.model_dump(mode="json")
            t0 = clock()
            parse_plan(data)
            base_s.append(clock() - t0)
    median = statistics.median(build_s) * 1e3
    base = statistics.median(base_s) * 1e3
    bare = statistics.median(bare_s) * 1e3
    p90 = statistics.quantiles(build_s, n=10)[-1] * 1e3
    print(f"plans built: {len(build_s)}")
    print(f"median build_plan: {median:.2f} ms (90th percentile {p90:.2f} ms); goal < {GOAL_MS:g} ms: "
          f"{'met' if median < GOAL_MS else 'NOT met'}")
    print(f"median limits derivation alone: {statistics.median(limits_s) * 1e3:.2f} ms")
    print(f"median plan without limits and why (the plan as it was built before them): {bare:.2f} ms")
    print(f"ratio plan + limits + why / plan without them: {median / bare:.2f}x (goal: within "
          f"{GOAL_WHY_RATIO:g}x) -> {'MET' if median / bare <= GOAL_WHY_RATIO else 'NOT MET'}")
    print(f"baseline, median parse_plan of the same plans' JSON: {base:.2f} ms")
    print(f"ratio build / baseline: {median / base:.2f}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
