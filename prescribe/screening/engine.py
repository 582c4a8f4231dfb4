"""The screening engine: one rule library, two evaluators.

The rules (:mod:`prescribe.screening.rules`, data files under ``prescribe/data/rules``) are
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
from dataclasses import dataclass
from functools import lru_cache
from itertools import compress
from pathlib import Path
from typing import Any, Callable

import numpy as np
import pandas as pd

from .batch_columns import FRACTURES_ALLOWED, RECORD_COLUMNS, REQUIRED_COLUMNS, FractureColumns, fracture_columns
from .batch_io import records_to_frame
from ..cautions import with_standard
from ..errors import FieldProblem, InputError
from ..records import CONDITIONS, T_SCORE_SITES, Flag, PatientRecord, ScreeningResult
from .rules import (BOOL, CATEGORY_RANK, FEATURES, NUMBER, SEVERITY_RANK, AllOf, AnyOf, Condition, Not, Rule,
                    RuleSet, Test, load_rules)

NORMS_FILE = Path(__file__).parent.parent / "data" / "norms" / "chair_stand_30s.csv"

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

    Missing numbers are ``None``.  See :data:`prescribe.screening.rules.FEATURES` for the vocabulary.
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
    """A text column as an object array ('' for absent; with ``raw``, absent cells left as they are)."""
    if name not in df.columns:
        return np.full(n, "", dtype=object)
    col = df[name]
    return col.to_numpy(dtype=object) if raw else col.to_numpy(dtype=object, na_value="")


def _fracture_features(df: pd.DataFrame, n: int, fractures: FractureColumns | None) -> dict[str, np.ndarray]:
    """Fracture features from the per-person figures (read from the compact cells when not given)."""
    if fractures is None:
        fractures, _, reasons = fracture_columns(_text_column(df, "fractures", n, raw=True))
        if reasons:
            pos = min(reasons)                  # the first bad cell, as it is in the frame
            raise InputError.single("fractures", df["fractures"].iloc[pos], f"{FRACTURES_ALLOWED} ({reasons[pos]})")
    count = fractures.low_trauma_count
    return {"low_trauma_fracture_count": count, "low_trauma_fracture": count > 0,
            "low_trauma_vertebral_fracture": fractures.low_trauma_vertebral,
            "low_trauma_hip_fracture": fractures.low_trauma_hip, "hip_fracture": fractures.hip,
            "months_since_last_fracture": fractures.months_since_last}


def _condition_features(cells: np.ndarray) -> dict[str, np.ndarray]:
    codes, uniques = pd.factorize(cells)        # absent cells (NaN, None) get code -1
    out = {}
    sets = [set(c.strip() for c in text.split(";")) for text in uniques]
    for code in CONDITIONS:
        present = np.array([code in s for s in sets] + [False], dtype=bool)  # [-1]: absent, none
        out[f"has_condition:{code}"] = present[codes]
    return out


def frame_features(df: pd.DataFrame, fractures: FractureColumns | None = None) -> dict[str, np.ndarray]:
    """The derived features of every row of a frame of flattened records, as arrays.

    Numbers are float64 with NaN for absent; flags are bool; ``sex`` is an object array.
    The frame is expected to hold validated records (:func:`prescribe.screening.batch_io.read_batch_csv`
    or :func:`prescribe.screening.batch_io.records_to_frame`).  ``fractures``, when given, are the
    per-person fracture figures the reader already worked out (:class:`prescribe.screening.batch_io.Caseload`);
    otherwise they are read from the frame's compact fracture cells.
    """
    return _frame_features(df, fractures)[0]


def _frame_features(df: pd.DataFrame, fractures: FractureColumns | None = None
                    ) -> tuple[dict[str, np.ndarray], list[np.ndarray]]:
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
    feats.update(_fracture_features(df, n, fractures))
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

    def _combine(self, patterns: np.ndarray) -> dict[str, list | np.ndarray]:
        """The combined effects of each distinct fired-rule pattern (patterns x rules, bool), by
        the rules of :meth:`outcome` (the property tests keep the two identical): numbers and
        yes/no effects as reductions over the rules, texts joined in rule (or code) order."""
        rules = self.rules
        marks = patterns.reshape(len(patterns), len(rules))

        def says(values) -> np.ndarray:
            return np.array(values, dtype=bool).reshape(len(rules))

        def any_of(flag: str) -> np.ndarray:
            return (marks & says([getattr(r.effect, flag) for r in rules])).any(axis=1)

        def joined(texts: list[str], chosen: np.ndarray, sep: str) -> list[str]:
            return [sep.join(compress(texts, row)) for row in chosen.tolist()]

        caps = np.array([3 if r.effect.max_impact_level is None else r.effect.max_impact_level for r in rules])
        ranks = np.array([CATEGORY_RANK[r.effect.category] if r.effect.category else -1 for r in rules])
        categories = {rank: name for name, rank in CATEGORY_RANK.items()}
        rank = np.where(marks, ranks, -1).max(axis=1, initial=-1)
        codes = sorted({a for r in rules for a in r.effect.avoid})
        avoids = np.array([[a in r.effect.avoid for a in codes] for r in rules], dtype=bool).reshape(len(rules),
                                                                                                   len(codes))
        avoided = (marks.astype(np.int64) @ avoids.astype(np.int64)) > 0
        with_caution = [i for i, r in enumerate(rules) if r.effect.caution]
        texts = [rules[i].effect.caution for i in with_caution]
        if len(set(texts)) == len(texts) and not set(texts) & set(with_standard()):
            head = CAUTION_SEP.join(with_standard())    # distinct texts: no duplicate to drop
            cautions = [head + CAUTION_SEP + extra if extra else head
                        for extra in joined(texts, marks[:, with_caution], CAUTION_SEP)]
        else:
            cautions = [CAUTION_SEP.join(with_standard(list(compress(texts, row))))
                        for row in marks[:, with_caution].tolist()]
        return {
            "category": [categories.get(k) for k in rank.tolist()],
            "max_impact_level": np.where(marks, caps, 3).min(axis=1, initial=3),
            "falls_risk": any_of("falls_risk"), "refer": any_of("refer"),
            "balance_first": any_of("balance_first"), "supervision": any_of("supervision"),
            "avoid": joined(codes, avoided, LIST_SEP),
            "flags": joined([r.id for r in rules], marks, LIST_SEP),
            "cautions": cautions,
        }

    def fired_matrix(self, df: pd.DataFrame) -> np.ndarray:
        """Boolean (rows x rules) matrix of fired rules, rules in ``self.rules`` order."""
        return self._fired(frame_features(df), len(df))

    def screen_frame(self, df: pd.DataFrame, fractures: FractureColumns | None = None) -> pd.DataFrame:
        """The vectorised evaluator: one result row per input row (see :func:`screen_batch`).

        The conditions are evaluated on whole feature arrays; the fired rules' effects are then
        combined once per distinct pattern of fired rules (a caseload has far fewer patterns than
        people, :meth:`_combine`) and spread back to the rows.
        """
        n = len(df)
        feats, tscores = _frame_features(df, fractures)
        rows, inverse = self._fired_patterns(feats, n)
        lowest, site = _lowest_site(tscores, feats["lowest_t_score"])
        effect = self._combine(rows)

        def per_pattern(values, dtype) -> np.ndarray:
            return np.asarray(values, dtype=dtype).reshape(len(rows))[inverse]

        category = per_pattern(effect["category"], object)
        none = np.equal(category, None)
        category[none] = np.where(np.isnan(lowest[none]), "unknown", "normal")
        columns = {
            "patient_id": _text_column(df, "patient_id", n).copy(),
            "bone_density_category": category,
            "falls_risk": per_pattern(effect["falls_risk"], bool),
            "max_impact_level": per_pattern(effect["max_impact_level"], np.int64),
            "avoid": per_pattern(effect["avoid"], object),
            "refer": per_pattern(effect["refer"], bool),
            "balance_first": per_pattern(effect["balance_first"], bool),
            "supervision": per_pattern(effect["supervision"], bool),
            "flags": per_pattern(effect["flags"], object),
            "lowest_t_score": lowest,
            "lowest_t_score_site": site,
            "ruleset_version": _constant_text(n, self.version),
            "cautions": per_pattern(effect["cautions"], object),
        }
        # Text columns stay object arrays (no per-cell type inference on 100k rows).
        # copy=False: each column keeps its own array (no consolidation copy into 2-D blocks).
        return pd.DataFrame({k: pd.Series(v, index=df.index, dtype=v.dtype, copy=False) for k, v in columns.items()},
                            columns=list(RESULT_COLUMNS), copy=False)

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


def screen_batch(df: pd.DataFrame, rules: RuleSet | None = None,
                 fractures: FractureColumns | None = None) -> pd.DataFrame:
    """Screen a caseload at once (vectorised evaluator).

    Parameters
    ----------
    df : pandas.DataFrame
        Flattened, validated records (:func:`prescribe.screening.batch_io.read_batch_csv` or
        :func:`prescribe.screening.batch_io.records_to_frame`).
    rules : RuleSet, optional
        Another rule set; the shipped one when omitted.
    fractures : FractureColumns, optional
        The per-person fracture figures already read from the cells (the batch reader's
        :class:`prescribe.screening.batch_io.Caseload` carries them); read from ``df`` when omitted.

    Returns
    -------
    pandas.DataFrame
        One row a person, columns :data:`RESULT_COLUMNS`; ``avoid`` and ``flags`` are
        ``;``-joined, ``cautions`` is ``' | '``-joined.
    """
    return engine_for(rules).screen_frame(df, fractures)


def results_from_frame(out: pd.DataFrame, rules: RuleSet | None = None) -> list[ScreeningResult]:
    """Turn :func:`screen_batch`'s frame back into :class:`ScreeningResult` objects."""
    return engine_for(rules).results_from_frame(out)


def screen_many(records: list[PatientRecord], rules: RuleSet | None = None) -> list[ScreeningResult]:
    """Screen many people through the vectorised evaluator; same results as :func:`screen` each."""
    engine = engine_for(rules)
    return engine.results_from_frame(engine.screen_frame(records_to_frame(records)))
