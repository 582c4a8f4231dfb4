"""Benchmark: vectorised dose models against a plain-Python loop measured in the same run.

Prints the time of each and the speed-up ratio for a caseload-sized batch of sessions
(daily osteogenic index with bouts and a recovery gap; landing peak force).  Run:
``.venv/bin/python benchmarks/bench_dose.py [N]``.
"""

from __future__ import annotations

import math
import sys
import time

import numpy as np

from prescribe.loading.dose import RECOVERY_TAU_HOURS, daily_osteogenic_index
from prescribe.loading.mechanics import landing_peak_grf_bw


def loop_daily_oi(grf, cycles, bouts, gaps):
    """Baseline: the same model, one session at a time in pure Python."""
    out = []
    for g, n, gap in zip(grf, cycles, gaps):
        r = 1.0 - math.exp(-gap / RECOVERY_TAU_HOURS)
        base, extra = divmod(int(n), bouts)
        carried, total = 0.0, 0.0
        for k in range(bouts):
            nk = base + (1 if k < extra else 0)
            w = 1.0 if k == 0 else r
            total += g * (w * math.log1p(nk) + (1 - w) * (math.log1p(carried + nk) - math.log1p(carried)))
            carried = nk + (1 - r) * carried
        out.append(total)
    return np.array(out)


def loop_landing(h, t):
    return np.array([math.pi / 2 * (math.sqrt(2 * 9.80665 * hh) / (9.80665 * tt) + 1) for hh, tt in zip(h, t)])


def timed(fn, *args):
    start = time.perf_counter()
    result = fn(*args)
    return result, time.perf_counter() - start


def main(n: int = 200_000) -> None:
    rng = np.random.default_rng(7)
    grf = rng.uniform(1.0, 5.5, n)
    cycles = rng.integers(0, 400, n)
    gaps = rng.uniform(0, 12, n)
    vec, t_vec = timed(daily_osteogenic_index, grf, cycles, 4, gaps)
    ref, t_loop = timed(loop_daily_oi, grf.tolist(), cycles.tolist(), 4, gaps.tolist())
    assert np.allclose(vec, ref)
    print(f"daily_osteogenic_index, {n} sessions x 4 bouts: vectorised {t_vec * 1e3:.1f} ms, "
          f"python loop {t_loop * 1e3:.1f} ms, speed-up x{t_loop / t_vec:.1f}")
    h = rng.uniform(0.05, 0.4, n)
    t = rng.uniform(0.08, 0.3, n)
    vec, t_vec = timed(landing_peak_grf_bw, h, t)
    ref, t_loop = timed(loop_landing, h.tolist(), t.tolist())
    assert np.allclose(vec, ref)
    print(f"landing_peak_grf_bw, {n} landings: vectorised {t_vec * 1e3:.1f} ms, "
          f"python loop {t_loop * 1e3:.1f} ms, speed-up x{t_loop / t_vec:.1f}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 200_000)
