"""FHIR R4 resources -> a version-2 record: one Bundle of one person's resources.

Two steps, so that one Bundle and a bulk export of many people share the same reading:

1. :func:`~prescribe.fhir.facts.resource_facts` turns one resource into a list of small JSON-able
   facts (:mod:`prescribe.fhir.facts`; what R4 is, dates and references in :mod:`prescribe.fhir.r4`);
2. :func:`~prescribe.fhir.assemble.assemble` turns one person's facts into a
   :class:`~prescribe.records.PatientRecord` with the provenance of every field, the codes not used
   and the notes (:mod:`prescribe.fhir.assemble`).

:func:`read_bundle` does both for the entries of one Bundle.
"""

from __future__ import annotations

from datetime import date
from typing import Any

from ..errors import InputError
from .assemble import REQUIRED_IN_FHIR, ImportResult, assemble
from .facts import READ_TYPES, medication_reference, resource_facts
from .r4 import (DAYS_PER_MONTH, FHIR_VERSION, age_on, check_version, months_between, normal_reference,
                 parse_fhir_date, r4_resource_types, ref_of, subject_key)

__all__ = ["DAYS_PER_MONTH", "FHIR_VERSION", "READ_TYPES", "REQUIRED_IN_FHIR", "ImportResult", "age_on", "assemble",
           "bundle_entries", "check_version", "months_between", "normal_reference", "parse_fhir_date",
           "r4_resource_types", "read_bundle", "ref_of", "resource_facts", "subject_key"]

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
    # The Medications a statement's medicationReference may name: by Medication/id and by fullUrl.
    medicines: dict[str, dict] = {}
    for _w, r, url in entries:
        if r.get("resourceType") == "Medication":
            medicines[ref_of(r)] = r
            if url:
                medicines[url if url.startswith("urn:") else normal_reference(url)] = r
    named: set[int] = set()
    facts: list = []
    try:
        for where, res, _url in entries:
            one = resource_facts(res, where, with_name, medicines)
            key = subject_key(res)
            if res.get("resourceType") in READ_TYPES[1:] and key is not None and aliases and key not in aliases:
                facts.append(["not_used", ref_of(res), f"about another person ({key})"])
                continue
            if res.get("resourceType") == "MedicationStatement":
                found = medicines.get(medication_reference(res) or "")
                if found is not None:
                    named.add(id(found))
            facts.extend(one)
    except InputError as err:
        raise InputError(err.problems, source) from None
    for _w, r, _url in entries:
        if r.get("resourceType") == "Medication" and id(r) not in named:
            facts.append(["not_used", ref_of(r), "no MedicationStatement of the person names this Medication"])
    return assemble(facts, as_of, source)
