"""The screening engine: one rule library, two evaluators.

The rules (:mod:`prescribe.rules`, data files under ``prescribe/data/rules``) are
evaluated either for one person (:func:`screen`, a plain per-record evaluator) or
for a whole caseload at once (:func:`screen_batch`, a vectorised numpy/pandas
evaluator over a DataFrame of flattened records).  Both compute the same derived
features (one function each, :func:`record_features` and :func:`frame_features`),
test the same conditions and combine the fired rules' effects by the rules below,
so a person gets the same result either way (a property test checks every feature
and every result field of random records both ways).

How fired rules combine
-----------------------
- ``max_impact_level``: the lowest cap of all fired rules, 3 when none caps it.
- ``avoid``: the sorted union of the fired rules' movement patterns.
- ``refer``, ``falls_risk``, ``balance_first``, ``supervision``: true when any fired rule says so.
- ``bone_density_category``: the strongest category a fired rule sets; ``normal`` when a
  T-score was measured and no rule set one; ``unknown`` when no T-score was measured.
- ``flags``: one per fired rule, strongest severity first, then in rule-library order.
- ``cautions``: the standard cautions, then each fired rule's own, in flag order.

This module gives decision support only; a licensed clinician reviews every result.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd

from .batch_io import FRACTURES_ALLOWED, RECORD_COLUMNS, REQUIRED_COLUMNS, parse_fractures, records_to_frame
from .cautions import with_standard
from .errors import FieldProblem, InputError
from .records import CONDITIONS, FRACTURE_SITES, T_SCORE_SITES, Flag, PatientRecord, ScreeningResult
from .rules import (BOOL, CATEGORY_RANK, FEATURES, NUMBER, SEVERITY_RANK, AllOf, AnyOf, Condition, Not, Rule,
                    RuleSet, Test, load_rules)

NORMS_FILE = Path(__file__).with_name("data") / "norms" / "chair_stand_30s.csv"

#: Columns of the frame :func:`screen_batch` returns (and of the results CSV).
RESULT_COLUMNS: tuple[str, ...] = (
    "patient_id", "bone_density_category", "falls_risk", "max_impact_level", "avoid", "refer",
    "balance_first", "supervision", "flags", "lowest_t_score", "lowest_t_score_site",
    "ruleset_version", "cautions",
)
#: Separator of list cells in the results frame (avoid, flags).
LIST_SEP = ";"
#: Separator of the cautions cell.
CAUTION_SEP = " | "


# ---------------------------------------------------------------------------
# Norms: 30-second chair stand
# ---------------------------------------------------------------------------

@lru_cache(maxsize=1)
def chair_stand_norms() -> dict[str, np.ndarray]:
    """Lower bound of the normal 30-s chair stand range by sex, indexed by age (years, 0-110).

    NaN under 60 years (no norm); ages above 94 use the 90-94 band.

    Returns
    -------
    dict
        ``{"female": array, "male": array}``, each of length 111 [stands].

    References
    ----------
    Rikli RE, Jones CJ (1999). Functional fitness normative scores for community-residing
    older adults, ages 60-94. J Aging Phys Act 7:162-181 (normal range = middle 50%).
    """
    table = {"female": np.full(111, np.nan), "male": np.full(111, np.nan)}
    with NORMS_FILE.open(encoding="utf-8") as fh:
        rows = list(csv.DictReader(line for line in fh if not line.startswith("#")))
    top: dict[str, tuple[int, float]] = {}
    for row in rows:
        lo, hi, low = int(row["age_min"]), int(row["age_max"]), float(row["normal_low"])
        table[row["sex"]][lo:hi + 1] = low
        if row["sex"] not in top or hi > top[row["sex"]][0]:
            top[row["sex"]] = (hi, low)
    for sex, (hi, low) in top.items():
        table[sex][hi + 1:] = low
    return table


def chair_stand_norm_low(age_years: int, sex: str) -> float | None:
    """Lower bound of the normal 30-s chair stand range [stands]; None under 60 years.

    References
    ----------
    Rikli RE, Jones CJ (1999). J Aging Phys Act 7:162-181.
    """
    value = chair_stand_norms()[sex][min(int(age_years), 110)]
    return None if np.isnan(value) else float(value)


# ---------------------------------------------------------------------------
# Derived features: scalar (one record) and vector (a frame)
# ---------------------------------------------------------------------------

def _bmi(mass_kg, height_cm):
    """Body mass index [kg/m^2] of scalars or arrays (one formula, identical rounding for both)."""
    metres = height_cm / 100.0
    return mass_kg / (metres * metres)


def record_features(rec: dict) -> dict[str, Any]:
    """The derived features of one record given as a dict (``PatientRecord.model_dump()`` shape).

    Missing numbers are ``None``.  See :data:`prescribe.rules.FEATURES` for the vocabulary.
    """
    ts = rec.get("t_scores") or {}
    lowest = None
    for site in T_SCORE_SITES:
        v = ts.get(site)
        if v is not None and (lowest is None or v < lowest):
            lowest = v
    fractures = rec.get("fractures") or ()
    lt_count = 0
    lt_vert = lt_hip = hip = False
    last = None
    for f in fractures:
        if f["low_trauma"]:
            lt_count += 1
            if f["site"] == "vertebra":
                lt_vert = True
            elif f["site"] == "hip":
                lt_hip = True
        if f["site"] == "hip":
            hip = True
        m = f["months_ago"]
        if last is None or m < last:
            last = m
    age, sex = rec["age_years"], rec["sex"]
    norm = chair_stand_norm_low(age, sex)
    chair = rec.get("chair_stand_30s")
    gc = rec.get("glucocorticoids")
    mass, height = rec["body_mass_kg"], rec["height_cm"]
    feats: dict[str, Any] = {
        "age_years": age,
        "sex": sex,
        "body_mass_kg": mass,
        "bmi": _bmi(mass, height),
        "lowest_t_score": lowest,
        "t_score_measured": lowest is not None,
        "low_trauma_fracture": lt_count > 0,
        "low_trauma_fracture_count": lt_count,
        "low_trauma_vertebral_fracture": lt_vert,
        "low_trauma_hip_fracture": lt_hip,
        "hip_fracture": hip,
        "months_since_last_fracture": last,
        "falls_past_year": rec.get("falls_past_year", 0),
        "timed_up_and_go_s": rec.get("timed_up_and_go_s"),
        "tandem_stance_s": rec.get("tandem_stance_s"),
        "chair_stand_30s": chair,
        "chair_stand_norm_low": norm,
        "chair_stand_below_norm": chair is not None and norm is not None and chair < norm,
        "glucocorticoid_mg_per_day": gc["mg_per_day"] if gc else 0.0,
        "glucocorticoid_months": gc["months"] if gc else 0.0,
        "pain_score": rec.get("pain_score", 0),
    }
    conditions = rec.get("conditions") or ()
    for code in CONDITIONS:
        feats[f"has_condition:{code}"] = code in conditions
    return feats


def _column(df: pd.DataFrame, name: str, n: int) -> np.ndarray:
    """A numeric column as float64 (NaN for absent); all NaN when the column is missing."""
    if name not in df.columns:
        return np.full(n, np.nan)
    col = df[name]
    if pd.api.types.is_numeric_dtype(col.dtype) and not pd.api.types.is_bool_dtype(col.dtype):
        return col.to_numpy(dtype="float64", na_value=np.nan)
    try:
        return pd.to_numeric(col, errors="raise").to_numpy(dtype="float64", na_value=np.nan)
    except (ValueError, TypeError):
        raise InputError.single(name, "non-numeric cells", "numbers, or empty when absent") from None


def _text_column(df: pd.DataFrame, name: str, n: int, raw: bool = False) -> np.ndarray:
    """A text column as an object array ('' for absent); may share the frame's memory (read only).

    With ``raw``, absent cells are left as they are (NaN or None) for a caller that handles them.
    """
    if name not in df.columns:
        return np.full(n, "", dtype=object)
    col = df[name]
    values = col.to_numpy(dtype=object)
    # A scan for non-text cells is several times cheaper than the per-cell missing-value check.
    if raw or not len(values) or pd.api.types.infer_dtype(values, skipna=False) == "string":
        return values
    return col.to_numpy(dtype=object, na_value="")


def _fracture_aggregates_slow(uniques: list[str]) -> tuple[np.ndarray, ...]:
    """Per distinct cell: low-trauma count, low-trauma vertebral, hip, most recent months, low-trauma hip.

    Validating fallback for cells the fast path does not take (spaces, bad items); raises
    InputError naming the bad cell.
    """
    k = len(uniques)
    count, vert = np.zeros(k), np.zeros(k, dtype=bool)
    hip, last = np.zeros(k, dtype=bool), np.full(k, np.nan)
    lt_hip = np.zeros(k, dtype=bool)
    for j, text in enumerate(uniques):
        try:
            items = parse_fractures(text)
        except ValueError as exc:
            raise InputError.single("fractures", text, f"{FRACTURES_ALLOWED} ({exc})") from None
        for site, months, low_trauma in items:
            count[j] += low_trauma
            vert[j] |= low_trauma and site == "vertebra"
            lt_hip[j] |= low_trauma and site == "hip"
            hip[j] |= site == "hip"
            if np.isnan(last[j]) or months < last[j]:
                last[j] = months
    return count, vert, hip, last, lt_hip


_SITE_BYTES = {site: np.frombuffer(site.encode("ascii"), dtype=np.uint8) for site in FRACTURE_SITES}
_SITE_WIDTH = max(map(len, FRACTURE_SITES))
_SITE_WORDS = {site: np.uint64(int.from_bytes(site.encode("ascii"), "little")) for site in FRACTURE_SITES
               if len(site) <= 8}
_LOW_BYTES = np.array([(1 << (8 * k)) - 1 for k in range(9)], dtype=np.uint64)  # mask of the k low bytes
_POW10 = 10.0 ** np.arange(23)
_MAX_DIGITS = 15  # a mantissa of up to 15 digits is exact in float64


_PLAIN_NUMBER = re.compile(r"[0-9]*\.?[0-9]*")


def _months_by_value(words: np.ndarray) -> np.ndarray | None:
    """Months from numbers of at most 8 characters, each given as its bytes in one word.

    A caseload repeats few distinct numbers, so each distinct one is checked and read once with
    Python's ``float``; None when one is not plain digits with at most one '.'.
    """
    inverse, uniq = pd.factorize(words)
    values = []
    for word in uniq.tolist():
        text = int(word).to_bytes(8, "little").rstrip(b"\0").decode("ascii")
        if not (_PLAIN_NUMBER.fullmatch(text) and 1 <= sum(c.isdigit() for c in text) <= _MAX_DIGITS):
            return None
        values.append(float(text))
    return np.array(values, dtype=np.float64)[inverse]


def _months_by_position(raw: np.ndarray, c1: np.ndarray, num_len: np.ndarray) -> np.ndarray | None:
    """Months from the numbers after each item's first colon, read by Horner's rule one
    character position at a time across all items (exact for up to 15 digits: an exact
    integer divided by an exact power of ten rounds like ``float(text)``); None when one is not
    plain digits with at most one '.'."""
    mantissa = np.zeros(len(c1))
    n_digits = np.zeros(len(c1), dtype=np.int64)
    n_dots = np.zeros(len(c1), dtype=np.int64)
    frac = np.zeros(len(c1), dtype=np.int64)           # digits after the '.'
    for j in range(int(num_len.max())):
        inside = num_len > j
        b = raw[np.minimum(c1 + 1 + j, raw.size - 1)]
        digit = inside & (b >= 48) & (b <= 57)
        dot = inside & (b == 46)
        if (inside & ~(digit | dot)).any():
            return None
        mantissa = np.where(digit, mantissa * 10.0 + (b - 48.0), mantissa)
        n_digits += digit
        frac += digit & (n_dots > 0)
        n_dots += dot
        if (n_digits > _MAX_DIGITS).any() or (n_dots > 1).any():
            return None
    if (n_digits < 1).any():
        return None
    return mantissa / _POW10[frac]


def _fracture_aggregates_fast(cells: list[str]) -> tuple[np.ndarray, ...] | None:
    """The same aggregates as the slow path, parsing every cell at once on its bytes with numpy.

    Handles the plain form ``site:digits[.digits]:y|n``; returns None when any cell has anything
    else (spaces, exponents, bad items, a cell that is not text), and the slow path then parses
    or rejects it.  A number of at most 15 digits is read as an exact integer divided by an exact
    power of ten, which IEEE division rounds correctly: the same float as Python's ``float(text)``.
    """
    k = len(cells)
    count, vert = np.zeros(k), np.zeros(k, dtype=bool)
    hip, last = np.zeros(k, dtype=bool), np.full(k, np.nan)
    lt_hip = np.zeros(k, dtype=bool)
    if not k:
        return count, vert, hip, last, lt_hip
    try:
        raw = np.frombuffer("\n".join(cells).encode("ascii"), dtype=np.uint8)
    except (TypeError, UnicodeEncodeError):
        return None
    if not raw.size:
        return count, vert, hip, last, lt_hip
    seps = np.flatnonzero((raw == 59) | (raw == 10))          # ';' between items, newline between cells
    newline = raw[seps] == 10
    if np.count_nonzero(newline) != k - 1 or (raw == 0).any():
        return None                                         # a newline or NUL inside a cell
    start = np.concatenate(([0], seps + 1))
    end = np.concatenate((seps, [raw.size]))
    cell = np.concatenate(([0], np.cumsum(newline)))        # which cell each segment is in
    # An empty segment is an empty cell only when both its ends are cell ends.
    after_nl = np.concatenate(([True], newline))
    before_nl = np.concatenate((newline, [True]))
    empty = start == end
    if (empty & ~(after_nl & before_nl)).any():
        return None
    start, end, cell = start[~empty], end[~empty], cell[~empty]
    if not len(start):
        return count, vert, hip, last, lt_hip
    colons = np.flatnonzero(raw == 58)
    if len(colons) != 2 * len(start):
        return None
    c1, c2 = colons[0::2], colons[1::2]
    if not ((c1 > start).all() and (c2 > c1 + 1).all() and (end == c2 + 2).all()):
        return None                                         # each item: site, ':', number, ':', one mark
    mark = raw[c2 + 1]
    if not ((mark == ord("y")) | (mark == ord("n"))).all():
        return None
    site_len = c1 - start
    # The 8 bytes from any position as one little-endian word: a stride-1 uint64 view over the
    # text reads them in one gather; bytes past the field are masked off.
    padded = np.concatenate((raw, np.zeros(8, dtype=np.uint8)))
    words = np.ndarray(shape=(raw.size,), dtype="<u8", buffer=padded, strides=(1,))
    if _SITE_WIDTH <= 8:
        word = words[start] & _LOW_BYTES[np.minimum(site_len, 8)]
        known = np.isin(word, np.array(list(_SITE_WORDS.values()), dtype=np.uint64)) & (site_len <= 8)
        is_vertebra, is_hip = word == _SITE_WORDS["vertebra"], word == _SITE_WORDS["hip"]
    else:
        is_vertebra = np.zeros(len(start), dtype=bool)
        is_hip = np.zeros(len(start), dtype=bool)
        known = np.zeros(len(start), dtype=bool)
        for name, code in _SITE_BYTES.items():
            cand = np.flatnonzero(site_len == len(code))
            same = np.ones(len(cand), dtype=bool)
            for j, byte in enumerate(code):
                same &= raw[start[cand] + j] == byte
            known[cand[same]] = True
            if name == "vertebra":
                is_vertebra[cand[same]] = True
            elif name == "hip":
                is_hip[cand[same]] = True
    if not known.all():
        return None
    # The number between the colons: digits with at most one '.'.
    num_len = c2 - c1 - 1
    if num_len.max() <= 8:
        months = _months_by_value(words[c1 + 1] & _LOW_BYTES[num_len])
    else:
        months = _months_by_position(raw, c1, num_len)
    if months is None or (months > 1200).any():
        return None
    low = mark == ord("y")
    count[:] = np.bincount(cell, weights=low, minlength=k)
    vert[:] = np.bincount(cell, weights=low & is_vertebra, minlength=k) > 0
    hip[:] = np.bincount(cell, weights=is_hip, minlength=k) > 0
    lt_hip[:] = np.bincount(cell, weights=low & is_hip, minlength=k) > 0
    first = np.flatnonzero(np.concatenate(([True], cell[1:] != cell[:-1])))
    last[cell[first]] = np.minimum.reduceat(months, first)
    return count, vert, hip, last, lt_hip


def _fracture_features(df: pd.DataFrame, n: int) -> dict[str, np.ndarray]:
    """Fracture features for the column of compact fracture cells, parsed in bulk."""
    aggregates = _fracture_aggregates_fast(_text_column(df, "fractures", n, raw=True).tolist())
    if aggregates is None:                  # absent or unusual cells: fill, then parse or reject
        texts = _text_column(df, "fractures", n).tolist()
        aggregates = _fracture_aggregates_fast(texts) or _fracture_aggregates_slow(texts)
    count, vert, hip, last, lt_hip = aggregates
    return {"low_trauma_fracture_count": count, "low_trauma_fracture": count > 0,
            "low_trauma_vertebral_fracture": vert, "low_trauma_hip_fracture": lt_hip, "hip_fracture": hip,
            "months_since_last_fracture": last}


def _condition_features(cells: np.ndarray) -> dict[str, np.ndarray]:
    codes, uniques = pd.factorize(cells)        # absent cells (NaN, None) get code -1
    out = {}
    sets = [set(c.strip() for c in text.split(";")) for text in uniques]
    for code in CONDITIONS:
        present = np.array([code in s for s in sets] + [False], dtype=bool)  # [-1]: absent, none
        out[f"has_condition:{code}"] = present[codes]
    return out


def frame_features(df: pd.DataFrame) -> dict[str, np.ndarray]:
    """The derived features of every row of a frame of flattened records, as arrays.

    Numbers are float64 with NaN for absent; flags are bool; ``sex`` is an object array.
    The frame is expected to hold validated records (:func:`prescribe.batch_io.read_batch_csv`
    or :func:`prescribe.batch_io.records_to_frame`).
    """
    return _frame_features(df)[0]


def _frame_features(df: pd.DataFrame) -> tuple[dict[str, np.ndarray], list[np.ndarray]]:
    """:func:`frame_features` and the T-score columns it read (T_SCORE_SITES order), for reuse."""
    n = len(df)
    missing = [c for c in REQUIRED_COLUMNS if c not in df.columns]
    unknown = [c for c in df.columns if c not in RECORD_COLUMNS]
    if missing or unknown:
        raise InputError([FieldProblem(f"column {c}", None, "a column of the batch frame (required)", "missing")
                          for c in missing] +
                         [FieldProblem(f"column {c}", c, "a known column (" + ", ".join(RECORD_COLUMNS) + ")",
                                       "unknown_field") for c in unknown])
    age = _column(df, "age_years", n)
    sex = _text_column(df, "sex", n)
    mass, height = _column(df, "body_mass_kg", n), _column(df, "height_cm", n)
    tscores = [_column(df, f"t_score_{s}", n) for s in T_SCORE_SITES]
    lowest = tscores[0]
    for site_scores in tscores[1:]:
        lowest = np.fmin(lowest, site_scores)   # pairwise: a reduce along a short axis is slow
    norms = chair_stand_norms()
    age_idx = np.clip(np.nan_to_num(age, nan=0.0), 0, 110).astype(np.intp)
    female = sex == "female"
    norm = np.where(female, norms["female"][age_idx], norms["male"][age_idx])
    chair = _column(df, "chair_stand_30s", n)
    mg = _column(df, "glucocorticoids_mg_per_day", n)
    months = _column(df, "glucocorticoids_months", n)
    falls = _column(df, "falls_past_year", n)
    pain = _column(df, "pain_score", n)
    feats: dict[str, np.ndarray] = {
        "age_years": age,
        "sex": sex,
        "body_mass_kg": mass,
        "bmi": _bmi(mass, height),
        "lowest_t_score": lowest,
        "t_score_measured": ~np.isnan(lowest),
        "falls_past_year": np.nan_to_num(falls, nan=0.0),
        "timed_up_and_go_s": _column(df, "timed_up_and_go_s", n),
        "tandem_stance_s": _column(df, "tandem_stance_s", n),
        "chair_stand_30s": chair,
        "chair_stand_norm_low": norm,
        "chair_stand_below_norm": chair < norm,  # NaN on either side compares False
        "glucocorticoid_mg_per_day": np.where(np.isnan(mg) | np.isnan(months), 0.0, mg),
        "glucocorticoid_months": np.where(np.isnan(mg) | np.isnan(months), 0.0, months),
        "pain_score": np.nan_to_num(pain, nan=0.0),
    }
    feats.update(_fracture_features(df, n))
    feats.update(_condition_features(_text_column(df, "conditions", n, raw=True)))
    return feats, tscores


def _lowest_site(tscores: list[np.ndarray], lowest: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Each row's lowest T-score and its site (first site in T_SCORE_SITES order on ties; NaN
    and None when none was measured), from the per-site T-score columns and their minimum."""
    idx = np.full(len(lowest), len(T_SCORE_SITES), dtype=np.intp)
    value = np.full(len(lowest), np.nan)
    for j in reversed(range(len(T_SCORE_SITES))):
        first = tscores[j] == lowest                   # NaN never compares equal
        idx = np.where(first, j, idx)
        value = np.where(first, tscores[j], value)
    return value, np.array([*T_SCORE_SITES, None], dtype=object)[idx]


