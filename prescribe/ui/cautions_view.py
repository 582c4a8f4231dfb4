"""Which cautions each part of the page shows (no widgets).

One always-visible box carries the standard cautions (prescribe/cautions.py); each
section then shows only its own, specific ones: the screening's with the screening, the
program's with the program, what to check before printing with the handout.  Nothing
is dropped: every caution of the screening and the plan appears in its section, and the
standard ones stay on screen while the page scrolls.
"""

from __future__ import annotations

from ..cautions import STANDARD_CAUTIONS

#: What the handout section asks of the clinician before printing (common practice).
HANDOUT_CAUTIONS = (
    "Read the handout through with the person before they take it home; every page carries the "
    "usual cautions and the clinic's contact.",
)


def section_cautions(session) -> dict[str, list[str]]:
    """Section css class -> its specific cautions (standard ones left to the top box)."""
    standard = set(STANDARD_CAUTIONS)
    screening = [c for c in (session.screening.cautions if session.screening is not None else [])
                 if c not in standard]
    plan = [c for c in (session.plan.cautions if session.plan is not None else [])
            if c not in standard and c not in screening]
    return {
        "pr-section-person": [],
        "pr-section-screening": screening,
        "pr-section-program": plan,
        "pr-section-handout": list(HANDOUT_CAUTIONS) if session.plan is not None else [],
        "pr-section-store": [],
    }
