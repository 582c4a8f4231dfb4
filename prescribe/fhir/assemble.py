"""Step 2 of the import: one person's facts -> a version-2 patient record.

:func:`assemble` turns one person's facts (:func:`prescribe.fhir.facts.resource_facts`) into a
:class:`~prescribe.records.PatientRecord` with the provenance of every field, the codes not used
and the notes (two values for one field: the most recent, with a note).  Dates become ages and
months as of a reference date (``as_of``, default today): months are days / 30.436875 (the mean
Gregorian month), to one decimal.
"""

from __future__ import annotations

from dataclasses import dataclass, field as dc_field
from datetime import date
from typing import Any, Iterable

from ..errors import FieldProblem, InputError
from ..records import CONDITIONS, PatientRecord, parse_record
from .r4 import age_on, months_between, parse_fhir_date


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


_CONDITION_ORDER = {code: i for i, code in enumerate(CONDITIONS)}

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
    if len(values) == 1:
        return values[0]
    ranked = sorted(values, key=lambda f: f[3] or "")
    chosen = ranked[-1]
    if len({repr(v[2]) for v in values}) > 1:
        others = "; ".join(f"{v[2]!r} ({v[3] or 'undated'}, {v[4]})" for v in ranked[:-1])
        notes.append(f"{field}: {len(values)} values; took the most recent, {chosen[2]!r} ({chosen[3] or 'undated'}, "
                     f"{chosen[4]}), over {others}")
    return chosen


@dataclass
class Fields:
    """One person's record fields as read from FHIR, not yet validated as a record."""

    data: dict[str, Any]
    provenance: list[dict]
    not_used: list[dict]
    notes: list[str]

    def validated(self, source: str | None = None) -> ImportResult:
        """The record (InputError naming each bad field's resource and the record's field)."""
        try:
            record = parse_record(self.data, source)
        except InputError as err:
            where = {p["field"].split("[")[0]: p["resource"] for p in self.provenance}
            raise InputError([FieldProblem(f"{_resource_of(where, p.field)} ({p.field})", p.value, p.allowed, p.kind)
                              for p in err.problems], source) from None
        return ImportResult(record, self.provenance, self.not_used, self.notes)


def _resource_of(where: dict[str, str], field: str) -> str:
    return where.get(field.split("[")[0].split(".")[0], where.get(field.split("[")[0], "Bundle"))


def assemble(facts: Iterable[list], as_of: date | None = None, source: str | None = None) -> ImportResult:
    """One person's facts -> an :class:`ImportResult` (raises InputError naming FHIR's and the record's terms)."""
    return assemble_fields(facts, as_of, source).validated(source)


def assemble_fields(facts: Iterable[list], as_of: date | None = None, source: str | None = None) -> Fields:
    """One person's facts -> the record's fields (:class:`Fields`), checked for what FHIR's side
    decides (one person, one birth date and gender, the required fields, dates not after ``as_of``)
    but not yet validated as a record."""
    as_of = as_of or date.today()
    notes: list[str] = []
    prov: list[dict] = []
    kinds: dict[str, list] = {}
    for f in facts:
        kinds.setdefault(f[0], []).append(f)
    scalars: dict[str, list] = {}
    for f in kinds.get("scalar", ()):
        scalars.setdefault(f[1], []).append(f)
    none: list = []
    ids, births, genders, names = (kinds.get("patient_id", none), kinds.get("birthDate", none),
                                   kinds.get("gender", none), kinds.get("name", none))
    fractures, conditions, meds, glucos = (kinds.get("fracture", none), kinds.get("condition", none),
                                           kinds.get("medication", none), kinds.get("glucocorticoid", none))
    surgeries, cancers, metastases = kinds.get("surgery", none), kinds.get("cancer", none), kinds.get("metastases", none)
    not_used = [{"resource": f[1], "why": f[2]} for f in kinds.get("not_used", ())]
    not_used += [{"resource": f[3], "why": f"medicationReference {f[1]}: no Medication with that id (contained in "
                                           "the statement, in the Bundle or in the export)"}
                 for f in kinds.get("medication_ref", ())]

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
    # In the vocabulary's order, whatever order the resources came in (a bulk export's lines are in none).
    for f in sorted(conditions, key=lambda f: (_CONDITION_ORDER.get(f[1], len(_CONDITION_ORDER)), f[1], f[2])):
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
        _, cls, start, end, ref, code, element = f
        item: dict[str, Any] = {"class": cls}
        if start is not None:
            s = date.fromisoformat(start)
            e = date.fromisoformat(end) if end else as_of
            item["months_on"] = months_between(s, e) if e >= s else 0.0
        item["months_since_last_dose"] = months_ago(end, f"{ref}.effectivePeriod.end")
        med_out.append(item)
        prov.append({"field": f"medications[{len(med_out) - 1}]", "resource": ref,
                     "element": element, "code": code})
    if med_out:
        data["medications"] = med_out
    if glucos:
        chosen = sorted(glucos, key=lambda f: (f[3] or as_of.isoformat(), f[2] or ""))[-1]
        if len(glucos) > 1:
            notes.append(f"glucocorticoids: {len(glucos)} statements with a dose; took the most recent, {chosen[4]}")
        _, mg, start, end, ref, code, element = chosen
        if start is None:
            not_used.append({"resource": ref, "why": "glucocorticoid dose without effectivePeriod.start "
                                                     "(months taken unknown)"})
        else:
            data["glucocorticoids"] = {"mg_per_day": mg, "months": months_between(date.fromisoformat(start),
                                                                                   date.fromisoformat(end) if end else as_of)}
            prov.append({"field": "glucocorticoids", "resource": ref, "element": element, "code": code})
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
    return Fields(data, prov, not_used, notes)
