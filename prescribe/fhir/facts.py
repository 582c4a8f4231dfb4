"""Step 1 of the import: one FHIR R4 resource -> the facts a patient record needs.

:func:`resource_facts` turns one resource into a list of small JSON-able *facts*
(``["scalar", field, value, date, ref, element, code]``, a fracture, a medicine ...), or facts
that say why it was not used.  Bad input (not FHIR, another FHIR version, a code system not
read) raises :class:`~prescribe.errors.InputError` naming the resource's element.  The facts of
one person are turned into a record by :func:`prescribe.fhir.assemble.assemble`.
"""

from __future__ import annotations

import math
import re
from typing import Any

from ..errors import InputError
from ..records import COGNITION_LEVELS, MENOPAUSE_STATUSES, VERTEBRAL_LEVEL_PATTERN
from . import codes as C
from .r4 import check_version, fhir_day_text, normal_reference, parse_fhir_date, ref_of

#: Resource types whose content becomes record fields.
READ_TYPES = ("Patient", "Observation", "Condition", "MedicationStatement", "Procedure")
#: Statuses that make a resource not used (listed as such).
_STATUS_NOT_USED = {"entered-in-error", "cancelled", "not-taken", "preliminary", "registered", "not-done"}
_ACTIVE_CLINICAL = {"active", "recurrence", "relapse"}
_MASS_UNITS = {"kg": 1.0, "g": 0.001, "[lb_av]": 0.45359237, "lb": 0.45359237, "lbs": 0.45359237}
_LENGTH_UNITS = {"cm": 1.0, "m": 100.0, "mm": 0.1, "[in_i]": 2.54, "in": 2.54}
_LEVEL = re.compile(VERTEBRAL_LEVEL_PATTERN)


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


def _mapped(codings: list[tuple[str, str]], find, ref: str, element: str) -> tuple[C.Mapping | None, list]:
    """The mapping line of the first coding ``find`` knows, or ``(None, facts saying it was not
    used)``; bad input (naming ``ref.element.coding``) when every coding is of a code system no
    mapping reads."""
    for system, code in codings:
        hit = find(system, code)
        if hit is not None:
            return hit, []
    _check_systems(codings, f"{ref}.{element}.coding")
    return None, _not_used(ref, "code not in the mapping: " + (", ".join(f"{s}|{c}" for s, c in codings) or "no code"))


def _day(text: Any, ref: str, element: str) -> str | None:
    return None if text is None else fhir_day_text(text, ref, element)


def _effective(resource: dict, ref: str) -> str | None:
    for key in ("effectiveDateTime", "effectiveInstant", "issued"):
        if resource.get(key) is not None:
            return _day(resource[key], ref, key)
    period = resource.get("effectivePeriod")
    if isinstance(period, dict) and (period.get("end") or period.get("start")):
        return _day(period.get("end") or period.get("start"), ref, "effectivePeriod")
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


def _observation_line(system: str, code: str) -> C.Mapping | None:
    return C.observation_codes().get((system, code))


def observation_facts(res: dict, ref: str) -> list:
    hit, unused = _mapped(_codings(res.get("code")), _observation_line, ref, "code")
    if hit is None:
        return unused
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
        if not isinstance(value, bool):
            raise InputError.single(f"{ref}.valueBoolean", value, "true or false (a JSON boolean)")
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
    hit, unused = _mapped(_codings(res.get("code")), C.find_condition, ref, "code")
    if hit is None:
        return unused
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
            onset = _day(res[key], ref, key)
            break
    low = _ext(res, "low-trauma")
    low = hit.low_trauma if low is None else low
    level = _ext(res, "vertebral-level") or hit.level or None
    if level is not None and (hit.value != "vertebra" or not _LEVEL.match(str(level))):
        level = None
    return [["fracture", hit.value, onset, low, level, ref, code]]


