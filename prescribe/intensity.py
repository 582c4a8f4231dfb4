"""Reading a plan's intensity text: the one reader of "% 1RM" and "RPE" figures, and the one
rule of which work is supervised.

An exercise's ``intensity`` is free text in the plan ("70% 1RM", "80-85% 1RM", "RPE 5-6",
"RPE 3 to 4", "body weight"), written by the planner, a template or a hand edit. The
planner's weekly figures, the safety check, the session advice, the handout and the app all
read it here, so none of them can read a different load from the same words, and all of them
mark the same work as supervised.
"""

from __future__ import annotations

import re
from functools import lru_cache

#: From this intensity on, resistance work is supervised (Watson et al. 2018, J Bone Miner Res
#: 33:211-220, LIFTMOR: every session at 80-85% 1RM and above was supervised).
SUPERVISED_FROM_PCT_1RM = 80.0
#: From this impact level on (high impact, above 4 BW), impact work is supervised (PRODUCT.md:
#: supervision wherever high impact is prescribed; common practice).
SUPERVISED_FROM_LEVEL = 3

# "80% 1RM", "80 % of 1 RM", "80-85% 1RM", "80 to 85% 1-RM" (a range gives its top).
_PCT_1RM = re.compile(r"(\d+(?:\.\d+)?)\s*(?:[-\u2013to ]+\s*(\d+(?:\.\d+)?))?\s*%\s*(?:of\s*)?1\s*-?\s*RM",
                      re.IGNORECASE)
# "RPE 5", "RPE 5-6", "RPE 5 to 6" (Borg CR10 effort; a range gives its top).
_RPE_TEXT = r"RPE\s*(\d+(?:\.\d+)?)(?:\s*(?:[-\u2013]|to)\s*(\d+(?:\.\d+)?))?"
_RPE = re.compile(_RPE_TEXT, re.IGNORECASE)
_RPE_ONLY = re.compile(rf"^\s*{_RPE_TEXT}\s*$", re.IGNORECASE)


def _top(pattern: re.Pattern, intensity: str | None) -> float | None:
    """The highest figure ``pattern`` finds in the text (a range's top), or None."""
    if not intensity:
        return None
    found = [float(b or a) for a, b in pattern.findall(intensity)]
    return max(found) if found else None


@lru_cache(maxsize=1024)
def pct_1rm(intensity: str | None) -> float | None:
    """The highest %1RM an intensity text prescribes ("80% 1RM", "80-85% 1RM" gives 85), or None."""
    return _top(_PCT_1RM, intensity)


@lru_cache(maxsize=1024)
def rpe_top(intensity: str | None) -> float | None:
    """The highest Borg CR10 effort an intensity text prescribes ("RPE 5-6" gives 6), or None."""
    return _top(_RPE, intensity)


def rpe_range(intensity: str | None, *, whole: bool = False) -> tuple[float, float] | None:
    """(low, high) of the first Borg CR10 effort in the text ("RPE 5-6" gives (5, 6), "RPE 6"
    gives (6, 6)), or None.  With ``whole`` the text must be nothing but that effort."""
    if not intensity:
        return None
    found = (_RPE_ONLY.match if whole else _RPE.search)(intensity)
    if found is None:
        return None
    low = float(found.group(1))
    return low, float(found.group(2)) if found.group(2) else low


def needs_supervision(intensity: str | None, impact_level: int) -> bool:
    """Whether work at this intensity and impact level is done only supervised: at
    :data:`SUPERVISED_FROM_PCT_1RM` or more, or at impact level :data:`SUPERVISED_FROM_LEVEL`."""
    pct = pct_1rm(intensity)
    return (pct is not None and pct >= SUPERVISED_FROM_PCT_1RM) or (impact_level or 0) >= SUPERVISED_FROM_LEVEL
