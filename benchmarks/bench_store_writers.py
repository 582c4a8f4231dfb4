"""Many clinicians at once: 8 writer processes saving program versions for a fixed time.

Each writer saves versions of the programs of four invented people that all writers share
(so saves race on the same program), each save based on the latest version it read; a
racing save is refused (ConflictError) and retried from the new latest version.  Every
commit a writer was told about is logged with a marker unique to that save.  Afterwards
the store must hold every logged commit, with its own marker (nothing overwritten), the
versions of each person numbered 1..n without a gap, each based on the one before.

Prints, for PostgreSQL (a private server started for the run, fsync on) and for SQLite
(WAL, synchronous=FULL) measured alike in the same run: commits a second, conflicts
refused, lost and overwritten saves (both must be 0), and the ratio PostgreSQL/SQLite.

Run: ``.venv/bin/python benchmarks/bench_store_writers.py [--seconds 60] [--writers 8]``.
tests/test_store_writers.py runs the same check for a few seconds on both backends.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))

PEOPLE = [f"BENCH-{i}" for i in range(4)]


def _writer(url: str, writer: int, seconds: float, out: str) -> None:
    """One clinician's process: save, retry on conflict, log each commit until time is up."""
    from prescribe.errors import ConflictError
    from prescribe.store import open_store
    from test_store_support import plan

    fd = os.open(out, os.O_WRONLY | os.O_CREAT | os.O_APPEND)
    conflicts = saves = 0
    try:
        with open_store(url) as store:
            deadline = time.monotonic() + seconds
            while time.monotonic() < deadline:
                pid = PEOPLE[(writer + saves) % len(PEOPLE)]
                marker = f"w{writer}-s{saves}"
                latest = store.latest_program_version(pid)
                try:
                    version = store.save_program(pid, plan(pid, marker=marker), f"writer{writer}", latest)
                except ConflictError:
                    conflicts += 1
                    continue
                saves += 1
                os.write(fd, f"committed {pid} {version} {marker}\n".encode())
        os.write(fd, f"conflicts {conflicts}\n".encode())
    except BaseException as exc:  # reported to the parent
        os.write(fd, f"error {type(exc).__name__}: {exc}\n".encode())
        os._exit(1)
    finally:
        os.close(fd)


def run_writers(url: str, writers: int = 8, seconds: float = 60.0, folder: str | None = None) -> dict:
    """Run the writers against the store at ``url`` and check every save; returns the figures."""
    from prescribe.store import open_store
    from test_store_support import record, screening

    with open_store(url) as store:
        for pid in PEOPLE:
            if not store.has_patient(pid):
                store.save_patient(record(pid), screening(pid), clinician="setup")
    tmp = tempfile.TemporaryDirectory() if folder is None else None
    where = Path(folder or tmp.name)
    fork = multiprocessing.get_context("fork")
    outs = [where / f"writer-{w}.log" for w in range(writers)]
    started = time.monotonic()
    procs = [fork.Process(target=_writer, args=(url, w, seconds, str(out)), daemon=True) for w, out in enumerate(outs)]
    for p in procs:
        p.start()
    for p in procs:
        p.join(timeout=seconds + 120)
    elapsed = time.monotonic() - started
    committed: dict[tuple[str, int], str] = {}
    conflicts = errors = repeated = 0
    error_lines = []
    for p, out in zip(procs, outs):
        if p.exitcode != 0:
            errors += 1
        for line in out.read_text().splitlines() if out.exists() else []:
            parts = line.split()
            if parts[0] == "committed":
                key = (parts[1], int(parts[2]))
                repeated += key in committed
                committed[key] = parts[3]
            elif parts[0] == "conflicts":
                conflicts += int(parts[1])
            elif parts[0] == "error":
                error_lines.append(line)
    lost = overwritten = gaps = bad_base = 0
    with open_store(url) as store:
        for pid in PEOPLE:
            versions = store.program_versions(pid)
            numbers = [v["version"] for v in versions]
            gaps += numbers != list(range(1, len(numbers) + 1))
            bad_base += sum(1 for v in versions if v["based_on_version"] != (v["version"] - 1 or None))
            stored = {v["version"] for v in versions}
            for (p, version), marker in committed.items():
                if p != pid:
                    continue
                if version not in stored:
                    lost += 1
                elif store.get_program(pid, version).marker != marker:
                    overwritten += 1
    if tmp is not None:
        tmp.cleanup()
    return {"writers": writers, "seconds": round(elapsed, 1), "commits": len(committed),
            "commits_per_s": round(len(committed) / elapsed, 1), "conflicts_refused": conflicts,
            "lost": lost, "overwritten": overwritten, "duplicate_versions": repeated,
            "gaps": gaps, "wrong_based_on": bad_base, "writer_errors": errors, "error_lines": error_lines[:3]}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=60.0)
    parser.add_argument("--writers", type=int, default=8)
    args = parser.parse_args()
    from pg_server import PgServer, PgUnavailable

    results = {}
    with tempfile.TemporaryDirectory() as tmp:
        results["sqlite"] = run_writers(str(Path(tmp) / "writers.db"), args.writers, args.seconds)
    try:
        with PgServer(fsync=True) as server:
            results["postgresql"] = run_writers(server.url, args.writers, args.seconds)
    except PgUnavailable as exc:
        print(f"PostgreSQL not available here ({exc}); only SQLite was measured")
    print(f"{args.writers} writers saving programs of {len(PEOPLE)} shared people for {args.seconds:g} s each:")
    print(f"{'backend':<11} {'commits':>8} {'per s':>7} {'conflicts':>10} {'lost':>5} {'overwritten':>12} {'errors':>7}")
    for name, r in results.items():
        print(f"{name:<11} {r['commits']:>8} {r['commits_per_s']:>7} {r['conflicts_refused']:>10} {r['lost']:>5} "
              f"{r['overwritten']:>12} {r['writer_errors']:>7}")
        for line in r["error_lines"]:
            print(f"  {name}: {line}")
    if "postgresql" in results:
        ratio = results["postgresql"]["commits_per_s"] / max(results["sqlite"]["commits_per_s"], 1e-9)
        print(f"ratio PostgreSQL/SQLite commits per second: {ratio:.2f}")
    bad = [n for n, r in results.items() if r["lost"] or r["overwritten"] or r["duplicate_versions"] or r["gaps"]
           or r["wrong_based_on"] or r["writer_errors"]]
    if bad:
        print(f"FAILED on {', '.join(bad)}: a save was lost, overwritten or misnumbered")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
