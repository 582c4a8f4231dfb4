"""Caseload files: patient records as CSV rows, and screening results as CSV.

One row per person; the columns are the record's fields flattened (see
:data:`RECORD_COLUMNS` and ``docs/rules.md``).  An empty cell means "absent".

- ``t_scores`` becomes ``t_score_lumbar_spine``, ``t_score_femoral_neck``, ``t_score_total_hip``;
- ``glucocorticoids`` becomes ``glucocorticoids_mg_per_day`` and ``glucocorticoids_months``;
- ``fractures`` is one compact cell: ``site:months_ago:low_trauma`` items joined by ``;``,
  with low_trauma ``y`` or ``n``, e.g. ``vertebra:14:y;wrist:60:n`` (empty = none);
- ``conditions`` is condition codes joined by ``;``.

Every row is validated with the patient record's own rules
(:func:`prescribe.records.parse_record`); a bad row raises
:class:`~prescribe.errors.InputError` whose field names the row and the column,
e.g. ``row 7 (patient_id P-007): age_years``.  Rows are numbered from 1 for the
first row under the header.
"""

from __future__ import annotations

import csv
import io
import math
import re
from pathlib import Path
from typing import Any, Iterable, Iterator

import numpy as np
import pandas as pd

from .errors import FieldProblem, InputError
from .fileio import CSV_MAX_BYTES, check_file_size, write_atomically
from .records import CONDITIONS, FRACTURE_SITES, T_SCORE_SITES, PatientRecord, parse_record

#: The batch file's columns, in the order files are written.
RECORD_COLUMNS: tuple[str, ...] = (
    "patient_id", "age_years", "sex", "body_mass_kg", "height_cm",
    "t_score_lumbar_spine", "t_score_femoral_neck", "t_score_total_hip",
    "fractures", "falls_past_year", "timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s",
    "glucocorticoids_mg_per_day", "glucocorticoids_months", "conditions", "pain_score",
)
#: Columns a batch file must have (the record's required fields).
REQUIRED_COLUMNS: tuple[str, ...] = ("patient_id", "age_years", "sex", "body_mass_kg", "height_cm")

_INT_COLUMNS = ("age_years", "falls_past_year", "chair_stand_30s", "pain_score")
_FLOAT_COLUMNS = ("body_mass_kg", "height_cm", "t_score_lumbar_spine", "t_score_femoral_neck",
                  "t_score_total_hip", "timed_up_and_go_s", "tandem_stance_s",
                  "glucocorticoids_mg_per_day", "glucocorticoids_months")
_TEXT_COLUMNS = ("patient_id", "sex", "fractures", "conditions")

FRACTURES_ALLOWED = ("items 'site:months_ago:y|n' joined by ';' (site one of "
                     + ", ".join(FRACTURE_SITES) + "; months_ago a number from 0 to 1200; "
                     "y = low trauma, n = not), or empty for none")


# ---------------------------------------------------------------------------
# The compact fracture cell
# ---------------------------------------------------------------------------

def parse_fractures(text: str) -> list[tuple[str, float, bool]]:
    """Parse a compact fracture cell into ``(site, months_ago, low_trauma)`` tuples.

    Raises
    ------
    ValueError
        When an item is not ``site:months_ago:y|n`` with a known site and a number
        from 0 to 1200.
    """
    text = text.strip()
    if not text:
        return []
    out = []
    for item in text.split(";"):
        parts = item.strip().split(":")
        if len(parts) != 3:
            raise ValueError(f"item {item!r} is not site:months_ago:y|n")
        site, months_text, trauma = (p.strip() for p in parts)
        if site not in FRACTURE_SITES:
            raise ValueError(f"unknown site {site!r}")
        try:
            months = float(months_text)
        except ValueError:
            raise ValueError(f"months_ago {months_text!r} is not a number") from None
        if not (math.isfinite(months) and 0 <= months <= 1200):
            raise ValueError(f"months_ago {months_text!r} is outside 0 to 1200")
        if trauma not in ("y", "n"):
            raise ValueError(f"low-trauma mark {trauma!r} is not y or n")
        out.append((site, months, trauma == "y"))
    return out


