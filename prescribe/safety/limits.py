"""The limits a program is held to: the strictest of every screening the check can find."""

from __future__ import annotations

from functools import lru_cache

from ..plan_schema import Plan
from ..records import PatientRecord, ScreeningResult
from .model import IMPACTS_CEILING, Limits

SPINAL_PATTERNS = frozenset({"loaded_spinal_flexion", "loaded_spinal_twisting"})


def limits_for(plan: Plan, screening: ScreeningResult | None = None, *,
               record: PatientRecord | None = None) -> Limits:
    """The strictest limits of every screening available for this plan.

    Considered: ``screening`` (when given), the plan's embedded screening, and a fresh
    screening of ``record`` (the caller's copy of the person, e.g. the store's) with the
    current rules, merged by :func:`strictest_screening` (the one merge): the cap is the
    lowest, the patterns to avoid the union, falls risk, refer and supervision are set if any
    says so.
    """
    found: list[tuple[str, ScreeningResult]] = []
    # A clearance recorded on the plan (who and when) lifts what the rules held until then; a
    # screening made before the clearance is then superseded by the records screened again with
    # it, so it is left out where a record is there to screen (docs/safety.md "Clearance").
    cleared = bool(plan.cleared_by and plan.cleared_at)
    has_record = plan.record is not None or record is not None
    if screening is not None and not (cleared and has_record and not screening.cleared):
        found.append(("screening given", screening))
    if not (cleared and has_record and not plan.screening.cleared):
        found.append(("plan.screening", plan.screening))
    if plan.record is not None:
        found.append(("re-screened plan.record", rescreen(plan.record, cleared)))
    if record is not None:
        found.append(("re-screened record", rescreen(record, cleared)))
    merged = strictest_screening(*(scr for _, scr in found))
    cap = merged.max_impact_level
    plan_cap = plan.max_impact_level
    if plan_cap is not None and 0 <= plan_cap < cap:
        cap = plan_cap  # the template's own cap can only lower the screening's
    avoid = frozenset(merged.avoid)
    max_imp = plan.max_impacts_per_session
    if max_imp is None or max_imp < 0:
        max_imp = IMPACTS_CEILING
    if max_imp > IMPACTS_CEILING and not plan.max_impacts_reason:
        max_imp = IMPACTS_CEILING
    return Limits(
        max_pct_1rm=merged.max_pct_1rm, carer_led=merged.carer_led, hold_volume=merged.hold_volume,
        cap=cap, avoid=avoid,
        falls_risk=merged.falls_risk or merged.balance_first,
        refer=merged.refer, supervision=merged.supervision,
        spine_sparing=bool(avoid & SPINAL_PATTERNS) or plan.spine_sparing is True,
        max_impacts=max_imp,
        origins=tuple(name for name, _ in found),
    )


_CATEGORY_ORDER = ("unknown", "normal", "within_expected_range_for_age", "osteopenia",
                   "below_expected_range_for_age", "osteoporosis", "severe_osteoporosis")


def strictest_screening(*screenings: ScreeningResult) -> ScreeningResult:
    """One screening holding the strictest of each: lowest cap, every pattern to avoid, falls
    risk, refer, supervision and balance-first if any says so, the most severe density
    category, every flag and caution (first seen first).  The first screening's identity
    (patient_id, rule-set version) is kept."""
    first = screenings[0]
    if len(screenings) == 1:
        return first
    flags, seen_rules, cautions = [], set(), []
    for scr in screenings:
        for fl in scr.flags:
            if fl.rule not in seen_rules:
                seen_rules.add(fl.rule)
                flags.append(fl)
        for c in scr.cautions:
            if c not in cautions:
                cautions.append(c)
    known = [s.bone_density_category for s in screenings if s.bone_density_category != "unknown"]
    category = max(known, key=_CATEGORY_ORDER.index) if known else first.bone_density_category
    avoid: list[str] = []
    for scr in screenings:
        avoid.extend(p for p in scr.avoid if p not in avoid)
    pcts = [s.max_pct_1rm for s in screenings if s.max_pct_1rm is not None]
    return first.model_copy(update={
        "bone_density_category": category,
        "falls_risk": any(s.falls_risk for s in screenings),
        "max_impact_level": min(s.max_impact_level for s in screenings),
        "avoid": avoid,
        "refer": any(s.refer for s in screenings),
        "flags": flags,
        "cautions": cautions,
        "balance_first": any(s.balance_first for s in screenings),
        "supervision": any(s.supervision for s in screenings),
        "max_pct_1rm": min(pcts) if pcts else None,
        "carer_led": any(s.carer_led for s in screenings),
        "hold_volume": any(s.hold_volume for s in screenings),
        "person_notes": list(dict.fromkeys(n for s in screenings for n in s.person_notes)),
        "cleared": all(s.cleared for s in screenings),
    })


def rescreen(record: PatientRecord, cleared: bool = False) -> ScreeningResult:
    """The record screened with the current rules (remembered: a plan is checked at many doors);
    ``cleared``: with a recorded clearance (what waited for it lifted)."""
    return _rescreen_json(record.model_dump_json(), cleared)


@lru_cache(maxsize=256)
def _rescreen_json(text: str, cleared: bool = False) -> ScreeningResult:
    from ..records import PatientRecord as _Record
    from ..screening import screen
    return screen(_Record.model_validate_json(text), cleared=cleared)
