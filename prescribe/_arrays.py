"""Argument checks shared by the model modules (dose, mechanics).

Each model function accepts a scalar or an array (or a pandas Series: anything
numpy can read) and returns a float for scalar input, an array otherwise.  Bad
input raises :class:`~prescribe.errors.InputError` naming the argument.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .errors import InputError
from .records import BODY_MASS_RANGE_KG


def checked(name: str, value: Any, *, low: float | None = None, high: float | None = None,
            low_open: bool = False, whole: bool = False, allowed: str | None = None) -> np.ndarray:
    """``value`` as a float array, or InputError naming ``name`` if any element is
    NaN, infinite, outside [low, high] (``low_open``: strictly above low), or not a
    whole number when ``whole``."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise InputError.single(name, value, allowed or "a number") from None
    bad = ~np.isfinite(arr)
    if low is not None:
        bad |= (arr <= low) if low_open else (arr < low)
    if high is not None:
        bad |= arr > high
    if whole:
        bad |= np.isfinite(arr) & (arr != np.round(arr))
    if np.any(bad):
        original = np.asarray(value)
        first = (original[bad] if original.ndim else original).flat[0]
        first = first.item() if hasattr(first, "item") else first
        raise InputError.single(name, first, allowed or _describe(low, high, low_open, whole))
    return arr


def _describe(low, high, low_open, whole) -> str:
    kind = "a whole number" if whole else "a finite number"
    if low is not None and high is not None:
        return f"{kind} {'above' if low_open else 'from'} {low:g} {'up ' if low_open else ''}to {high:g}"
    if low is not None:
        return f"{kind} {'above' if low_open else '>='} {low:g}"
    if high is not None:
        return f"{kind} <= {high:g}"
    return kind


def out(result: Any, *inputs: Any):
    """A float when every input was a scalar, else the array itself."""
    if all(np.ndim(x) == 0 for x in inputs):
        return float(np.asarray(result))
    return np.asarray(result, dtype=float)


#: Standard acceleration of gravity [m/s^2] (CGPM 1901 conventional value).
G = 9.80665

def body_mass(value: Any, name: str = "body_mass_kg") -> np.ndarray:
    """``value`` checked against the patient record's body-mass range (records.py), as an array."""
    lo, hi = BODY_MASS_RANGE_KG
    return checked(name, value, low=lo, high=hi, allowed=body_mass_allowed())


def body_mass_allowed() -> str:
    """What a body mass may be, in words: "a body mass from 25 to 300 kg"."""
    lo, hi = BODY_MASS_RANGE_KG
    return f"a body mass from {lo:g} to {hi:g} kg"
