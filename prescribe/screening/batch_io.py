"""Caseload files: patient records as CSV rows, and screening results as CSV.

One row per person; the columns are the record's fields flattened (see
:data:`RECORD_COLUMNS` and ``docs/rules.md``).  An empty cell means "absent".

- ``t_scores`` becomes ``t_score_lumbar_spine``, ``t_score_femoral_neck``, ``t_score_total_hip``,
  and ``z_scores`` likewise ``z_score_...``;
- ``glucocorticoids`` becomes ``glucocorticoids_mg_per_day`` and ``glucocorticoids_months``;
- ``fractures`` is one compact cell: ``site:months_ago:low_trauma`` items joined by ``;``,
  with low_trauma ``y`` or ``n``, and for a vertebra an optional fourth part, its level,
  e.g. ``vertebra:14:y:T12;wrist:60:n`` (empty = none);
- ``conditions`` is condition codes joined by ``;``;
- ``medications`` is ``class:months_on:months_since_last_dose`` items joined by ``;`` (an empty
  part where not known), ``surgeries`` is ``procedure:side:months_ago:y|n`` items (y: the
  surgeon has cleared impact);
- ``cancer`` becomes ``cancer_active`` (true/false) and ``cancer_bone_metastases`` (both empty:
  no cancer record); ``lives_alone`` and ``has_carer`` are true/false;
- ``display_name`` is read, but written only when asked (:data:`PRIVATE_COLUMNS`).

Files are read a chunk of rows at a time (:func:`iter_batch_csv`) and validated a column at a
time with the patient record's own rules (:mod:`prescribe.screening.batch_columns`); a bad row raises
:class:`~prescribe.errors.InputError` whose field names the row and the column,
e.g. ``row 7 (patient_id P-007): age_years``.  Rows are numbered from 1 for the
first row under the header.  :func:`rows_to_records` validates rows one record at a time
(the record model itself) and is the reference the column-wise reader is tested against.
Results are written a column at a time (:class:`ResultsWriter`).
"""

from __future__ import annotations

import csv
import io
import math
import os
import re
import sys
from dataclasses import dataclass
from itertools import islice
from pathlib import Path
from typing import Any, BinaryIO, Callable, Iterable, Iterator

import numpy as np
import pandas as pd

from .batch_columns import (BOOL_COLUMNS, FLOAT_COLUMNS as _FLOAT_COLUMNS, FRACTURES_ALLOWED,
                            INT_COLUMNS as _INT_COLUMNS, LIST_ALLOWED, LIST_COLUMNS, PRIVATE_COLUMNS,
                            RECORD_COLUMNS, RECORD_V1_COLUMNS, REQUIRED_COLUMNS, TEXT_COLUMNS as _TEXT_COLUMNS,
                            FractureColumns, bool_allowed, column_of, format_cell as _fmt, format_fractures,
                            format_medications, format_surgeries, fracture_columns, frame_dtype, item_problem,
                            parse_bool_cell, parse_fractures, parse_items, validate_columns)
from ..errors import FieldProblem, InputError
from ..fileio import CSV_MAX_BYTES, INPUT_ENCODING, check_file_size, open_atomically, write_atomically
from ..records import CONDITIONS, T_SCORE_SITES, PatientRecord, parse_record

__all__ = ["RECORD_COLUMNS", "RECORD_V1_COLUMNS", "PRIVATE_COLUMNS", "REQUIRED_COLUMNS", "FRACTURES_ALLOWED",
           "CHUNK_ROWS", "Caseload", "dict_to_row", "dicts_to_frame", "written_columns", "write_dicts_csv",
           "parse_fractures", "format_fractures", "fracture_columns", "spreadsheet_text",
           "from_spreadsheet_text", "record_to_row", "row_to_dict", "rows_to_records", "records_to_frame",
           "frame_to_rows", "frame_to_records", "read_batch_csv", "iter_batch_csv", "frame_to_csv_text",
           "write_batch_csv", "write_results_csv", "ResultsWriter"]

