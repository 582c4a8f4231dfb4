"""Caseload cells validated a column at a time, into the typed columns the screening reads.

A caseload CSV is checked with the patient record's own rules, but a column at a time:
each distinct cell of a column is read once (a caseload repeats few distinct ages, masses,
T-scores, fracture items and condition lists), and the bounds, vocabularies and the
"allowed" words of every message come from the record itself
(:data:`prescribe.records.FIELD_META`, ``RECORD_SCHEMA`` and
:func:`prescribe.records.describe_allowed`), never from a second copy here.

The problems found are exactly those that validating each row with
:func:`prescribe.screening.batch_io.rows_to_records` (one record model a row) finds, in the same order
and with the same words; ``tests/test_batch_columns.py`` checks that on random rows with bad
cells.  Within a row, problems with cells that cannot be read at all come first (numbers,
then the glucocorticoid pair, then the fracture cell), then the record's own problems in
field order.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from itertools import chain
from typing import Any, Iterable, Sequence

import numpy as np
import pandas as pd

from ..errors import FieldProblem
from ..identifiers import identifier_problem
from ..records import CONDITIONS, FIELD_META, FRACTURE_SITES, RECORD_SCHEMA, T_SCORE_SITES, describe_allowed

#: The batch file's columns, in the order files are written.
RECORD_COLUMNS: tuple[str, ...] = (
    "patient_id", "age_years", "sex", "body_mass_kg", "height_cm",
    "t_score_lumbar_spine", "t_score_femoral_neck", "t_score_total_hip",
    "fractures", "falls_past_year", "timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s",
    "glucocorticoids_mg_per_day", "glucocorticoids_months", "conditions", "pain_score",
)
#: Columns a batch file must have (the record's required fields).
REQUIRED_COLUMNS: tuple[str, ...] = ("patient_id", "age_years", "sex", "body_mass_kg", "height_cm")

INT_COLUMNS = ("age_years", "falls_past_year", "chair_stand_30s", "pain_score")
FLOAT_COLUMNS = ("body_mass_kg", "height_cm", "t_score_lumbar_spine", "t_score_femoral_neck",
                 "t_score_total_hip", "timed_up_and_go_s", "tandem_stance_s",
                 "glucocorticoids_mg_per_day", "glucocorticoids_months")
TEXT_COLUMNS = ("patient_id", "sex", "fractures", "conditions")

FRACTURES_ALLOWED = ("items 'site:months_ago:y|n' joined by ';' (site one of "
                     + ", ".join(FRACTURE_SITES) + "; months_ago a number from 0 to 1200; "
                     "y = low trauma, n = not), or empty for none")
CONDITIONS_ALLOWED = "condition codes joined by ';' from: " + ", ".join(CONDITIONS)


# ---------------------------------------------------------------------------
# The compact fracture cell
# ---------------------------------------------------------------------------

def parse_fracture_item(item: str) -> tuple[str, float, bool]:
    """One ``site:months_ago:y|n`` item as ``(site, months_ago, low_trauma)``.

    Raises
    ------
    ValueError
        When the item is not three parts with a known site, a number from 0 to 1200
        and ``y`` or ``n``.
    """
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
    return site, months, trauma == "y"


def parse_fractures(text: str) -> list[tuple[str, float, bool]]:
    """Parse a compact fracture cell into ``(site, months_ago, low_trauma)`` tuples.

    Raises
    ------
    ValueError
        When an item is not ``site:months_ago:y|n`` with a known site and a number
        from 0 to 1200 (the first such item).
    """
    text = text.strip()
    if not text:
        return []
    return [parse_fracture_item(item) for item in text.split(";")]


def format_fractures(fractures: Iterable[Any]) -> str:
    """The compact cell for a list of fractures (models, dicts or ``(site, months, low)`` tuples)."""
    items = []
    for f in fractures:
        if isinstance(f, tuple):
            site, months, low = f
        else:
            d = f if isinstance(f, dict) else f.model_dump()
            site, months, low = d["site"], d["months_ago"], d["low_trauma"]
        items.append(f"{site}:{format_cell(months)}:{'y' if low else 'n'}")
    return ";".join(items)


def format_cell(value: Any) -> str:
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


@dataclass(frozen=True)
class FractureColumns:
    """What the screening reads from the fracture cells, one entry a person.

    ``low_trauma_count`` is float64 (0 for none); ``months_since_last`` is NaN for a person
    with no fracture; the others are bool.
    """

    low_trauma_count: np.ndarray
    low_trauma_vertebral: np.ndarray
    low_trauma_hip: np.ndarray
    hip: np.ndarray
    months_since_last: np.ndarray

    def take(self, index: np.ndarray) -> "FractureColumns":
        """The entries at ``index`` (an integer or boolean array)."""
        return FractureColumns(*(getattr(self, f)[index] for f in self.__dataclass_fields__))


def fracture_columns(cells: Sequence[str]) -> tuple[FractureColumns, np.ndarray, dict[int, str]]:
    """Parse a column of compact fracture cells ('' or a missing value for none).

    Each distinct cell is split once and each distinct item parsed once with
    :func:`parse_fracture_item`; the per-person figures are reduced with numpy.

    Returns
    -------
    (FractureColumns, numpy.ndarray, dict)
        The figures (as for no fracture where a cell is bad), each cell in its normal written
        form (:func:`format_fractures`; '' where bad), and ``{position: reason}`` for each bad
        cell (the reason :func:`parse_fractures` gives for its first bad item).
    """
    codes, uniques = pd.factorize(np.asarray(cells, dtype=object))     # a missing cell: code -1
    texts = [t.strip() for t in uniques.tolist()]
    k = len(texts)
    items_of = [t.split(";") if t else [] for t in texts]
    sizes = np.array([len(items) for items in items_of], dtype=np.intp)
    owner = np.repeat(np.arange(k), sizes)
    item_codes, item_uniques = pd.factorize(np.array([""] + list(chain.from_iterable(items_of)), dtype=object))
    item_codes = item_codes[1:]
    parsed: list[tuple[str, float, bool] | None] = []
    for item in item_uniques.tolist():
        try:
            parsed.append(parse_fracture_item(item))
        except ValueError:
            parsed.append(None)
    good_item = np.array([p is not None for p in parsed], dtype=bool)
    bad_cell = np.zeros(k + 1, dtype=bool)                          # [k]: the missing cell
    bad_cell[owner[~good_item[item_codes]]] = True
    fill = [p or ("other", 0.0, False) for p in parsed]
    site = np.array([p[0] for p in fill], dtype=object)[item_codes]
    months = np.array([p[1] for p in fill], dtype=np.float64)[item_codes]
    low = np.array([p[2] for p in fill], dtype=bool)[item_codes]
    keep = ~bad_cell[owner]
    owner, site, months, low = owner[keep], site[keep], months[keep], low[keep]
    is_hip, is_vertebra = site == "hip", site == "vertebra"
    count = np.bincount(owner, weights=low, minlength=k + 1).astype(np.float64)
    vert = np.bincount(owner, weights=low & is_vertebra, minlength=k + 1) > 0
    lt_hip = np.bincount(owner, weights=low & is_hip, minlength=k + 1) > 0
    hip = np.bincount(owner, weights=is_hip, minlength=k + 1) > 0
    last = np.full(k + 1, np.nan)
    if len(owner):
        first = np.flatnonzero(np.concatenate(([True], owner[1:] != owner[:-1])))
        last[owner[first]] = np.minimum.reduceat(months, first)
    # The normal form of each distinct cell, from its items' normal forms.
    item_text = [format_fractures([p]) if p else "" for p in parsed]
    ends = np.cumsum(sizes)
    normal = np.empty(k + 1, dtype=object)
    normal[k] = ""
    for j, (stop, size) in enumerate(zip(ends.tolist(), sizes.tolist())):
        normal[j] = "" if bad_cell[j] else ";".join(item_text[c] for c in item_codes[stop - size:stop].tolist())
    why = {j: _first_reason(texts[j]) for j in np.flatnonzero(bad_cell[:k]).tolist()}
    reasons = {pos: why[codes[pos]] for pos in np.flatnonzero(bad_cell[codes]).tolist()}
    columns = FractureColumns(*(a[codes] for a in (count, vert, lt_hip, hip, last)))
    return columns, normal[codes], reasons


def _first_reason(text: str) -> str:
    """What :func:`parse_fractures` says about a bad cell."""
    try:
        parse_fractures(text)
    except ValueError as exc:
        return str(exc)
    raise AssertionError(f"fracture cell {text!r} was taken for bad but parses")


# ---------------------------------------------------------------------------
# Column-wise validation
# ---------------------------------------------------------------------------

def _schema_node(loc: tuple[str, ...]) -> dict:
    """The record schema's entry for a field (nested fields through ``$defs``)."""
    if len(loc) == 1:
        return FIELD_META[loc[0]]
    parent = RECORD_SCHEMA["properties"][loc[0]]
    ref = next(o["$ref"] for o in [parent, *parent.get("anyOf", [])] if "$ref" in o)
    node = RECORD_SCHEMA["$defs"][ref.split("/")[-1]]["properties"][loc[1]]
    return next((o for o in [node, *node.get("anyOf", [])] if "minimum" in o), node)


