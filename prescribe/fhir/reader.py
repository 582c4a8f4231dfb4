"""FHIR R4 resources -> the facts a patient record needs -> a version-2 record.

Two steps, so that one Bundle and a bulk export of many people share the same reading:

1. :func:`resource_facts` turns one resource into a list of small JSON-able *facts*
   (``["scalar", field, value, date, ref, element]``, a fracture, a medicine ...), or facts
   that say why it was not used.  Bad input (not FHIR, another FHIR version, a code system
   not read) raises :class:`~prescribe.errors.InputError` naming the resource's element.
2. :func:`assemble` turns one person's facts into a :class:`~prescribe.records.PatientRecord`
   with the provenance of every field, the codes not used and the notes (two values for one
   field: the most recent, with a note).

Dates become ages and months as of a reference date (``as_of``, default today): months are
days / 30.436875 (the mean Gregorian month), to one decimal.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field as dc_field
from datetime import date, datetime
from typing import Any, Iterable

from ..errors import FieldProblem, InputError
from ..records import (COGNITION_LEVELS, MENOPAUSE_STATUSES, T_SCORE_SITES, VERTEBRAL_LEVEL_PATTERN,
                       PatientRecord, parse_record)
from . import codes as C

#: Days in a mean Gregorian month (365.2425 / 12).
DAYS_PER_MONTH = 30.436875
#: The FHIR release this reader reads (HL7 FHIR R4, 4.0.1).
FHIR_VERSION = "4.0.1"
#: Resource types whose content becomes record fields.
READ_TYPES = ("Patient", "Observation", "Condition", "MedicationStatement", "Procedure")
#: Resource types a Bundle may carry that are read for nothing (listed as not used).
_STATUS_NOT_USED = {"entered-in-error", "cancelled", "not-taken", "preliminary", "registered", "not-done"}
_ACTIVE_CLINICAL = {"active", "recurrence", "relapse"}
_MASS_UNITS = {"kg": 1.0, "g": 0.001, "[lb_av]": 0.45359237, "lb": 0.45359237, "lbs": 0.45359237}
_LENGTH_UNITS = {"cm": 1.0, "m": 100.0, "mm": 0.1, "[in_i]": 2.54, "in": 2.54}
_LEVEL = re.compile(VERTEBRAL_LEVEL_PATTERN)
_DATE = re.compile(r"^(\d{4})(-(\d{2})(-(\d{2}))?)?")
_R4_TYPES: frozenset[str] | None = None


def r4_resource_types() -> frozenset[str]:
    """The resource types of FHIR R4 (4.0.1), from the independent R4 models (fhirclient)."""
    global _R4_TYPES
    if _R4_TYPES is None:
        import importlib
        import pkgutil

        import fhirclient.models as models
        found = set()
        for info in pkgutil.iter_modules(models.__path__):
            if info.name.endswith("_tests") or info.name.startswith("fhir"):
                continue
            module = importlib.import_module(f"fhirclient.models.{info.name}")
            for obj in vars(module).values():
                rtype = getattr(obj, "resource_type", None)
                if isinstance(obj, type) and isinstance(rtype, str) and obj.__module__ == module.__name__ \
                        and hasattr(obj, "elementProperties") and "Resource" in [b.__name__ for b in obj.__mro__]:
                    found.add(rtype)
        _R4_TYPES = frozenset(found - {"Resource", "DomainResource"})
    return _R4_TYPES


# ---------------------------------------------------------------------------
# Dates
# ---------------------------------------------------------------------------

def parse_fhir_date(text: Any, where: str) -> tuple[date, bool]:
    """A FHIR date or dateTime as a day; ``True`` when only a year or a month was given
    (the middle of that period is taken)."""
    if not isinstance(text, str):
        raise InputError.single(where, text, "a FHIR date or dateTime (YYYY, YYYY-MM, YYYY-MM-DD or "
                                "YYYY-MM-DDThh:mm:ss+zz:zz)")
    m = _DATE.match(text)
    try:
        if not m:
            raise ValueError
        year = int(m.group(1))
        if m.group(5):
            return date(year, int(m.group(3)), int(m.group(5))), False
        if m.group(3):
            return date(year, int(m.group(3)), 15), True
        return date(year, 7, 1), True
    except ValueError:
        raise InputError.single(where, text, "a FHIR date or dateTime (YYYY, YYYY-MM, YYYY-MM-DD or "
                                "YYYY-MM-DDThh:mm:ss+zz:zz)") from None


def months_between(earlier: date, later: date) -> float:
    """Whole days between two days in mean months, to one decimal."""
    return round((later - earlier).days / DAYS_PER_MONTH, 1)


def age_on(birth: date, on: date) -> int:
    return on.year - birth.year - ((on.month, on.day) < (birth.month, birth.day))


# ---------------------------------------------------------------------------
# Step 1: one resource -> facts
# ---------------------------------------------------------------------------

def ref_of(resource: dict) -> str:
    return f"{resource.get('resourceType')}/{resource.get('id', '?')}"


def normal_reference(ref: Any) -> str | None:
    """``Patient/123`` from ``Patient/123``, ``https://host/fhir/Patient/123/_history/2`` or a urn."""
    if not isinstance(ref, str) or not ref:
        return None
    if ref.startswith("urn:"):
        return ref
    parts = ref.split("/_history/")[0].rstrip("/").split("/")
    return "/".join(parts[-2:]) if len(parts) >= 2 else ref


