"""The person's program as a FHIR R4 Bundle (type collection), checked with independent R4 models.

The Bundle holds the Patient (pseudonymous: the record's ``patient_id`` as an identifier; the
handout's name only when asked for), the record's facts as Observations, Conditions,
MedicationStatements and Procedures (the same codes :mod:`prescribe.fhir.reader` reads, so an
export reads back as the same record), the CarePlan (status ``draft`` until the clearance is
recorded, then ``active``; intent ``plan``; one activity per planned exercise with its dose and
schedule; the plan's limits and their reasons as notes), its Goals, the handout as a
DocumentReference (PDF, with ``with_handout``) and a Provenance naming the clinician and the
program's version.  :func:`validate_r4` parses the whole Bundle with fhirclient's models,
generated from the FHIR 4.0.1 StructureDefinitions (types, cardinality, required elements,
unknown elements): never only with our own models.
"""

from __future__ import annotations

import base64
import uuid
from datetime import date, datetime, timedelta, timezone
from typing import Any

from .. import __version__
from ..cautions import STANDARD_CAUTIONS
from ..errors import FieldProblem, InputError
from ..plan_schema import Plan, parse_plan
from ..records import T_SCORE_SITES, PatientRecord
from . import codes as C
from .reader import DAYS_PER_MONTH, FHIR_VERSION

_DAY_CODES = ("mon", "tue", "wed", "thu", "fri", "sat", "sun")
_NS = uuid.UUID("6f1c3a52-2d0e-4b8e-9a57-0b8f3f6c2a11")


class ExportInvalid(InputError):
    """The Bundle did not validate as FHIR R4 (a bug of the export, never of the person's data)."""


def _concept(m: C.Mapping) -> dict:
    return {"coding": [{"system": m.system, "code": m.code, "display": m.display}], "text": m.display}


def _day_before(as_of: date, months: float) -> str:
    return (as_of - timedelta(days=round(months * DAYS_PER_MONTH))).isoformat()


class _Builder:
    def __init__(self, patient_id: str, version: int | None):
        self.entries: list[dict] = []
        self.seed = f"{patient_id}|{version}"
        self.patient_url = self.url("Patient", 0)

    def url(self, rtype: str, n: int) -> str:
        return f"urn:uuid:{uuid.uuid5(_NS, f'{self.seed}|{rtype}|{n}')}"

    def add(self, resource: dict) -> str:
        rtype = resource["resourceType"]
        n = sum(1 for e in self.entries if e["resource"]["resourceType"] == rtype)
        url = self.patient_url if rtype == "Patient" else self.url(rtype, n)
        resource["id"] = url.rsplit(":", 1)[1]
        self.entries.append({"fullUrl": url, "resource": resource})
        return url

    @property
    def subject(self) -> dict:
        return {"reference": self.patient_url}


