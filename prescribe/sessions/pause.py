"""A pause binds; a recorded resumption lifts it (docs/sessions.md).

A program is paused when the session advice is stop_and_refer and a clinician applies it
(``prescribe adjust --apply``): the stored version carries ``paused`` {from_week, since,
reason, until, counts_from}.  Until a clinician records the resumption
(``prescribe resume PATIENT_ID --clinician NAME --reason TEXT``) no save, import or
adjustment may replace it; the store refuses them in one place
(:func:`prescribe.store.programs.refuse_replacing_pause`).

Pure helpers over the typed plan (:class:`prescribe.plan_schema.Plan`): no store, no widgets.  Stopping after warning signs and
referring for assessment before more exercise: Riebe D et al. 2015, Updating ACSM's
recommendations for exercise preparticipation health screening, Med Sci Sports Exerc
47(11):2473-2479; keeping the program stopped until a clinician records the decision to
go on is common practice.
"""

from __future__ import annotations

from typing import Any

from ..errors import InputError
from ..languages import N_
from ..plan_schema import Plan, PlanPause, PlanResume

#: Longest resumption reason accepted [characters]: a sentence or a short paragraph for the
#: record, not a clinical letter.
REASON_MAX_CHARS = 500


def active_pause(plan: Plan | None) -> PlanPause | None:
    """The plan's pause when it is paused, else None."""
    return plan.paused if plan is not None else None


def keeps_pause(pause: PlanPause, new_plan: Plan | None) -> bool:
    """Whether ``new_plan`` keeps the same pause (the advice paused it again): it is still
    paused, from the same week and since the same day."""
    new = active_pause(new_plan)
    return new is not None and new.since == pause.since and new.from_week == pause.from_week


def pause_caution(week: int) -> str:
    """The caution a paused program carries (the clinician's words; the person's pages say it
    in their own words, first on every page)."""
    return N_("Paused from week %(week)s: do not continue this program until a clinician has assessed the "
              "person.") % {"week": week}


def checked_reason(reason: Any, field: str = "reason") -> str:
    """The resumption's reason, stripped; :class:`InputError` naming ``field`` when it is
    missing, blank or longer than :data:`REASON_MAX_CHARS`."""
    allowed = (f"why the program may go on, in words (1 to {REASON_MAX_CHARS} characters), e.g. "
               "\"assessed after the fall: no injury, cleared to continue\"")
    if not isinstance(reason, str) or not reason.strip() or len(reason.strip()) > REASON_MAX_CHARS:
        raise InputError.single(field, reason, allowed)
    return reason.strip()


def lift_pause(plan: Plan, *, by: str, at: str, reason: str, paused_version: int) -> Plan:
    """The paused ``plan`` with its pause lifted: the next program version.

    The weeks stay as they were (the week the pause began is still marked for
    reassessment); the pause's caution goes; ``resumed`` records who, when and why.  The
    adjustment that paused it is not carried on (this version is a resumption, not an
    adjustment); ``based_on_version`` is the paused version.
    """
    pause = active_pause(plan)
    if pause is None:
        raise InputError.single("program", f"version {paused_version}", "a paused program")
    drop = pause_caution(pause.from_week)
    return plan.model_copy(update={
        "paused": None, "adjustment": None,
        "cautions": [c for c in plan.cautions if c != drop],
        "based_on_version": paused_version, "created": at,
        "resumed": PlanResume(by=by, at=at, reason=reason, paused_version=paused_version,
                              paused_since=pause.since, from_week=pause.from_week)})
