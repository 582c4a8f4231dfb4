"""Store benchmark: the cost of opening a current store, and of a durable save.

Prints two ratios measured in the same run on the same machine:

- opening a store already at the newest revision (our fast path) against the same open
  that runs Alembic's upgrade check on every open instead (the baseline), per open;
- a program save with ``synchronous=FULL`` (what the store uses) against
  ``synchronous=NORMAL`` (the baseline), per save: the price of durability across
  power loss.

Then the same store operations on both backends side by side, measured alike in the same
run: SQLite (WAL, synchronous=FULL) and PostgreSQL (a private server on 127.0.0.1 started
for the run, fsync on, tests/pg_server.py), median ms each, with the ratio PostgreSQL/SQLite.

Invented data only.  Run: ``.venv/bin/python benchmarks/bench_store.py``.
"""

from __future__ import annotations

import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

from prescribe.store import api, engine, open_store  # noqa: E402
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
    engine.SQLITE_SYNCHRONOUS = synchronous
    try:
        with open_store(str(folder / f"sync-{synchronous}.db")) as store:
            store.save_patient(record(), screening())
            state = {"v": None}
            body = plan()

            def save():
                state["v"] = store.save_program("TEST-0001", body, "bench", state["v"])

            return _median_ms(save, n)
    finally:
        engine.SQLITE_SYNCHRONOUS = "FULL"


def _operations_ms(url: str, n: int = 30) -> dict[str, float]:
    """Median ms of the store's everyday operations on one backend."""
    from prescribe.planning import build_plan
    open_store(url).close()
    with open_store(url) as store:
        for i in range(50):
            store.save_patient(record(f"SIDE-{i:02d}"), screening(f"SIDE-{i:02d}"), clinician="bench")
        state = {"v": None, "r": store.record_version("SIDE-00"), "falls": 0}

        def save_program():
            state["v"] = store.save_program("SIDE-00", body, "bench", state["v"])

        def save_record():
            state["falls"] = (state["falls"] + 1) % 50
            out = store.save_patient(record("SIDE-00", falls_past_year=state["falls"]), screening("SIDE-00"),
                                     "bench", based_on_version=state["r"])
            state["r"] = out["record_version"]

        out = {"open a current store": _median_ms(lambda: open_store(url).close(), n),
               "save a person (record + screening)": _median_ms(save_record, n)}
        # The program is the planner's, built from the record as it is now stored (the record edits
        # above may have made the person one to refer: the planner then marks the program a draft),
        # so every save passes the store's safety check as a clinic's would.
        body = build_plan(store.get_patient("SIDE-00"), created="2026-01-05T09:00:00+00:00")
        out.update({
            "save a program version": _median_ms(save_program, n),
            "read a program": _median_ms(lambda: store.get_program("SIDE-00"), n),
            "list 50 people": _median_ms(store.list_patients, n),
            "export a person": _median_ms(lambda: store.export_patient("SIDE-00"), n),
        })
        return out


def side_by_side() -> None:
    from pg_server import PgServer, PgUnavailable
    with tempfile.TemporaryDirectory() as tmp:
        sqlite = _operations_ms(str(Path(tmp) / "side.db"))
    try:
        with PgServer(fsync=True) as server:
            pg = _operations_ms(server.url)
    except PgUnavailable as exc:
        print(f"PostgreSQL not available here ({exc}); the side-by-side table is SQLite only")
        pg = {}
    print(f"{'operation (median ms)':<38} {'SQLite':>8} {'PostgreSQL':>11} {'PG/SQLite':>10}")
    for op, ms in sqlite.items():
        if op in pg:
            print(f"{op:<38} {ms:>8.2f} {pg[op]:>11.2f} {pg[op] / ms:>9.2f}x")
        else:
            print(f"{op:<38} {ms:>8.2f} {'-':>11} {'-':>10}")


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
    side_by_side()
    return 0


if __name__ == "__main__":
    sys.exit(main())
