"""The store under stress: writers killed with SIGKILL mid-save, four processes
writing at once, and concurrent clinicians racing on one program or one person.

Every test here runs on SQLite and on a real PostgreSQL server (the ``new_db``
fixture of tests/conftest.py).  A save that a writer reported as committed must be
in the store afterwards, the store must pass its integrity check (SQLite's
``PRAGMA integrity_check``; on PostgreSQL, no duplicate or orphaned rows), and no
writer may fail with "database is locked".  All people here are invented.
"""

from __future__ import annotations

import os
import random
import signal
import sqlite3
import subprocess
import time
from collections import defaultdict
from pathlib import Path

import pytest

from prescribe.store import HEAD_REVISION, open_store
from test_store_support import PYTHON, python_env

TESTS = Path(__file__).resolve().parent

#: A writer process: saves program versions for one person in a loop (forever when
#: COUNT is 0) and prints "committed PID VERSION" after each commit returns.
WRITER = r"""
import sys
from prescribe.errors import ConflictError
from prescribe.store import HEAD_REVISION, open_store
from test_store_support import plan, record, screening

db, pid, count, mode = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4]
store = open_store(db)
if not store.has_patient(pid):
    store.save_patient(record(pid), screening(pid), clinician=pid)
done = conflicts = 0
while count == 0 or done < count:
    if mode == "shared":  # also append a screening to one person every writer shares
        store.save_patient(record("SHARED-1"), screening("SHARED-1"), clinician=pid)
    latest = store.latest_program_version(pid)
    try:
        version = store.save_program(pid, plan(pid, marker=f"{pid}:{done}"), pid, latest)
    except ConflictError:
        conflicts += 1
        continue
    done += 1
    print(f"committed {pid} {version}", flush=True)
print(f"conflicts {conflicts}", flush=True)
"""


def _env() -> dict:
    env = python_env()
    env["PYTHONPATH"] = str(TESTS) + os.pathsep + env["PYTHONPATH"]
    return env


def _start(db: Path, pid: str, count: int, out: Path, mode: str = "own") -> subprocess.Popen:
    return subprocess.Popen([PYTHON, "-c", WRITER, str(db), pid, str(count), mode],
                            stdout=open(out, "w"), stderr=open(out.with_suffix(".err"), "w"), env=_env())


def _committed(out: Path) -> list[tuple[str, int]]:
    rows = []
    for line in out.read_text().splitlines():
        parts = line.split()
        if len(parts) == 3 and parts[0] == "committed":  # a line cut by the kill has no newline-ended twin
            rows.append((parts[1], int(parts[2])))
    return rows


def _integrity(db) -> str:
    db = str(db)
    if "://" not in db:
        conn = sqlite3.connect(db)
        try:
            return conn.execute("PRAGMA integrity_check").fetchone()[0]
        finally:
            conn.close()
    from sqlalchemy import create_engine, text
    engine = create_engine(db)
    try:
        with engine.connect() as conn:
            dup = conn.execute(text("SELECT count(*) FROM (SELECT patient_id, version FROM program_versions "
                                    "GROUP BY patient_id, version HAVING count(*) > 1) d")).scalar()
            orphans = conn.execute(text("SELECT count(*) FROM program_versions v LEFT JOIN people p "
                                        "ON p.patient_id = v.patient_id WHERE p.patient_id IS NULL")).scalar()
    finally:
        engine.dispose()
    return "ok" if dup == orphans == 0 else f"{dup} duplicate versions, {orphans} orphaned versions"


def _alive(proc) -> bool:
    return proc.poll() is None if isinstance(proc, subprocess.Popen) else proc.is_alive()


def _err_text(out: Path) -> str:
    for err in (out.with_suffix(".err"), Path(str(out) + ".err")):
        if err.exists():
            return err.read_text()
    return ""


def _wait_for_first_commit(procs_outs, timeout_s: float = 30.0) -> None:
    deadline = time.monotonic() + timeout_s
    pending = list(procs_outs)
    while pending and time.monotonic() < deadline:
        for proc, out in list(pending):
            if out.exists() and "committed" in out.read_text():
                pending.remove((proc, out))
            elif not _alive(proc):
                pytest.fail(f"writer exited early: {_err_text(out)}")
        time.sleep(0.01)
    assert not pending, "writers did not commit within the time limit"