# ---------------------------------------------------------------------------
# Conditions: compiled once, two evaluators
# ---------------------------------------------------------------------------

def _scalar_test(t: Test) -> Callable[[dict], bool]:
    name, op, value = t.feature, t.op, t.value
    if op == "missing":
        return lambda f: f[name] is None
    if op == "present":
        return lambda f: f[name] is not None
    compare = {
        "<": lambda v: v < value, "<=": lambda v: v <= value, ">": lambda v: v > value,
        ">=": lambda v: v >= value, "==": lambda v: v == value, "!=": lambda v: v != value,
        "in": lambda v: v in value,
    }[op]

    def test(f: dict) -> bool:
        v = f[name]
        return v is not None and compare(v)
    return test


def compile_scalar(cond: Condition) -> Callable[[dict], bool]:
    """A function of a feature dict that is true where ``cond`` holds (per-record evaluator)."""
    if isinstance(cond, Test):
        return _scalar_test(cond)
    if isinstance(cond, AllOf):
        parts = [compile_scalar(p) for p in cond.parts]
        return lambda f: all(p(f) for p in parts)
    if isinstance(cond, AnyOf):
        parts = [compile_scalar(p) for p in cond.parts]
        return lambda f: any(p(f) for p in parts)
    if isinstance(cond, Not):
        inner = compile_scalar(cond.part)
        return lambda f: not inner(f)
    raise TypeError(f"not a condition: {cond!r}")