def subject_key(resource: dict) -> str | None:
    """Which person a resource is about (its ``subject`` reference, normalised)."""
    if resource.get("resourceType") == "Patient":
        return f"Patient/{resource.get('id')}"
    subject = resource.get("subject")
    return normal_reference(subject.get("reference")) if isinstance(subject, dict) else None


def check_version(resource: Any, where: str) -> None:
    """Refuse what is not an R4 resource: not a JSON object with a resourceType, a declared
    fhirVersion other than 4.0.x, a type or an element only found in another release."""
    if not isinstance(resource, dict) or not isinstance(resource.get("resourceType"), str):
        raise InputError.single(f"{where}.resourceType", resource if not isinstance(resource, dict) else None,
                                "a FHIR resource: a JSON object with a resourceType (this is not FHIR)")
    rtype = resource["resourceType"]
    for key, holder in (("fhirVersion", resource), ("meta.fhirVersion", resource.get("meta") or {})):
        declared = holder.get("fhirVersion") if isinstance(holder, dict) else None
        if declared is not None and not str(declared).startswith("4.0"):
            raise InputError.single(f"{where} {rtype}.{key}", declared, f"FHIR R4 ({FHIR_VERSION}); this file "
                                    "is from another FHIR release")
    versions = C.other_versions()
    other = versions.get(("resource", rtype))
    if other:
        raise InputError.single(f"{where}.resourceType", rtype, f"a resource type of FHIR R4 ({FHIR_VERSION}); "
                                f"{rtype} is a FHIR {other} resource: the file is from another FHIR release")
    for key in resource:
        other = versions.get(("element", f"{rtype}.{key}"))
        if other:
            raise InputError.single(f"{where} {rtype}.{key}", resource[key], f"FHIR R4 ({FHIR_VERSION}) elements; "
                                    f"{rtype}.{key} is FHIR {other}: the file is from another FHIR release")
    if rtype not in r4_resource_types():
        raise InputError.single(f"{where}.resourceType", rtype, f"a resource type of FHIR R4 ({FHIR_VERSION})")


def _codings(concept: Any) -> list[tuple[str, str]]:
    if not isinstance(concept, dict):
        return []
    out = []
    for c in concept.get("coding") or []:
        if isinstance(c, dict) and isinstance(c.get("system"), str) and isinstance(c.get("code"), str):
            out.append((c["system"], c["code"]))
    return out


def _check_systems(codings: list[tuple[str, str]], where: str) -> None:
    """Bad input when a resource is coded only in systems no mapping reads."""
    read = C.systems_read()
    if codings and not any(s in read for s, _ in codings):
        raise InputError.single(where, ", ".join(f"{s}|{c}" for s, c in codings),
                                "a code from a code system this program reads (" + ", ".join(sorted(read)) + ")")


def _not_used(ref: str, why: str) -> list:
    return [["not_used", ref, why]]