def format_fractures(fractures: Iterable[Any]) -> str:
    """The compact cell for a list of fractures (models or dicts)."""
    items = []
    for f in fractures:
        d = f if isinstance(f, dict) else f.model_dump()
        items.append(f"{d['site']}:{_fmt(d['months_ago'])}:{'y' if d['low_trauma'] else 'n'}")
    return ";".join(items)


def _fmt(value: Any) -> str:
    """A cell for one value: empty for absent, whole numbers without '.0', floats round-trip exact."""
    if value is None:
        return ""
    if isinstance(value, (bool, np.bool_)):
        return "true" if value else "false"
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if math.isnan(v):
            return ""
        if v.is_integer() and abs(v) < 1e15:
            return str(int(v))
        return repr(v)
    return str(value)


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

def record_to_row(record: PatientRecord) -> dict[str, str]:
    """One CSV row (column -> cell text) for a record."""
    d = record.model_dump()
    row = {c: "" for c in RECORD_COLUMNS}
    for c in ("patient_id", "age_years", "sex", "body_mass_kg", "height_cm", "falls_past_year",
              "timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "pain_score"):
        row[c] = _fmt(d[c])
    for site in T_SCORE_SITES:
        row[f"t_score_{site}"] = _fmt(d["t_scores"][site])
    row["fractures"] = format_fractures(d["fractures"])
    if d["glucocorticoids"] is not None:
        row["glucocorticoids_mg_per_day"] = _fmt(d["glucocorticoids"]["mg_per_day"])
        row["glucocorticoids_months"] = _fmt(d["glucocorticoids"]["months"])
    row["conditions"] = ";".join(d["conditions"])
    return row


def _row_label(number: int, row: dict[str, str]) -> str:
    pid = (row.get("patient_id") or "").strip()
    return f"row {number} (patient_id {pid})" if pid else f"row {number}"


def _column_of(field: str) -> str:
    """The batch column that holds the record field named in a FieldProblem."""
    head = field.split("[")[0]
    if head.startswith("t_scores."):
        return "t_score_" + head.split(".", 1)[1]
    if head.startswith("glucocorticoids."):
        return "glucocorticoids_" + head.split(".", 1)[1]
    if head.startswith("fractures"):
        return "fractures"
    if head == "glucocorticoids":
        return "glucocorticoids_mg_per_day"
    return head


def row_to_dict(row: dict[str, str]) -> tuple[dict, list[FieldProblem]]:
    """Turn one row's cells into a record dict; problems with cells that cannot be converted.

    The problems' fields are bare column names (the caller adds the row).
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
    scores = {site: floats[f"t_score_{site}"] for site in T_SCORE_SITES if f"t_score_{site}" in floats}
    if scores:
        data["t_scores"] = scores
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
        data["fractures"] = [{"site": s, "months_ago": m, "low_trauma": lt} for s, m, lt in parse_fractures(fx_text)]
    except ValueError as exc:
        problems.append(FieldProblem("fractures", fx_text, f"{FRACTURES_ALLOWED} ({exc})"))
    cond_text = cell("conditions")
    if cond_text:
        data["conditions"] = [c.strip() for c in cond_text.split(";") if c.strip()]
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
                column = _column_of(p.field)
                if column in bad_columns:
                    continue
                value = row.get(column, p.value) if column in ("fractures", "conditions") else p.value
                allowed = ("condition codes joined by ';' from: " + ", ".join(CONDITIONS)
                           if column == "conditions" else p.allowed)
                problems.append(FieldProblem(f"{label}: {column}", value, allowed, p.kind))
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
    ``pain_score`` (int64); ``fractures`` and ``conditions`` hold the compact cell text.
    """
    cols: dict[str, list] = {c: [] for c in RECORD_COLUMNS}
    nan = float("nan")
    for r in records:
        cols["patient_id"].append(r.patient_id)
        cols["age_years"].append(r.age_years)
        cols["sex"].append(r.sex)
        cols["body_mass_kg"].append(float(r.body_mass_kg))
        cols["height_cm"].append(float(r.height_cm))
        for site in T_SCORE_SITES:
            v = getattr(r.t_scores, site)
            cols[f"t_score_{site}"].append(nan if v is None else float(v))
        cols["fractures"].append(format_fractures(r.fractures))
        cols["falls_past_year"].append(r.falls_past_year)
        for c in ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s"):
            v = getattr(r, c)
            cols[c].append(nan if v is None else float(v))
        g = r.glucocorticoids
        cols["glucocorticoids_mg_per_day"].append(nan if g is None else float(g.mg_per_day))
        cols["glucocorticoids_months"].append(nan if g is None else float(g.months))
        cols["conditions"].append(";".join(r.conditions))
        cols["pain_score"].append(r.pain_score)
    frame = pd.DataFrame({
        c: pd.Series(v, dtype=("int64" if c in ("age_years", "falls_past_year", "pain_score") else
                               "float64" if c in _FLOAT_COLUMNS or c == "chair_stand_30s" else object))
        for c, v in cols.items()
    })
    return frame


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


def read_batch_csv(path: str | Path) -> pd.DataFrame:
    """Read and validate a caseload CSV into a DataFrame of flattened records.

    Raises
    ------
    InputError
        For an unreadable file, malformed CSV (bad quoting, ragged rows), a missing
        required or unknown column, or any bad row (field ``row N (patient_id X): column``).
    """
    p = Path(path)
    check_file_size(p, "batch file", CSV_MAX_BYTES)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise InputError.single("batch file", str(path), "an existing, readable CSV file") from None
    except (IsADirectoryError, PermissionError, UnicodeDecodeError) as exc:
        raise InputError.single("batch file", str(path),
                                f"a readable UTF-8 CSV file ({exc.__class__.__name__})") from None
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    try:
        table = [row for row in reader]
    except csv.Error as exc:
        raise InputError.single("batch file", f"{path} (line {reader.line_num})",
                                f"well-formed CSV with standard double-quote quoting ({exc})") from None
    table = [row for row in table if any(cell.strip() for cell in row)]
    if not table:
        raise InputError.single("batch file", str(path), "a CSV file with a header row and one row per person")
    header = [h.strip() for h in table[0]]
    _check_columns(header, str(path))
    rows = []
    for number, cells in enumerate(table[1:], start=1):
        if len(cells) != len(header):
            row = dict(zip(header, cells))
            raise InputError.single(_row_label(number, row), f"{len(cells)} cells",
                                    f"{len(header)} cells, one per header column", source=str(path))
        row = dict(zip(header, cells))
        for col in _TEXT_COLUMNS:
            if col in row:
                row[col] = from_spreadsheet_text(row[col])
        rows.append(row)
    try:
        return records_to_frame(rows_to_records(rows))
    except InputError as err:
        raise InputError(err.problems, str(path)) from None


def _atomic_write(path: str | Path, text: str) -> None:
    """Write ``text`` to ``path`` in one step: a reader never sees a partial file."""
    target = Path(path)
    if target.is_dir():
        raise InputError.single("output file", str(path), "a file path, not a folder")
    if not target.parent.exists():
        raise InputError.single("output file", str(path), "a path in an existing folder")
    write_atomically(target, text, "output file")


def frame_to_csv_text(df: pd.DataFrame) -> str:
    """CSV text of any DataFrame with our cell formatting (booleans true/false, absent empty)."""
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    columns = list(df.columns)
    writer.writerow(columns)
    for values in zip(*(df[c].tolist() for c in columns)):
        writer.writerow([spreadsheet_text(v) if isinstance(v, str) else _fmt(v) for v in values])
    return buf.getvalue()


def write_batch_csv(records: Iterable[PatientRecord], path: str | Path) -> None:
    """Write records as a caseload CSV (the format :func:`read_batch_csv` reads)."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(RECORD_COLUMNS), lineterminator="\n")
    writer.writeheader()
    for r in records:
        row = record_to_row(r)
        for col in _TEXT_COLUMNS:
            row[col] = spreadsheet_text(row[col])
        writer.writerow(row)
    _atomic_write(path, buf.getvalue())


def write_results_csv(df: pd.DataFrame, path: str | Path) -> None:
    """Write screening results (the frame :func:`prescribe.screening.screen_batch` returns) as CSV.

    Written to a temporary file and renamed, so ``path`` is either the whole result or untouched.
    """
    _atomic_write(path, frame_to_csv_text(df))
