"""A bulk-data export (NDJSON) of many people -> the caseload CSV, streamed with bounded memory.

The input is one NDJSON file of mixed resources, or a folder of a bulk export's per-type files
(``Patient.ndjson``, ``Observation.ndjson`` ...; a file named after a type holds only that type).
A person's resources may be anywhere in the files, so each line's facts
(:func:`prescribe.fhir.reader.resource_facts`) go to a temporary SQLite table keyed by the person,
a chunk of lines at a time; the people are then read back in key order, a chunk of people at a
time, assembled into records and written through the caseload writer
(:mod:`prescribe.screening.batch_io`, the same columns as ``screen --batch`` reads).  Memory holds
one chunk, never the file.  A broken line (not JSON, not R4, a code system not read) is named by
its file and number and the rest is read; a person who cannot become a record (a required field
missing) is named and left out.
"""

from __future__ import annotations

import json
import os
import sqlite3
import sys
import tempfile
import time
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from typing import Callable, Iterator

from ..errors import InputError
from ..fileio import open_atomically
from .reader import assemble, check_version, resource_facts, subject_key

#: Lines parsed and stored at a time, and people assembled and written at a time.
CHUNK_LINES = 20_000
CHUNK_PEOPLE = 10_000
#: Problems kept in the summary (the rest are counted).
MAX_LISTED = 200


@dataclass
class BulkSummary:
    out: str
    lines: int = 0
    people: int = 0
    written: int = 0
    broken_lines: list[dict] = field(default_factory=list)
    broken_count: int = 0
    people_left_out: list[dict] = field(default_factory=list)
    left_out_count: int = 0
    not_used: int = 0
    notes: int = 0

    def as_dict(self) -> dict:
        return {"out": self.out, "lines": self.lines, "people": self.people, "written": self.written,
                "broken_lines": self.broken_lines, "broken_line_count": self.broken_count,
                "people_left_out": self.people_left_out, "people_left_out_count": self.left_out_count,
                "resources_not_used": self.not_used, "notes": self.notes}


def bulk_files(path: str | Path) -> list[tuple[Path, str | None]]:
    """The NDJSON files to read, each with the resource type its name promises (or None)."""
    p = Path(path)
    if p.is_dir():
        files = sorted(f for f in p.iterdir() if f.suffix == ".ndjson" and f.is_file())
        if not files:
            raise InputError.single("FILE", str(path), "a folder holding a bulk export's .ndjson files")
        return [(f, f.name.split(".")[0] if f.name.split(".")[0][:1].isupper() else None) for f in files]
    if not p.is_file():
        raise InputError.single("FILE", str(path), "an existing .ndjson file or a folder of them")
    return [(p, None)]