def _record_resources(b: _Builder, record: PatientRecord, as_of: date, with_name: bool) -> None:
    patient: dict[str, Any] = {"resourceType": "Patient",
                               "identifier": [{"system": C.PATIENT_ID_SYSTEM, "value": record.patient_id}],
                               "gender": record.sex}
    if with_name and record.display_name:
        patient["name"] = [{"text": record.display_name}]
    b.add(patient)
    day = as_of.isoformat()

    def obs(field: str, value_key: str, value: Any) -> None:
        m = C.export_code("observation", field, field)
        res = {"resourceType": "Observation", "status": "final", "code": _concept(m), "subject": b.subject,
               "effectiveDateTime": day}
        if value_key == "valueQuantity":
            q = {"value": value}
            if m.unit:
                q.update({"unit": m.unit, "system": C.UCUM, "code": m.unit})
            res["valueQuantity"] = q
        elif value_key == "valueCodeableConcept":
            res[value_key] = {"coding": [{"system": C.LOCAL, "code": value}], "text": value}
        else:
            res[value_key] = value
        b.add(res)

    # The record holds no date of birth (pseudonymous): the age travels as an Observation of age.
    obs("age_years", "valueQuantity", record.age_years)
    obs("body_mass_kg", "valueQuantity", record.body_mass_kg)
    obs("height_cm", "valueQuantity", record.height_cm)
    for kind, scores in (("t_scores", record.t_scores), ("z_scores", record.z_scores)):
        for site in T_SCORE_SITES:
            v = getattr(scores, site)
            if v is not None:
                obs(f"{kind}.{site}", "valueQuantity", v)
    obs("falls_past_year", "valueQuantity", record.falls_past_year)
    obs("pain_score", "valueQuantity", record.pain_score)
    for field in ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s"):
        if getattr(record, field) is not None:
            obs(field, "valueQuantity", getattr(record, field))
    for field in ("menopause", "cognition"):
        if getattr(record, field) is not None:
            obs(field, "valueCodeableConcept", getattr(record, field))
    for field in ("lives_alone", "has_carer"):
        if getattr(record, field) is not None:
            obs(field, "valueBoolean", getattr(record, field))
    for fx in record.fractures:
        m = C.export_code("condition", "fracture", fx.site)
        ext = [{"url": C.EXTENSION_BASE + "low-trauma", "valueBoolean": fx.low_trauma}]
        if fx.level:
            ext.append({"url": C.EXTENSION_BASE + "vertebral-level", "valueString": fx.level})
        b.add({"resourceType": "Condition", "extension": ext, "code": _concept(m), "subject": b.subject,
               "onsetDateTime": _day_before(as_of, fx.months_ago)})
    for code in record.conditions:
        m = C.export_code("condition", "condition", code)
        b.add({"resourceType": "Condition", "clinicalStatus": _clinical("active"), "code": _concept(m),
               "subject": b.subject})
    if record.cancer is not None:
        m = C.export_code("condition", "cancer", "cancer")
        b.add({"resourceType": "Condition", "clinicalStatus": _clinical("active" if record.cancer.active else "remission"),
               "code": _concept(m), "subject": b.subject})
        if record.cancer.bone_metastases != "unknown":
            m = C.export_code("condition", "bone_metastases", "present")
            res = {"resourceType": "Condition", "code": _concept(m), "subject": b.subject,
                   "verificationStatus": {"coding": [{"system": C.CONDITION_VERIFICATION, "code":
                                                      "confirmed" if record.cancer.bone_metastases == "present"
                                                      else "refuted"}]}}
            if record.cancer.bone_metastases == "present":
                res["clinicalStatus"] = _clinical("active" if record.cancer.active else "remission")
            b.add(res)
    for med in record.medications:
        m = C.export_code("medicine", "medication", med.class_)
        res: dict[str, Any] = {"resourceType": "MedicationStatement", "medicationCodeableConcept": _concept(m),
                               "subject": b.subject}
        period: dict[str, str] = {}
        end = None
        if med.months_since_last_dose is not None:
            end = as_of - timedelta(days=round(med.months_since_last_dose * DAYS_PER_MONTH))
            period["end"] = end.isoformat()
        if med.months_on is not None:
            period["start"] = ((end or as_of) - timedelta(days=round(med.months_on * DAYS_PER_MONTH))).isoformat()
        res["status"] = "active" if med.months_since_last_dose in (None, 0) else "completed"
        if period:
            res["effectivePeriod"] = period
        b.add(res)
    if record.glucocorticoids is not None:
        m = C.export_code("medicine", "medication", "glucocorticoid")
        g = record.glucocorticoids
        b.add({"resourceType": "MedicationStatement", "status": "active", "medicationCodeableConcept": _concept(m),
               "subject": b.subject, "effectivePeriod": {"start": _day_before(as_of, g.months)},
               "dosage": [{"text": f"{g.mg_per_day:g} mg a day (prednisolone equivalent)",
                           "timing": {"repeat": {"frequency": 1, "period": 1, "periodUnit": "d"}},
                           "doseAndRate": [{"doseQuantity": {"value": g.mg_per_day, "unit": "mg", "system": C.UCUM,
                                                             "code": "mg"}}]}]})
    for s in record.surgeries:
        m = C.export_code("procedure", "procedure", s.procedure)
        res = {"resourceType": "Procedure", "status": "completed", "code": _concept(m), "subject": b.subject,
               "performedDateTime": _day_before(as_of, s.months_ago),
               "extension": [{"url": C.EXTENSION_BASE + "surgeon-cleared-impact", "valueBoolean": s.surgeon_cleared_impact}]}
        if s.side != "none":
            res["bodySite"] = [_concept(C.export_code("procedure", "side", s.side))]
        b.add(res)


def _clinical(code: str) -> dict:
    return {"coding": [{"system": C.CONDITION_CLINICAL, "code": code}]}


def _dose_text(x) -> str:
    """The dose in the clinician's words (planning.why.exercise_dose, the clinician's pages' own)."""
    from ..planning.why import exercise_dose
    return exercise_dose(x) + (" supervised" if x.supervised else "")