def medication_facts(res: dict, ref: str, medicines: dict[str, dict] | None = None) -> list:
    """A MedicationStatement's medicine class and dates.  The medicine is its
    ``medicationCodeableConcept``, or the ``code`` of the Medication its ``medicationReference``
    names: one ``contained`` in the statement (``#id``), or one of ``medicines`` (the Bundle's or the
    export's Medication resources by reference).  A reference found in neither gives a
    ``medication_ref`` fact, resolved later (a bulk export's Medications may come after the
    statement) or listed as not used by :func:`~prescribe.fhir.assemble.assemble`."""
    if res.get("status") in _STATUS_NOT_USED:
        return _not_used(ref, f"status {res.get('status')}")
    concept = res.get("medicationCodeableConcept")
    element = "medicationCodeableConcept"
    if concept is None and "medicationReference" in res:
        name = medication_reference(res)
        if name is None:
            link = res["medicationReference"]
            raise InputError.single(f"{ref}.medicationReference.reference",
                                    link.get("reference") if isinstance(link, dict) else link,
                                    "a reference to a Medication ('#id' of a contained one, or 'Medication/id')")
        medication = _referenced_medication(res, name, medicines)
        if medication is None:
            return [["medication_ref", name, res, ref]]
        concept, element = medication.get("code"), f"medicationReference ({ref_of(medication)}.code)"
    hit, unused = _mapped(_codings(concept), C.find_medicine, ref, element)
    if hit is None:
        return unused
    period = res.get("effectivePeriod") or {}
    start = _day(period.get("start"), ref, "effectivePeriod.start")
    end = _day(period.get("end"), ref, "effectivePeriod.end")
    if res.get("effectiveDateTime") is not None and end is None:
        end = _day(res["effectiveDateTime"], ref, "effectiveDateTime")
    code = f"{hit.system}|{hit.code}"
    if hit.value == "glucocorticoid":
        dose = _daily_dose_mg(res, ref)
        if dose is not None:
            return [["glucocorticoid", round(dose * (hit.factor or 1.0), 3), start, end, ref, code,
                     f"{element}, dosage, effectivePeriod"]]
    return [["medication", hit.value, start, end, ref, code, f"{element}, effectivePeriod"]]


def medication_reference(res: dict) -> str | None:
    """The Medication a MedicationStatement's ``medicationReference`` names, in normal form
    (``#id`` for one contained in the statement, else ``Medication/id`` or a urn), or None."""
    link = res.get("medicationReference")
    target = link.get("reference") if isinstance(link, dict) else None
    if not isinstance(target, str) or not target:
        return None
    return target if target.startswith("#") else normal_reference(target)


def _referenced_medication(res: dict, name: str, medicines: dict[str, dict] | None) -> dict | None:
    """The Medication ``name`` is: one contained in the statement, else one of ``medicines``."""
    if name.startswith("#"):
        return next((inner for inner in res.get("contained") or [] if isinstance(inner, dict)
                     and inner.get("resourceType") == "Medication" and inner.get("id") == name[1:]), None)
    return (medicines or {}).get(name)


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
    hit, unused = _mapped(_codings(res.get("code")), lambda s, c: _procedure(table.get((s, c))), ref, "code")
    if hit is None:
        return unused
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
        when = _day(res["performedDateTime"], ref, "performedDateTime")
    elif isinstance(res.get("performedPeriod"), dict):
        p = res["performedPeriod"]
        when = _day(p.get("end") or p.get("start"), ref, "performedPeriod")
    cleared = bool(_ext(res, "surgeon-cleared-impact"))
    return [["surgery", hit.value, side, when, cleared, ref, f"{hit.system}|{hit.code}"]]


def _procedure(m: C.Mapping | None) -> C.Mapping | None:
    """An operation's line of procedures.csv (its other lines are the sides of a bodySite)."""
    return m if m is not None and m.field == "procedure" else None


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
        if not isinstance(pid[0], str):
            element = "identifier.value" if pid[1] == "identifier (prescribe)" else pid[1]
            raise InputError.single(f"{ref}.{element} (patient_id)", pid[0], "text (a FHIR string)")
        facts.append(["patient_id", pid[0], ref, pid[1]])
    if "birthDate" in res:
        parse_fhir_date(res["birthDate"], f"{ref}.birthDate (age_years)")
        facts.append(["birthDate", res["birthDate"], ref])
    if "gender" in res:
        if not isinstance(res["gender"], str):
            raise InputError.single(f"{ref}.gender (sex)", res["gender"], "'female' or 'male'")
        facts.append(["gender", res["gender"], ref])
    if with_name:
        for name in res.get("name") or []:
            if isinstance(name, dict):
                text = name.get("text") or " ".join([*(name.get("given") or []), name.get("family") or ""]).strip()
                if text:
                    facts.append(["name", text, ref])
                    break
    return facts


def resource_facts(res: Any, where: str, with_name: bool = False, medicines: dict[str, dict] | None = None) -> list:
    """The facts of one resource (see the module's docstring); bad input raises InputError.

    ``medicines``: the Medication resources a MedicationStatement's reference may name (by
    ``Medication/id`` and by fullUrl).  A Medication itself gives no facts: it is read through the
    statements that name it."""
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
        return medication_facts(res, ref, medicines)
    if rtype == "Procedure":
        return procedure_facts(res, ref)
    if rtype == "Medication":
        return []
    return _not_used(ref, f"{rtype} is not read")