#: Rows read, validated and screened at a time: about 90 MB above the interpreter's own at the
#: peak (cells, typed columns, results text); larger chunks use more memory and are no faster.
CHUNK_ROWS = 10_000


# ---------------------------------------------------------------------------
# Cells a spreadsheet would run as a formula
# ---------------------------------------------------------------------------

#: First characters that make a spreadsheet read a cell as a formula (OWASP, CSV Injection).
FORMULA_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
#: The mark put before such a text cell so that a spreadsheet shows it as text.
TEXT_MARK = "'"
_PLAIN_NUMBER_CELL = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")


def spreadsheet_text(cell: str) -> str:
    """A text cell made safe to open in a spreadsheet.

    A cell that starts with ``= + - @``, a tab or a carriage return gets a leading
    ``'`` so that a spreadsheet shows it as text instead of running it as a formula
    (OWASP Foundation, CSV Injection guidance).  A plain number such as ``-2.5`` is
    left as it is (it cannot be a formula).  A cell that already starts with ``'``
    followed by one of those characters (or another ``'``) gets one more, so that
    :func:`from_spreadsheet_text` gives back exactly the original text.
    """
    if not cell:
        return cell
    first = cell[0]
    if first in FORMULA_TRIGGERS:
        return cell if _PLAIN_NUMBER_CELL.fullmatch(cell) else TEXT_MARK + cell
    if first == TEXT_MARK and len(cell) > 1 and (cell[1] in FORMULA_TRIGGERS or cell[1] == TEXT_MARK):
        return TEXT_MARK + cell
    return cell


def from_spreadsheet_text(cell: str) -> str:
    """The inverse of :func:`spreadsheet_text`: drop the one leading ``'`` it adds."""
    if len(cell) > 1 and cell[0] == TEXT_MARK and (cell[1] in FORMULA_TRIGGERS or cell[1] == TEXT_MARK):
        return cell[1:]
    return cell


# ---------------------------------------------------------------------------
# Record <-> row
# ---------------------------------------------------------------------------

def dict_to_row(d: dict) -> dict[str, str]:
    """One CSV row (column -> cell text) for a record dict (``PatientRecord.model_dump()`` shape, or
    a stored record's JSON): every column, ``display_name`` included (see :func:`written_columns`)."""
    row = {c: "" for c in RECORD_COLUMNS}
    for c in ("patient_id", "age_years", "sex", "body_mass_kg", "height_cm", "falls_past_year",
              "timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "pain_score", "record_version",
              "menopause", "cognition", "lives_alone", "has_carer", "display_name"):
        row[c] = _fmt(d.get(c))
    t, z = d.get("t_scores") or {}, d.get("z_scores") or {}
    for site in T_SCORE_SITES:
        row[f"t_score_{site}"] = _fmt(t.get(site))
        row[f"z_score_{site}"] = _fmt(z.get(site))
    row["fractures"] = format_fractures(d.get("fractures") or [])
    g = d.get("glucocorticoids")
    if g is not None:
        row["glucocorticoids_mg_per_day"] = _fmt(g["mg_per_day"])
        row["glucocorticoids_months"] = _fmt(g["months"])
    row["conditions"] = ";".join(d.get("conditions") or [])
    row["medications"] = format_medications(d.get("medications") or [])
    row["surgeries"] = format_surgeries(d.get("surgeries") or [])
    cancer = d.get("cancer")
    if cancer is not None:
        row["cancer_active"] = _fmt(cancer["active"])
        row["cancer_bone_metastases"] = _fmt(cancer.get("bone_metastases"))
    return row


def record_to_row(record: PatientRecord) -> dict[str, str]:
    """One CSV row (column -> cell text) for a record, as its JSON writes it (``record_version`` 2
    where version-2 fields are used)."""
    return dict_to_row(record.model_dump())


def written_columns(with_display_name: bool = False) -> list[str]:
    """The columns a caseload file is written with: every column, the name the person's handout
    uses (:data:`PRIVATE_COLUMNS`) only when asked."""
    return [c for c in RECORD_COLUMNS if with_display_name or c not in PRIVATE_COLUMNS]