@dataclass(frozen=True)
class NumberColumn:
    """A numeric batch column: the record field it fills and that field's bounds and words."""

    column: str
    loc: tuple[str, ...]
    whole: bool
    required: bool
    minimum: float | None
    maximum: float | None
    allowed: str

    @classmethod
    def of(cls, column: str, loc: tuple[str, ...]) -> "NumberColumn":
        node = _schema_node(loc)
        return cls(column, loc, column in INT_COLUMNS, column in REQUIRED_COLUMNS,
                   node.get("minimum"), node.get("maximum"), describe_allowed(loc))


def _loc_of(column: str) -> tuple[str, ...]:
    if column.startswith("t_score_"):
        return ("t_scores", column[len("t_score_"):])
    if column.startswith("glucocorticoids_"):
        return ("glucocorticoids", column[len("glucocorticoids_"):])
    return (column,)


NUMBER_COLUMNS: dict[str, NumberColumn] = {c: NumberColumn.of(c, _loc_of(c)) for c in INT_COLUMNS + FLOAT_COLUMNS}
#: Order of the problems with unreadable cells within a row (as :func:`prescribe.screening.batch_io.row_to_dict`).
CELL_ORDER = {c: i for i, c in enumerate(INT_COLUMNS + FLOAT_COLUMNS + ("glucocorticoids_pair", "fractures"))}
#: Order of the record's own problems within a row (the record's field order).
FIELD_ORDER = {c: i for i, c in enumerate(RECORD_COLUMNS)}
SEXES: tuple[str, ...] = tuple(RECORD_SCHEMA["properties"]["sex"]["enum"])
_ID_PATTERN = re.compile(RECORD_SCHEMA["properties"]["patient_id"]["pattern"])
_ID_MAX = FIELD_META["patient_id"].get("maxLength") or RECORD_SCHEMA["properties"]["patient_id"]["maxLength"]


