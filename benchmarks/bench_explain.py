"""Benchmark: `explain_exercise` against a bare catalogue lookup measured alike in the same run.

Goal: one explanation in under 5 ms (the app redraws the panel on every pick).  Both sides
are timed the same way: each call of each catalogue entry timed on its own with
time.perf_counter, after a warm-up, over several rounds; the median of those per-call
times is printed with the ratio.  The stress-strain picture and force bars (the data the
app and the handout draw), and their SVG, are timed alike.  Run: ``.venv/bin/python benchmarks/bench_explain.py [ROUNDS]``.
"""

from __future__ import annotations

import os
import statistics
import sys
import time

from prescribe.catalogue import default_catalogue
from prescribe.loading.explain import explain_exercise, force_bars, stress_strain_picture
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
    n = rounds * len(ids)
    runs = {name: per_call_ms(fn, ids, rounds) for name, fn in (
        ("catalogue lookup (baseline)", lookup), ("explain_exercise", explain),
        ("explain_exercise + both pictures' data", explain_and_pictures),
        ("explain_exercise + both pictures drawn as SVG (the app's redraw)", explain_and_svg))}
    base = statistics.median(runs["catalogue lookup (baseline)"])
    for name, times in runs.items():
        med = statistics.median(times)
        line = (f"{name}: median {med:.4f} ms (min {min(times):.4f}, max {max(times):.3f}) a call over {n} calls, "
                f"x{med / base:.0f} the baseline")
        if name != "catalogue lookup (baseline)":
            line += f"; goal under {GOAL_MS:g} ms: {'met' if med < GOAL_MS else 'NOT met'}"
        print(line)
    print(f"machine load (1, 5, 15 min): {os.getloadavg()}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 40)
