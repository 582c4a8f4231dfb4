"""Synthetic worn-sensor signals with known impacts, made by the tests themselves.

A recording at ``rate_hz`` with the sensor still (1 g of gravity along z, or another
axis) and half-sine pulses added along z: pulse k has its highest sample exactly at
``times_s[k]`` with net height ``peaks_g[k]`` (the resultant there is 1 + peak).
"""

from __future__ import annotations

import numpy as np

#: 2026-03-02T00:00:00Z, a Monday (Unix time).
MONDAY_2026_03_02 = 1772409600.0


def recording(duration_s: float, peaks_g=(), times_s=(), rate_hz: float = 100.0, start_s: float = MONDAY_2026_03_02,
              noise_g: float = 0.0, gravity_axis: int = 2, seed: int = 7, still: list[tuple[float, float]] = ()):
    n = int(round(duration_s * rate_hz))
    k = np.arange(n)
    t = start_s + k / rate_hz
    acc = np.zeros((n, 3))
    acc[:, gravity_axis] = 1.0
    rng = np.random.default_rng(seed)
    if noise_g:
        acc += rng.normal(0.0, noise_g, size=acc.shape)
        # Still periods (the sensor off the body) have almost no movement.
        for a, b in still:
            sl = slice(int(a * rate_hz), int(b * rate_hz))
            acc[sl] = 0.0
            acc[sl, gravity_axis] = 1.0
            acc[sl] += rng.normal(0.0, 0.002, size=acc[sl].shape)
    shape = np.sin(np.pi * np.arange(1, 6) / 6.0)  # 5 samples, the middle one exactly 1
    for peak, at in zip(peaks_g, times_s):
        i = int(round(at * rate_hz))
        acc[i - 2:i + 3, :] = 0.0
        acc[i - 2:i + 3, 2] = 1.0 + peak * shape
    return t, acc
