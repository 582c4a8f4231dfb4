"""Caseload cells validated a column at a time, into the typed columns the screening reads.

A caseload CSV is checked with the patient record's own rules, but a column at a time:
each distinct cell of a column is read once (a caseload repeats few distinct ages, masses,
T-scores, fracture items, medicine and operation items and condition lists), and the bounds,
vocabularies and the "allowed" words of every message come from the record itself
(:data:`prescribe.records.FIELD_META`, ``RECORD_SCHEMA``, :func:`prescribe.records.describe_allowed`,
and, for the version-2 fields and the items of the compact cells, the record model validating
each distinct value once inside an otherwise valid record: :func:`record_value_problems`), never
from a second copy here.

The problems found are exactly those that validating each row with
:func:`prescribe.screening.batch_io.rows_to_records` (one record model a row) finds, in the same order
and with the same words; ``tests/test_batch_columns.py`` checks that on random rows with bad
cells.  Within a row, problems with cells that cannot be read at all come first (numbers,
then the glucocorticoid pair, the fracture cell, the true/false cells, the medicine and the
operation cells), then the record's own problems in the record's field order, then (only for
a row without any of the record's own problems, as the record model checks across fields last)
a menopausal status given for a man, or ``record_version`` 1 with version-2 fields.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache
from itertools import chain
from typing import Any, Callable, Iterable, NamedTuple, Sequence

import numpy as np
import pandas as pd
from pydantic import ValidationError

from ..errors import FieldProblem
from ..identifiers import identifier_problem
from ..records import (CONDITIONS, FIELD_META, FRACTURE_SITES, RECORD_SCHEMA, T_SCORE_SITES, PatientRecord,
                       describe_allowed, problems_from_validation)

#: The first stage's columns (a version-1 caseload file has these, or some of them).
RECORD_V1_COLUMNS: tuple[str, ...] = (
    "patient_id", "age_years", "sex", "body_mass_kg", "height_cm",
    "t_score_lumbar_spine", "t_score_femoral_neck", "t_score_total_hip",
    "fractures", "falls_past_year", "timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s",
    "glucocorticoids_mg_per_day", "glucocorticoids_months", "conditions", "pain_score",
)
#: The version-2 record's columns (all optional), after the first stage's.
RECORD_V2_COLUMNS: tuple[str, ...] = (
    "record_version", "z_score_lumbar_spine", "z_score_femoral_neck", "z_score_total_hip", "menopause",
    "medications", "cancer_active", "cancer_bone_metastases", "surgeries", "cognition", "lives_alone",
    "has_carer", "display_name",
)
#: The batch file's columns, in the order files are written.
RECORD_COLUMNS: tuple[str, ...] = RECORD_V1_COLUMNS + RECORD_V2_COLUMNS
#: Columns a caseload file is written with only when asked (the name the person's handout uses).
PRIVATE_COLUMNS: tuple[str, ...] = ("display_name",)
#: Columns a batch file must have (the record's required fields).
REQUIRED_COLUMNS: tuple[str, ...] = ("patient_id", "age_years", "sex", "body_mass_kg", "height_cm")

INT_COLUMNS = ("age_years", "falls_past_year", "chair_stand_30s", "pain_score", "record_version")
FLOAT_COLUMNS = ("body_mass_kg", "height_cm", "t_score_lumbar_spine", "t_score_femoral_neck",
                 "t_score_total_hip", "timed_up_and_go_s", "tandem_stance_s",
                 "glucocorticoids_mg_per_day", "glucocorticoids_months",
                 "z_score_lumbar_spine", "z_score_femoral_neck", "z_score_total_hip")
#: Cells that hold true or false (or nothing).
BOOL_COLUMNS = ("cancer_active", "lives_alone", "has_carer")
TEXT_COLUMNS = ("patient_id", "sex", "fractures", "conditions", "menopause", "medications",
                "cancer_bone_metastases", "surgeries", "cognition", "display_name")
#: Whole-number columns kept as int64 in a frame (absent: the record's default 0); the other
#: number columns are float64 with NaN for absent.
FRAME_INT64_COLUMNS = ("age_years", "falls_past_year", "pain_score")


def frame_dtype(column: str) -> str:
    """The dtype of a column in a frame of flattened records (:func:`batch_io.records_to_frame`).

    Numbers: int64 for :data:`FRAME_INT64_COLUMNS`, float64 (NaN absent) for the other numbers;
    true/false cells: object (True, False or None); text and compact cells: object ('' absent).
    """
    if column in FRAME_INT64_COLUMNS:
        return "int64"
    if column in FLOAT_COLUMNS or column in INT_COLUMNS:
        return "float64"
    return "object"


FRACTURES_ALLOWED = ("items 'site:months_ago:y|n' joined by ';' (site one of "
                     + ", ".join(FRACTURE_SITES) + "; months_ago a number from 0 to 1200; "
                     "y = low trauma, n = not; a vertebra may add its level as a fourth part, "
                     "e.g. 'vertebra:12:y:T12'), or empty for none")
CONDITIONS_ALLOWED = "condition codes joined by ';' from: " + ", ".join(CONDITIONS)
MEDICATIONS_ALLOWED = ("items 'class:months_on:months_since_last_dose' joined by ';', with an empty part "
                       "where a figure is not known (e.g. 'denosumab:36:10;anticoagulant::0'), or empty for none")
SURGERIES_ALLOWED = ("items 'procedure:side:months_ago:y|n' joined by ';' (y = the surgeon has cleared impact, "
                     "n = not; an empty side means none, e.g. 'hip_replacement:left:8:n'), or empty for none")
#: What each compact list column holds, for the messages about cells that cannot be read.
LIST_ALLOWED = {"fractures": FRACTURES_ALLOWED, "medications": MEDICATIONS_ALLOWED, "surgeries": SURGERIES_ALLOWED}


# ---------------------------------------------------------------------------
# The compact cells: fractures, medicines, operations
# ---------------------------------------------------------------------------

class FractureItem(NamedTuple):
    """One fracture item of a compact cell."""

    site: str
    months_ago: float
    low_trauma: bool
    level: str | None = None


def _number_part(name: str, text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise ValueError(f"{name} {text!r} is not a number") from None
    if not math.isfinite(value):
        raise ValueError(f"{name} {text!r} is not a finite number")
    return value


def parse_fracture_item(item: str) -> FractureItem:
    """One ``site:months_ago:y|n`` item (a vertebra may add ``:LEVEL``) as a :class:`FractureItem`.

    The level is taken as written (an empty fourth part: none); whether it is a vertebra's
    level, and on a vertebra, is the record's check.

    Raises
    ------
    ValueError
        When the item is not three or four parts with a known site, a number from 0 to 1200
        and ``y`` or ``n``.
    """
    parts = item.strip().split(":")
    if len(parts) not in (3, 4):
        raise ValueError(f"item {item!r} is not site:months_ago:y|n[:level]")
    site, months_text, trauma = (p.strip() for p in parts[:3])
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
    level = parts[3].strip() if len(parts) == 4 else ""
    return FractureItem(site, months, trauma == "y", level or None)


def parse_fractures(text: str) -> list[FractureItem]:
    """Parse a compact fracture cell into :class:`FractureItem` tuples ``(site, months_ago, low_trauma, level)``.

    Raises
    ------
    ValueError
        When an item is not ``site:months_ago:y|n[:level]`` with a known site and a number
        from 0 to 1200 (the first such item).
    """
    return parse_items(text, parse_fracture_item)


def fracture_dict(item: FractureItem) -> dict:
    """The record's fracture dict of an item (``level`` only when given)."""
    d = {"site": item.site, "months_ago": item.months_ago, "low_trauma": item.low_trauma}
    if item.level is not None:
        d["level"] = item.level
    return d


