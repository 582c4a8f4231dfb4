"""A bulk-data export (NDJSON) of many people -> the caseload CSV, streamed with bounded memory.

The input is one NDJSON file of mixed resources, or a folder of a bulk export's per-type files
(``Patient.ndjson``, ``Observation.ndjson`` ...; a file named after a type holds only that type).
A person's resources may be anywhere in the files, so each line's facts
(:func:`prescribe.fhir.facts.resource_facts`, the same reading as one Bundle's) go to a temporary
SQLite table keyed by the person, a chunk of lines at a time; Medication resources go to a table of
their own, for the statements that name them.  The people are then read back in key order, a
chunk of people at a time: each person's fields are assembled (:func:`prescribe.fhir.assemble.assemble_fields`),
the chunk is validated a column at a time with the caseload's own checks
(:func:`prescribe.screening.batch_columns.validate_columns`, which finds exactly the problems the
record model finds), and written through the caseload writer (:mod:`prescribe.screening.batch_io`,
the columns ``screen --batch`` reads).  A person whose row has a problem is validated again as one
record, so that the problem names its resource (``Observation/t (t_scores.lumbar_spine)``), and is
left out.  Memory holds one chunk, never the file.  A broken line (not JSON, not R4, a code system
not read) is named by its file and number and the rest is read.
"""

from __future__ import annotations

import codecs
import gc
import json
import marshal
import os
import sqlite3
import sys
import tempfile
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import date
from operator import itemgetter
from pathlib import Path
from typing import Iterator

import numpy as np
import pandas as pd

from ..errors import InputError
from ..records import RECORD_V2_FIELDS
from .assemble import Fields, assemble_fields
from .facts import READ_TYPES, medication_facts, resource_facts
from .r4 import check_version, ref_of, subject_key

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
    """Each file's lines with its name and number; a UTF-8 byte-order mark opening a file is dropped."""
    for path, expected in files:
        name = path.name
        with open(path, "rb") as fh:
            first = fh.readline()
            progress.add(len(first))
            if first:
                yield name, 1, expected, first.removeprefix(codecs.BOM_UTF8)
            if not progress.on:
                for number, line in enumerate(fh, start=2):
                    yield name, number, expected, line
                continue
            for number, line in enumerate(fh, start=2):
                progress.add(len(line))
                yield name, number, expected, line


def bulk_to_caseload(path: str | Path, out: str | Path, as_of: date | None = None,
                     progress_stream=None, chunk_lines: int = CHUNK_LINES,
                     chunk_people: int = CHUNK_PEOPLE) -> BulkSummary:
    """Read a bulk export at ``path`` and write the caseload CSV ``out`` (see the module's docstring)."""
    from ..screening.batch_io import RECORD_COLUMNS, ResultsWriter

    files = bulk_files(path)
    as_of = as_of or date.today()
    summary = BulkSummary(out=str(out))
    progress = _Progress(sum(f.stat().st_size for f, _ in files), progress_stream)
    with tempfile.TemporaryDirectory(prefix="prescribe-fhir-") as tmp, _fewer_collections():
        db = sqlite3.connect(os.path.join(tmp, "facts.sqlite"))
        try:
            _spill(db, files, summary, progress, chunk_lines)
            with ResultsWriter(out, RECORD_COLUMNS) as writer:
                chunk: list[tuple[str, list, Fields]] = []
                for person, facts in _people(db, summary):
                    summary.people += 1
                    if not any(f[0] == "patient_id" or f[0] == "gender" or f[0] == "birthDate" for f in facts):
                        _left_out(summary, person, "no Patient resource for this person")
                        continue
                    try:
                        fields = assemble_fields(facts, as_of)
                    except InputError as err:
                        _left_out(summary, person, str(err))
                        continue
                    chunk.append((person, facts, fields))
                    if len(chunk) >= chunk_people:
                        _write_chunk(writer, chunk, summary)
                        chunk = []
                if chunk:
                    _write_chunk(writer, chunk, summary)
        finally:
            db.close()
    return summary