def _row_label(number: int, row: dict[str, str]) -> str:
    pid = (row.get("patient_id") or "").strip()
    return f"row {number} (patient_id {pid})" if pid else f"row {number}"


def row_to_dict(row: dict[str, str]) -> tuple[dict, list[FieldProblem]]:
    """Turn one row's cells into a record dict; problems with cells that cannot be converted.

    The problems' fields are bare column names (the caller adds the row).  A cell that cannot
    be read is left out of the record (so is a cancer record whose true/false cell cannot be read).
    """
    data: dict[str, Any] = {}
    problems: list[FieldProblem] = []

    def cell(col: str) -> str:
        value = row.get(col)
        return "" if value is None else str(value).strip()

    for col in _TEXT_COLUMNS[:2]:
        if cell(col):
            data[col] = cell(col)
    numbers: dict[str, float] = {}
    for col in _INT_COLUMNS + _FLOAT_COLUMNS:
        text = cell(col)
        if not text:
            continue
        whole = col in _INT_COLUMNS
        try:
            value = float(text)
            if not math.isfinite(value) or (whole and not value.is_integer()):
                raise ValueError
        except ValueError:
            problems.append(FieldProblem(col, text, ("a whole number" if whole else "a finite number")
                                         + ", or empty when absent"))
            continue
        numbers[col] = value
        if whole:
            data[col] = int(value)
    floats = {c: v for c, v in numbers.items() if c in _FLOAT_COLUMNS}
    for col in ("body_mass_kg", "height_cm", "timed_up_and_go_s", "tandem_stance_s"):
        if col in floats:
            data[col] = floats[col]
    for kind in ("t_score", "z_score"):
        scores = {site: floats[f"{kind}_{site}"] for site in T_SCORE_SITES if f"{kind}_{site}" in floats}
        if scores:
            data[f"{kind}s"] = scores
    mg, months = floats.get("glucocorticoids_mg_per_day"), floats.get("glucocorticoids_months")
    mg_text, months_text = cell("glucocorticoids_mg_per_day"), cell("glucocorticoids_months")
    if mg is not None and months is not None:
        data["glucocorticoids"] = {"mg_per_day": mg, "months": months}
    elif mg is not None and not months_text:
        problems.append(FieldProblem("glucocorticoids_months", "", "a number of months when "
                                     "glucocorticoids_mg_per_day is given", kind="invalid"))
    elif months is not None and not mg_text:
        problems.append(FieldProblem("glucocorticoids_mg_per_day", "", "a dose in mg/day when "
                                     "glucocorticoids_months is given", kind="invalid"))
    fx_text = cell("fractures")
    try:
        data["fractures"] = [LIST_COLUMNS["fractures"][1](f) for f in parse_fractures(fx_text)]
    except ValueError as exc:
        problems.append(FieldProblem("fractures", fx_text, f"{FRACTURES_ALLOWED} ({exc})"))
    flags: dict[str, bool | None] = {}
    for col in BOOL_COLUMNS:
        try:
            flags[col] = parse_bool_cell(cell(col))
        except ValueError:
            problems.append(FieldProblem(col, cell(col), bool_allowed(col)))
    for col in ("medications", "surgeries"):
        parse_item, to_dict, _ = LIST_COLUMNS[col]
        try:
            items = [to_dict(i) for i in parse_items(cell(col), parse_item)]
        except ValueError as exc:
            problems.append(FieldProblem(col, cell(col), f"{LIST_ALLOWED[col]} ({exc})"))
            continue
        if items:
            data[col] = items
    cond_text = cell("conditions")
    if cond_text:
        data["conditions"] = [c.strip() for c in cond_text.split(";") if c.strip()]
    for col in ("menopause", "cognition", "display_name"):
        if cell(col):
            data[col] = cell(col)
    for col in ("lives_alone", "has_carer"):
        if flags.get(col) is not None:
            data[col] = flags[col]
    metastases = cell("cancer_bone_metastases")
    if "cancer_active" in flags and (flags["cancer_active"] is not None or metastases):
        data["cancer"] = {}
        if flags["cancer_active"] is not None:
            data["cancer"]["active"] = flags["cancer_active"]
        if metastases:
            data["cancer"]["bone_metastases"] = metastases
    return data, problems