def parse_medication_item(item: str) -> dict:
    """One ``class:months_on:months_since_last_dose`` item as the record's medication dict.

    An empty part is a figure not known (``None``; an empty class is left out, and the record
    says it is required).  Whether the class is known and the figures in range is the record's check.

    Raises
    ------
    ValueError
        When the item is not three parts, or a figure is not a finite number.
    """
    parts = item.strip().split(":")
    if len(parts) != 3:
        raise ValueError(f"item {item!r} is not class:months_on:months_since_last_dose")
    code, months_on, since = (p.strip() for p in parts)
    out: dict[str, Any] = {"class": code} if code else {}
    out["months_on"] = _number_part("months_on", months_on) if months_on else None
    out["months_since_last_dose"] = _number_part("months_since_last_dose", since) if since else None
    return out


def parse_surgery_item(item: str) -> dict:
    """One ``procedure:side:months_ago:y|n`` item as the record's surgery dict.

    An empty side is left out (the record's default, none); an empty procedure or months_ago
    is left out and the record says it is required.  The vocabularies and the range are the
    record's check.

    Raises
    ------
    ValueError
        When the item is not four parts, months_ago is not a finite number, or the last part
        is not ``y`` or ``n``.
    """
    parts = item.strip().split(":")
    if len(parts) != 4:
        raise ValueError(f"item {item!r} is not procedure:side:months_ago:y|n")
    procedure, side, months, cleared = (p.strip() for p in parts)
    out: dict[str, Any] = {}
    if procedure:
        out["procedure"] = procedure
    if side:
        out["side"] = side
    if months:
        out["months_ago"] = _number_part("months_ago", months)
    if cleared not in ("y", "n"):
        raise ValueError(f"surgeon-cleared mark {cleared!r} is not y or n")
    out["surgeon_cleared_impact"] = cleared == "y"
    return out


