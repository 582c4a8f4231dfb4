"""Store benchmark: the cost of opening a current store, and of a durable save.

Prints two ratios measured in the same run on the same machine:

- opening a store already at the newest revision (our fast path) against the same open
  that runs Alembic's upgrade check on every open instead (the baseline), per open;
- a program save with ``synchronous=FULL`` (what the store uses) against
  ``synchronous=NORMAL`` (the baseline), per save: the price of durability across
  power loss.

Invented data only.  Run: ``.venv/bin/python benchmarks/bench_store.py``.
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from prescribe.store import api, open_store  # noqa: E402
from test_store_support import plan, record, screening  # noqa: E402


def _median_ms(fn, n: int) -> float:
    times = []
    for _ in range(n):
        t0 = time.perf_counter()
        fn()
        times.append((time.perf_counter() - t0) * 1000)
    return statistics.median(times)


def _open_fast(path: str) -> None:
    open_store(path).close()


class _CheckEveryOpen(api.Store):
    """The real alternative to our fast path: a store that hands every open to Alembic's
    upgrade-to-head (a no-op at head, but it reads the scripts and the version table inside a
    write transaction), as a store without the fast path would."""

    def _migrate(self, revision) -> None:
        from alembic import command
        from alembic.config import Config

        with self._write() as conn:
            cfg = Config()
            cfg.set_main_option("script_location", str(api.MIGRATIONS_DIR))
            cfg.attributes["connection"] = conn
            command.upgrade(cfg, api.HEAD_REVISION)


def _open_with_alembic_check(path: str) -> None:
    _CheckEveryOpen(api.db_url(path)).close()


def _saves_ms(folder: Path, synchronous: str, n: int = 40) -> float:
    api.SQLITE_SYNCHRONOUS = synchronous
    try:
        with open_store(str(folder / f"sync-{synchronous}.db")) as store:
            store.save_patient(record(), screening())
            state = {"v": None}
            body = plan()

            def save():
                state["v"] = store.save_program("TEST-0001", body, "bench", state["v"])

            return _median_ms(save, n)
    finally:
        api.SQLITE_SYNCHRONOUS = "FULL"


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        path = str(folder / "open.db")
        open_store(path).close()
        _open_with_alembic_check(path)  # warm both paths' imports
        fast = _median_ms(lambda: _open_fast(path), 30)
        slow = _median_ms(lambda: _open_with_alembic_check(path), 30)
        print(f"open current store (median of 30 each, both warmed): fast path {fast:.2f} ms, "
              f"Alembic check on every open {slow:.2f} ms (ratio check/fast {slow / fast:.2f}x)")
        full = _saves_ms(folder, "FULL")
        normal = _saves_ms(folder, "NORMAL")
        print(f"program save: synchronous=FULL {full:.2f} ms, NORMAL {normal:.2f} ms "
              f"(FULL costs {full / normal:.2f}x)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