def rows_to_records(rows: Iterable[dict[str, str]], start: int = 1) -> list[PatientRecord]:
    """Validate rows (column -> cell text) into records.

    Raises
    ------
    InputError
        With every problem found, each field naming the row and the column.
    """
    records: list[PatientRecord] = []
    problems: list[FieldProblem] = []
    seen_ids: dict[str, int] = {}
    for number, row in enumerate(rows, start=start):
        label = _row_label(number, row)
        data, cell_problems = row_to_dict(row)
        bad_columns = {p.field for p in cell_problems}
        for p in cell_problems:
            problems.append(FieldProblem(f"{label}: {p.field}", p.value, p.allowed, p.kind))
        try:
            record = parse_record(data)
        except InputError as err:
            for p in err.problems:
                column = column_of(p.field)
                if column in bad_columns:
                    continue
                item = item_problem(p, str(row.get(column) or ""))
                if item is not None:                  # one item of a compact cell: that item, the part's words
                    value, allowed, kind = item.value, item.allowed, item.kind
                else:
                    value = row.get(column, p.value) if column in ("fractures", "conditions") else p.value
                    allowed = ("condition codes joined by ';' from: " + ", ".join(CONDITIONS)
                               if column == "conditions" else p.allowed)
                    kind = p.kind
                problems.append(FieldProblem(f"{label}: {column}", value, allowed, kind))
            continue
        if cell_problems:
            continue
        if record.patient_id in seen_ids:
            problems.append(FieldProblem(f"{label}: patient_id", record.patient_id,
                                         f"an id not already used (row {seen_ids[record.patient_id]} has it)"))
            continue
        seen_ids[record.patient_id] = number
        records.append(record)
    if problems:
        raise InputError(problems)
    return records


# ---------------------------------------------------------------------------
# Records <-> DataFrame
# ---------------------------------------------------------------------------

def records_to_frame(records: Iterable[PatientRecord]) -> pd.DataFrame:
    """A DataFrame of flattened records (the batch columns, typed).

    Numbers are float64 with NaN for absent, except ``age_years``, ``falls_past_year`` and
    ``pain_score`` (int64); the true/false columns hold True, False or None; the compact and
    text cells hold their text ('' for absent).  Each record as its JSON writes it
    (``record_version`` 2 where version-2 fields are used).
    """
    return dicts_to_frame(r.model_dump() for r in records)


def dicts_to_frame(dicts: Iterable[dict]) -> pd.DataFrame:
    """:func:`records_to_frame` from record dicts (``model_dump()`` shape, or a stored record's JSON)."""
    nan = float("nan")

    def num(v):
        return nan if v is None else float(v)

    cols: dict[str, list] = {c: [] for c in RECORD_COLUMNS}
    for d in dicts:
        cols["patient_id"].append(d["patient_id"])
        cols["age_years"].append(d["age_years"])
        cols["sex"].append(d["sex"])
        cols["body_mass_kg"].append(float(d["body_mass_kg"]))
        cols["height_cm"].append(float(d["height_cm"]))
        t, z = d.get("t_scores") or {}, d.get("z_scores") or {}
        for site in T_SCORE_SITES:
            cols[f"t_score_{site}"].append(num(t.get(site)))
            cols[f"z_score_{site}"].append(num(z.get(site)))
        cols["fractures"].append(format_fractures(d.get("fractures") or []))
        cols["falls_past_year"].append(d.get("falls_past_year") or 0)
        for c in ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "record_version"):
            cols[c].append(num(d.get(c)))
        g = d.get("glucocorticoids")
        cols["glucocorticoids_mg_per_day"].append(nan if g is None else float(g["mg_per_day"]))
        cols["glucocorticoids_months"].append(nan if g is None else float(g["months"]))
        cols["conditions"].append(";".join(d.get("conditions") or []))
        cols["pain_score"].append(d.get("pain_score") or 0)
        for c in ("menopause", "cognition", "display_name"):
            cols[c].append(d.get(c) or "")
        cols["medications"].append(format_medications(d.get("medications") or []))
        cols["surgeries"].append(format_surgeries(d.get("surgeries") or []))
        cancer = d.get("cancer")
        cols["cancer_active"].append(None if cancer is None else bool(cancer["active"]))
        cols["cancer_bone_metastases"].append("" if cancer is None else cancer["bone_metastases"])
        for c in ("lives_alone", "has_carer"):
            v = d.get(c)
            cols[c].append(None if v is None else bool(v))
    return pd.DataFrame({c: pd.Series(v, dtype=frame_dtype(c)) for c, v in cols.items()})