def parse_items(text: str, parse_item: Callable[[str], Any]) -> list:
    """The items of a compact cell (``;``-joined), each parsed by ``parse_item``; '' is none.

    Raises
    ------
    ValueError
        The first bad item's reason.
    """
    text = text.strip()
    if not text:
        return []
    return [parse_item(item) for item in text.split(";")]


def _as_dict(item: Any) -> dict:
    return item if isinstance(item, dict) else item.model_dump()


def format_fractures(fractures: Iterable[Any]) -> str:
    """The compact cell for a list of fractures (models, dicts or ``(site, months, low[, level])`` tuples)."""
    items = []
    for f in fractures:
        if isinstance(f, tuple):
            site, months, low, level = (*f, None)[:4]
        else:
            d = _as_dict(f)
            site, months, low, level = d["site"], d["months_ago"], d["low_trauma"], d.get("level")
        items.append(f"{site}:{format_cell(months)}:{'y' if low else 'n'}" + (f":{level}" if level else ""))
    return ";".join(items)


def format_medications(medications: Iterable[Any]) -> str:
    """The compact cell for a list of medications (models or dicts)."""
    return ";".join(f"{d['class']}:{format_cell(d.get('months_on'))}:{format_cell(d.get('months_since_last_dose'))}"
                    for d in map(_as_dict, medications))


def format_surgeries(surgeries: Iterable[Any]) -> str:
    """The compact cell for a list of operations (models or dicts)."""
    return ";".join(f"{d['procedure']}:{d.get('side') or 'none'}:{format_cell(d['months_ago'])}:"
                    f"{'y' if d.get('surgeon_cleared_impact') else 'n'}" for d in map(_as_dict, surgeries))


#: Per compact list column: the record field, the item parser and the item writer.
LIST_COLUMNS: dict[str, tuple[Callable[[str], Any], Callable[[Any], dict], Callable[[Iterable[Any]], str]]] = {
    "fractures": (parse_fracture_item, fracture_dict, format_fractures),
    "medications": (parse_medication_item, dict, format_medications),
    "surgeries": (parse_surgery_item, dict, format_surgeries),
}


def parse_bool_cell(text: str) -> bool | None:
    """A true/false cell: ``true`` or ``false`` in any case, '' for absent.

    Raises
    ------
    ValueError
        For any other text.
    """
    word = text.strip().lower()
    if not word:
        return None
    if word in ("true", "false"):
        return word == "true"
    raise ValueError(f"{text!r} is not true or false")


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


# ---------------------------------------------------------------------------
# The record's own words for one value, and the column of a record field
# ---------------------------------------------------------------------------

#: An otherwise valid record that one field's value is checked inside.
_TEMPLATE = {"patient_id": "CHECK-1", "age_years": 70, "sex": "female", "body_mass_kg": 60.0, "height_cm": 160.0}


def record_value_problems(values: dict[str, Any]) -> list[FieldProblem]:
    """What the record model says about some fields' values, inside an otherwise valid record.

    The problems (fields as the record names them, e.g. ``medications[0].class``) are exactly
    those the record model gives for these values in any row whose other fields are valid,
    in its words.  Used once per distinct value of a column.
    """
    data = {**_TEMPLATE, **values}
    try:
        PatientRecord.model_validate(data)
    except ValidationError as err:
        return problems_from_validation(err, data)
    return []


def column_of(field: str) -> str:
    """The batch column that holds the record field named in a FieldProblem."""
    head = field.split("[")[0]
    for group, prefix in (("t_scores.", "t_score_"), ("z_scores.", "z_score_"),
                          ("glucocorticoids.", "glucocorticoids_"), ("cancer.", "cancer_")):
        if head.startswith(group):
            return prefix + head[len(group):]
    if head == "glucocorticoids":
        return "glucocorticoids_mg_per_day"
    if head == "cancer":
        return "cancer_active"
    return head


