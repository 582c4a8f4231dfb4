"""The code mappings of the FHIR exchange, read once from ``prescribe/data/fhir/*.csv``.

Each line maps one code of one code system to a record field and names its source.  A code
not on a line is *not used* by the import: it is never guessed from its display text.  ICD-10
and ATC lines may match a category (``match`` = ``prefix``): ``S72.0`` also matches
``S72.001A``; the longest matching category wins.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

DATA = Path(__file__).resolve().parent.parent / "data" / "fhir"

LOINC = "http://loinc.org"
SNOMED = "http://snomed.info/sct"
ICD10 = "http://hl7.org/fhir/sid/icd-10"
ICD10CM = "http://hl7.org/fhir/sid/icd-10-cm"
ATC = "http://www.whocc.no/atc"
RXNORM = "http://www.nlm.nih.gov/research/umls/rxnorm"
UCUM = "http://unitsofmeasure.org"
#: This program's own (local) code system and the base of its extensions.
LOCAL = "http://prescribe.invalid/fhir/CodeSystem/record"
PATIENT_ID_SYSTEM = "http://prescribe.invalid/fhir/NamingSystem/patient-id"
EXTENSION_BASE = "http://prescribe.invalid/fhir/StructureDefinition/"
#: HL7 terminology code systems of the base resources' status codes (FHIR R4 4.0.1).
CONDITION_CLINICAL = "http://terminology.hl7.org/CodeSystem/condition-clinical"
CONDITION_VERIFICATION = "http://terminology.hl7.org/CodeSystem/condition-ver-status"


@dataclass(frozen=True)
class Mapping:
    system: str
    code: str
    field: str
    value: str
    export: bool
    display: str
    source: str
    prefix: bool = False
    unit: str = ""
    level: str = ""
    low_trauma: bool | None = None
    factor: float | None = None


def _rows(name: str) -> list[dict[str, str]]:
    with open(DATA / name, newline="", encoding="utf-8") as fh:
        return [row for row in csv.DictReader(fh) if row.get("system") or row.get("kind")]


@lru_cache(maxsize=1)
def observation_codes() -> dict[tuple[str, str], Mapping]:
    return {(r["system"], r["code"]): Mapping(r["system"], r["code"], r["field"], r["field"], r["export"] == "yes",
                                              r["display"], r["source"], unit=r["unit"])
            for r in _rows("observations.csv")}


@lru_cache(maxsize=1)
def condition_codes() -> list[Mapping]:
    return [Mapping(r["system"], r["code"], r["field"], r["value"], r["export"] == "yes", r["display"], r["source"],
                    prefix=r["match"] == "prefix", level=r["level"],
                    low_trauma=True if r["low_trauma"] == "y" else None) for r in _rows("conditions.csv")]


@lru_cache(maxsize=1)
def medicine_codes() -> list[Mapping]:
    return [Mapping(r["system"], r["code"], "medication", r["class"], r["export"] == "yes", r["display"], r["source"],
                    prefix=r["match"] == "prefix",
                    factor=float(r["prednisolone_factor"]) if r["prednisolone_factor"] else None)
            for r in _rows("medicines.csv")]


@lru_cache(maxsize=1)
def procedure_codes() -> dict[tuple[str, str], Mapping]:
    return {(r["system"], r["code"]): Mapping(r["system"], r["code"], r["field"], r["value"], r["export"] == "yes",
                                              r["display"], r["source"]) for r in _rows("procedures.csv")}


@lru_cache(maxsize=1)
def other_versions() -> dict[tuple[str, str], str]:
    """(kind, name) -> the release it belongs to, for resource types and elements not in R4."""
    return {(r["kind"], r["name"]): r["version"] for r in _rows("other_versions.csv")}


def systems_read() -> frozenset[str]:
    """Every code system some mapping line reads."""
    found = {k[0] for k in observation_codes()} | {m.system for m in condition_codes()}
    found |= {m.system for m in medicine_codes()} | {k[0] for k in procedure_codes()}
    return frozenset(found)


def _lookup(table: list[Mapping], system: str, code: str) -> Mapping | None:
    best: Mapping | None = None
    for m in table:
        if m.system != system:
            continue
        if m.code == code:
            return m
        if m.prefix and code.startswith(m.code) and (best is None or len(m.code) > len(best.code)):
            best = m
    return best


def find_condition(system: str, code: str) -> Mapping | None:
    return _lookup(condition_codes(), system, code)


def find_medicine(system: str, code: str) -> Mapping | None:
    return _lookup(medicine_codes(), system, code)


def export_code(table: str, field: str, value: str) -> Mapping:
    """The code the export writes for ``value`` of ``field`` (the line marked ``export``)."""
    rows = {"observation": list(observation_codes().values()), "condition": condition_codes(),
            "medicine": medicine_codes(), "procedure": list(procedure_codes().values())}[table]
    for m in rows:
        if m.export and m.field == field and m.value == value:
            return m
    raise KeyError(f"no export code for {table} {field}={value}")
