"""The check itself: :data:`RULES` in the order they are checked, :func:`check_program`
and :func:`assert_safe` (see the package's docstring)."""

from __future__ import annotations

from typing import Iterable

from ..plan_schema import Plan
from ..records import PatientRecord, ScreeningResult
from ..errors import UnsafeProgram
from .clearance import SRC_DRAFT, rule_draft_until_cleared
from .facts import _Facts
from .falls import SRC_BALANCE, SRC_FALLS_LIMITS, rule_balance_every_week, rule_falls_risk_limits
from .impact import (SRC_BOUTS, SRC_CEILING, SRC_DIRECTIONS, SRC_SCREENING, rule_avoided_patterns, rule_bout_split,
                     rule_impact_cap, rule_session_ceiling, rule_two_directions)
from .integrity import (SRC_CATALOGUE, SRC_FIGURES, SRC_SWAP, rule_catalogue_match, rule_impact_counts,
                        rule_same_person, rule_swap_same_kind, rule_week_figures)
from .derivation import SRC_DERIVATION, rule_limits_match, rule_screening_matches
from .limits import limits_for
from .person import (SRC_LOAD_CAP, rule_balance_within_measured, rule_carer_led, rule_hold_volume,
                     rule_load_cap)
from ..planning.sources import SRC_BALANCE_MEASURED, SRC_CARER_LED, SRC_HOLD_VOLUME
from .model import Rule, SafetyViolation
from .progression import SRC_ONE_LEVEL, SRC_REMODEL, rule_one_level_at_a_time, rule_weak_window
from .strength import (SRC_RESISTANCE_DAYS, SRC_SPINE, SRC_SUPERVISION, rule_resistance_days,
                       rule_spine_sparing_load, rule_spine_sparing_variant, rule_supervision)

SRC_RECORD = ("common practice: a program is checked against the person's own record, screened again with "
              "the current rules")

#: The rules, in the order they are checked.
RULES: tuple[Rule, ...] = (
    Rule("impact_cap", "Never above the screening's impact cap", SRC_SCREENING, rule_impact_cap),
    Rule("avoided_pattern", "No movement pattern the screening asks to avoid", SRC_SCREENING,
         rule_avoided_patterns),
    Rule("week_level_matches", "A week's impact level is its exercises' highest", SRC_FIGURES, rule_week_figures),
    Rule("impact_counts_match", "Impact counts add up", SRC_FIGURES, rule_impact_counts),
    Rule("session_ceiling", "At most 100 impacts a session", SRC_CEILING, rule_session_ceiling),
    Rule("bout_split", "More than 50 impacts a day split into bouts at least 4 h apart", SRC_BOUTS,
         rule_bout_split),
    Rule("two_directions", "Two loading directions from moderate impact on", SRC_DIRECTIONS, rule_two_directions),
    Rule("one_level_at_a_time", "Impact steps up one level at a time", SRC_ONE_LEVEL, rule_one_level_at_a_time),
    Rule("weak_window", "No escalation in weeks 3-5 after a new or larger stimulus", SRC_REMODEL, rule_weak_window),
    Rule("catalogue_match", "Exercises are the catalogue's, with its figures", SRC_CATALOGUE, rule_catalogue_match),
    Rule("spine_sparing_variant", "Spine-sparing variants where flexion or twisting is to be avoided", SRC_SPINE,
         rule_spine_sparing_variant),
    Rule("spine_sparing_load", "Spine-sparing load limits where flexion or twisting is to be avoided", SRC_SPINE,
         rule_spine_sparing_load),
    Rule("balance_every_week", "Balance work every week where falls risk is flagged", SRC_BALANCE,
         rule_balance_every_week),
    Rule("falls_risk_limits", "Balance demand within the limits of a person at falls risk", SRC_FALLS_LIMITS,
         rule_falls_risk_limits),
    Rule("supervision", "Supervision at 80% 1RM or more, or at high impact", SRC_SUPERVISION, rule_supervision),
    Rule("swap_same_kind", "A swap keeps the kind of movement and the person's limits", SRC_SWAP,
         rule_swap_same_kind),
    Rule("resistance_days", "At most 3 resistance sessions a week, not on consecutive days", SRC_RESISTANCE_DAYS,
         rule_resistance_days),
    Rule("load_cap", "No resistance load above the screening's heaviest allowed", SRC_LOAD_CAP, rule_load_cap),
    Rule("carer_led", "A short program, every session supervised or carer-led, where the person cannot exercise "
         "alone", SRC_CARER_LED, rule_carer_led),
    Rule("hold_volume", "The starting dose held until the clearance where the screening asks", SRC_HOLD_VOLUME,
         rule_hold_volume),
    Rule("balance_within_measured", "Balance tasks start within what the person was measured to hold",
         SRC_BALANCE_MEASURED, rule_balance_within_measured),
    Rule("draft_until_cleared", "A draft until a clinician clears a referred person", SRC_DRAFT,
         rule_draft_until_cleared),
    Rule("same_person", "The records are the plan's own person's", SRC_FIGURES, rule_same_person),
    Rule("screening_matches", "The plan's screening is its record's, screened again", SRC_DERIVATION,
         rule_screening_matches),
    Rule("limits_match", "The plan's limits are the ones its record gives", SRC_DERIVATION, rule_limits_match),
)


def check_program(plan: Plan, screening: ScreeningResult | None = None, *, catalogue=None,
                  record: PatientRecord | None = None, rules: Iterable[Rule] | None = None
                  ) -> list[SafetyViolation]:
    """Every rule the program breaks; ``[]`` when it is safe.

    Parameters
    ----------
    plan : Plan
        Any plan: built by the planner, edited in the app, or edited by hand.
    screening : ScreeningResult, optional
        A screening to hold the plan to, besides the plan's own.
    catalogue : Catalogue, optional
        The exercise catalogue (default: the packaged one).
    record : PatientRecord, optional
        The person's record as the caller knows it (e.g. the store's); it is screened
        again with the current rules and the plan held to the stricter result.
    rules : iterable of Rule, optional
        A subset of :data:`RULES` (default: all).
    """
    if catalogue is None:
        from ..catalogue import default_catalogue
        catalogue = default_catalogue()
    limits = limits_for(plan, screening, record=record)
    facts = _Facts(plan, limits, catalogue, record)
    out: list[SafetyViolation] = []
    for rule in (RULES if rules is None else rules):
        out.extend(rule.check(facts))
    return out


def assert_safe(plan: Plan, screening: ScreeningResult | None = None, *, door: str = "", catalogue=None,
                record: PatientRecord | None = None, require_record: bool = False) -> None:
    """Raise :class:`~prescribe.errors.UnsafeProgram` when :func:`check_program` finds a violation.

    ``door`` names where the program came in (``"prescribe handout"``, ``"app: swap"``)
    and starts the message.  With ``require_record`` a plan that carries no patient
    record, checked without the caller's (the store's) record either, is refused: its
    only screening is the plan's own copy, which a hand edit can loosen.
    """
    found = check_program(plan, screening, catalogue=catalogue, record=record)
    if require_record and plan.record is None and record is None:
        found.insert(0, SafetyViolation(
            "record_on_file", None, None,
            "the plan carries no patient record to screen again, and no stored record of "
            f"{plan.patient_id!r} was given, so its embedded screening cannot be trusted",
            "a plan made by this version of `prescribe plan` (it carries the record), or the person's record "
            "from the store", SRC_RECORD))
    if found:
        raise UnsafeProgram(found, door=door)