def _activities(plan: Plan) -> list[dict]:
    """One activity per planned exercise: days a week, the weeks it runs, its first and last dose."""
    seen: dict[str, dict] = {}
    for week in plan.weeks:
        for ses in week.sessions:
            for x in ses.exercises:
                a = seen.setdefault(x.exercise_id, {"x": x, "weeks": [], "days": {}, "first": None, "last": None})
                if week.week not in a["weeks"]:
                    a["weeks"].append(week.week)
                a["days"].setdefault(week.week, set()).add(ses.day)
                a["first"] = a["first"] or (week.week, x)
                a["last"] = (week.week, x)
    start = date.fromisoformat(plan.start_date) if plan.start_date else None
    out = []
    for exercise_id, a in seen.items():
        x = a["x"]
        days = sorted(set().union(*a["days"].values()))
        per_week = max(len(d) for d in a["days"].values())
        first_week, last_week = min(a["weeks"]), max(a["weeks"])
        repeat: dict[str, Any] = {"frequency": per_week, "period": 1, "periodUnit": "wk",
                                  "dayOfWeek": [_DAY_CODES[d - 1] for d in days]}
        if start:
            repeat["boundsPeriod"] = {"start": (start + timedelta(days=7 * (first_week - 1))).isoformat(),
                                      "end": (start + timedelta(days=7 * last_week - 1)).isoformat()}
        else:
            repeat["boundsDuration"] = {"value": last_week - first_week + 1, "unit": "wk", "system": C.UCUM, "code": "wk"}
        fw, fx = a["first"]
        lw, lx = a["last"]
        dose = f"Week {fw}: {_dose_text(fx)}" + (f"; week {lw}: {_dose_text(lx)}" if lw != fw else "")
        description = (f"{x.name}: {per_week} day{'s' if per_week != 1 else ''} a week, weeks {first_week}-{last_week} "
                       f"({len(a['weeks'])} weeks). {dose}. Impact level {x.impact_level}, peak GRF about "
                       f"{x.peak_grf_bw:g} BW.")
        detail: dict[str, Any] = {
            "kind": "ServiceRequest",
            "code": {"coding": [{"system": C.LOCAL.rsplit("/", 1)[0] + "/exercise", "code": exercise_id,
                                 "display": x.name}], "text": x.name},
            "status": "not-started",
            "scheduledTiming": {"repeat": repeat},
            "description": description,
        }
        if fx.sets and fx.reps:
            detail["quantity"] = {"value": fx.reps, "unit": "repetitions a set"}
        out.append({"detail": detail})
    return out


def _limits(plan: Plan) -> list[dict]:
    """The plan's limits with their reasons and sources (the rows the clinician's pages and
    ``prescribe why`` print), then the screening's flags, the clearance and the cautions."""
    from ..planning.why import limit_rows
    from ..safety import plan_limits
    notes = []
    for row in limit_rows(plan_limits(plan)):
        because = "; ".join(f"{r['reason']} (source: {r['source']})" for r in row["reasons"])
        notes.append(f"{row['label']}: {row['value']}." + (f" Because {because}." if because else ""))
    for f in plan.screening.flags:
        notes.append(f"Limit {f.rule} ({f.severity}): {f.title or f.rule}. {f.message} Source: {f.source}")
    if plan.draft:
        notes.append("DRAFT: the screening refers this person; the program waits for a clinician to record the "
                     "clearance before loading.")
    elif plan.cleared_by:
        notes.append(f"Cleared for loading by {plan.cleared_by} at {plan.cleared_at}.")
    notes.extend(plan.cautions or list(STANDARD_CAUTIONS))
    return [{"text": n} for n in notes]