@dataclass
class ColumnProblems:
    """Problems found in a chunk: (row position, phase, order, bare FieldProblem) each."""

    items: list[tuple[int, int, int, FieldProblem]]

    def add(self, positions: Iterable[int], phase: int, order: int, make) -> None:
        for pos in positions:
            self.items.append((int(pos), phase, order, make(int(pos))))

    def rows(self) -> np.ndarray:
        return np.array(sorted({p for p, *_ in self.items}), dtype=np.intp)


def _stripped(cells: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each cell stripped, and its code among the distinct raw cells (read once each)."""
    codes, uniques = pd.factorize(cells)
    stripped = np.array([u.strip() for u in uniques.tolist()] + [""], dtype=object)
    return stripped[codes], codes


def _numbers(spec: NumberColumn, cells: np.ndarray, problems: ColumnProblems) -> tuple[np.ndarray, np.ndarray]:
    """The column as float64 (NaN absent or unreadable) and a mask of cells that could not be read."""
    codes, uniques = pd.factorize(cells)
    texts = [u.strip() for u in uniques.tolist()]
    values = np.full(len(texts) + 1, np.nan)
    unreadable = np.zeros(len(texts) + 1, dtype=bool)
    for j, text in enumerate(texts):
        if not text:
            continue
        try:
            v = float(text)
            if not math.isfinite(v) or (spec.whole and not v.is_integer()):
                raise ValueError
        except ValueError:
            unreadable[j] = True
            continue
        values[j] = v
    value, bad = values[codes], unreadable[codes]
    words = ("a whole number" if spec.whole else "a finite number") + ", or empty when absent"
    problems.add(np.flatnonzero(bad), 0, CELL_ORDER[spec.column],
                 lambda pos: FieldProblem(spec.column, texts[codes[pos]], words))
    return value, bad


def _out_of_bounds(spec: NumberColumn, value: np.ndarray, problems: ColumnProblems, where=None) -> None:
    """Record problems for values outside the field's bounds (``where`` limits the rows checked)."""
    outside = np.zeros(len(value), dtype=bool)
    if spec.minimum is not None:
        outside |= value < spec.minimum
    if spec.maximum is not None:
        outside |= value > spec.maximum
    if where is not None:
        outside &= where
    shown = (lambda v: int(v)) if spec.whole else float
    problems.add(np.flatnonzero(outside), 1, FIELD_ORDER[spec.column],
                 lambda pos: FieldProblem(spec.column, shown(value[pos]), spec.allowed))


def validate_columns(cells: dict[str, np.ndarray], n: int) -> tuple[pd.DataFrame, FractureColumns, ColumnProblems]:
    """Validate a chunk of caseload cells (column -> object array of raw text, formula marks removed).

    Returns
    -------
    (pandas.DataFrame, FractureColumns, ColumnProblems)
        The flattened records (the shape of :func:`prescribe.screening.batch_io.records_to_frame`;
        rows with problems hold placeholders), the fracture figures, and the problems.
    """
    problems = ColumnProblems([])
    empty = np.full(n, "", dtype=object)

    def text(col: str) -> np.ndarray:
        return cells[col] if col in cells else empty

    frame: dict[str, Any] = {}
    # patient_id: required text of 1-64 characters without surrounding spaces or control characters.
    pid, _ = _stripped(text("patient_id"))
    missing_id = pid == ""
    problems.add(np.flatnonzero(missing_id), 1, FIELD_ORDER["patient_id"],
                 lambda pos: FieldProblem("patient_id", None, FIELD_META["patient_id"]["allowed"], kind="missing"))
    # The record's own rules: length, no surrounding spaces, and no control or invisible direction
    # characters (the one shared check, prescribe.identifiers).
    bad_id = [i for i in np.flatnonzero(~missing_id)
              if len(pid[i]) > _ID_MAX or not _ID_PATTERN.fullmatch(pid[i]) or identifier_problem(pid[i])] if n else []
    problems.add(bad_id, 1, FIELD_ORDER["patient_id"],
                 lambda pos: FieldProblem("patient_id", pid[pos], FIELD_META["patient_id"]["allowed"]))
    frame["patient_id"] = pid
    # Numbers.
    values: dict[str, np.ndarray] = {}
    unreadable: dict[str, np.ndarray] = {}
    for col, spec in NUMBER_COLUMNS.items():
        values[col], unreadable[col] = _numbers(spec, text(col), problems)
    # The glucocorticoid pair: both or neither.
    mg_col, months_col = "glucocorticoids_mg_per_day", "glucocorticoids_months"
    mg_text, _ = _stripped(text(mg_col))
    months_text, _ = _stripped(text(months_col))
    mg_ok, months_ok = ~np.isnan(values[mg_col]), ~np.isnan(values[months_col])
    problems.add(np.flatnonzero(mg_ok & (months_text == "")), 0, CELL_ORDER["glucocorticoids_pair"],
                 lambda pos: FieldProblem(months_col, "", "a number of months when glucocorticoids_mg_per_day "
                                          "is given", kind="invalid"))
    problems.add(np.flatnonzero(months_ok & (mg_text == "")), 0, CELL_ORDER["glucocorticoids_pair"],
                 lambda pos: FieldProblem(mg_col, "", "a dose in mg/day when glucocorticoids_months is given",
                                          kind="invalid"))
    both = mg_ok & months_ok
    # Fractures: unreadable cells are cell problems.
    fx_text, _ = _stripped(text("fractures"))
    fractures, fx_normal, reasons = fracture_columns(fx_text)
    problems.add(sorted(reasons), 0, CELL_ORDER["fractures"],
                 lambda pos: FieldProblem("fractures", fx_text[pos], f"{FRACTURES_ALLOWED} ({reasons[pos]})"))
    # The record's own checks on what could be read: required, bounds, vocabularies.
    for col, spec in NUMBER_COLUMNS.items():
        absent = np.isnan(values[col]) & ~unreadable[col]
        if spec.required:
            problems.add(np.flatnonzero(absent), 1, FIELD_ORDER[col],
                         lambda pos, spec=spec: FieldProblem(spec.column, None, spec.allowed, kind="missing"))
        _out_of_bounds(spec, values[col], problems, both if col in (mg_col, months_col) else None)
    sex, _ = _stripped(text("sex"))
    problems.add(np.flatnonzero(sex == ""), 1, FIELD_ORDER["sex"],
                 lambda pos: FieldProblem("sex", None, FIELD_META["sex"]["allowed"], kind="missing"))
    problems.add(np.flatnonzero((sex != "") & ~np.isin(sex, SEXES)), 1, FIELD_ORDER["sex"],
                 lambda pos: FieldProblem("sex", sex[pos], FIELD_META["sex"]["allowed"]))
    conditions = _condition_column(text("conditions"), problems)
    # The frame, typed as records_to_frame makes it.
    frame["age_years"] = values["age_years"]
    frame["sex"] = sex
    for col in ("body_mass_kg", "height_cm", *(f"t_score_{s}" for s in T_SCORE_SITES)):
        frame[col] = values[col]
    frame["fractures"] = fx_normal
    frame["falls_past_year"] = np.nan_to_num(values["falls_past_year"], nan=0.0)
    for col in ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s"):
        frame[col] = values[col]
    frame[mg_col] = np.where(both, values[mg_col], np.nan)
    frame[months_col] = np.where(both, values[months_col], np.nan)
    frame["conditions"] = conditions
    frame["pain_score"] = np.nan_to_num(values["pain_score"], nan=0.0)
    bad = problems.rows()
    for col in ("age_years", "falls_past_year", "pain_score"):
        column = frame[col].copy()
        column[bad] = 0                                   # placeholders: those rows are refused
        frame[col] = column.astype(np.int64)
    out = pd.DataFrame({c: pd.Series(frame[c], dtype=frame[c].dtype, copy=False) for c in RECORD_COLUMNS},
                       copy=False)
    return out, fractures, problems


def _condition_column(cells: np.ndarray, problems: ColumnProblems) -> np.ndarray:
    """Condition cells in their normal form (codes joined by ';'); record problems for unknown or
    repeated codes, one per unknown code (as the record model reports them), with the raw cell."""
    codes, uniques = pd.factorize(cells)
    normal, unknown, repeated = [], [], []
    for raw in uniques.tolist():
        listed = [c.strip() for c in raw.strip().split(";") if c.strip()]
        normal.append(";".join(listed))
        unknown.append(sum(c not in CONDITIONS for c in listed))
        repeated.append(len(set(listed)) != len(listed))
    normal_arr = np.array(normal + [""], dtype=object)
    raw_cells = uniques.tolist()
    count = np.array([u or (1 if r else 0) for u, r in zip(unknown, repeated)] + [0], dtype=np.intp)
    bad = np.flatnonzero(count[codes] > 0)
    for pos in bad.tolist():
        j = codes[pos]
        for _ in range(count[j]):
            problems.items.append((pos, 1, FIELD_ORDER["conditions"],
                                   FieldProblem("conditions", raw_cells[j], CONDITIONS_ALLOWED)))
    return normal_arr[codes]
