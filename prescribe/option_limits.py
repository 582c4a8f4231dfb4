"""The ranges the planner accepts for its whole-number options.

Kept apart from :mod:`prescribe.planner` (which imports pandas) so that forms can offer
exactly these values without loading the planner; :class:`prescribe.planner.PlanOptions`
takes its bounds from here.
"""

from __future__ import annotations

#: option name -> (smallest, largest) accepted value.
OPTION_RANGES: dict[str, tuple[int, int]] = {
    "weeks": (8, 52),
    "start_level": (0, 3),
    "impact_sessions_per_week": (1, 7),
    "resistance_sessions_per_week": (1, 3),
    "balance_sessions_per_week": (2, 7),
}