_ITEM_FIELD = re.compile(r"^(?P<column>\w+)\[(?P<index>\d+)\]\.(?P<part>\w+)$")


def item_problem(problem: FieldProblem, cell: str) -> FieldProblem | None:
    """A record problem with one item of a compact list cell, told about that item: the bare
    column, the item as written and the record's words for the part, e.g. ``medications must be
    items whose class is one of ..., not 'denosumb:36:10'``.  None when ``problem`` is not about
    an item of a compact list column."""
    m = _ITEM_FIELD.match(problem.field)
    if m is None or m["column"] not in LIST_COLUMNS:
        return None
    items = cell.strip().split(";")
    return FieldProblem(m["column"], items[int(m["index"])].strip(), f"items whose {m['part']} is {problem.allowed}")


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


_GROUPS = (("t_score_", "t_scores"), ("z_score_", "z_scores"), ("glucocorticoids_", "glucocorticoids"),
           ("cancer_", "cancer"))


def _loc_of(column: str) -> tuple[str, ...]:
    """The record field a column fills, e.g. ``('z_scores', 'total_hip')``."""
    for prefix, field in _GROUPS:
        if column.startswith(prefix):
            return (field, column[len(prefix):])
    return (column,)


NUMBER_COLUMNS: dict[str, NumberColumn] = {c: NumberColumn.of(c, _loc_of(c)) for c in INT_COLUMNS + FLOAT_COLUMNS}
#: Order of the problems with unreadable cells within a row (as :func:`prescribe.screening.batch_io.row_to_dict`).
CELL_ORDER = {c: i for i, c in enumerate(INT_COLUMNS + FLOAT_COLUMNS + ("glucocorticoids_pair", "fractures")
                                         + BOOL_COLUMNS + ("medications", "surgeries"))}
_MODEL_FIELDS = list(PatientRecord.model_fields)
#: Order of the record's own problems within a row: the record's field order (a group's columns,
#: such as the three T-scores, in the order of their sub-fields).
FIELD_ORDER = {c: i for i, c in enumerate(sorted(RECORD_COLUMNS, key=lambda c: (_MODEL_FIELDS.index(_loc_of(c)[0]),
                                                                               RECORD_COLUMNS.index(c))))}
#: The record's checks across fields come after all its other checks.
CROSS_ORDER = len(FIELD_ORDER)
SEXES: tuple[str, ...] = tuple(RECORD_SCHEMA["properties"]["sex"]["enum"])
_ID_PATTERN = re.compile(RECORD_SCHEMA["properties"]["patient_id"]["pattern"])
_ID_MAX = FIELD_META["patient_id"].get("maxLength") or RECORD_SCHEMA["properties"]["patient_id"]["maxLength"]
#: What a cancer record with no metastases status holds (the record's default).
_METASTASES_DEFAULT = PatientRecord.model_fields["cancer"].annotation.__args__[0].model_fields["bone_metastases"].default


def bool_allowed(column: str) -> str:
    """What a true/false cell accepts, in the record's words."""
    return describe_allowed(_loc_of(column)) + ", or empty when absent"


@dataclass
class ColumnProblems:
    """Problems found in a chunk: (row position, phase, order, bare FieldProblem) each."""

    items: list[tuple[int, int, int, FieldProblem]]

    def add(self, positions: Iterable[int], phase: int, order: int, make) -> None:
        for pos in positions:
            self.items.append((int(pos), phase, order, make(int(pos))))

    def rows(self) -> np.ndarray:
        return np.array(sorted({p for p, *_ in self.items}), dtype=np.intp)

    def rows_with_record_problems(self, n: int) -> np.ndarray:
        """A mask of the rows with one of the record's own problems (phase 1)."""
        mask = np.zeros(n, dtype=bool)
        mask[[p for p, phase, *_ in self.items if phase == 1]] = True
        return mask


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


def _spread(codes: np.ndarray, per_value: list[list[FieldProblem]], phase: int, order: int,
            problems: ColumnProblems) -> None:
    """Each distinct value's problems (in their order) for every row holding it (code -1: none)."""
    has = np.array([bool(p) for p in per_value] + [False], dtype=bool)
    for pos in np.flatnonzero(has[codes]).tolist():
        for problem in per_value[codes[pos]]:
            problems.items.append((pos, phase, order, problem))


