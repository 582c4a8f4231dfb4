"""Exchange with a clinic's record system in HL7 FHIR R4 (4.0.1): docs/fhir.md.

- :func:`read_bundle`: a Bundle of one person's resources -> a version-2 patient record, with
  the resource each field came from, the codes not used and the notes;
- :func:`bulk_to_caseload`: a bulk-data NDJSON export (one file or a folder of per-type
  files) -> the caseload CSV, streamed;
- :func:`program_bundle`: the person's current program -> a Bundle (type collection) with
  Patient, CarePlan, Goals, the handout as a DocumentReference and a Provenance, checked
  with independent R4 models (:func:`validate_r4`).

The code mappings are data files under ``prescribe/data/fhir/``.  Nothing here opens a
network connection.
"""

from __future__ import annotations

from .reader import FHIR_VERSION, ImportResult, assemble, read_bundle, resource_facts

__all__ = ["FHIR_VERSION", "ImportResult", "assemble", "read_bundle", "resource_facts", "bulk_to_caseload",
           "program_bundle", "validate_r4"]


def __getattr__(name: str):
    if name == "bulk_to_caseload":
        from .bulk import bulk_to_caseload
        return bulk_to_caseload
    if name in ("program_bundle", "validate_r4"):
        from . import writer
        return getattr(writer, name)
    raise AttributeError(name)
