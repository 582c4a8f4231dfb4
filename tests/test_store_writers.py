"""Eight clinicians' processes saving programs at once for a few seconds, on SQLite and on
PostgreSQL: every save a writer was told committed is stored with its own content, none is
lost or silently overwritten, racing saves are refused as conflicts (the benchmark
benchmarks/bench_store_writers.py runs the same for 60 s and prints the figures)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))

from bench_store_writers import run_writers  # noqa: E402


@pytest.mark.slow
def test_eight_writers_lose_and_overwrite_nothing(new_db, tmp_path):
    result = run_writers(new_db("writers"), writers=8, seconds=3.0, folder=str(tmp_path))
    assert result["writer_errors"] == 0, result["error_lines"]
    assert result["commits"] > 8  # every writer got saves in
    assert result["lost"] == result["overwritten"] == result["duplicate_versions"] == 0, result
    assert result["gaps"] == result["wrong_based_on"] == 0, result
    # four shared programs and eight writers: some saves raced and were refused, not merged
    assert result["conflicts_refused"] > 0, result