def _record_checked(column: str, cells: np.ndarray, problems: ColumnProblems, convert=None) -> None:
    """The record's problems with each distinct non-empty value of a column (its own words)."""
    codes, uniques = pd.factorize(cells)
    field = _loc_of(column)[0]
    per_value = [record_value_problems({field: convert(u) if convert else u}) if u != "" else []
                 for u in uniques.tolist()]
    _spread(codes, per_value, 1, FIELD_ORDER[column], problems)


def _booleans(column: str, cells: np.ndarray, problems: ColumnProblems) -> tuple[np.ndarray, np.ndarray]:
    """A true/false column as an object array (True, False or None) and a mask of unreadable cells."""
    codes, uniques = pd.factorize(cells)
    texts = uniques.tolist()
    values = np.empty(len(texts) + 1, dtype=object)
    unreadable = np.zeros(len(texts) + 1, dtype=bool)
    for j, text in enumerate(texts):
        try:
            values[j] = parse_bool_cell(text)
        except ValueError:
            unreadable[j] = True
    words = bool_allowed(column)
    problems.add(np.flatnonzero(unreadable[codes]), 0, CELL_ORDER[column],
                 lambda pos: FieldProblem(column, texts[codes[pos]].strip(), words))
    return values[codes], unreadable[codes]


