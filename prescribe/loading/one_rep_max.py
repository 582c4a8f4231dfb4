"""Working loads: an estimated one-repetition maximum (1RM) from a submaximal set.

Pure functions, scalar or array in, the same shape out.  Both formulas are meant
for sets of up to about 10 repetitions; beyond that the estimate is not given.
"""

from __future__ import annotations

import numpy as np

#: Largest number of repetitions for which either estimate is used (Brzycki 1993; from memory for Epley).
MAX_REPS_FOR_ESTIMATE = 10


def epley_1rm(load_kg, reps):
    r"""Estimated 1RM by Epley's formula.

    .. math:: 1RM = w \, (1 + r / 30)

    Parameters
    ----------
    load_kg : float or array
        Load lifted [kg].
    reps : int or array
        Repetitions completed with it, 1 to 10; NaN outside that range.

    References
    ----------
    Epley B. 1985. Poundage Chart. Boyd Epley Workout, Lincoln, NE (from memory).
    """
    w = np.asarray(load_kg, dtype=float)
    r = np.asarray(reps, dtype=float)
    out = np.where(r == 1, w, w * (1.0 + r / 30.0))
    out = np.where((r >= 1) & (r <= MAX_REPS_FOR_ESTIMATE) & (w >= 0), out, np.nan)
    return out if out.ndim else float(out)


def brzycki_1rm(load_kg, reps):
    r"""Estimated 1RM by Brzycki's formula.

    .. math:: 1RM = w \times \frac{36}{37 - r}

    Parameters
    ----------
    load_kg : float or array
        Load lifted [kg].
    reps : int or array
        Repetitions completed with it, 1 to 10; NaN outside that range.

    References
    ----------
    Brzycki M. 1993. Strength testing: predicting a one-rep max from reps-to-fatigue.
    J Phys Educ Recreat Dance 64(1):88-90.
    """
    w = np.asarray(load_kg, dtype=float)
    r = np.asarray(reps, dtype=float)
    ok = (r >= 1) & (r <= MAX_REPS_FOR_ESTIMATE) & (w >= 0)
    out = np.where(ok, w * 36.0 / (37.0 - np.where(ok, r, 1.0)), np.nan)
    return out if out.ndim else float(out)


def round_load(kg: float, step: float = 0.5) -> float:
    """A load rounded to the nearest ``step`` kg (plates and dumbbells come in steps)."""
    return round(round(kg / step) * step, 2)