class _Progress:
    """A progress bar on stderr by bytes read, only when stderr is a terminal."""

    def __init__(self, total: int, stream=None):
        self.stream = stream or sys.stderr
        self.on = total > 0 and hasattr(self.stream, "isatty") and self.stream.isatty()
        self.total, self.done, self.shown = total, 0, -1

    def add(self, n: int) -> None:
        self.done += n
        if not self.on:
            return
        pct = int(100 * self.done / self.total)
        if pct != self.shown:
            self.shown = pct
            bar = "#" * (pct // 4)
            self.stream.write(f"\rreading FHIR NDJSON [{bar:<25}] {pct:3d}%")
            self.stream.flush()

    def close(self) -> None:
        if self.on:
            self.stream.write("\n")


def _lines(files, progress: _Progress) -> Iterator[tuple[str, int, str | None, bytes]]:
    for path, expected in files:
        with open(path, "rb") as fh:
            for number, line in enumerate(fh, start=1):
                progress.add(len(line))
                yield path.name, number, expected, line


def bulk_to_caseload(path: str | Path, out: str | Path, as_of: date | None = None,
                     progress_stream=None, chunk_lines: int = CHUNK_LINES,
                     chunk_people: int = CHUNK_PEOPLE) -> BulkSummary:
    """Read a bulk export at ``path`` and write the caseload CSV ``out`` (see the module's docstring)."""
    from ..screening.batch_io import RECORD_COLUMNS, ResultsWriter, records_to_frame

    files = bulk_files(path)
    as_of = as_of or date.today()
    summary = BulkSummary(out=str(out))
    progress = _Progress(sum(f.stat().st_size for f, _ in files), progress_stream)
    with tempfile.TemporaryDirectory(prefix="prescribe-fhir-") as tmp:
        db = sqlite3.connect(os.path.join(tmp, "facts.sqlite"))
        db.execute("PRAGMA journal_mode=OFF")
        db.execute("PRAGMA synchronous=OFF")
        db.execute("CREATE TABLE facts (person TEXT NOT NULL, seq INTEGER NOT NULL, facts TEXT NOT NULL)")
        batch: list[tuple[str, int, str]] = []
        loads, dumps = json.loads, json.dumps
        for name, number, expected, line in _lines(files, progress):
            summary.lines += 1
            if not line.strip():
                continue
            try:
                try:
                    res = loads(line)
                except ValueError as exc:
                    raise InputError.single("line", line[:60].decode("utf-8", "replace"),
                                            f"one JSON object a line ({exc.__class__.__name__})") from None
                if expected and isinstance(res, dict) and res.get("resourceType") != expected:
                    check_version(res, "resource")
                    raise InputError.single("resourceType", res.get("resourceType"),
                                            f"'{expected}' (the file {name} holds {expected} resources)")
                facts = resource_facts(res, "resource")
                key = subject_key(res)
                if key is None:
                    raise InputError.single("subject.reference", None, "a reference to the Patient")
            except InputError as err:
                summary.broken_count += 1
                if len(summary.broken_lines) < MAX_LISTED:
                    summary.broken_lines.append({"file": name, "line": number, "problem": str(err)})
                continue
            batch.append((key, summary.lines, dumps(facts)))
            if len(batch) >= chunk_lines:
                db.executemany("INSERT INTO facts VALUES (?, ?, ?)", batch)
                batch.clear()
        if batch:
            db.executemany("INSERT INTO facts VALUES (?, ?, ?)", batch)
            batch.clear()
        progress.close()
        db.execute("CREATE INDEX facts_person ON facts (person, seq)")
        with ResultsWriter(out, RECORD_COLUMNS) as writer:
            records = []
            for person, facts in _people(db):
                summary.people += 1
                if not any(f[0] == "patient_id" or f[0] == "gender" or f[0] == "birthDate" for f in facts):
                    _left_out(summary, person, "no Patient resource for this person")
                    continue
                try:
                    result = assemble(facts, as_of)
                except InputError as err:
                    _left_out(summary, person, str(err))
                    continue
                summary.not_used += len(result.not_used)
                summary.notes += len(result.notes)
                records.append(result.record)
                if len(records) >= chunk_people:
                    _write(writer, records, records_to_frame)
                    summary.written += len(records)
                    records = []
            if records:
                _write(writer, records, records_to_frame)
                summary.written += len(records)
        db.close()
    return summary


def _write(writer, records, records_to_frame) -> None:
    frame = records_to_frame(records)
    writer.write(frame[list(writer.columns)])


def _left_out(summary: BulkSummary, person: str, why: str) -> None:
    summary.left_out_count += 1
    if len(summary.people_left_out) < MAX_LISTED:
        summary.people_left_out.append({"person": person, "why": why})


def _people(db: sqlite3.Connection) -> Iterator[tuple[str, list]]:
    """Each person's facts, in person order (one person's rows at a time)."""
    current, facts = None, []
    loads = json.loads
    for person, text in db.execute("SELECT person, facts FROM facts ORDER BY person, seq"):
        if person != current:
            if current is not None:
                yield current, facts
            current, facts = person, []
        facts.extend(loads(text))
    if current is not None:
        yield current, facts
