"""The next step for a stored person: the session engine over the store's program and
sessions, and ``apply`` storing the adjusted program as a new version based on the old;
``resume_person`` recording the resumption of a paused program.

Shared by ``prescribe adjust`` / ``prescribe resume`` and the app's live-session panel, so
both give the same advice and both pass the same checks before anything is stored.
"""

from __future__ import annotations

from datetime import date

from ..errors import InputError
from ..plan_schema import PlanAdjustment
from ..store.api import now_utc


def adjust_person(store, patient_id: str, *, today: date, apply: bool = False, clinician: str | None = None,
                  draft=None) -> dict:
    """The advice for one stored person (and, with ``apply``, the stored new version).

    Shared by the command line and the app.  The returned dict is the printed advice
    plus ``_program`` (the adjusted :class:`prescribe.plan_schema.Plan`) and ``changes_program``: whether the adjusted
    program differs from the stored one in any week (applying advice that changes nothing
    stores no new version).

    ``draft`` is a session not stored (a validated
    :class:`~prescribe.sessions.records.SessionRecord`, the app's "advise without logging"):
    the advice counts it as the newest session, and nothing can be applied from it.
    """
    from ..plan_schema import program_week
    from ..plan_schema import start_day as plan_start
    from ..sessions.engine import LoggedSession, assess
    from ..sessions.gate import assert_program_safe
    record, version, plan, sessions = store.session_context(patient_id)  # NotFoundError names the id
    if version is None:
        raise InputError.single("patient_id", patient_id, "a person with a stored program (store one with "
                                                          "`prescribe save PATIENT.json --plan PLAN.json`)")
    if draft is not None:
        if apply:
            raise InputError.single("draft", patient_id, "a logged session: advice from a session not stored "
                                                         "is not applied (log the session first)")
        if draft.patient_id != patient_id:
            raise InputError.single("patient_id", draft.patient_id, f"the person advised ({patient_id})")
        from ..sessions.records import check_session_dates
        check_session_dates(draft, plan_start(plan), today)  # the same dates a logged session may have
        week = program_week(plan_start(plan), date.fromisoformat(draft.session_date))
        newest = max((s.session_id or 0 for s in sessions), default=0) + 1  # after every stored session that day
        sessions = [*sessions, LoggedSession(draft, week, version, newest)]
    resumed = store.last_resumption(patient_id)  # after a resumption only later sessions count
    advice = assess(plan, sessions, today=today, baseline_pain=record.pain_score, program_version=version,
                    counts_after_version=(resumed or {}).get("paused_version"))
    out = advice.as_dict()
    out["current_program_version"] = version
    # The current version already applies an adjustment worked out on the same day, with no
    # session logged against it since: applying again would move the program twice for
    # the same sessions.
    done = plan.adjustment
    repeat = (done is not None and done.as_of == advice.as_of
              and not any(s.program_version == version for s in sessions))
    if repeat:
        out["already_applied"] = (f"program version {version} already applies the advice of {advice.as_of} "
                                  f"({done.decision}); log a session before adjusting again")
    program = advice.program.model_copy(update={
        "based_on_version": version,
        "adjustment": PlanAdjustment(decision=advice.decision, week=advice.week, as_of=advice.as_of,
                                     reasons=advice.reasons, changes=advice.changes,
                                     session_ruleset_version=advice.ruleset_version)})
    if apply:
        if repeat:
            raise InputError.single("--apply", patient_id, "a person whose current program does not already "
                                    f"apply today's advice: {out['already_applied']}")
        program = program.model_copy(update={"created": now_utc()})
        # refused: exit 2, nothing stored
        assert_program_safe(program, door=f"prescribe adjust --apply {patient_id}", record=record)
        new_version = store.save_program(
            patient_id, program, clinician, based_on_version=version,
            note=f"adjusted: {advice.decision} from week {advice.week}", action="program_adjusted",
            audit_detail={"decision": advice.decision, "week": advice.week,
                          "reasons": [r["rule"] for r in advice.reasons], "changes": advice.changes})
        out["program_version"] = new_version
        out["based_on_version"] = version
        out["applied_by"] = clinician
    out["changes_program"] = (_prescribed(program) != _prescribed(plan)
                              or (program.paused is None) != (plan.paused is None))
    out["_program"] = program
    return out


#: Week fields the engine works out again from the rest (not a change of what the person does).
_DERIVED_WEEK_FIELDS = ("weak_window", "step_up")


def _prescribed(plan) -> list:
    """What a program asks the person to do, week by week (the weeks without their derived marks)."""
    return [w.model_copy(update={k: None for k in _DERIVED_WEEK_FIELDS}) for w in plan.weeks]


def resume_person(store, patient_id: str, *, clinician: str | None, reason: str) -> dict:
    """Record a clinician's resumption of a person's paused program (the next version, the
    pause lifted); what ``prescribe resume`` prints and the app shows.

    ``clinician`` goes through :func:`prescribe.settings.current_clinician` (under
    JupyterHub the login).  Bad input (no program, not paused, a blank or too long reason,
    no clinician) is an :class:`InputError`; an unknown person a ``NotFoundError``.
    """
    from ..cautions import with_standard
    from ..settings import current_clinician
    from ..sessions.pause import checked_reason
    reason = checked_reason(reason, "reason")
    who = current_clinician(clinician, required=True)
    out = store.resume_program(patient_id, who, reason)
    out["cautions"] = with_standard([
        f"Resumed by {out['resumed_by']}: check the next step with `prescribe adjust {patient_id}` (or Advise in "
        "the app) before the next session; after a long pause the advice may go back a step."])
    return out
