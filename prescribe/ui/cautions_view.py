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

#: What the live-session panel asks of the clinician (common practice; the symptoms and falls
#: that stop a session are the session rules' own, data/rules/sessions.toml).
LIVE_CAUTIONS = (
    "Any symptom ticked below means stop the session and assess the person before going on; "
    "a fall since the last session is assessed before any loading.",
    "The advice is a suggestion from the clinic's rules, with its reasons: you decide. Applying it stores a "
    "new program version that passes the same safety check as every program.",
)
#: What the worn-sensor panel says of its counts (common practice).
SENSOR_CAUTIONS = (
    "Impacts counted from a worn sensor are estimates from acceleration at the hip, not forces at the bone; "
    "check the wear time before reading a low count as missed sessions.",
)


def specific(items) -> list[str]:
    """``items`` without the standard cautions (those stay in the box on top of the page)."""
    standard = set(STANDARD_CAUTIONS)
    return [c for c in items or () if c not in standard]


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