_COMPARE = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal,
            "==": np.equal, "!=": np.not_equal}
_NAN_FALSE = ("<", "<=", ">", ">=", "==")


def evaluate_vector(cond: Condition, feats: dict[str, np.ndarray]) -> np.ndarray:
    """Boolean array, true for rows where ``cond`` holds (vectorised evaluator)."""
    if isinstance(cond, Test):
        v = feats[cond.feature]
        op, value = cond.op, cond.value
        kind = FEATURES[cond.feature].kind
        if kind == NUMBER and op in _NAN_FALSE:
            return _COMPARE[op](v, value)           # NaN (absent) compares false: nothing to mask
        absent = np.isnan(v) if kind == NUMBER else np.zeros(len(v), dtype=bool)
        if op == "missing":
            return absent
        if op == "present":
            return ~absent
        if op == "in":
            return np.isin(v, list(value)) & ~absent
        if kind == BOOL:
            v = v.astype(bool)
        result = _COMPARE[op](v, value)
        return np.asarray(result, dtype=bool) & ~absent
    if isinstance(cond, AllOf):
        out = evaluate_vector(cond.parts[0], feats)
        for p in cond.parts[1:]:
            out = out & evaluate_vector(p, feats)
        return out
    if isinstance(cond, AnyOf):
        out = evaluate_vector(cond.parts[0], feats)
        for p in cond.parts[1:]:
            out = out | evaluate_vector(p, feats)
        return out
    if isinstance(cond, Not):
        return ~evaluate_vector(cond.part, feats)
    raise TypeError(f"not a condition: {cond!r}")


