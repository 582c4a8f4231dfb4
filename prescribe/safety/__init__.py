"""The one safety check of a program, called at every door.

Every program the tool builds, edits, prints, saves or imports passes
:func:`check_program`, whatever its origin (the planner, an edit in the app, a plan
file edited by hand, a bundle from another clinic).  Each rule is one function that
returns :class:`SafetyViolation` records and cites its source; :data:`RULES` lists
them in the order they are checked.  :func:`assert_safe` raises
:class:`prescribe.errors.UnsafeProgram` (bad input: the command line exits 2) naming
the rule, the week, the exercise and what is allowed.

The limits a program is held to (:class:`Limits`) are the strictest of every
screening the check can find: the one passed in, the copy embedded in the plan, a
fresh screening of the patient record embedded in the plan, and a fresh screening of
the record the caller passes (the store's copy of the person).  A hand edit can loosen
the plan's copy of its screening; it cannot loosen the others.  See docs/safety.md.

The modules: :mod:`.check` (the rules table and the check), :mod:`.model` (violation,
limits, rule), :mod:`.facts` (what the rules read), :mod:`.limits` (the strictest
screening), and the rules by theme: :mod:`.impact`, :mod:`.progression`,
:mod:`.strength`, :mod:`.falls`, :mod:`.integrity`, :mod:`.clearance`.

This package is domain code: it never imports the store, the handout or the widgets.
"""

from .check import RULES, assert_safe, check_program
from .clearance import is_draft, record_clearance
from .facts import pct_1rm, rpe_top
from .impact import IMPACT_LABELS, MAX_BOUT_IMPACTS, MIN_BOUT_GAP_H
from .limits import (TemplateCaps, _rescreen_json, derive_limits, limits_for, limits_of_plan, plan_limits, rescreen,  # noqa: F401
                     spine_sparing_reason, strictest_screening)  # (_rescreen_json: benchmarks)
from .model import IMPACTS_CEILING, Limits, Rule, SafetyViolation
from .strength import SUPERVISED_FROM_PCT_1RM

__all__ = ["SafetyViolation", "Limits", "Rule", "RULES", "check_program", "assert_safe", "limits_for",
           "strictest_screening", "rescreen", "derive_limits", "limits_of_plan", "plan_limits", "TemplateCaps",
           "spine_sparing_reason", "pct_1rm", "rpe_top", "SUPERVISED_FROM_PCT_1RM",
           "record_clearance", "is_draft",
           "MAX_BOUT_IMPACTS", "MIN_BOUT_GAP_H", "IMPACTS_CEILING", "IMPACT_LABELS"]
