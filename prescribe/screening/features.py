"""The derived features the rules test: one function for a record, one for a frame.

:func:`record_features` works out the features of one person (the per-record evaluator);
:func:`frame_features` those of every row of a caseload as arrays (the vectorised one).  A
property test keeps the two identical feature by feature; a new feature is written for both
(see :data:`prescribe.screening.rules.FEATURES` for the vocabulary).
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from ..errors import FieldProblem, InputError
from ..records import CONDITIONS, MEDICATION_CLASSES, SURGERY_PROCEDURES, T_SCORE_SITES, lowest_score
from .batch_columns import (FRACTURES_ALLOWED, LIST_ALLOWED, LIST_COLUMNS, RECORD_COLUMNS, REQUIRED_COLUMNS,
                            FractureColumns, fracture_columns, parse_items)
from .norms import chair_stand_norm_low, chair_stand_norms


def _bmi(mass_kg, height_cm):
    """Body mass index [kg/m^2] of scalars or arrays (one formula, identical rounding for both)."""
    metres = height_cm / 100.0
    return mass_kg / (metres * metres)


#: Bone density is judged by Z-score under this age [years] (ISCD 2019 adult official positions).
Z_SCORE_AGE_BELOW = 50


def density_reference(age_years, sex, menopause) -> str:
    """'z_score' for premenopausal women and anyone under 50, 't_score' otherwise.

    References
    ----------
    International Society for Clinical Densitometry 2019, Adult Official Positions (Shuhart CR et
    al. 2019, J Clin Densitom 22:453-471): in premenopausal women and men under 50 the Z-score, not
    the T-score, is used; a Z-score of -2.0 or lower is "below the expected range for age".
    """
    if age_years < Z_SCORE_AGE_BELOW or (sex == "female" and menopause == "premenopausal"):
        return "z_score"
    return "t_score"


def _lowest_of(scores: dict | None) -> float | None:
    found = lowest_score(scores)
    return None if found is None else found[1]


def v2_record_features(rec: dict) -> dict[str, Any]:
    """The features of the version-2 fields of one record dict (absent fields: their 'not recorded' value)."""
    lowest_z = _lowest_of(rec.get("z_scores"))
    menopause = rec.get("menopause")
    cancer = rec.get("cancer") or {}
    feats: dict[str, Any] = {
        "density_reference": density_reference(rec["age_years"], rec["sex"], menopause),
        "lowest_z_score": lowest_z,
        "z_score_measured": lowest_z is not None,
        "menopause": menopause or "unknown",
        "cancer_active": bool(cancer.get("active", False)),
        "bone_metastases": cancer.get("bone_metastases") or "unknown",
        "cognition": rec.get("cognition") or "unknown",
        "lives_alone": bool(rec.get("lives_alone")),
        "has_carer": bool(rec.get("has_carer")),
    }
    meds = rec.get("medications") or ()
    for code in MEDICATION_CLASSES:
        listed = [m for m in meds if m.get("class") == code]
        known = [m["months_since_last_dose"] for m in listed if m.get("months_since_last_dose") is not None]
        feats[f"medication:{code}"] = bool(listed)
        feats[f"months_since_last_dose:{code}"] = min(known) if known else None
    ops = rec.get("surgeries") or ()
    for code in SURGERY_PROCEDURES:
        done = [s for s in ops if s["procedure"] == code]
        feats[f"surgery:{code}"] = bool(done)
        feats[f"months_since_surgery:{code}"] = min(s["months_ago"] for s in done) if done else None
        feats[f"surgery_impact_uncleared:{code}"] = any(not s.get("surgeon_cleared_impact") for s in done)
    return feats


def record_features(rec: dict) -> dict[str, Any]:
    """The derived features of one record given as a dict (``PatientRecord.model_dump()`` shape).

    Missing numbers are ``None``.  See :data:`prescribe.screening.rules.FEATURES` for the vocabulary.
    """
    lowest = _lowest_of(rec.get("t_scores"))
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
    feats.update(v2_record_features(rec))
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
                    ) -> tuple[dict[str, np.ndarray], list[np.ndarray], list[np.ndarray]]:
    """:func:`frame_features` and the T-score and Z-score columns it read (T_SCORE_SITES order), for reuse."""
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
    zscores = [_column(df, f"z_score_{s}", n) for s in T_SCORE_SITES]
    feats.update(_v2_frame_features(df, n, age, sex, zscores))
    return feats, tscores, zscores


def _bool_column(df: pd.DataFrame, name: str, n: int) -> np.ndarray:
    """A true/false column as bool (True only for a true cell; absent, None and NaN are false)."""
    if name not in df.columns:
        return np.zeros(n, dtype=bool)
    col = df[name]
    if pd.api.types.is_bool_dtype(col.dtype) and not isinstance(col.dtype, pd.api.extensions.ExtensionDtype):
        return col.to_numpy(dtype=bool)
    codes, uniques = pd.factorize(col.to_numpy(dtype=object))      # absent cells: code -1
    truth = np.array([u is True or isinstance(u, np.bool_) and bool(u) or
                      isinstance(u, str) and u.strip().lower() == "true" for u in uniques.tolist()] + [False],
                     dtype=bool)
    return truth[codes]


def _list_cells(df: pd.DataFrame, column: str, n: int, vocabulary, code_key: str):
    """Each distinct compact cell of a list column parsed once: ``(codes, items of each distinct cell)``.

    Raises
    ------
    InputError
        For a cell that cannot be read or an item outside the vocabulary (the frame was not validated).
    """
    codes, uniques = pd.factorize(_text_column(df, column, n, raw=True))
    parse_item, to_dict, _ = LIST_COLUMNS[column]
    parsed = []
    for text in uniques.tolist():
        try:
            items = [to_dict(i) for i in parse_items(text, parse_item)]
        except ValueError as exc:
            raise InputError.single(column, text, f"{LIST_ALLOWED[column]} ({exc})") from None
        for item in items:
            if item.get(code_key) not in vocabulary:
                raise InputError.single(column, text, f"{LIST_ALLOWED[column]} ({code_key} one of "
                                        + ", ".join(vocabulary) + ")")
        parsed.append(items)
    return codes, parsed


def _medication_features(df: pd.DataFrame, n: int) -> dict[str, np.ndarray]:
    """Per medicine class: listed, and the fewest months since a known last dose (NaN: none known)."""
    codes, cells = _list_cells(df, "medications", n, MEDICATION_CLASSES, "class")
    listed = np.zeros((len(MEDICATION_CLASSES), len(cells) + 1), dtype=bool)    # [:, -1]: absent cell
    since = np.full((len(MEDICATION_CLASSES), len(cells) + 1), np.nan)
    index = {code: i for i, code in enumerate(MEDICATION_CLASSES)}
    for j, items in enumerate(cells):
        for m in items:
            i = index[m["class"]]
            listed[i, j] = True
            last = m.get("months_since_last_dose")
            if last is not None and not last >= since[i, j]:       # NaN (none yet) compares false
                since[i, j] = last
    out: dict[str, np.ndarray] = {}
    for code, i in index.items():
        out[f"medication:{code}"] = listed[i][codes]
        out[f"months_since_last_dose:{code}"] = since[i][codes]
    return out


def _surgery_features(df: pd.DataFrame, n: int) -> dict[str, np.ndarray]:
    """Per operation: done, the fewest months since, and whether one of them is not cleared for impact."""
    codes, cells = _list_cells(df, "surgeries", n, SURGERY_PROCEDURES, "procedure")
    done = np.zeros((len(SURGERY_PROCEDURES), len(cells) + 1), dtype=bool)
    months = np.full((len(SURGERY_PROCEDURES), len(cells) + 1), np.nan)
    uncleared = np.zeros((len(SURGERY_PROCEDURES), len(cells) + 1), dtype=bool)
    index = {code: i for i, code in enumerate(SURGERY_PROCEDURES)}
    for j, items in enumerate(cells):
        for s in items:
            i = index[s["procedure"]]
            done[i, j] = True
            if not s["months_ago"] >= months[i, j]:
                months[i, j] = s["months_ago"]
            uncleared[i, j] |= not s.get("surgeon_cleared_impact")
    out: dict[str, np.ndarray] = {}
    for code, i in index.items():
        out[f"surgery:{code}"] = done[i][codes]
        out[f"months_since_surgery:{code}"] = months[i][codes]
        out[f"surgery_impact_uncleared:{code}"] = uncleared[i][codes]
    return out


def _word_column(df: pd.DataFrame, name: str, n: int, absent: str) -> np.ndarray:
    """A text column with ``absent`` where a cell is empty or missing."""
    cells = _text_column(df, name, n)
    out = cells.copy()
    out[cells == ""] = absent
    return out


def _v2_frame_features(df: pd.DataFrame, n: int, age: np.ndarray, sex: np.ndarray,
                       zscores: list[np.ndarray]) -> dict[str, np.ndarray]:
    """The version-2 features of a frame, as :func:`v2_record_features` works them out for each row
    (a missing column: 'not recorded' everywhere)."""
    menopause = _word_column(df, "menopause", n, "unknown")
    reference = np.where((age < Z_SCORE_AGE_BELOW) | ((sex == "female") & (menopause == "premenopausal")),
                         "z_score", "t_score").astype(object)
    lowest_z = zscores[0]
    for site_scores in zscores[1:]:
        lowest_z = np.fmin(lowest_z, site_scores)
    active = _bool_column(df, "cancer_active", n)
    feats: dict[str, np.ndarray] = {
        "density_reference": reference,
        "lowest_z_score": lowest_z, "z_score_measured": ~np.isnan(lowest_z),
        "menopause": menopause, "cancer_active": active,
        "bone_metastases": _word_column(df, "cancer_bone_metastases", n, "unknown"),
        "cognition": _word_column(df, "cognition", n, "unknown"),
        "lives_alone": _bool_column(df, "lives_alone", n), "has_carer": _bool_column(df, "has_carer", n),
    }
    feats.update(_medication_features(df, n))
    feats.update(_surgery_features(df, n))
    return feats


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