# ---------------------------------------------------------------------------
# The engine
# ---------------------------------------------------------------------------

def _unique_rows(matrix: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct rows of a boolean matrix and, for each row, the index of its distinct row."""
    n, c = matrix.shape
    if n == 0:
        return np.zeros((0, c), dtype=bool), np.zeros(0, dtype=np.intp)
    if c <= 62:
        keys = matrix.astype(np.int64) @ np.left_shift(np.int64(1), np.arange(c, dtype=np.int64))
        uniq, inverse = np.unique(keys, return_inverse=True)
        rows = ((uniq[:, None] >> np.arange(c, dtype=np.int64)) & 1).astype(bool)
        return rows, np.asarray(inverse).reshape(-1)
    rows, inverse = np.unique(matrix, axis=0, return_inverse=True)
    return rows, np.asarray(inverse).reshape(-1)


_TABLE_CHARS = 3 << 19  # about the most text one subset table may hold (1.5 M characters)


def _chunk_size(labels: list[str]) -> int:
    """Labels per subset table: up to 13 (8192 texts), fewer for long labels so that a table
    holds at most about :data:`_TABLE_CHARS` characters."""
    mean = max(1.0, sum(map(len, labels)) / max(1, len(labels)))
    size = 13
    while size > 4 and (1 << size) * size / 2 * mean > _TABLE_CHARS:
        size -= 1
    return size


@lru_cache(maxsize=16)
def _chunk_table(labels: tuple[str, ...], sep: str, lead: bool) -> np.ndarray:
    """The ``sep``-joined text of every subset of a few labels, indexed by its bit pattern (kept
    for the next call); with ``lead``, each non-empty text starts with ``sep`` (to append)."""
    texts = [sep.join(lab for j, lab in enumerate(labels) if v >> j & 1) for v in range(1 << len(labels))]
    return np.array([sep + t if lead and t else t for t in texts], dtype=object)


def _join_columns(marks: np.ndarray, labels: list[str], sep: str,
                  finish: Callable[[np.ndarray], np.ndarray] | None = None) -> np.ndarray:
    """Per column of a (labels x items) boolean matrix, the labels of its true rows joined by
    ``sep``, in label order.

    Works a chunk of labels at a time (:func:`_chunk_size`): an item's marks for the chunk make a
    code that picks the chunk's text from a table of every subset's text, and chunks are joined
    with one whole-array string addition.  Up to 62 labels, the text is made once per distinct
    code.  No Python loop runs over the items.  ``finish``, when given, maps an array of joined
    texts to the final texts (applied once per distinct text when it can be).
    """
    finish = finish or (lambda texts: texts)
    n, size = marks.shape[1], _chunk_size(labels)
    codes = []
    for c0 in range(0, len(labels), size):
        code = np.zeros(n, dtype=np.int64)
        for j in range(min(size, len(labels) - c0)):
            code |= marks[c0 + j].astype(np.int64) << j
        codes.append(code)
    if len(labels) <= 62 and codes:
        key = codes[0]
        for i, code in enumerate(codes[1:], start=1):
            key = key | (code << (size * i))      # bit of label c is bit c: at most bit 61
        inverse, uniq = pd.factorize(key)
        if len(uniq) < n:
            uniq = np.asarray(uniq, dtype=np.int64)
            codes = [(uniq >> (size * i)) & ((1 << size) - 1) for i in range(len(codes))]
            return finish(_join_codes(codes, labels, sep, len(uniq), size))[inverse]
    return finish(_join_codes(codes, labels, sep, n, size))


def _join_codes(codes: list[np.ndarray], labels: list[str], sep: str, n: int, size: int) -> np.ndarray:
    """The ``n`` texts of :func:`_join_columns` from each chunk's subset codes."""
    out = _constant_text(n, "")
    filled = np.zeros(n, dtype=bool)
    for i, code in enumerate(codes):
        chunk = tuple(labels[size * i:size * (i + 1)])
        some = code != 0
        first, more = some & ~filled, some & filled
        out[first] = _chunk_table(chunk, sep, False)[code[first]]
        out[more] = out[more] + _chunk_table(chunk, sep, True)[code[more]]
        filled |= some
    return out


@dataclass(frozen=True)
class Outcome:
    """What a set of fired rules means, before the per-person fields are added."""

    category: str | None
    falls_risk: bool
    max_impact_level: int
    avoid: tuple[str, ...]
    refer: bool
    balance_first: bool
    supervision: bool
    rules: tuple[str, ...]
    cautions: tuple[str, ...]


class Engine:
    """A rule set compiled for both evaluators.

    Rules are kept strongest severity first, then in library order; bit ``i`` of a
    fired-rule mask stands for ``self.rules[i]``.
    """

    def __init__(self, ruleset: RuleSet):
        self.ruleset = ruleset
        self.version = ruleset.version
        order = sorted(range(len(ruleset.rules)), key=lambda i: (SEVERITY_RANK[ruleset.rules[i].severity], i))
        self.rules: tuple[Rule, ...] = tuple(ruleset.rules[i] for i in order)
        self._tests = [compile_scalar(r.when) for r in self.rules]
        self._bit = {r.id: 1 << i for i, r in enumerate(self.rules)}
        self._outcomes: dict[int, Outcome] = {}
        self._flags = {r.id: Flag(rule=r.id, severity=r.severity, message=r.message, source=r.source,
                                  title=r.title, max_impact_level=r.effect.max_impact_level,
                                  avoid=list(r.effect.avoid)) for r in self.rules}
        # Effects as arrays, for the vectorised evaluator.
        self._caps = np.array([3 if r.effect.max_impact_level is None else r.effect.max_impact_level
                               for r in self.rules], dtype=np.int8)
        self._cat_rank = np.array([CATEGORY_RANK[r.effect.category] if r.effect.category else -1
                                   for r in self.rules], dtype=np.int8)
        self._effect_flag = {k: np.array([getattr(r.effect, k) for r in self.rules], dtype=bool)
                             for k in ("falls_risk", "refer", "balance_first", "supervision")}
        self._avoid_codes = sorted({a for r in self.rules for a in r.effect.avoid})
        self._avoid_matrix = np.array([[a in r.effect.avoid for a in self._avoid_codes] for r in self.rules],
                                      dtype=bool).reshape(len(self.rules), len(self._avoid_codes))
        self._caution_idx = np.array([i for i, r in enumerate(self.rules) if r.effect.caution], dtype=np.intp)

    # -- shared: fired rules -> outcome ------------------------------------------------
    def outcome(self, mask: int) -> Outcome:
        """The combined effect of the rules whose bits are set in ``mask`` (cached)."""
        hit = self._outcomes.get(mask)
        if hit is not None:
            return hit
        fired = [r for i, r in enumerate(self.rules) if mask >> i & 1]
        caps = [r.effect.max_impact_level for r in fired if r.effect.max_impact_level is not None]
        cats = [r.effect.category for r in fired if r.effect.category]
        out = Outcome(
            category=max(cats, key=CATEGORY_RANK.__getitem__) if cats else None,
            falls_risk=any(r.effect.falls_risk for r in fired),
            max_impact_level=min(caps, default=3),
            avoid=tuple(sorted({a for r in fired for a in r.effect.avoid})),
            refer=any(r.effect.refer for r in fired),
            balance_first=any(r.effect.balance_first for r in fired),
            supervision=any(r.effect.supervision for r in fired),
            rules=tuple(r.id for r in fired),
            cautions=tuple(with_standard([r.effect.caution for r in fired if r.effect.caution])),
        )
        self._outcomes[mask] = out
        return out

    def mask_of(self, rule_ids: list[str] | tuple[str, ...]) -> int:
        try:
            return sum(self._bit[r] for r in rule_ids)
        except KeyError as exc:
            raise InputError.single("flags", exc.args[0], "rule ids of ruleset " + self.version) from None

    # -- per-record evaluator ----------------------------------------------------------
    def fired_mask(self, feats: dict) -> int:
        mask = 0
        for i, test in enumerate(self._tests):
            if test(feats):
                mask |= 1 << i
        return mask

    def screen_dict(self, rec: dict) -> dict[str, Any]:
        """Plain-dict screening result of one record dict (no validation; used by the benchmark)."""
        feats = record_features(rec)
        out = self.outcome(self.fired_mask(feats))
        lowest = feats["lowest_t_score"]
        site = None
        if lowest is not None:
            site = next(s for s in T_SCORE_SITES if (rec.get("t_scores") or {}).get(s) == lowest)
        category = out.category or ("normal" if lowest is not None else "unknown")
        return {"patient_id": rec["patient_id"], "bone_density_category": category,
                "falls_risk": out.falls_risk, "max_impact_level": out.max_impact_level,
                "avoid": list(out.avoid), "refer": out.refer, "rules": out.rules,
                "cautions": list(out.cautions), "lowest_t_score": lowest, "lowest_t_score_site": site,
                "balance_first": out.balance_first, "supervision": out.supervision,
                "ruleset_version": self.version}

    def screen(self, record: PatientRecord) -> ScreeningResult:
        d = self.screen_dict(record.model_dump())
        d["flags"] = [self._flags[r] for r in d.pop("rules")]
        return ScreeningResult(**d)

    # -- vectorised evaluator ----------------------------------------------------------
    def _fired_patterns(self, feats: dict[str, np.ndarray], n: int) -> tuple[np.ndarray, np.ndarray]:
        """Distinct fired-rule patterns (patterns x rules, bool) and each row's pattern index.

        Up to 64 rules, each row's fired rules are packed into one integer (bit ``i`` for
        ``self.rules[i]``) and the integers are grouped by hashing: no (rows x rules) matrix
        is built and nothing is sorted.  Patterns come in order of first appearance.
        """
        count = len(self.rules)
        if count > 64:
            return _unique_rows(self._fired(feats, n))
        dtype = np.uint32 if count <= 32 else np.uint64
        keys = np.zeros(n, dtype=dtype)
        for i, r in enumerate(self.rules):
            keys |= evaluate_vector(r.when, feats).astype(dtype) << dtype(i)
        inverse, uniq = pd.factorize(keys)
        rows = ((np.asarray(uniq, dtype=dtype)[:, None] >> np.arange(count, dtype=dtype)) & 1).astype(bool)
        return rows, np.asarray(inverse, dtype=np.intp)

    def _fired(self, feats: dict[str, np.ndarray], n: int) -> np.ndarray:
        out = np.zeros((n, len(self.rules)), dtype=bool)
        for i, r in enumerate(self.rules):
            out[:, i] = evaluate_vector(r.when, feats)
        return out

    def fired_matrix(self, df: pd.DataFrame) -> np.ndarray:
        """Boolean (rows x rules) matrix of fired rules, rules in ``self.rules`` order."""
        return self._fired(frame_features(df), len(df))

    def screen_frame(self, df: pd.DataFrame) -> pd.DataFrame:
        """The vectorised evaluator: one result row per input row (see :func:`screen_batch`).

        Effects are combined once per distinct pattern of fired rules (a caseload has far fewer
        patterns than people), then spread back to the rows.
        """
        n = len(df)
        feats, tscores = _frame_features(df)
        rows, inverse = self._fired_patterns(feats, n)
        lowest, site = _lowest_site(tscores, feats["lowest_t_score"])
        # Effects per distinct pattern, on a (rules x patterns) matrix: each "did any fired rule
        # say so" is one reduction over the rules that say so.
        marks = np.ascontiguousarray(rows.T)
        patterns = marks.shape[1]

        def any_fired(which: np.ndarray) -> np.ndarray:
            return marks[which].any(axis=0) if which.any() else np.zeros(patterns, dtype=bool)

        rank = np.full(patterns, -1, dtype=np.intp)          # strongest category rank, -1 for none
        for level in sorted(set(self._cat_rank[self._cat_rank >= 0].tolist())):
            rank[any_fired(self._cat_rank >= level)] = level
        cap = np.full(patterns, 3, dtype=np.int64)           # lowest impact cap, 3 when none caps
        for level in sorted(set(self._caps.tolist()), reverse=True):
            cap[any_fired(self._caps <= level)] = level
        names = list(CATEGORY_RANK)
        code = rank[inverse]
        none = code < 0
        code[none] = np.where(np.isnan(lowest[none]), len(names), len(names) + 1)
        category = np.array([*names, "unknown", "normal"], dtype=object)[code]
        avoid = np.array([any_fired(self._avoid_matrix[:, j]) for j in range(len(self._avoid_codes))],
                         dtype=bool).reshape(len(self._avoid_codes), patterns)
        any_effect = {k: any_fired(v)[inverse] for k, v in self._effect_flag.items()}
        columns = {
            "patient_id": _text_column(df, "patient_id", n).copy(),
            "bone_density_category": category,
            "falls_risk": any_effect["falls_risk"],
            "max_impact_level": cap[inverse],
            "avoid": _join_columns(avoid, self._avoid_codes, LIST_SEP)[inverse],
            "refer": any_effect["refer"],
            "balance_first": any_effect["balance_first"],
            "supervision": any_effect["supervision"],
            "flags": _join_columns(marks, [r.id for r in self.rules], LIST_SEP)[inverse],
            "lowest_t_score": lowest,
            "lowest_t_score_site": site,
            "ruleset_version": _constant_text(n, self.version),
            "cautions": self._caution_text(marks)[inverse],
        }
        # Text columns stay object arrays (no per-cell type inference on 100k rows).
        # copy=False: each column keeps its own array (no consolidation copy into 2-D blocks).
        return pd.DataFrame({k: pd.Series(v, index=df.index, dtype=v.dtype, copy=False) for k, v in columns.items()},
                            columns=list(RESULT_COLUMNS), copy=False)

    def _caution_text(self, marks: np.ndarray) -> np.ndarray:
        """The cautions cell for each distinct fired-rule pattern (standard ones first), given the
        (rules x patterns) matrix of fired rules."""
        texts = [self.rules[i].effect.caution for i in self._caution_idx]
        head = CAUTION_SEP.join(with_standard())
        if len(set(texts)) == len(texts) and not set(texts) & set(with_standard()):
            return _join_columns(marks[self._caution_idx], texts, CAUTION_SEP,
                                 lambda extra: np.where(extra == "", head, head + CAUTION_SEP + extra))
        return np.array([CAUTION_SEP.join(with_standard([texts[j] for j in np.flatnonzero(col)]))
                         for col in marks[self._caution_idx].T], dtype=object)

    def results_from_frame(self, out: pd.DataFrame) -> list[ScreeningResult]:
        """ScreeningResult objects from the frame :meth:`screen_frame` returned."""
        results = []
        for row in out.to_dict("records"):
            ids = [r for r in str(row["flags"]).split(LIST_SEP) if r]
            o = self.outcome(self.mask_of(ids))
            lowest = row["lowest_t_score"]
            lowest = None if lowest is None or np.isnan(lowest) else float(lowest)
            results.append(ScreeningResult(
                patient_id=row["patient_id"], bone_density_category=row["bone_density_category"],
                falls_risk=bool(row["falls_risk"]), max_impact_level=int(row["max_impact_level"]),
                avoid=[a for a in str(row["avoid"]).split(LIST_SEP) if a], refer=bool(row["refer"]),
                flags=[self._flags[r] for r in o.rules], cautions=list(o.cautions),
                lowest_t_score=lowest, lowest_t_score_site=_text_or_none(row["lowest_t_score_site"]),
                balance_first=bool(row["balance_first"]), supervision=bool(row["supervision"]),
                ruleset_version=row["ruleset_version"]))
        return results


def _constant_text(n: int, text: str) -> np.ndarray:
    """An object array of ``n`` references to one string (``np.full`` converts cell by cell)."""
    out = np.empty(n, dtype=object)
    out[:] = text
    return out


def _text_or_none(value: Any) -> str | None:
    return value if isinstance(value, str) and value else None


@lru_cache(maxsize=1)
def default_engine() -> Engine:
    """The engine over the shipped rule library (loaded and validated once)."""
    return Engine(load_rules())


#: Version of the shipped rule library: release plus a short hash of the rule files.
RULESET_VERSION: str = default_engine().version


def engine_for(rules: RuleSet | None) -> Engine:
    return default_engine() if rules is None else Engine(rules)


def screen(record: PatientRecord, rules: RuleSet | None = None) -> ScreeningResult:
    """Screen one person (per-record evaluator).

    Parameters
    ----------
    record : PatientRecord
        A validated record.
    rules : RuleSet, optional
        Another rule set (for example a draft library); the shipped one when omitted.

    Returns
    -------
    ScreeningResult
        Category, falls risk, impact cap (0-3), patterns to avoid, referral, flags with
        sources, and the cautions.

    References
    ----------
    The rule files cite a source for each rule; see ``docs/rules.md``.
    """
    return engine_for(rules).screen(record)


def screen_batch(df: pd.DataFrame, rules: RuleSet | None = None) -> pd.DataFrame:
    """Screen a caseload at once (vectorised evaluator).

    Parameters
    ----------
    df : pandas.DataFrame
        Flattened, validated records (:func:`prescribe.batch_io.read_batch_csv` or
        :func:`prescribe.batch_io.records_to_frame`).
    rules : RuleSet, optional
        Another rule set; the shipped one when omitted.

    Returns
    -------
    pandas.DataFrame
        One row a person, columns :data:`RESULT_COLUMNS`; ``avoid`` and ``flags`` are
        ``;``-joined, ``cautions`` is ``' | '``-joined.
    """
    return engine_for(rules).screen_frame(df)


def results_from_frame(out: pd.DataFrame, rules: RuleSet | None = None) -> list[ScreeningResult]:
    """Turn :func:`screen_batch`'s frame back into :class:`ScreeningResult` objects."""
    return engine_for(rules).results_from_frame(out)


def screen_many(records: list[PatientRecord], rules: RuleSet | None = None) -> list[ScreeningResult]:
    """Screen many people through the vectorised evaluator; same results as :func:`screen` each."""
    engine = engine_for(rules)
    return engine.results_from_frame(engine.screen_frame(records_to_frame(records)))