@contextmanager
def _fewer_collections(first_generation: int = 50_000) -> Iterator[None]:
    """Run the cyclic garbage collector less often while a bulk export is read.

    Reading makes millions of small containers (the parsed JSON, the facts) that hold no
    reference cycles: reference counting frees them, and the collector, run every 700 new
    containers by default, only walks the chunk held in memory again and again (a fifth of the
    time on a caseload).  It still runs, every ``first_generation`` containers, and the
    thresholds are put back afterwards."""
    before = gc.get_threshold()
    gc.set_threshold(max(first_generation, before[0]), *before[1:])
    try:
        yield
    finally:
        gc.set_threshold(*before)


def _spill(db: sqlite3.Connection, files, summary: BulkSummary, progress: _Progress, chunk_lines: int) -> None:
    """Every line's facts into the table ``facts`` (person, line, facts), the Medications into
    ``medications``; broken lines into the summary."""
    db.execute("PRAGMA journal_mode=OFF")
    db.execute("PRAGMA synchronous=OFF")
    db.execute("CREATE TABLE facts (person TEXT NOT NULL, seq INTEGER NOT NULL, facts BLOB NOT NULL)")
    db.execute("CREATE TABLE medications (ref TEXT PRIMARY KEY, resource BLOB NOT NULL)")
    pending: dict[str, list] = {}      # a chunk of lines' facts, by person
    seq = 0
    loads, dumps = json.loads, marshal.dumps
    for name, number, expected, line in _lines(files, progress):
        summary.lines += 1
        if not line.strip():
            continue
        try:
            try:
                res = loads(line.decode("utf-8"))
            except ValueError as exc:      # not UTF-8 (UnicodeDecodeError) or not JSON
                raise InputError.single("line", line[:60].decode("utf-8", "replace"),
                                        f"one JSON object a line ({exc.__class__.__name__})") from None
            if expected and isinstance(res, dict) and res.get("resourceType") != expected:
                check_version(res, "resource")
                raise InputError.single("resourceType", res.get("resourceType"),
                                        f"'{expected}' (the file {name} holds {expected} resources)")
            facts = resource_facts(res, "resource")
            if res["resourceType"] == "Medication":
                db.execute("INSERT OR IGNORE INTO medications VALUES (?, ?)", (ref_of(res), dumps(res)))
                continue
            key = subject_key(res)
            if key is None:
                if res["resourceType"] not in READ_TYPES:     # about no one person, and not read
                    summary.not_used += 1
                    continue
                raise InputError.single("subject.reference", None, "a reference to the Patient")
        except InputError as err:
            _broken(summary, name, number, str(err))
            continue
        for f in facts:
            if f[0] == "medication_ref":
                f.extend((name, number))     # where to name a problem found when it is resolved
        held = pending.get(key)
        if held is None:
            pending[key] = facts
        else:
            held.extend(facts)
        seq += 1
        if seq % chunk_lines == 0:
            _store(db, pending, seq)
    _store(db, pending, seq)
    progress.close()
    db.execute("CREATE INDEX facts_person ON facts (person, seq)")


def _store(db: sqlite3.Connection, pending: dict[str, list], seq: int) -> None:
    """A chunk of lines' facts, one row a person (in the order the lines came), then forgotten."""
    dumps = marshal.dumps
    db.executemany("INSERT INTO facts VALUES (?, ?, ?)", ((key, seq, dumps(facts)) for key, facts in pending.items()))
    pending.clear()


