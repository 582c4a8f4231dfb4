"""A retest of a stored person: compare, re-screen, decide, and store it with the next block.

Shared by ``prescribe reassess`` and the app's retest panel, so both give the same answer
and store the same things.  :func:`assess_retest` works everything out without writing;
:func:`reassess_person` also stores it (one transaction, :meth:`Store.save_retest`).

What it does (docs/reassess.md):

1. the retest's date: not in the future, not before the program's start_date, not before
   the person's last stored retest;
2. each measure against its baseline (the intake value, kept in the first retest's row)
   and the previous value, with its minimal detectable change and verdict
   (:mod:`prescribe.outcomes.measures`);
3. the record takes the retest's measures (falls in the past year from the falls since each
   visit) and is screened again;
4. the decision: continue, hold or refer (:func:`prescribe.outcomes.decide.decide`);
5. continue: the next block, a new program version that continues from the current levels
   (:func:`prescribe.outcomes.decide.next_block`); hold or refer: no new version, and the
   reasons say why.  Where the current program no longer passes the safety check for the
   re-screened record (a fall brings falls risk and a lower impact cap), that is said too:
   every door checks the stored program against the updated record, so it is not handed out
   again until a program within the new limits is built.
"""

from __future__ import annotations

from datetime import date, timedelta

from ..cautions import with_standard
from ..errors import InputError, PlanRequestRefused
from ..outcomes.decide import decide, needs_new_clearance, next_block
from ..outcomes.measures import compare, height_loss_cm, snapshot
from ..outcomes.retest import RetestRecord, check_retest_date
from ..plan_schema import Plan, start_day
from ..records import PatientRecord, parse_record

__all__ = ["assess_retest", "reassess_person", "updated_record", "history_of"]

#: Falls counted into the record's "falls in the past year" [days].
YEAR_DAYS = 365


def history_of(record: PatientRecord, rows: list[dict]) -> list[dict]:
    """The earlier measure snapshots, oldest first: the intake values (kept in the first retest's
    row), then each stored retest's."""
    if not rows:
        return [snapshot(record.model_dump(mode="json"))]
    return [rows[0]["previous"], *(snapshot(r["retest"]) for r in rows)]


def updated_record(record: PatientRecord, retest: RetestRecord, rows: list[dict], start: date) -> PatientRecord:
    """The record with the retest's measures as its current ones.

    ``falls_past_year`` becomes the falls reported at the retests of the last 365 days (this
    one included), plus the intake's count while the program started less than a year ago
    (the intake's falls may fall inside the year; counted in, to err on the safe side).
    """
    data = record.model_dump(mode="json")
    given = retest.model_dump(mode="json")
    for name in ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "pain_score", "body_mass_kg",
                 "height_cm"):
        if given[name] is not None:
            data[name] = given[name]
    for group in ("t_scores", "z_scores"):
        new = {k: v for k, v in given[group].items() if v is not None}
        if new:
            data[group] = {**(data.get(group) or {}), **new}
            if group == "z_scores":
                data.pop("record_version", None)  # Z-scores make it a version-2 record
    since = retest.day - timedelta(days=YEAR_DAYS)
    falls = retest.falls_since_last + sum(int(r["retest"].get("falls_since_last") or 0) for r in rows
                                          if date.fromisoformat(r["date"]) > since)
    if start > since:
        intake = rows[0]["previous"].get("falls_past_year", 0) if rows else record.falls_past_year
        falls += int(intake or 0)
    data["falls_past_year"] = min(falls, 1000)
    return parse_record(data, source=f"the record of {record.patient_id!r} with the retest of {retest.date}")


def _baseline_snapshot(record: PatientRecord) -> dict:
    snap = snapshot(record.model_dump(mode="json"))
    snap["falls_past_year"] = record.falls_past_year
    return snap


def _template_of(store, plan: Plan):
    """The clinic template the plan was built from (resolved from the store), or None for a shipped one."""
    tpl = plan.template
    if tpl is None or tpl.origin != "clinic" or not tpl.name:
        return None
    from .template_library import resolve
    ref = f"{tpl.name}@{tpl.version}" if tpl.version else tpl.name
    return resolve(ref, store, purpose="read", field="template").template()