def frame_to_rows(df: pd.DataFrame) -> Iterator[dict[str, str]]:
    """Each DataFrame row as CSV cells (column -> text)."""
    columns = [c for c in RECORD_COLUMNS if c in df.columns]
    for values in zip(*(df[c].tolist() for c in columns)):
        yield {c: _fmt(v) for c, v in zip(columns, values)}


def frame_to_records(df: pd.DataFrame) -> list[PatientRecord]:
    """Validated records from a DataFrame of flattened records (inverse of :func:`records_to_frame`)."""
    _check_columns(list(df.columns), "data frame")
    return rows_to_records(frame_to_rows(df))


# ---------------------------------------------------------------------------
# Files
# ---------------------------------------------------------------------------

def _check_columns(header: list[str], source: str) -> None:
    problems = []
    unknown = [c for c in header if c not in RECORD_COLUMNS]
    for c in unknown:
        problems.append(FieldProblem(f"column {c}", c, "a known column (" + ", ".join(RECORD_COLUMNS) + ")",
                                     kind="unknown_field"))
    for c in REQUIRED_COLUMNS:
        if c not in header:
            problems.append(FieldProblem(f"column {c}", None, "a column of the batch file (required)",
                                         kind="missing"))
    dupes = sorted({c for c in header if header.count(c) > 1})
    for c in dupes:
        problems.append(FieldProblem(f"column {c}", c, "each column once"))
    if problems:
        raise InputError(problems, source)


@dataclass(frozen=True)
class Caseload:
    """One validated chunk of a caseload: typed columns for the screening.

    ``frame`` is the flattened records (the shape :func:`records_to_frame` makes, the compact
    cells in their normal form); ``fractures`` the per-person fracture figures, read once from
    the cells; ``first_row`` the number of the chunk's first row (1 for the first row under
    the header).
    """

    frame: pd.DataFrame
    fractures: FractureColumns
    first_row: int


def _open_text(path: str | Path) -> tuple[io.TextIOWrapper, BinaryIO]:
    """The caseload as text (UTF-8, byte-order mark dropped, newlines as the whole-file reader
    sees them) and the binary file under it (whose position tells how far reading has come)."""
    try:
        raw = open(path, "rb")
    except FileNotFoundError:
        raise InputError.single("batch file", str(path), "an existing, readable CSV file") from None
    except (IsADirectoryError, PermissionError) as exc:
        raise InputError.single("batch file", str(path),
                                f"a readable UTF-8 CSV file ({exc.__class__.__name__})") from None
    return io.TextIOWrapper(raw, encoding=INPUT_ENCODING, newline=None), raw


def _decoding_error(path, exc: UnicodeDecodeError) -> InputError:
    return InputError.single("batch file", str(path), f"a readable UTF-8 CSV file ({exc.__class__.__name__})")


