"""The screening: one rule library, two evaluators (see :mod:`.engine`)."""

from .engine import (CAUTION_SEP, LIST_SEP, RESULT_COLUMNS, RULESET_VERSION, Engine, Outcome, chair_stand_norm_low,
                     chair_stand_norms, default_engine, engine_for, frame_features, record_features,
                     results_from_frame, screen, screen_batch, screen_many)