def _forked_writer(db: str, pid: str, out: str) -> None:
    """Body of a forked writer: the same loop as WRITER, reporting through a file.

    Forking (rather than starting a new interpreter) lets each round begin saving
    within milliseconds, so many kill rounds fit in a few seconds.  The engine is
    created in the child, never shared with the parent.
    """
    fd = os.open(out, os.O_WRONLY | os.O_CREAT | os.O_APPEND)
    try:
        from test_store_support import plan
        store = open_store(db)
        done = 0
        while True:
            latest = store.latest_program_version(pid)
            version = store.save_program(pid, plan(pid, marker=f"{pid}:{done}"), pid, latest)
            done += 1
            os.write(fd, f"committed {pid} {version}\n".encode())  # one write: a whole line or nothing
    except BaseException as exc:  # reported to the parent through the .err file
        with open(out + ".err", "w") as fh:
            fh.write(f"{type(exc).__name__}: {exc}")
        os._exit(1)


@pytest.mark.slow
def test_writers_killed_with_sigkill_lose_no_reported_commit(tmp_path, new_db):
    import multiprocessing

    from test_store_support import record, screening
    db = new_db("kill")
    writers, rounds = 2, 25
    with open_store(str(db)) as store:
        for w in range(writers):
            store.save_patient(record(f"KILL-{w}"), screening(f"KILL-{w}"))
    fork = multiprocessing.get_context("fork")
    rng = random.Random(5150)
    reported: dict[str, set[int]] = defaultdict(set)
    for rnd in range(rounds):
        runs = []
        for w in range(writers):
            out = tmp_path / f"r{rnd}-w{w}.out"
            proc = fork.Process(target=_forked_writer, args=(str(db), f"KILL-{w}", str(out)), daemon=True)
            proc.start()
            runs.append((proc, out))
        _wait_for_first_commit(runs)
        time.sleep(rng.uniform(0.0, 0.2))  # a random moment in the save loop
        for proc, _ in runs:
            os.kill(proc.pid, signal.SIGKILL)
        for proc, out in runs:
            proc.join(timeout=30)
            assert proc.exitcode == -signal.SIGKILL, Path(str(out) + ".err").read_text()
            for pid, version in _committed(out):
                reported[pid].add(version)
    assert _integrity(db) == "ok"
    with open_store(str(db)) as store:
        for pid, versions in reported.items():
            stored = [v["version"] for v in store.program_versions(pid)]
            assert stored == list(range(1, len(stored) + 1)), "versions are numbered without gaps"
            assert versions <= set(stored), f"reported commits missing for {pid}"
            # At most one save per round can commit without being reported (killed before printing).
            assert len(stored) - max(versions) <= rounds
            assert store.get_program(pid).patient_id == pid
    assert sum(len(v) for v in reported.values()) >= rounds * writers


#: A process that creates a fresh store and stops for good right after the K-th CREATE TABLE
#: of the migrations has run (inside the migration's one transaction), after writing a marker
#: file, so the test's SIGKILL lands while the migration is in progress, every time.
CREATOR = r"""
import sys, time
from pathlib import Path
from sqlalchemy import event
from sqlalchemy.engine import Engine
db, k, marker = sys.argv[1], int(sys.argv[2]), Path(sys.argv[3])
seen = []

@event.listens_for(Engine, "after_cursor_execute")
def _pause(conn, cursor, statement, parameters, context, executemany):
    if statement.lstrip().upper().startswith("CREATE TABLE"):
        seen.append(statement.split("(")[0].split()[-1])
        if len(seen) == k:
            partial = marker.with_suffix(".partial")  # written whole, then renamed: never read half-written
            partial.write_text(f"in transaction: {conn.in_transaction()}; created {seen[-1]}")
            partial.replace(marker)
            time.sleep(600)

from prescribe.store import open_store
open_store(db).close()
marker.write_text("finished")
"""


def _create_table_count(db: str) -> int:
    """How many CREATE TABLE statements the migrations run on a fresh store."""
    from sqlalchemy import event
    from sqlalchemy.engine import Engine

    seen: list[str] = []

    def count(conn, cursor, statement, parameters, context, executemany):
        if statement.lstrip().upper().startswith("CREATE TABLE"):
            seen.append(statement)

    event.listen(Engine, "after_cursor_execute", count)
    try:
        open_store(db).close()
    finally:
        event.remove(Engine, "after_cursor_execute", count)
    return len(seen)


