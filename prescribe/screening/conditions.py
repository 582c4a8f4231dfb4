"""Rule conditions compiled once for the two evaluators.

:func:`compile_scalar` turns a condition into a function of one person's feature dict;
:func:`evaluate_vector` evaluates it on whole feature arrays.  A missing number never
passes a comparison in either.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from .rules import BOOL, FEATURES, NUMBER, AllOf, AnyOf, Condition, Not, Test


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