def assess_retest(store, retest: RetestRecord, *, today: date | None = None, source: str | None = None) -> dict:
    """Everything a retest leads to, worked out without writing.

    Returns the printed result plus private keys (``_record``, ``_screening``, ``_plan`` (the
    next block as a :class:`~prescribe.plan_schema.Plan`, or None), ``_previous``,
    ``_based_on_record_version``, ``_based_on_version``, ``_verdicts``, ``_template``) that
    :func:`reassess_person` stores.
    """
    from ..safety import check_program, rescreen

    today = today or date.today()
    pid = retest.patient_id
    record = store.get_patient(pid)            # NotFoundError names the id
    record_version = store.record_version(pid)
    version = store.latest_program_version(pid)
    if version is None:
        raise InputError.single("patient_id", pid, "a person with a stored program (store one with "
                                                   "`prescribe save PATIENT.json --plan PLAN.json`)", source)
    _, plan = store.program_for_reading(pid, version)   # shared, read-only: versions never change
    first = plan if version == 1 else store.program_for_reading(pid, 1)[1]
    # the program's start: the first version's (a next block starts later and may start after a retest)
    start = start_day(first)
    check_retest_date(retest, start, today, source)
    rows = store.retests(pid)
    if rows and retest.date < rows[-1]["date"]:
        raise InputError.single("date", retest.date, f"a date on or after the last stored retest "
                                f"({rows[-1]['date']})", source)
    history = history_of(record, rows)
    now = snapshot(retest.model_dump(mode="json"))
    measures, first = compare(history, now)
    loss = height_loss_cm(history, now)
    new_record = updated_record(record, retest, rows, start)
    uncleared = rescreen(new_record, False)
    keeps_clearance = bool(plan.cleared_by) and not needs_new_clearance(uncleared, plan)
    screening = rescreen(new_record, True) if keeps_clearance else uncleared
    verdict = decide(measures, retest.falls_since_last, loss, uncleared, plan)
    decision, reasons = verdict.decision, verdict.reasons
    cautions = list(plan.cautions)
    out_plan, next_info = None, None
    broken = check_program(plan, record=new_record)
    if broken:
        first_v = broken[0]
        reasons.append({"rule": "reassess.current_program_unsafe", "decision": "hold",
                        "message": f"The current program no longer passes the safety check for the re-screened "
                                   f"record ({len(broken)} finding{'s' if len(broken) != 1 else ''}; first: "
                                   f"{first_v.message}): build a program within the new limits before the next "
                                   "session.",
                        "source": first_v.source, "status": "seen"})
        if decision == "continue":
            decision = "hold"
            reasons = [r for r in reasons if r["rule"] != "reassess.continue"]
    if decision == "continue":
        try:
            new_plan, info = next_block(plan, new_record, retest.day, template=_template_of(store, plan),
                                        cleared_by=plan.cleared_by if keeps_clearance else None,
                                        cleared_at=plan.cleared_at if keeps_clearance else None)
        except PlanRequestRefused as exc:  # the planner cannot continue at these levels: hold, say why
            decision = "hold"
            reasons = [{"rule": "reassess.next_block_refused", "decision": "hold",
                        "message": f"The next block could not continue from the current levels: {exc}",
                        "source": "the planner's progression rules and the safety check, each rule with its "
                                  "own source",
                        "status": "seen"}]
        else:
            out_plan = new_plan.model_copy(update={"based_on_version": version})
            cautions = list(new_plan.cautions)
            next_info = {"program_version": version + 1, **info}
            if info["starts_on"] != retest.date:
                reasons.append({"rule": "reassess.after_window", "decision": "continue",
                                "message": f"The next block starts on {info['starts_on']}: the current program "
                                           f"stepped up in week {info['last_stimulus_week']}, and weeks 3-5 after "
                                           "a new or larger stimulus carry no increase; until then the current "
                                           "program goes on.",
                                "source": "Eriksen 1986, Endocr Rev 7:379; Heaney, Yates & Santora 1997, "
                                          "J Bone Miner Res 12:1143 (bone is transiently weaker in weeks 3-5 "
                                          "after a new or larger stimulus)",
                                "status": "seen"})
    result = {
        "patient_id": pid, "date": retest.date,
        "measures": measures, "first_measured": first, "height_loss_cm": loss,
        "falls_since_last": retest.falls_since_last,
        "flags": verdict.flags, "decision": decision,
        "reasons": [{k: v for k, v in r.items() if k != "decision"} for r in reasons],
        "next_block": next_info,
        "current_program_version": version,
        "screening": {"bone_density_category": screening.bone_density_category,
                      "max_impact_level": screening.max_impact_level, "refer": screening.refer,
                      "falls_risk": screening.falls_risk, "flags": [f.rule for f in screening.flags]},
        "cautions": with_standard([*(["Refer: do not continue loading until a clinician has assessed the person."]
                                     if decision == "refer" else []), *cautions]),
    }
    result.update(_record=new_record, _screening=screening, _plan=out_plan, _previous=_baseline_snapshot(record),
                  _based_on_record_version=record_version, _based_on_version=version,
                  _verdicts={m["measure"]: m["verdict"] for m in measures},
                  _template=plan.template.name if plan.template else None)
    return result


def reassess_person(store, retest: RetestRecord, *, clinician: str, today: date | None = None,
                    source: str | None = None) -> dict:
    """Work out and store a retest (see :func:`assess_retest`); returns the printed result with
    ``retest_id``, ``record_version`` and the stored next block's or pause's version."""
    out = assess_retest(store, retest, today=today, source=source)
    plan = out.pop("_plan")
    note = ""
    if plan is not None:
        note = f"next block after the retest of {retest.date}"
    saved = store.save_retest(
        retest.model_dump(mode="json"), out.pop("_record"), out.pop("_screening"), clinician,
        previous=out.pop("_previous"), result={k: v for k, v in out.items() if not k.startswith("_")},
        based_on_record_version=out.pop("_based_on_record_version"), plan=plan,
        based_on_version=out.pop("_based_on_version"), plan_note=note, template=out.pop("_template"),
        verdicts=out.pop("_verdicts"))
    if out["next_block"] is not None:
        out["next_block"]["program_version"] = saved["program_version"]
    out.update(retest_id=saved["retest_id"], record_version=saved["record_version"])
    return out