def test_a_fresh_store_killed_while_being_created_still_opens(tmp_path, new_db):
    """Migrations run in one transaction: a kill during creation leaves nothing half-made.

    The creating process pauses after the first, a middle and the last CREATE TABLE of the
    migrations (a marker file says it is inside the transaction) and is killed there.
    """
    total = _create_table_count(new_db("count"))
    assert total >= 3
    for k in sorted({1, total // 2, total}):
        db, marker = new_db(f"new-{k}"), tmp_path / f"marker-{k}"
        proc = subprocess.Popen([PYTHON, "-c", CREATOR, str(db), str(k), str(marker)], env=_env(),
                                stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        deadline = time.monotonic() + 60
        while not marker.exists() and proc.poll() is None and time.monotonic() < deadline:
            time.sleep(0.02)
        assert proc.poll() is None, proc.stderr.read().decode()
        text = marker.read_text()
        # The kill lands where it claims to: mid-migration, inside the open transaction.
        assert text.startswith("in transaction: True"), text
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
        assert proc.returncode == -signal.SIGKILL
        with open_store(str(db)) as store:
            assert store.list_patients() == []
            assert store.revision() is not None
        assert _integrity(db) == "ok"


def test_four_processes_writing_at_once_lose_nothing(tmp_path, new_db):
    db = new_db("four")
    open_store(str(db)).close()
    n = 25
    runs = [(_start(db, f"FOUR-{w}", n, tmp_path / f"w{w}.out", mode="shared"), tmp_path / f"w{w}.out")
            for w in range(4)]
    for proc, out in runs:
        assert proc.wait(timeout=120) == 0, out.with_suffix(".err").read_text()
        err = out.with_suffix(".err").read_text()
        assert "locked" not in err and "Traceback" not in err, err
        assert [v for _, v in _committed(out)] == list(range(1, n + 1))
    with open_store(str(db)) as store:
        for w in range(4):
            assert [v["version"] for v in store.program_versions(f"FOUR-{w}")] == list(range(1, n + 1))
        assert len(store.screenings("SHARED-1")) == 4 * n
        # each writer: its person and screening, then a shared screening and a program a loop;
        # plus the shared person once
        assert len(store.audit()) == 4 * (2 + 2 * n) + 1
    assert _integrity(db) == "ok"


def test_four_clinicians_racing_on_one_program_never_overwrite(tmp_path, new_db):
    """Every process saves versions of the SAME program, each based on the latest it
    read; racing saves are refused (ConflictError) and retried, so every version
    number is given exactly once and none is lost."""
    db = new_db("race")
    with open_store(str(db)) as store:
        from test_store_support import record, screening
        store.save_patient(record("RACE-1"), screening("RACE-1"))
    m = 12
    outs = [tmp_path / f"c{w}.out" for w in range(4)]
    procs = [subprocess.Popen([PYTHON, "-c", WRITER.replace("pid, latest)", "f'clin{sys.argv[5]}', latest)"),
                               str(db), "RACE-1", str(m), "own", str(w)],
                              stdout=open(out, "w"), stderr=open(out.with_suffix(".err"), "w"), env=_env())
             for w, out in enumerate(outs)]
    versions: list[int] = []
    for proc, out in zip(procs, outs):
        assert proc.wait(timeout=120) == 0, out.with_suffix(".err").read_text()
        assert "locked" not in out.with_suffix(".err").read_text()
        versions += [v for _, v in _committed(out)]
    assert sorted(versions) == list(range(1, 4 * m + 1))
    with open_store(str(db)) as store:
        stored = store.program_versions("RACE-1")
        assert [v["version"] for v in stored] == list(range(1, 4 * m + 1))
        assert all(v["based_on_version"] == v["version"] - 1 or v["version"] == 1 for v in stored)
        assert {v["clinician"] for v in stored} == {f"clin{w}" for w in range(4)}


#: A clinician process: edits ONE shared person's record again and again, each save based
#: on the record version it read; prints "committed VERSION FALLS" after each commit.
RECORD_EDITOR = r"""
import sys
from prescribe.errors import ConflictError
from prescribe.store import open_store
from test_store_support import record

db, who, count = sys.argv[1], sys.argv[2], int(sys.argv[3])
store = open_store(db)
done = conflicts = 0
while done < count:
    version = store.record_version("SAME-1")
    falls = int(who[1:]) * 100 + done
    try:
        saved = store.save_patient(record("SAME-1", falls_past_year=falls), None, who, based_on_version=version)
    except ConflictError:
        conflicts += 1
        continue
    done += 1
    print(f"committed {saved['record_version']} {falls}", flush=True)
print(f"conflicts {conflicts}", flush=True)
"""


def test_clinicians_saving_the_same_person_at_once_never_overwrite_silently(tmp_path, new_db):
    """Four processes change one person's record at once.  Every committed save was based
    on the version just before it (no change was lost under another), the rest were refused
    as conflicts, and the stored record is the last committed one."""
    from test_store_support import record
    db = new_db("same")
    with open_store(db) as store:
        store.save_patient(record("SAME-1"), None, "c0", based_on_version=0)
    m = 10
    outs = [tmp_path / f"e{w}.out" for w in range(4)]
    procs = [subprocess.Popen([PYTHON, "-c", RECORD_EDITOR, db, f"c{w + 1}", str(m)], stdout=open(out, "w"),
                              stderr=open(out.with_suffix(".err"), "w"), env=_env()) for w, out in enumerate(outs)]
    committed: dict[int, int] = {}
    for proc, out in zip(procs, outs):
        assert proc.wait(timeout=120) == 0, out.with_suffix(".err").read_text()
        for line in out.read_text().splitlines():
            if line.startswith("committed "):
                _, version, falls = line.split()
                assert int(version) not in committed, "a record version was given twice"
                committed[int(version)] = int(falls)
    assert sorted(committed) == list(range(2, 4 * m + 2))
    with open_store(db) as store:
        assert store.record_version("SAME-1") == 4 * m + 1
        assert store.get_patient("SAME-1").falls_past_year == committed[4 * m + 1]
        updates = [a for a in store.audit("SAME-1") if a["action"] == "person_updated"]
        assert [a["detail"]["record_version"] for a in updates] == list(range(2, 4 * m + 2))
        assert all(a["detail"]["based_on_version"] == a["detail"]["record_version"] - 1 for a in updates)
        # each update's replaced value is the value the previous commit stored: nothing vanished unseen
        for a in updates:
            previous = committed.get(a["detail"]["record_version"] - 1, record("SAME-1").falls_past_year)
            assert a["detail"]["previous"] == {"falls_past_year": previous}


def _fork_run(target, *args):
    import multiprocessing
    proc = multiprocessing.get_context("fork").Process(target=target, args=args, daemon=True)
    proc.start()
    return proc


def _open_and_save(db: str, pid: str, out: str) -> None:
    """Open a store that may not exist yet and save one person and two program versions."""
    try:
        from test_store_support import plan, record, screening
        with open_store(db) as store:
            store.save_patient(record(pid), screening(pid), clinician=pid)
            store.save_program(pid, plan(pid), pid, None)
            store.save_program(pid, plan(pid), pid, 1)
        Path(out).write_text("ok")
    except BaseException as exc:
        Path(out).write_text(f"{type(exc).__name__}: {exc}")
        os._exit(1)


def test_four_processes_creating_the_same_new_store_at_once(tmp_path, new_db):
    """All four find no file, race to create and migrate it: one migrates, the others
    wait for the lock, see the new schema and carry on; nobody sees "locked"."""
    for attempt in range(3):
        db = new_db(f"fresh-{attempt}/store")
        if "://" not in str(db):  # a named store's folder must exist (only the file is new)
            Path(db).parent.mkdir(parents=True, exist_ok=True)
        outs = [tmp_path / f"fresh-{attempt}-{w}.out" for w in range(4)]
        procs = [_fork_run(_open_and_save, str(db), f"NEW-{w}", str(out)) for w, out in enumerate(outs)]
        for proc, out in zip(procs, outs):
            proc.join(timeout=60)
            assert proc.exitcode == 0 and out.read_text() == "ok", out.read_text()
        with open_store(str(db)) as store:
            assert sorted(p["patient_id"] for p in store.list_patients()) == [f"NEW-{w}" for w in range(4)]
            assert store.revision() == HEAD_REVISION
        assert _integrity(db) == "ok"


def test_backups_taken_while_a_writer_saves_are_consistent(tmp_path):  # SQLite's online backup
    from test_store_support import record, screening
    db = tmp_path / "live.db"
    with open_store(str(db)) as store:
        store.save_patient(record("LIVE-1"), screening("LIVE-1"))
    out = tmp_path / "live.out"
    writer = _fork_run(_forked_writer, str(db), "LIVE-1", str(out))
    try:
        _wait_for_first_commit([(writer, out)])
        with open_store(str(db)) as store:
            for i in range(3):
                time.sleep(0.1)
                info = store.backup(tmp_path / f"backup-{i}.db")
                assert info["integrity_check"] == "ok"
                with open_store(str(tmp_path / f"backup-{i}.db")) as copy:
                    versions = [v["version"] for v in copy.program_versions("LIVE-1")]
                    assert versions == list(range(1, len(versions) + 1)) and len(versions) == info["program_versions"]
                    # the person and its screening, then one entry a version: nothing half-copied
                    assert len(copy.audit("LIVE-1")) == 2 + len(versions)
    finally:
        os.kill(writer.pid, signal.SIGKILL)
        writer.join(timeout=30)
    assert max(v for _, v in _committed(out)) >= info["program_versions"] > 0
