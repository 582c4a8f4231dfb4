"""Norms the screening compares a person with: the 30-second chair stand by age and sex.

The table is read from ``prescribe/data/norms/chair_stand_30s.csv`` on first use and kept.
"""

from __future__ import annotations

import csv
from functools import lru_cache
from pathlib import Path

import numpy as np

NORMS_FILE = Path(__file__).parent.parent / "data" / "norms" / "chair_stand_30s.csv"


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
