"""Benchmark: counting impacts in a week of 100 Hz tri-axial data, against the reader alone.

Writes a synthetic 7-day, 100 Hz recording (about 60 million samples; made here: still
nights, walking-like days with a few jumps) as the documented CSV in a temporary folder,
then in one run measures

* in one pass, the CPU time spent fetching the reader's chunks (parsing and converting)
  and the CPU time spent counting them (peaks, refractory grouping, non-wear, days): the
  ratio is the goal's figure, unaffected by other programs on a shared machine;
* for the record, the wall clock of the reader alone and of the whole summary,
  alternated twice with the fastest of each kept.  It also checks
the counts against what was written (2 steps a second for 12 h a day, 30 jumps a day).

It prints both times, the counting's share of the reader's time (goal: at most 0.5x),
and the process's peak memory against the size of the samples as float64 (goal: the
chunks keep it bounded, far below the whole recording).  Run:
``.venv/bin/python benchmarks/bench_sensor.py [HOURS]`` (default 168 = 7 days).
"""

from __future__ import annotations

import resource
import shutil
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

from prescribe.sensor import summarise_file
from prescribe.sensor.readers import CHUNK_ROWS, open_recording

RATE_HZ = 100
#: Rounds of (reader alone, reader + counting), alternated.
ROUNDS = 2
ROW_BYTES = 31  # "tttttt.tt,+x.xxx,+y.yyy,+z.zzz\n"