def _write_chunk(writer, chunk: list[tuple[str, list, Fields]], summary: BulkSummary) -> None:
    """Validate a chunk of people's fields a column at a time and write the valid rows in order;
    a row with a problem is validated again as one record (the problem names its resource) and
    left out."""
    from ..screening.batch_columns import validate_columns
    from ..screening.batch_io import RECORD_COLUMNS, dict_to_row, records_to_frame

    # A patient_id that is not plain text without surrounding spaces goes to the record model:
    # the caseload's cells are read stripped, a record's identifier is not.
    plain = [i for i, (_p, _f, fields) in enumerate(chunk) if _plain_text(fields.data.get("patient_id"))]
    rows = []
    for i in plain:
        data = chunk[i][2].data
        row = dict_to_row(data)
        # The record model's own rule (PatientRecord.version): a version-2 field given makes it version 2.
        if not data.keys().isdisjoint(RECORD_V2_FIELDS):
            row["record_version"] = "2"
        rows.append(row)
    columns = zip(*map(itemgetter(*RECORD_COLUMNS), rows)) if rows else [()] * len(RECORD_COLUMNS)
    cells = {c: np.array(column, dtype=object) for c, column in zip(RECORD_COLUMNS, columns)}
    frame, _fractures, problems = validate_columns(cells, len(rows))
    refused: dict[int, object] = {}
    for j, _phase, _order, problem in sorted(problems.items, key=lambda item: item[:3]):
        refused.setdefault(plain[j], problem)
    checked = sorted(set(range(len(chunk))) - set(plain) | set(refused))
    frame.index = plain
    keep = [i for i in plain if i not in refused]
    records, kept_alone = [], []
    for i in checked:
        person, _facts, fields = chunk[i]
        try:
            result = fields.validated()
        except InputError as err:
            _left_out(summary, person, str(err))
            continue
        if i in refused:        # the caseload's own check refuses what the record model took: left out
            _left_out(summary, person, f"{refused[i].field}: {refused[i]}")
            continue
        records.append(result.record)
        kept_alone.append(i)
    parts = [frame if len(keep) == len(frame) else frame.loc[keep]]
    if records:
        alone = records_to_frame(records)
        alone.index = kept_alone
        parts.append(alone)
    out = pd.concat(parts).sort_index() if len(parts) > 1 else parts[0]
    for i in keep + kept_alone:
        fields = chunk[i][2]
        summary.not_used += len(fields.not_used)
        summary.notes += len(fields.notes)
    writer.write(out[list(writer.columns)])
    summary.written += len(out)


def _plain_text(value) -> bool:
    return type(value) is str and value == value.strip()


def _broken(summary: BulkSummary, name: str, number: int, problem: str) -> None:
    summary.broken_count += 1
    if len(summary.broken_lines) < MAX_LISTED:
        summary.broken_lines.append({"file": name, "line": number, "problem": problem})


def _left_out(summary: BulkSummary, person: str, why: str) -> None:
    summary.left_out_count += 1
    if len(summary.people_left_out) < MAX_LISTED:
        summary.people_left_out.append({"person": person, "why": why})


def _people(db: sqlite3.Connection, summary: BulkSummary) -> Iterator[tuple[str, list]]:
    """Each person's facts, in person order (one person's rows at a time), with the statements that
    name a Medication elsewhere in the export resolved."""
    current, facts = None, []
    loads = marshal.loads
    for person, blob in db.execute("SELECT person, facts FROM facts ORDER BY person, seq"):
        if person != current:
            if current is not None:
                yield current, _resolved(db, facts, summary)
            current, facts = person, []
        facts.extend(loads(blob))
    if current is not None:
        yield current, _resolved(db, facts, summary)


def _resolved(db: sqlite3.Connection, facts: list, summary: BulkSummary) -> list:
    """The facts with each ``medication_ref`` replaced by its statement's facts read with the
    Medication it names (left for the record's not-used list when the export has none); a problem
    found then (a code system not read) names the statement's line, and the statement is not read."""
    if not any(f[0] == "medication_ref" for f in facts):
        return facts
    out = []
    for f in facts:
        if f[0] != "medication_ref" or f[1].startswith("#"):
            out.append(f)
            continue
        _kind, name, statement, ref, file, number = f
        row = db.execute("SELECT resource FROM medications WHERE ref = ?", (name,)).fetchone()
        if row is None:
            out.append(f)
            continue
        try:
            out.extend(medication_facts(statement, ref, {name: marshal.loads(row[0])}))
        except InputError as err:
            _broken(summary, file, number, str(err))
    return out