def iter_batch_csv(path: str | Path, chunk_rows: int | None = None,
                   progress: Callable[[int, int], None] | None = None) -> Iterator[Caseload]:
    """Read and validate a caseload CSV a chunk of rows at a time (bounded memory).

    Chunks are yielded while every row so far is valid.  After the first problem the rest
    of the file is still read and checked, without yielding, and one :class:`InputError`
    with every problem is raised at the end; the problems and their order are those of
    :func:`read_batch_csv`.  A caller that writes results must therefore write them so that
    nothing is kept unless the whole iteration ends without an error (:class:`ResultsWriter`).

    ``chunk_rows`` rows are read at a time (:data:`CHUNK_ROWS` when not given);
    ``progress(bytes_read, file_size)`` is called after each chunk.

    Raises
    ------
    InputError
        For an unreadable file, malformed CSV (bad quoting, ragged rows), a missing
        required or unknown column, or any bad row (field ``row N (patient_id X): column``).
    """
    p = Path(path)
    chunk_rows = chunk_rows or CHUNK_ROWS
    check_file_size(p, "batch file", CSV_MAX_BYTES)
    text, raw = _open_text(p)
    size = os.fstat(raw.fileno()).st_size
    reader = csv.reader(text, strict=True)
    problems: list[FieldProblem] = []
    fatal: InputError | None = None          # a structural problem: reported alone, as before
    seen_ids: dict[str, int] = {}
    header: list[str] | None = None
    number = 0                               # rows under the header, blank rows not counted
    with text:
        try:
            while True:
                read = list(islice(reader, chunk_rows))
                if not read:
                    break
                table = [row for row in read if any(map(str.strip, row))]      # blank rows are skipped
                del read
                if header is None:
                    if not table:
                        continue
                    header = [h.strip() for h in table.pop(0)]
                    try:
                        _check_columns(header, str(path))
                    except InputError as err:
                        fatal = err
                first = number + 1
                number += len(table)
                if fatal is not None:
                    continue
                ragged = next((i for i, cells in enumerate(table) if len(cells) != len(header)), None)
                if ragged is not None:
                    cells = table[ragged]
                    fatal = InputError.single(_row_label(first + ragged, dict(zip(header, cells))),
                                              f"{len(cells)} cells", f"{len(header)} cells, one per header column",
                                              source=str(path))
                    continue
                chunk = _validate_chunk(header, table, first, seen_ids, problems)
                if progress is not None:
                    progress(raw.tell(), size)
                if chunk is not None and not problems:
                    yield chunk
        except UnicodeDecodeError as exc:
            raise _decoding_error(path, exc) from None
        except csv.Error as exc:
            line = reader.line_num
            try:                              # a file that is not UTF-8 is reported as such first
                while text.read(1 << 20):
                    pass
            except UnicodeDecodeError as dec:
                raise _decoding_error(path, dec) from None
            raise InputError.single("batch file", f"{path} (line {line})",
                                    f"well-formed CSV with standard double-quote quoting ({exc})") from None
    if header is None:
        raise InputError.single("batch file", str(path), "a CSV file with a header row and one row per person")
    if fatal is not None:
        raise fatal
    if problems:
        raise InputError(problems, str(path))


def _validate_chunk(header: list[str], table: list[list[str]], first: int, seen_ids: dict[str, int],
                    problems: list[FieldProblem]) -> Caseload | None:
    """Validate a chunk of rows column-wise; add its problems (with the row) to ``problems``."""
    n = len(table)
    if not n:
        return None
    columns = list(zip(*table))
    cells = {}
    for col, values in zip(header, columns):
        array = np.array(values, dtype=object)
        if col in _TEXT_COLUMNS:
            array = _without_marks(array)
        cells[col] = array
    frame, fractures, found = validate_columns(cells, n)
    pids = frame["patient_id"].to_numpy()
    bad = np.zeros(n, dtype=bool)
    bad[found.rows()] = True
    # A patient_id already used by an earlier valid row (rows with other problems are skipped).
    for pos in np.flatnonzero(~bad).tolist():
        pid, row = pids[pos], first + pos
        earlier = seen_ids.setdefault(pid, row)
        if earlier != row:
            bad[pos] = True
            found.items.append((pos, 2, 0, FieldProblem("patient_id", pid,
                                                        f"an id not already used (row {earlier} has it)")))
    for pos, _phase, _order, problem in sorted(found.items, key=lambda item: item[:3]):
        label = _row_label(first + pos, {"patient_id": pids[pos]})
        problems.append(FieldProblem(f"{label}: {problem.field}", problem.value, problem.allowed, problem.kind))
    if bad.any():
        return None
    return Caseload(frame, fractures, first)


