"""The ranges and defaults the planner accepts for its whole-number options.

Kept apart from :mod:`prescribe.planner` (which imports pandas) so that forms and the
command line's help can offer exactly these values without loading the planner;
:class:`prescribe.planner.PlanOptions` takes its bounds and defaults from here.
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

#: option name -> the value used when the clinician leaves the option unset.
OPTION_DEFAULTS: dict[str, int] = {
    "weeks": 26,
    "impact_sessions_per_week": 3,
    "resistance_sessions_per_week": 2,
    # Without falls risk; with it, the template's balance.sessions_falls_risk.
    "balance_sessions_per_week": 3,
}


def range_text(name: str) -> str:
    """``"LOW-HIGH"`` for a whole-number option (help texts)."""
    low, high = OPTION_RANGES[name]
    return f"{low}-{high}"
