"""What FHIR R4 (4.0.1) is, as the import checks it: the release, its resource types, dates and references.

The resource types come from the independent R4 models (fhirclient); resource types and elements of
other releases are listed with their sources in ``prescribe/data/fhir/other_versions.csv``.
"""

from __future__ import annotations

import re
from datetime import date
from functools import lru_cache
from typing import Any

from ..errors import InputError
from . import codes as C

#: Days in a mean Gregorian month (365.2425 / 12).
DAYS_PER_MONTH = 30.436875
#: The FHIR release this reader reads (HL7 FHIR R4, 4.0.1).
FHIR_VERSION = "4.0.1"
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

_DATE_ALLOWED = "a FHIR date or dateTime (YYYY, YYYY-MM, YYYY-MM-DD or YYYY-MM-DDThh:mm:ss+zz:zz)"


def parse_fhir_date(text: Any, where: str) -> tuple[date, bool]:
    """A FHIR date or dateTime as a day; ``True`` when only a year or a month was given
    (the middle of that period is taken)."""
    day = _fhir_day(text) if isinstance(text, str) else None
    if day is None:
        raise InputError.single(where, text, _DATE_ALLOWED)
    return day


def fhir_day_text(text: Any, ref: str, element: str) -> str:
    """:func:`parse_fhir_date`'s day as ``YYYY-MM-DD`` (the form the facts carry); bad input names
    ``ref.element``."""
    day = _fhir_day(text) if isinstance(text, str) else None
    if day is None:
        raise InputError.single(f"{ref}.{element}", text, _DATE_ALLOWED)
    return _iso(day[0])


@lru_cache(maxsize=4096)
def _fhir_day(text: str) -> tuple[date, bool] | None:
    """The day of a date text, or None when it is not one (cached: a caseload repeats its dates)."""
    m = _DATE.match(text)
    if not m:
        return None
    year = int(m.group(1))
    try:
        if m.group(5):
            return date(year, int(m.group(3)), int(m.group(5))), False
        if m.group(3):
            return date(year, int(m.group(3)), 15), True
        return date(year, 7, 1), True
    except ValueError:
        return None


@lru_cache(maxsize=4096)
def _iso(day: date) -> str:
    return day.isoformat()


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
    if ref.count("/") == 1 and not ref.endswith("/"):      # already "Type/id"
        return ref
    parts = ref.split("/_history/")[0].rstrip("/").split("/")
    return "/".join(parts[-2:]) if len(parts) >= 2 else ref


def subject_key(resource: dict) -> str | None:
    """Which person a resource is about (its ``subject`` reference, normalised)."""
    if resource.get("resourceType") == "Patient":
        return f"Patient/{resource.get('id')}"
    subject = resource.get("subject")
    return normal_reference(subject.get("reference")) if isinstance(subject, dict) else None


_TABLES: tuple[frozenset[str], dict[str, dict[str, str]]] | None = None


def _tables() -> tuple[frozenset[str], dict[str, dict[str, str]]]:
    """The R4 resource types not listed as another release's, and per resource type {element:
    the release it belongs to} for elements not in R4 (other_versions.csv), worked out once."""
    global _TABLES
    if _TABLES is None:
        elements: dict[str, dict[str, str]] = {}
        for (kind, name), version in C.other_versions().items():
            if kind == "element":
                rtype, _, element = name.partition(".")
                elements.setdefault(rtype, {})[element] = version
        other_types = {name for (kind, name) in C.other_versions() if kind == "resource"}
        _TABLES = frozenset(r4_resource_types() - other_types), elements
    return _TABLES


def check_version(resource: Any, where: str) -> None:
    """Refuse what is not an R4 resource: not a JSON object with a resourceType, a declared
    fhirVersion other than 4.0.x, a type or an element only found in another release."""
    rtype = resource.get("resourceType") if isinstance(resource, dict) else None
    if not isinstance(rtype, str):
        raise InputError.single(f"{where}.resourceType", resource if not isinstance(resource, dict) else None,
                                "a FHIR resource: a JSON object with a resourceType (this is not FHIR)")
    if "fhirVersion" in resource or "meta" in resource:
        meta = resource.get("meta")
        for key, holder in (("fhirVersion", resource), ("meta.fhirVersion", meta if isinstance(meta, dict) else {})):
            declared = holder.get("fhirVersion")
            if declared is not None and not str(declared).startswith("4.0"):
                raise InputError.single(f"{where} {rtype}.{key}", declared, f"FHIR R4 ({FHIR_VERSION}); this file "
                                        "is from another FHIR release")
    r4_types, other_elements = _TABLES or _tables()
    foreign = other_elements.get(rtype)
    if rtype in r4_types and not foreign:
        return
    other = C.other_versions().get(("resource", rtype))
    if other:
        raise InputError.single(f"{where}.resourceType", rtype, f"a resource type of FHIR R4 ({FHIR_VERSION}); "
                                f"{rtype} is a FHIR {other} resource: the file is from another FHIR release")
    if foreign and not foreign.keys().isdisjoint(resource):
        key = next(k for k in resource if k in foreign)
        raise InputError.single(f"{where} {rtype}.{key}", resource[key], f"FHIR R4 ({FHIR_VERSION}) elements; "
                                f"{rtype}.{key} is FHIR {foreign[key]}: the file is from another FHIR release")
    if rtype not in r4_types:
        raise InputError.single(f"{where}.resourceType", rtype, f"a resource type of FHIR R4 ({FHIR_VERSION})")