def _day(text: Any, where: str) -> str | None:
    if text is None:
        return None
    return parse_fhir_date(text, where)[0].isoformat()


def _effective(resource: dict, ref: str) -> str | None:
    for key in ("effectiveDateTime", "effectiveInstant", "issued"):
        if resource.get(key) is not None:
            return _day(resource[key], f"{ref}.{key}")
    period = resource.get("effectivePeriod")
    if isinstance(period, dict) and (period.get("end") or period.get("start")):
        return _day(period.get("end") or period.get("start"), f"{ref}.effectivePeriod")
    return None


def _ext(resource: dict, name: str) -> Any:
    for e in resource.get("extension") or []:
        if isinstance(e, dict) and e.get("url") == C.EXTENSION_BASE + name:
            for k, v in e.items():
                if k.startswith("value"):
                    return v
    return None


def _number(value: Any, where: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        raise InputError.single(where, value, "a number")
    return value


def observation_facts(res: dict, ref: str) -> list:
    codings = _codings(res.get("code"))
    table = C.observation_codes()
    hit = next((table[k] for k in codings if k in table), None)
    if hit is None:
        _check_systems(codings, f"{ref}.code.coding")
        return _not_used(ref, "code not in the mapping: " + (", ".join(f"{s}|{c}" for s, c in codings) or "no code"))
    if res.get("status") in _STATUS_NOT_USED:
        return _not_used(ref, f"status {res.get('status')}")
    when = _effective(res, ref)
    field = hit.field
    element = None
    if "valueQuantity" in res:
        q = res["valueQuantity"] or {}
        value = _number(q.get("value"), f"{ref}.valueQuantity.value")
        unit = q.get("code") or q.get("unit")
        element = "valueQuantity.value"
        if field == "body_mass_kg" or field == "height_cm":
            units = _MASS_UNITS if field == "body_mass_kg" else _LENGTH_UNITS
            if unit not in units:
                raise InputError.single(f"{ref}.valueQuantity.code", unit, "a UCUM unit of "
                                        + ("mass: kg, g or [lb_av]" if field == "body_mass_kg" else
                                           "length: cm, m, mm or [in_i]"))
            value = round(value * units[unit], 3) if units[unit] != 1.0 else value
        elif field == "age_years" and unit not in (None, "a", "yr", "years"):
            raise InputError.single(f"{ref}.valueQuantity.code", unit, "a: age in years (UCUM 'a')")
    elif "valueInteger" in res:
        value, element = _number(res["valueInteger"], f"{ref}.valueInteger"), "valueInteger"
    elif "valueBoolean" in res:
        value, element = res["valueBoolean"], "valueBoolean"
    elif "valueCodeableConcept" in res:
        vocab = {"menopause": MENOPAUSE_STATUSES, "cognition": COGNITION_LEVELS}.get(field, {})
        value = next((c for s, c in _codings(res["valueCodeableConcept"]) if s == C.LOCAL and c in vocab), None)
        if value is None:
            return _not_used(ref, f"{field}: value code not in the mapping")
        element = "valueCodeableConcept"
    else:
        return _not_used(ref, "no value")
    if field in ("falls_past_year", "chair_stand_30s", "pain_score", "age_years") and isinstance(value, float) \
            and value.is_integer():
        value = int(value)
    return [["scalar", field, value, when, ref, element, f"{hit.system}|{hit.code}"]]


def condition_facts(res: dict, ref: str) -> list:
    codings = _codings(res.get("code"))
    hit = None
    for s, c in codings:
        hit = C.find_condition(s, c)
        if hit:
            break
    if hit is None:
        _check_systems(codings, f"{ref}.code.coding")
        return _not_used(ref, "code not in the mapping: " + (", ".join(f"{s}|{c}" for s, c in codings) or "no code"))
    verification = {c for _, c in _codings(res.get("verificationStatus"))}
    clinical = {c for _, c in _codings(res.get("clinicalStatus"))}
    code = f"{hit.system}|{hit.code}"
    if "entered-in-error" in verification:
        return _not_used(ref, "verificationStatus entered-in-error")
    if hit.field == "bone_metastases":
        return [["metastases", "excluded" if "refuted" in verification else "present", bool(clinical & _ACTIVE_CLINICAL),
                 ref, code]]
    if "refuted" in verification:
        return _not_used(ref, "verificationStatus refuted")
    if hit.field == "cancer":
        return [["cancer", bool(clinical & _ACTIVE_CLINICAL), ref, code]]
    if hit.field == "condition":
        if clinical and not clinical & _ACTIVE_CLINICAL:
            return _not_used(ref, f"clinicalStatus {', '.join(sorted(clinical))}")
        return [["condition", hit.value, ref, code]]
    # a fracture
    onset = None
    for key in ("onsetDateTime", "recordedDate"):
        if res.get(key) is not None:
            onset = _day(res[key], f"{ref}.{key}")
            break
    low = _ext(res, "low-trauma")
    low = hit.low_trauma if low is None else low
    level = _ext(res, "vertebral-level") or hit.level or None
    if level is not None and (hit.value != "vertebra" or not _LEVEL.match(str(level))):
        level = None
    return [["fracture", hit.value, onset, low, level, ref, code]]


def medication_facts(res: dict, ref: str) -> list:
    if res.get("status") in _STATUS_NOT_USED:
        return _not_used(ref, f"status {res.get('status')}")
    concept = res.get("medicationCodeableConcept")
    if concept is None and "medicationReference" in res:
        return _not_used(ref, "medicationReference (only medicationCodeableConcept is read)")
    codings = _codings(concept)
    hit = None
    for s, c in codings:
        hit = C.find_medicine(s, c)
        if hit:
            break
    if hit is None:
        _check_systems(codings, f"{ref}.medicationCodeableConcept.coding")
        return _not_used(ref, "code not in the mapping: " + (", ".join(f"{s}|{c}" for s, c in codings) or "no code"))
    period = res.get("effectivePeriod") or {}
    start = _day(period.get("start"), f"{ref}.effectivePeriod.start")
    end = _day(period.get("end"), f"{ref}.effectivePeriod.end")
    if res.get("effectiveDateTime") is not None and end is None:
        end = _day(res["effectiveDateTime"], f"{ref}.effectiveDateTime")
    code = f"{hit.system}|{hit.code}"
    if hit.value == "glucocorticoid":
        dose = _daily_dose_mg(res, ref)
        if dose is not None:
            return [["glucocorticoid", round(dose * (hit.factor or 1.0), 3), start, end, ref, code]]
    return [["medication", hit.value, start, end, ref, code]]


def _daily_dose_mg(res: dict, ref: str) -> float | None:
    """mg a day from the first dosage: doseQuantity in mg times the doses a day (1 when no timing)."""
    dosage = (res.get("dosage") or [None])[0]
    if not isinstance(dosage, dict):
        return None
    rate = (dosage.get("doseAndRate") or [None])[0]
    q = rate.get("doseQuantity") if isinstance(rate, dict) else None
    if not isinstance(q, dict):
        return None
    value = _number(q.get("value"), f"{ref}.dosage[0].doseAndRate[0].doseQuantity.value")
    unit = q.get("code") or q.get("unit")
    if unit not in ("mg",):
        raise InputError.single(f"{ref}.dosage[0].doseAndRate[0].doseQuantity.code", unit, "mg")
    repeat = ((dosage.get("timing") or {}).get("repeat") or {})
    per_day = 1.0
    if repeat:
        freq = repeat.get("frequency", 1)
        period = repeat.get("period", 1)
        unit_days = {"d": 1, "wk": 7, "h": 1 / 24}.get(repeat.get("periodUnit", "d"))
        if unit_days is None:
            raise InputError.single(f"{ref}.dosage[0].timing.repeat.periodUnit", repeat.get("periodUnit"), "h, d or wk")
        per_day = freq / (period * unit_days)
    return value * per_day


def procedure_facts(res: dict, ref: str) -> list:
    if res.get("status") not in (None, "completed"):
        return _not_used(ref, f"status {res.get('status')}")
    table = C.procedure_codes()
    codings = _codings(res.get("code"))
    hit = next((table[k] for k in codings if k in table and table[k].field == "procedure"), None)
    if hit is None:
        _check_systems(codings, f"{ref}.code.coding")
        return _not_used(ref, "code not in the mapping: " + (", ".join(f"{s}|{c}" for s, c in codings) or "no code"))
    side = "none"
    for site in res.get("bodySite") or []:
        for k in _codings(site):
            if k in table and table[k].field == "side":
                side = table[k].value
        text = (site.get("text") or "").strip().lower() if isinstance(site, dict) else ""
        if side == "none" and text in ("left", "right", "both"):
            side = text
    when = None
    if res.get("performedDateTime") is not None:
        when = _day(res["performedDateTime"], f"{ref}.performedDateTime")
    elif isinstance(res.get("performedPeriod"), dict):
        p = res["performedPeriod"]
        when = _day(p.get("end") or p.get("start"), f"{ref}.performedPeriod")
    cleared = bool(_ext(res, "surgeon-cleared-impact"))
    return [["surgery", hit.value, side, when, cleared, ref, f"{hit.system}|{hit.code}"]]


def patient_facts(res: dict, ref: str, with_name: bool) -> list:
    facts: list = []
    pid = None
    for ident in res.get("identifier") or []:
        if isinstance(ident, dict) and ident.get("system") == C.PATIENT_ID_SYSTEM and ident.get("value"):
            pid = (ident["value"], "identifier (prescribe)")
    if pid is None:
        first = next((i for i in res.get("identifier") or [] if isinstance(i, dict) and i.get("value")), None)
        pid = (first["value"], "identifier[0].value") if first else (res.get("id"), "id") if res.get("id") else None
    if pid:
        facts.append(["patient_id", pid[0], ref, pid[1]])
    if "birthDate" in res:
        facts.append(["birthDate", res["birthDate"], ref])
    if "gender" in res:
        facts.append(["gender", res["gender"], ref])
    if with_name:
        for name in res.get("name") or []:
            if isinstance(name, dict):
                text = name.get("text") or " ".join([*(name.get("given") or []), name.get("family") or ""]).strip()
                if text:
                    facts.append(["name", text, ref])
                    break
    return facts


def resource_facts(res: Any, where: str, with_name: bool = False) -> list:
    """The facts of one resource (see the module's docstring); bad input raises InputError."""
    check_version(res, where)
    rtype = res["resourceType"]
    ref = ref_of(res)
    if rtype == "Patient":
        return patient_facts(res, ref, with_name)
    if rtype == "Observation":
        return observation_facts(res, ref)
    if rtype == "Condition":
        return condition_facts(res, ref)
    if rtype == "MedicationStatement":
        return medication_facts(res, ref)
    if rtype == "Procedure":
        return procedure_facts(res, ref)
    return _not_used(ref, f"{rtype} is not read")


# ---------------------------------------------------------------------------
# Step 2: one person's facts -> a record
# ---------------------------------------------------------------------------

@dataclass
class ImportResult:
    """A record read from FHIR, where each field came from, what was not used and the notes."""

    record: PatientRecord
    provenance: list[dict] = dc_field(default_factory=list)
    not_used: list[dict] = dc_field(default_factory=list)
    notes: list[str] = dc_field(default_factory=list)

    def report(self) -> dict:
        return {"patient_id": self.record.patient_id, "provenance": self.provenance, "not_used": self.not_used,
                "notes": self.notes}

    def filled_fields(self) -> list[str]:
        """The record's top-level fields this import filled."""
        return sorted({p["field"].split(".")[0].split("[")[0] for p in self.provenance})


#: What each required field is called in FHIR's terms.
REQUIRED_IN_FHIR = {
    "patient_id": ("Patient.identifier", "an identifier (or an id) on the Patient resource"),
    "age_years": ("Patient.birthDate", "a birth date on the Patient (YYYY-MM-DD), or an Observation of age "
                                       "(LOINC 30525-0)"),
    "sex": ("Patient.gender", "'female' or 'male' on the Patient"),
    "body_mass_kg": ("Observation 29463-7 (body weight)", "an Observation of body weight, LOINC 29463-7, in kg"),
    "height_cm": ("Observation 8302-2 (body height)", "an Observation of body height, LOINC 8302-2, in cm"),
}


def _latest(values: list, field: str, notes: list[str]) -> list:
    """The most recent of several facts for one field (undated ones count as oldest), with a note."""
    ranked = sorted(values, key=lambda f: f[3] or "")
    chosen = ranked[-1]
    if len({repr(v[2]) for v in values}) > 1:
        others = "; ".join(f"{v[2]!r} ({v[3] or 'undated'}, {v[4]})" for v in ranked[:-1])
        notes.append(f"{field}: {len(values)} values; took the most recent, {chosen[2]!r} ({chosen[3] or 'undated'}, "
                     f"{chosen[4]}), over {others}")
    return chosen


def assemble(facts: Iterable[list], as_of: date | None = None, source: str | None = None) -> ImportResult:
    """One person's facts -> an :class:`ImportResult` (raises InputError naming FHIR's and the record's terms)."""
    as_of = as_of or date.today()
    notes: list[str] = []
    prov: list[dict] = []
    not_used: list[dict] = []
    scalars: dict[str, list] = {}
    ids, births, genders, names = [], [], [], []
    fractures, conditions, meds, glucos, surgeries, cancers, metastases = [], [], [], [], [], [], []
    for f in facts:
        kind = f[0]
        if kind == "scalar":
            scalars.setdefault(f[1], []).append(f)
        elif kind == "patient_id":
            ids.append(f)
        elif kind == "birthDate":
            births.append(f)
        elif kind == "gender":
            genders.append(f)
        elif kind == "name":
            names.append(f)
        elif kind == "fracture":
            fractures.append(f)
        elif kind == "condition":
            conditions.append(f)
        elif kind == "medication":
            meds.append(f)
        elif kind == "glucocorticoid":
            glucos.append(f)
        elif kind == "surgery":
            surgeries.append(f)
        elif kind == "cancer":
            cancers.append(f)
        elif kind == "metastases":
            metastases.append(f)
        elif kind == "not_used":
            not_used.append({"resource": f[1], "why": f[2]})

    def months_ago(day: str | None, where: str) -> float | None:
        if day is None:
            return None
        d = date.fromisoformat(day)
        if d > as_of:
            raise InputError.single(where, day, f"a date on or before the reference date {as_of.isoformat()}")
        return months_between(d, as_of)

    data: dict[str, Any] = {}
    missing: list[FieldProblem] = []
    # Patient
    distinct_ids = {f[1] for f in ids}
    if len(distinct_ids) > 1:
        raise InputError.single("Patient.identifier (patient_id)", sorted(distinct_ids),
                                "one person a Bundle (use an NDJSON bulk export for a caseload)", source)
    if ids:
        data["patient_id"] = ids[0][1]
        prov.append({"field": "patient_id", "resource": ids[0][2], "element": ids[0][3]})
    distinct_births = sorted({f[1] for f in births})
    if len(distinct_births) > 1:
        raise InputError.single("Patient.birthDate (age_years)", distinct_births,
                                "one birth date for the person (the record system holds two: correct it there)", source)
    if births:
        birth, partial = parse_fhir_date(births[0][1], "Patient.birthDate (age_years)")
        if birth > as_of:
            raise InputError.single("Patient.birthDate (age_years)", births[0][1],
                                    f"a date on or before the reference date {as_of.isoformat()}", source)
        data["age_years"] = age_on(birth, as_of)
        prov.append({"field": "age_years", "resource": births[0][2], "element": "birthDate",
                     "as_of": as_of.isoformat()})
        if partial:
            notes.append(f"age_years: Patient.birthDate {births[0][1]!r} gives no day; the middle of the period "
                         "was taken (the age may be one year off)")
        scalars.pop("age_years", None)
    distinct_genders = sorted({f[1] for f in genders})
    if len(distinct_genders) > 1:
        raise InputError.single("Patient.gender (sex)", distinct_genders, "one gender for the person", source)
    if genders:
        if genders[0][1] not in ("female", "male"):
            raise InputError.single("Patient.gender (sex)", genders[0][1],
                                    "'female' or 'male' (the published norms and rules the screening uses are "
                                    "by sex; record the person's sex for this purpose by hand)", source)
        data["sex"] = genders[0][1]
        prov.append({"field": "sex", "resource": genders[0][2], "element": "gender"})
    if names:
        data["display_name"] = names[0][1][:80]
        prov.append({"field": "display_name", "resource": names[0][2], "element": "name"})
    # Observations
    for field, values in scalars.items():
        chosen = _latest(values, field, notes)
        value = chosen[2]
        if field == "age_years" and isinstance(value, (int, float)):
            value = int(value) + (as_of - date.fromisoformat(chosen[3])).days // 365 if chosen[3] else int(value)
        head, _, site = field.partition(".")
        if site:
            data.setdefault(head, {})[site] = value
        else:
            data[field] = value
        prov.append({"field": field, "resource": chosen[4], "element": chosen[5], "code": chosen[6],
                     **({"effective": chosen[3]} if chosen[3] else {})})
    for name, (fhir_name, allowed) in REQUIRED_IN_FHIR.items():
        if name not in data:
            missing.append(FieldProblem(f"{fhir_name} ({name})", None, allowed, kind="absent"))
    if missing:
        raise InputError(missing, source)
    # Conditions
    fx_out = []
    for f in sorted(fractures, key=lambda f: (f[2] or "", f[5])):
        _, site, onset, low, level, ref, code = f
        if onset is None:
            not_used.append({"resource": ref, "why": "fracture without onsetDateTime (months_ago unknown)"})
            continue
        item = {"site": site, "months_ago": months_ago(onset, f"{ref}.onsetDateTime"), "low_trauma": bool(low)}
        if low is None:
            item["low_trauma"] = True
            notes.append(f"fractures: {ref} does not say how the fracture happened; taken as a low-trauma "
                         "(fragility) fracture, the cautious reading: confirm with the person")
        if level:
            item["level"] = level
        prov.append({"field": f"fractures[{len(fx_out)}]", "resource": ref, "element": "code, onsetDateTime",
                     "code": code})
        fx_out.append(item)
    if fx_out:
        data["fractures"] = fx_out
    seen_conditions = []
    for f in conditions:
        if f[1] not in seen_conditions:
            seen_conditions.append(f[1])
            prov.append({"field": f"conditions[{len(seen_conditions) - 1}]", "resource": f[2], "element": "code",
                         "code": f[3]})
    if seen_conditions:
        data["conditions"] = seen_conditions
    if cancers or metastases:
        active = any(f[1] for f in cancers) or any(f[2] for f in metastases if f[1] == "present")
        status = "present" if any(f[1] == "present" for f in metastases) else \
            "excluded" if any(f[1] == "excluded" for f in metastases) else "unknown"
        data["cancer"] = {"active": active, "bone_metastases": status}
        for f in cancers:
            prov.append({"field": "cancer.active", "resource": f[2], "element": "clinicalStatus", "code": f[3]})
        for f in metastases:
            prov.append({"field": "cancer.bone_metastases", "resource": f[3], "element": "code, verificationStatus",
                         "code": f[4]})
    # Medicines
    med_out = []
    for f in sorted(meds, key=lambda f: f[4]):
        _, cls, start, end, ref, code = f
        item: dict[str, Any] = {"class": cls}
        if start is not None:
            s = date.fromisoformat(start)
            e = date.fromisoformat(end) if end else as_of
            item["months_on"] = months_between(s, e) if e >= s else 0.0
        item["months_since_last_dose"] = months_ago(end, f"{ref}.effectivePeriod.end")
        med_out.append(item)
        prov.append({"field": f"medications[{len(med_out) - 1}]", "resource": ref,
                     "element": "medicationCodeableConcept, effectivePeriod", "code": code})
    if med_out:
        data["medications"] = med_out
    if glucos:
        chosen = sorted(glucos, key=lambda f: (f[3] or as_of.isoformat(), f[2] or ""))[-1]
        if len(glucos) > 1:
            notes.append(f"glucocorticoids: {len(glucos)} statements with a dose; took the most recent, {chosen[4]}")
        _, mg, start, end, ref, code = chosen
        if start is None:
            not_used.append({"resource": ref, "why": "glucocorticoid dose without effectivePeriod.start "
                                                     "(months taken unknown)"})
        else:
            data["glucocorticoids"] = {"mg_per_day": mg, "months": months_between(date.fromisoformat(start),
                                                                                   date.fromisoformat(end) if end else as_of)}
            prov.append({"field": "glucocorticoids", "resource": ref, "element": "dosage, effectivePeriod",
                         "code": code})
    # Procedures
    surg_out = []
    for f in sorted(surgeries, key=lambda f: (f[3] or "", f[5])):
        _, procedure, side, when, cleared, ref, code = f
        if when is None:
            not_used.append({"resource": ref, "why": "operation without performedDateTime (months_ago unknown)"})
            continue
        surg_out.append({"procedure": procedure, "side": side, "months_ago": months_ago(when, f"{ref}.performedDateTime"),
                         "surgeon_cleared_impact": cleared})
        prov.append({"field": f"surgeries[{len(surg_out) - 1}]", "resource": ref,
                     "element": "code, bodySite, performedDateTime", "code": code})
    if surg_out:
        data["surgeries"] = surg_out
    try:
        record = parse_record(data, source)
    except InputError as err:
        where = {p["field"].split("[")[0]: p["resource"] for p in prov}
        raise InputError([FieldProblem(f"{where.get(p.field.split('[')[0].split('.')[0], where.get(p.field.split('[')[0], 'Bundle'))} "
                                       f"({p.field})", p.value, p.allowed, p.kind) for p in err.problems],
                         source) from None
    return ImportResult(record, prov, not_used, notes)


# ---------------------------------------------------------------------------
# One Bundle
# ---------------------------------------------------------------------------

BUNDLE_TYPES = ("document", "message", "transaction", "transaction-response", "batch", "batch-response",
                "history", "searchset", "collection")


def bundle_entries(bundle: Any, source: str | None = None) -> list[tuple[str, dict]]:
    """``(where, resource)`` for each entry of a FHIR R4 Bundle; bad input when it is not one."""
    try:
        check_version(bundle, "Bundle" if isinstance(bundle, dict) and bundle.get("resourceType") == "Bundle"
                      else "file")
    except InputError as err:
        raise InputError(err.problems, source) from None
    if bundle["resourceType"] != "Bundle":
        raise InputError.single("resourceType", bundle["resourceType"],
                                "'Bundle' (a FHIR R4 Bundle of the person's resources; a bulk export is read "
                                "from its .ndjson files)", source)
    if bundle.get("type") not in BUNDLE_TYPES:
        raise InputError.single("Bundle.type", bundle.get("type"), "one of " + ", ".join(BUNDLE_TYPES), source)
    entries = bundle.get("entry") or []
    if not isinstance(entries, list):
        raise InputError.single("Bundle.entry", entries, "a list of entries", source)
    out = []
    for i, entry in enumerate(entries):
        if not isinstance(entry, dict) or not isinstance(entry.get("resource"), dict):
            raise InputError.single(f"Bundle.entry[{i}].resource", entry, "a FHIR resource", source)
        out.append((f"Bundle.entry[{i}].resource", entry["resource"], entry.get("fullUrl")))
    return out


def read_bundle(bundle: Any, as_of: date | None = None, with_name: bool = False,
                source: str | None = None) -> ImportResult:
    """A FHIR R4 Bundle of one person's resources -> an :class:`ImportResult`."""
    entries = bundle_entries(bundle, source)
    patients = [(w, r, u) for w, r, u in entries if r.get("resourceType") == "Patient"]
    aliases: set[str] = set()
    for _w, r, url in patients:
        aliases.add(f"Patient/{r.get('id')}")
        if url:
            aliases.add(url if url.startswith("urn:") else normal_reference(url))
    facts: list = []
    try:
        for where, res, _url in entries:
            one = resource_facts(res, where, with_name)
            key = subject_key(res)
            if res.get("resourceType") in READ_TYPES[1:] and key is not None and aliases and key not in aliases:
                facts.append(["not_used", ref_of(res), f"about another person ({key})"])
                continue
            facts.extend(one)
    except InputError as err:
        raise InputError(err.problems, source) from None
    return assemble(facts, as_of, source)