def _without_marks(cells: np.ndarray) -> np.ndarray:
    """Text cells with the spreadsheet's text mark removed (only cells that start with it are looked at)."""
    marked = [i for i, c in enumerate(cells.tolist()) if c[:1] == TEXT_MARK]
    for i in marked:
        cells[i] = from_spreadsheet_text(cells[i])
    return cells


def read_batch_csv(path: str | Path) -> pd.DataFrame:
    """Read and validate a caseload CSV into a DataFrame of flattened records.

    The whole caseload in one frame; :func:`iter_batch_csv` reads it a chunk at a time.

    Raises
    ------
    InputError
        For an unreadable file, malformed CSV (bad quoting, ragged rows), a missing
        required or unknown column, or any bad row (field ``row N (patient_id X): column``).
    """
    frames = [chunk.frame for chunk in iter_batch_csv(path)]
    if not frames:
        return records_to_frame([])
    return pd.concat(frames, ignore_index=True) if len(frames) > 1 else frames[0]


def _atomic_write(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` in one step: a reader never sees a partial file."""
    _check_output(path)
    write_atomically(Path(path), text, "output file")


def _check_output(path: str | Path) -> None:
    target = Path(path)
    if target.is_dir():
        raise InputError.single("output file", str(path), "a file path, not a folder")
    if not target.parent.exists():
        raise InputError.single("output file", str(path), "a path in an existing folder")


# ---------------------------------------------------------------------------
# Writing: a column at a time
# ---------------------------------------------------------------------------

def _format_column(values: np.ndarray) -> np.ndarray:
    """Each cell's text (as :func:`frame_to_csv_text` writes it), worked out once per distinct value."""
    kind = values.dtype.kind
    if kind == "b":
        return np.where(values, "true", "false").astype(object)
    if kind in "iu":
        return values.astype(str).astype(object)
    if kind == "f":
        codes, uniques = pd.factorize(values)
        return np.array([_fmt(v) for v in uniques.tolist()] + [""], dtype=object)[codes]
    if kind == "O" and pd.api.types.infer_dtype(values, skipna=True) in ("string", "empty"):
        codes, uniques = pd.factorize(values)            # None and NaN: code -1, an empty cell
        return np.array([spreadsheet_text(v) for v in uniques.tolist()] + [""], dtype=object)[codes]
    return np.array([spreadsheet_text(v) if isinstance(v, str) else _fmt(v) for v in values.tolist()], dtype=object)


#: Characters that make the csv module quote a cell (delimiter, quote, line ends).
_QUOTE_TRIGGERS = re.compile(r'[,"\r\n]')


def _csv_field(text: str) -> str:
    """A cell as the csv module writes it (minimal quoting): as it is unless it holds a
    delimiter, a quote or a line end, in which case the csv module itself quotes it."""
    if not _QUOTE_TRIGGERS.search(text):
        return text
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow([text])
    return buf.getvalue()[:-1]


def _column_fields(values: np.ndarray) -> np.ndarray:
    """Each cell of a column as written in the CSV, formatted and quoted once per distinct value."""
    if values.dtype.kind == "O" and pd.api.types.infer_dtype(values, skipna=True) in ("string", "empty"):
        codes, uniques = pd.factorize(values)            # None and NaN: code -1, an empty cell
        return np.array([_csv_field(spreadsheet_text(u)) for u in uniques.tolist()] + [""], dtype=object)[codes]
    cells = _format_column(values)
    if values.dtype.kind in "biuf":                      # numbers, true and false: never quoted
        return cells
    return np.array([_csv_field(c) for c in cells.tolist()], dtype=object)


def _csv_bytes(df: pd.DataFrame, header: bool) -> bytes:
    """The CSV text of a frame, built a column at a time: each column's cells are formatted and
    quoted once per distinct value, then the columns are joined with whole-array string
    additions (a per-cell CSV writer spends most of its time scanning the long, repeated
    cautions cells)."""
    out = ""
    if header:
        names = [_csv_field(str(c)) for c in df.columns]
        out = (",".join(names) if names != [""] else '""') + "\n"
    if len(df) and df.shape[1]:
        line = None
        for i in range(df.shape[1]):
            col = df.iloc[:, i]
            extension = isinstance(col.dtype, pd.api.extensions.ExtensionDtype)
            fields = _column_fields(col.to_numpy(dtype=object) if extension else col.to_numpy())
            line = fields if line is None else line + "," + fields
        if df.shape[1] == 1:
            line[line == ""] = '""'                      # the csv module's one empty field
        out += "\n".join(line.tolist()) + "\n"
    return out.encode("utf-8")


def frame_to_csv_text(df: pd.DataFrame) -> str:
    """CSV text of any DataFrame with our cell formatting (booleans true/false, absent empty)."""
    return _csv_bytes(df, header=True).decode("utf-8")


class ResultsWriter:
    """Screening results written a chunk at a time, put in place only when all went well.

    ``with ResultsWriter(path, columns) as out: out.write(frame)``: the header and the chunks
    go to a temporary file beside ``path`` (made when the writer is made, so a bad output path
    is refused before any work), which replaces ``path`` when the block ends without an
    exception; on any exception (bad input found late in the caseload, a full disk) it is
    removed and an earlier file at ``path`` is left untouched.
    """

    def __init__(self, path: str | Path, columns: Iterable[str]):
        _check_output(path)
        self.path = Path(path)
        self.columns = list(columns)
        self.rows = 0
        self._context = open_atomically(self.path, "output file")
        self._fh: BinaryIO = self._context.__enter__()
        try:
            self._fh.write(_csv_bytes(pd.DataFrame(columns=self.columns), header=True))
        except BaseException:
            self._context.__exit__(*sys.exc_info())
            raise

    def __enter__(self) -> "ResultsWriter":
        return self

    def write(self, df: pd.DataFrame) -> None:
        if list(df.columns) != self.columns:
            raise ValueError(f"results columns {list(df.columns)} are not {self.columns}")
        self._fh.write(_csv_bytes(df, header=False))
        self.rows += len(df)

    def __exit__(self, *exc) -> bool:
        return bool(self._context.__exit__(*exc))


def write_batch_csv(records: Iterable[PatientRecord], path: str | Path, *, with_display_name: bool = False) -> int:
    """Write records as a caseload CSV (the format :func:`read_batch_csv` reads); returns the rows written.

    The name the person's handout uses (``display_name``) is written only ``with_display_name``.
    """
    return write_dicts_csv((r.model_dump() for r in records), path, with_display_name=with_display_name)


def write_dicts_csv(dicts: Iterable[dict], path: str | Path, *, with_display_name: bool = False) -> int:
    """:func:`write_batch_csv` from record dicts (``model_dump()`` shape, or stored records' JSON):
    the whole file or nothing; text cells guarded against spreadsheet formulas."""
    columns = written_columns(with_display_name)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n", extrasaction="ignore")
    writer.writeheader()
    n = 0
    for d in dicts:
        row = dict_to_row(d)
        for col in _TEXT_COLUMNS:           # never a cell a spreadsheet would run as a formula
            row[col] = spreadsheet_text(row[col])
        writer.writerow(row)
        n += 1
    _atomic_write(path, buf.getvalue())
    return n


def write_results_csv(df: pd.DataFrame, path: str | Path) -> None:
    """Write screening results (the frame :func:`prescribe.screening.screen_batch` returns) as CSV.

    Written to a temporary file and renamed, so ``path`` is either the whole result or untouched.
    """
    with ResultsWriter(path, df.columns) as out:
        out.write(df)
