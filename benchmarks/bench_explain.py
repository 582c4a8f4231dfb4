"""Benchmark: `explain_exercise` against a bare catalogue lookup measured alike in the same run.

Goal: one explanation in under 5 ms (the app redraws the panel on every pick).  Both sides
are timed the same way: each call of each catalogue entry timed on its own with
time.perf_counter, after a warm-up, over several rounds; the median of those per-call
times is printed with the ratio.  The stress-strain picture and force bars (the data the
app and the handout draw), and their SVG, are timed alike.  Run: ``.venv/bin/python benchmarks/bench_explain.py [ROUNDS]``.
"""

from __future__ import annotations

import statistics
import sys
import time

from prescribe.catalogue import default_catalogue
from prescribe.explain import explain_exercise, force_bars, stress_strain_picture
from prescribe.handout.explain_figures import explanation_figures

GOAL_MS = 5.0


def per_call_ms(fn, ids, rounds: int) -> list[float]:
    times = []
    for _ in range(rounds):
        for exercise_id in ids:
            start = time.perf_counter()
            fn(exercise_id)
            times.append((time.perf_counter() - start) * 1e3)
    return times


def main(rounds: int = 40) -> None:
    cat = default_catalogue()
    ids = cat.ids

    def lookup(exercise_id):
        return cat.get(exercise_id)

    def explain(exercise_id):
        return explain_exercise(exercise_id, body_mass_kg=64.0, t_score=-2.6, catalogue=cat)

    def explain_and_pictures(exercise_id):
        r = explain(exercise_id)
        return stress_strain_picture(r), force_bars(r)

    def explain_and_svg(exercise_id):
        return explanation_figures(explain(exercise_id))

    for fn in (lookup, explain, explain_and_pictures, explain_and_svg):  # warm-up: imports, caches
        per_call_ms(fn, ids, 1)
    base = statistics.median(per_call_ms(lookup, ids, rounds))
    exp = statistics.median(per_call_ms(explain, ids, rounds))
    pics = statistics.median(per_call_ms(explain_and_pictures, ids, rounds))
    svg = statistics.median(per_call_ms(explain_and_svg, ids, rounds))
    n = rounds * len(ids)
    print(f"catalogue lookup (baseline): median {base * 1e3:.2f} us a call over {n} calls")
    print(f"explain_exercise: median {exp:.3f} ms a call, x{exp / base:.0f} the baseline; "
          f"goal under {GOAL_MS:g} ms: {'met' if exp < GOAL_MS else 'NOT met'}")
    print(f"explain_exercise + both pictures' data: median {pics:.3f} ms a call, x{pics / base:.0f} the baseline; "
          f"goal under {GOAL_MS:g} ms: {'met' if pics < GOAL_MS else 'NOT met'}")
    print(f"explain_exercise + both pictures drawn as SVG (the app's redraw): median {svg:.3f} ms a call, "
          f"x{svg / base:.0f} the baseline")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 40)