def _digits(values: np.ndarray, width: int) -> np.ndarray:
    powers = 10 ** np.arange(width - 1, -1, -1, dtype=np.int64)
    return ((values[:, None] // powers) % 10 + 48).astype(np.uint8)


def _signal(k: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Acceleration [g] of samples k: 0.02 g noise, steps at 2 Hz from 08:00 to 20:00 with
    peaks 0.4-2.4 g net changing each minute, 30 jumps of about 4.5 g net an hour at 10:00,
    and still nights (non-wear)."""
    t = k / RATE_HZ
    hour = (t / 3600.0) % 24
    day = (hour >= 8) & (hour < 20)
    acc = np.zeros((k.size, 3))
    acc[:, 2] = 1.0
    acc[day] += rng.normal(0.0, 0.02, size=(int(day.sum()), 3))
    acc[~day] += rng.normal(0.0, 0.002, size=(int((~day).sum()), 3))
    minute = np.floor(t / 60.0)
    amplitude = 0.4 + 2.0 * ((minute * 0.6180339887) % 1.0)
    steps = np.maximum(np.sin(2 * np.pi * 2.0 * t), 0.0) ** 20
    acc[:, 2] += np.where(day, amplitude * steps, 0.0)
    jumps = (hour >= 10) & (hour < 11) & ((t % 120.0) < 1.0)
    acc[:, 2] += np.where(jumps, 4.5 * np.maximum(np.sin(2 * np.pi * 1.0 * t), 0.0) ** 20, 0.0)
    return acc


def write_week(path: Path, hours: float) -> int:
    """Write the synthetic recording as CSV, a chunk at a time; returns the sample count."""
    n = int(hours * 3600 * RATE_HZ)
    rng = np.random.default_rng(2026)
    with open(path, "wb") as fh:
        fh.write(b"time_s,x_g,y_g,z_g\n")
        for start in range(0, n, CHUNK_ROWS):
            k = np.arange(start, min(start + CHUNK_ROWS, n), dtype=np.int64)
            acc = np.clip(_signal(k, rng), -9.999, 9.999)
            rows = np.empty((k.size, ROW_BYTES), dtype=np.uint8)
            rows[:, 0:6] = _digits(k // 100, 6)
            rows[:, 6] = ord(".")
            rows[:, 7:9] = _digits(k % 100, 2)
            for j in range(3):
                col = 9 + 7 * j
                milli = np.round(acc[:, j] * 1000).astype(np.int64)
                rows[:, col] = ord(",")
                rows[:, col + 1] = np.where(milli < 0, ord("-"), ord("+"))
                a = np.abs(milli)
                rows[:, col + 2] = (a // 1000 + 48).astype(np.uint8)
                rows[:, col + 3] = ord(".")
                rows[:, col + 4:col + 7] = _digits(a % 1000, 3)
            rows[:, 30] = ord("\n")
            fh.write(rows.tobytes())
    return n


def read_only(path: Path) -> tuple[float, int]:
    t0 = time.perf_counter()
    n = 0
    for t, acc in open_recording(path).chunks:
        n += t.size
    return time.perf_counter() - t0, n


def instrumented(path: Path) -> tuple[float, float, dict]:
    """One pass, CPU seconds of this process split between fetching the reader's chunks
    and counting them (feed + finish): the same data, the same run, and time spent
    waiting for other programs on a shared machine left out."""
    from prescribe.sensor.summary import ImpactCounter

    clock = time.process_time
    read_s = count_s = 0.0
    counter = ImpactCounter(64.0, "hip")
    chunks = iter(open_recording(path).chunks)
    while True:
        t0 = clock()
        try:
            t, acc = next(chunks)
        except StopIteration:
            read_s += clock() - t0
            break
        t1 = clock()
        counter.feed(t, acc)
        t2 = clock()
        read_s += t1 - t0
        count_s += t2 - t1
    t3 = clock()
    summary = counter.finish()
    count_s += clock() - t3
    return read_s, count_s, summary


def main(hours: float = 168.0) -> int:
    folder = Path(tempfile.mkdtemp(prefix="bench-sensor-"))
    try:
        path = folder / "week.csv"
        t0 = time.perf_counter()
        n = write_week(path, hours)
        print(f"wrote {n:,} samples ({hours:g} h at {RATE_HZ} Hz, {path.stat().st_size / 1e9:.2f} GB) "
              f"in {time.perf_counter() - t0:.1f} s")
        # 1. CPU time of one pass, split between the reader and the counting.
        read_cpu, count_cpu, summary = instrumented(path)
        assert summary["samples"] == n
        ratio = count_cpu / read_cpu
        # 2. Wall clock, end to end, for the record: alternated, fastest of each kept.
        reads, fulls = [], []
        for _ in range(ROUNDS):
            seconds, count = read_only(path)
            assert count == n, (count, n)
            reads.append(seconds)
            t1 = time.perf_counter()
            assert summarise_file(path, start="2026-03-02", body_mass_kg=64)["samples"] == n
            fulls.append(time.perf_counter() - t1)
        peak_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        data_mb = n * 4 * 8 / 1e6
        print(f"CPU time in one pass: reader {read_cpu:.1f} s, counting {count_cpu:.1f} s = {ratio:.2f}x the "
              f"reader's time (goal: at most 0.5x) -> {'OK' if ratio <= 0.5 else 'OVER'}")
        print(f"wall clock: reader alone {', '.join(f'{x:.1f}' for x in reads)} s; reader + counting "
              f"{', '.join(f'{x:.1f}' for x in fulls)} s (fastest of each: counting adds "
              f"{min(fulls) / min(reads) - 1:.2f}x the reader's time)")
        print(f"peak memory {peak_mb:.0f} MB for {data_mb:.0f} MB of samples as float64 "
              f"({peak_mb / data_mb:.2f}x; chunks of {CHUNK_ROWS:,} rows)")
        days = hours / 24.0
        expected_steps = int(round(n / RATE_HZ / 86400 * 12 * 3600 * 2)) if hours % 24 == 0 else None
        if expected_steps is not None:
            assert summary["impacts"] == expected_steps, (summary["impacts"], expected_steps)
            assert summary["impacts_above_4g"] == int(30 * days), summary["impacts_above_4g"]
        print(f"impacts {summary['impacts']:,}, days {len(summary['days'])}, wear {summary['wear_time_h']} h, "
              f"non-wear {summary['nonwear_time_h']} h, above 4 g {summary['impacts_above_4g']:,}")
        return 0 if ratio <= 0.5 else 1
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main(float(sys.argv[1]) if len(sys.argv) > 1 else 168.0))