def _list_column(column: str, cells: np.ndarray, problems: ColumnProblems,
                 only: Callable[[str], bool] | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A compact list column (stripped cells): each distinct cell split once, each distinct item parsed
    once and checked once by the record model (:func:`record_value_problems`).

    Cells that cannot be read are problems of their own (the first bad item's reason, as
    :func:`parse_items` gives it); the record's problems with an item name that item
    (:func:`item_problem`).  With ``only``, just the distinct cells it picks are looked at (and
    cell problems are left to the caller).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray, numpy.ndarray)
        Each cell in its normal written form ('' where bad), whether it holds items that could
        be read, and whether it could not be read.
    """
    parse_item, to_dict, fmt = LIST_COLUMNS[column]
    codes, uniques = pd.factorize(cells)
    texts = uniques.tolist()
    k = len(texts)
    normal = np.full(k + 1, "", dtype=object)
    given = np.zeros(k + 1, dtype=bool)
    unreadable = np.zeros(k + 1, dtype=bool)
    reasons: dict[int, str] = {}
    checked: list[list[FieldProblem]] = [[] for _ in range(k)]
    parsed_items: dict[str, tuple[Any, str | None]] = {}
    item_checks: dict[str, list[FieldProblem]] = {}
    for j, text in enumerate(texts):
        if not text or (only is not None and not only(text)):
            continue
        raw_items = text.split(";")
        dicts = []
        for item in raw_items:
            got = parsed_items.get(item)
            if got is None:
                try:
                    got = (to_dict(parse_item(item)), None)
                except ValueError as exc:
                    got = (None, str(exc))
                parsed_items[item] = got
            if got[1] is not None:
                reasons[j] = got[1]
                unreadable[j] = True
                break
            dicts.append(got[0])
        if unreadable[j]:
            continue
        given[j] = True
        for item, d in zip(raw_items, dicts):
            found = item_checks.get(item)
            if found is None:
                found = item_checks[item] = [item_problem(p, item) for p in record_value_problems({column: [d]})]
            checked[j].extend(found)
        if not any(checked[j]):
            normal[j] = fmt(dicts)
    if only is None:
        problems.add(np.flatnonzero(unreadable[codes]), 0, CELL_ORDER[column],
                     lambda pos: FieldProblem(column, texts[codes[pos]],
                                              f"{LIST_ALLOWED[column]} ({reasons[codes[pos]]})"))
    _spread(codes, checked, 1, FIELD_ORDER[column], problems)
    return normal[codes], given[codes], unreadable[codes]


def _has_level_part(text: str) -> bool:
    """Whether some item of a (readable) fracture cell has a fourth part, a vertebral level."""
    return text.count(":") > 2 * (text.count(";") + 1)


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
    # Fractures: unreadable cells are cell problems; a vertebral level is the record's to check.
    fx_text, _ = _stripped(text("fractures"))
    fractures, fx_normal, reasons = fracture_columns(fx_text)
    problems.add(sorted(reasons), 0, CELL_ORDER["fractures"],
                 lambda pos: FieldProblem("fractures", fx_text[pos], f"{FRACTURES_ALLOWED} ({reasons[pos]})"))
    if reasons:
        fx_readable = fx_text.copy()
        fx_readable[sorted(reasons)] = ""
    else:
        fx_readable = fx_text
    _list_column("fractures", fx_readable, problems, only=_has_level_part)
    # True/false cells, medicines and operations.
    flags: dict[str, np.ndarray] = {}
    flag_bad: dict[str, np.ndarray] = {}
    for col in BOOL_COLUMNS:
        flags[col], flag_bad[col] = _booleans(col, text(col), problems)
    compact = {col: _list_column(col, _stripped(text(col))[0], problems) for col in ("medications", "surgeries")}
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
    version = values["record_version"]
    _record_checked("record_version", np.where(np.isnan(version), "", version.astype(object)), problems,
                    convert=int)
    words: dict[str, np.ndarray] = {}
    for col in ("menopause", "cognition", "display_name"):
        words[col], _ = _stripped(text(col))
        _record_checked(col, words[col], problems)
    # Cancer: no record where both cells are empty (or the true/false cell cannot be read).
    active = flags["cancer_active"]
    metastases, _ = _stripped(text("cancer_bone_metastases"))
    cancer = ~flag_bad["cancer_active"] & ((active != None) | (metastases != ""))  # noqa: E711 (elementwise)
    pairs = np.full(n, "", dtype=object)
    with_cancer = np.flatnonzero(cancer)
    if len(with_cancer):
        pairs[with_cancer] = metastases[with_cancer] + "|" + active[with_cancer].astype(str)
    codes, uniques = pd.factorize(pairs)
    per_pair = []
    for key in uniques.tolist():
        if not key:
            per_pair.append([])
            continue
        met, _, act = key.rpartition("|")
        given = {"active": act == "True"} if act != "None" else {}
        if met:
            given["bone_metastases"] = met
        per_pair.append([FieldProblem(column_of(p.field), p.value, p.allowed, p.kind)
                         for p in record_value_problems({"cancer": given})])
    _spread(codes, per_pair, 1, FIELD_ORDER["cancer_active"], problems)
    # Checks across fields: the record model makes them only when all its other checks pass.
    record_ok = ~problems.rows_with_record_problems(n)
    for col in REQUIRED_COLUMNS:
        if col in unreadable:
            record_ok &= ~unreadable[col]
    zscores = [values[f"z_score_{s}"] for s in T_SCORE_SITES]
    v2_given = ((words["display_name"] != "") | (words["menopause"] != "") | (words["cognition"] != "")
                | compact["medications"][1] | compact["surgeries"][1] | cancer
                | (flags["lives_alone"] != None) | (flags["has_carer"] != None))  # noqa: E711 (elementwise)
    for z in zscores:
        v2_given |= ~np.isnan(z)
    menopause_of_man = record_ok & (sex == "male") & (words["menopause"] != "")
    for pos in np.flatnonzero(menopause_of_man).tolist():
        problems.items.append((pos, 1, CROSS_ORDER, _cross_problem("menopause", (("sex", "male"),
                                                                              ("menopause", words["menopause"][pos])))))
    old_version = record_ok & ~menopause_of_man & (version == 1) & v2_given
    problems.add(np.flatnonzero(old_version), 1, CROSS_ORDER,
                 lambda pos: _cross_problem("record_version", (("record_version", 1), ("lives_alone", True))))
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
    frame["record_version"] = version
    for site in T_SCORE_SITES:
        frame[f"z_score_{site}"] = values[f"z_score_{site}"]
    for col in ("menopause", "cognition", "display_name"):
        frame[col] = words[col]
    for col in ("medications", "surgeries"):
        frame[col] = compact[col][0]
    frame["cancer_active"] = np.where(cancer, active, None)
    frame["cancer_bone_metastases"] = np.where(cancer, np.where(metastases == "", _METASTASES_DEFAULT, metastases), "")
    frame["lives_alone"], frame["has_carer"] = flags["lives_alone"], flags["has_carer"]
    bad = problems.rows()
    for col in FRAME_INT64_COLUMNS:
        column = frame[col].copy()
        column[bad] = 0                                   # placeholders: those rows are refused
        frame[col] = column.astype(np.int64)
    out = pd.DataFrame({c: pd.Series(frame[c], dtype=frame_dtype(c), copy=False) for c in RECORD_COLUMNS},
                       copy=False)
    return out, fractures, problems


@lru_cache(maxsize=64)
def _cross_problem(field: str, values: tuple[tuple[str, Any], ...]) -> FieldProblem:
    """The record model's problem across fields for these values (its own words), e.g. a
    menopausal status given for a man."""
    found = [p for p in record_value_problems(dict(values)) if p.field == field]
    assert len(found) == 1, (field, values, found)
    return found[0]


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
