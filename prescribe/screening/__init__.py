"""Screening: one rule library, two evaluators.

- :mod:`.rules`: the rule files (``prescribe/data/rules/screening/*.toml``) loaded and validated, and the
  feature vocabulary a condition may test;
- :mod:`.norms`: the norms a person is compared with (30-second chair stand);
- :mod:`.features`: the derived features of one record and of a caseload frame;
- :mod:`.conditions`: conditions compiled for the per-record and the vectorised evaluator;
- :mod:`.engine`: the engine that combines the fired rules, and :func:`screen` and friends;
- :mod:`.batch_columns` and :mod:`.batch_io`: the caseload CSV, validated a column at a time,
  read in chunks and written back.

The shipped rule library is loaded on first use (the first screening, or the first read of
:data:`RULESET_VERSION`), not when this package is imported.

This package gives decision support only; a licensed clinician reviews every result.
"""

from __future__ import annotations

from .engine import (CAUTION_SEP, LIST_SEP, RESULT_COLUMNS, Engine, Outcome, default_engine, engine_for,
                     results_from_frame, screen, screen_batch, screen_many)
from .features import frame_features, record_features
from .norms import chair_stand_norm_low, chair_stand_norms
from .rules import RuleSet, load_rules

__all__ = ["CAUTION_SEP", "LIST_SEP", "RESULT_COLUMNS", "RULESET_VERSION", "Engine", "Outcome", "RuleSet",
           "chair_stand_norm_low", "chair_stand_norms", "default_engine", "engine_for", "frame_features",
           "load_rules", "record_features", "results_from_frame", "screen", "screen_batch", "screen_many"]


def __getattr__(name: str):
    # RULESET_VERSION (release plus a short hash of the rule files) reads the shipped library,
    # so it is worked out when first asked for; the engine keeps the loaded library.
    if name == "RULESET_VERSION":
        return default_engine().version
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