def program_bundle(plan: Plan | dict, record: PatientRecord, clinician: str, *, version: int | None = None,
                   as_of: date | None = None, with_handout: bool = False, with_name: bool = False,
                   handout_pdf: bytes | None = None, now: datetime | None = None) -> dict:
    """The program of ``plan`` for ``record`` as a FHIR R4 Bundle (validated: :func:`validate_r4`)."""
    plan = parse_plan(plan) if isinstance(plan, dict) else plan
    if plan.patient_id != record.patient_id:
        raise InputError.single("plan.patient_id", plan.patient_id, f"the person's id {record.patient_id!r}")
    now = now or datetime.now(timezone.utc).replace(microsecond=0)
    as_of = as_of or now.date()
    b = _Builder(record.patient_id, version)
    _record_resources(b, record, as_of, with_name)
    draft = bool(plan.draft)
    goal_texts = _goals(plan)
    goal_urls = [b.add({"resourceType": "Goal", "lifecycleStatus": "proposed" if draft else "active",
                        "description": {"text": text}, "subject": b.subject}) for text in goal_texts]
    care: dict[str, Any] = {
        "resourceType": "CarePlan", "status": "draft" if draft else "active", "intent": "plan",
        "title": "Bone-loading exercise program" + (f", version {version}" if version else ""),
        "description": f"{len(plan.weeks)}-week graded bone-loading exercise program made with prescribe "
                       f"{plan.tool_version} (rules {plan.ruleset_version}). Decision support only: a licensed "
                       "clinician reviews it; follow local guidelines.",
        "subject": b.subject, "created": plan.created, "author": {"display": clinician} if clinician else None,
        "goal": [{"reference": u} for u in goal_urls], "activity": _activities(plan), "note": _limits(plan),
    }
    if plan.start_date:
        start = date.fromisoformat(plan.start_date)
        care["period"] = {"start": start.isoformat(), "end": (start + timedelta(days=7 * len(plan.weeks) - 1)).isoformat()}
    care = {k: v for k, v in care.items() if v not in (None, [])}
    care_url = b.add(care)
    targets = [care_url, *goal_urls]
    if with_handout:
        if handout_pdf is None:
            from ..handout.render import render_pdf
            handout_pdf = render_pdf(plan)
        targets.append(b.add({
            "resourceType": "DocumentReference", "status": "current", "docStatus": "preliminary" if draft else "final",
            "type": {"text": "Exercise program handout"}, "subject": b.subject,
            "date": now.isoformat(), "description": "The printed program: the person's and the clinician's pages",
            "context": {"related": [{"reference": care_url}]},
            "content": [{"attachment": {"contentType": "application/pdf", "language": "en",
                                        "data": base64.b64encode(handout_pdf).decode("ascii"),
                                        "title": f"handout-{record.patient_id}.pdf", "creation": now.isoformat(),
                                        "size": len(handout_pdf)}}]}))
    b.add({"resourceType": "Provenance", "target": [{"reference": u} for u in targets], "recorded": now.isoformat(),
           "agent": [
               {"type": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/provenance-participant-type",
                                     "code": "author"}]}, "who": {"display": clinician or "not recorded"}},
               {"type": {"coding": [{"system": "http://terminology.hl7.org/CodeSystem/provenance-participant-type",
                                     "code": "assembler"}]}, "who": {"display": f"prescribe {__version__}"}}],
           "entity": [{"role": "source", "what": {"display": f"prescribe program version {version or 'unsaved'}, "
                                                               f"plan made by prescribe {plan.tool_version}, rules "
                                                               f"{plan.ruleset_version}"}}]})
    bundle = {"resourceType": "Bundle", "type": "collection", "timestamp": now.isoformat(),
              "meta": {"tag": [{"system": C.LOCAL, "code": f"fhir-{FHIR_VERSION}"}]}, "entry": b.entries}
    validate_r4(bundle)
    return bundle


def _goals(plan: Plan) -> list[str]:
    if plan.goals:
        return list(plan.goals)
    from ..handout.content.person import goals  # the handout's own goals: one wording
    return goals(plan)


def validate_r4(bundle: dict) -> None:
    """Parse ``bundle`` with fhirclient's FHIR R4 (4.0.1) models in strict mode.

    Raises
    ------
    ExportInvalid
        With fhirclient's own description of what does not conform.
    """
    from fhirclient.models.bundle import Bundle
    from fhirclient.models.fhirabstractbase import FHIRValidationError

    try:
        Bundle(bundle, strict=True)
    except FHIRValidationError as exc:
        raise ExportInvalid([FieldProblem("Bundle", None, f"FHIR R4 {FHIR_VERSION} as fhirclient's models read "
                                          f"it ({str(exc)[:600]})")]) from None
    for i, entry in enumerate(bundle.get("entry") or []):
        res = entry["resource"]
        # R4 invariants fhirclient does not check, on the resources this program writes.
        if res["resourceType"] == "Condition":
            ver = {c["code"] for c in (res.get("verificationStatus") or {}).get("coding", [])}
            if "entered-in-error" in ver and "clinicalStatus" in res:
                raise ExportInvalid([FieldProblem(f"Bundle.entry[{i}] Condition", None, "con-5")])
