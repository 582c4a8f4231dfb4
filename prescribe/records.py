"""The patient record and the screening result: the validated interchange format.

The record's fields, units and bounds live here once.  The command line, the
batch reader, the store and the app's intake form all read them from this
module (``FIELD_META``, ``PatientRecord.model_json_schema()``), never from a
second copy.

Validation happens once, at the boundary (:func:`parse_record`); a bad record
raises :class:`prescribe.errors.InputError` with one problem per bad field,
each naming the field, the value and what is allowed.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from . import fileio
from .errors import FieldProblem, InputError

SCHEMA_VERSION = "1"

#: Fracture sites the record accepts.
FRACTURE_SITES: dict[str, str] = {
    "vertebra": "vertebral (spine) fracture",
    "hip": "hip (proximal femur) fracture",
    "wrist": "wrist (distal radius) fracture",
    "humerus": "upper arm (proximal humerus) fracture",
    "pelvis": "pelvic fracture",
    "rib": "rib fracture",
    "other": "fracture at another site",
}

#: Condition codes and what each means.  The vocabulary may grow; codes are never renamed.
CONDITIONS: dict[str, str] = {
    "uncontrolled_hypertension": "Blood pressure not controlled (for example resting systolic 160 mmHg or more, or diastolic 100 or more) or not yet treated.",
    "recent_surgery": "Surgery in the last 3 months, not yet cleared for loading by the surgical team.",
    "knee_osteoarthritis": "Symptomatic knee osteoarthritis.",
    "hip_osteoarthritis": "Symptomatic hip osteoarthritis.",
    "hip_replacement": "Total or partial hip replacement (arthroplasty) on either side.",
    "pelvic_floor_dysfunction": "Stress urinary incontinence, prolapse or other pelvic floor dysfunction.",
    "peripheral_neuropathy": "Peripheral neuropathy with reduced sensation in the feet.",
    "thoracic_kyphosis": "Marked thoracic kyphosis (rounded upper back).",
}

#: Movement-pattern codes that exercises carry and screening rules may ask to avoid.
MOVEMENT_PATTERNS: dict[str, str] = {
    "loaded_spinal_flexion": "Bending the spine forward under load (sit-ups, toe touches with weight, rounded-back lifting).",
    "loaded_spinal_twisting": "Twisting the spine under load or at speed (loaded rotations, golf-style swings).",
    "end_range_spinal_flexion": "Bending the spine fully forward, even without load (toe touches, deep slumping).",
    "high_impact_landing": "Landing from a jump, hop or drop.",
    "deep_hip_flexion": "Bending the hip past 90 degrees (deep squats, low chairs).",
    "hip_adduction_rotation": "Crossing the leg past the midline or turning it inward (after some hip replacements).",
    "single_leg_stance": "Standing on one leg.",
    "overhead_loading": "Holding or pressing a load above the head.",
    "breath_holding_strain": "Straining with a held breath (Valsalva), as in maximal lifts.",
    "deep_knee_flexion": "Bending the knee fully under load (deep squats, deep lunges).",
}

T_SCORE_SITES: tuple[str, ...] = ("lumbar_spine", "femoral_neck", "total_hip")

Sex = Literal["female", "male"]
FractureSite = Literal["vertebra", "hip", "wrist", "humerus", "pelvis", "rib", "other"]
ConditionCode = Literal[tuple(CONDITIONS)]  # type: ignore[valid-type]


def _meta(unit: str | None = None, soft: tuple[float, float] | None = None, label: str | None = None,
          step: float | None = None) -> dict:
    """Extra JSON-schema keys the intake form reads: unit, typical range, label, step."""
    extra: dict[str, Any] = {}
    if unit:
        extra["unit"] = unit
    if soft:
        extra["soft_range"] = list(soft)
    if label:
        extra["label"] = label
    if step:
        extra["step"] = step
    return extra


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class TScores(_Strict):
    """T-scores by DXA site (standard deviations from the young-adult mean)."""

    lumbar_spine: float | None = Field(None, ge=-7, le=5, description="T-score at the lumbar spine (L1-L4).",
                                       json_schema_extra=_meta("SD", (-4.5, 1.0), "Lumbar spine T-score", 0.1))
    femoral_neck: float | None = Field(None, ge=-7, le=5, description="T-score at the femoral neck.",
                                       json_schema_extra=_meta("SD", (-4.5, 1.0), "Femoral neck T-score", 0.1))
    total_hip: float | None = Field(None, ge=-7, le=5, description="T-score at the total hip.",
                                    json_schema_extra=_meta("SD", (-4.5, 1.0), "Total hip T-score", 0.1))

    def lowest(self) -> tuple[str, float] | None:
        """The lowest T-score and its site, or None when no site was measured."""
        known = [(site, getattr(self, site)) for site in T_SCORE_SITES if getattr(self, site) is not None]
        return min(known, key=lambda kv: kv[1]) if known else None


class Fracture(_Strict):
    """One past fracture."""

    site: FractureSite = Field(description="Where the bone broke.")
    months_ago: float = Field(ge=0, le=1200, description="How long ago, in months.",
                              json_schema_extra=_meta("months", (0, 240)))
    low_trauma: bool = Field(description="True for a fragility fracture: a fall from standing height or less, or no trauma.")


class Glucocorticoids(_Strict):
    """Oral glucocorticoid use, as prednisolone equivalent."""

    mg_per_day: float = Field(ge=0, le=1000, description="Daily dose, prednisolone equivalent.",
                              json_schema_extra=_meta("mg/day", (0, 60), step=0.5))
    months: float = Field(ge=0, le=1200, description="How long taken so far (current or within the last year).",
                          json_schema_extra=_meta("months", (0, 120)))


#: Body mass accepted anywhere in prescribe [kg] (the record, the models, the sensor
#: readers and the command line read it from here).
BODY_MASS_RANGE_KG: tuple[int, int] = (25, 300)


class PatientRecord(_Strict):
    """What the screening and the planner need to know about one person.

    Pseudonymous: no name, address or date of birth.  Units are in the field names.
    """

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True,
                              json_schema_extra={"title": "prescribe patient record",
                                                 "$comment": f"schema version {SCHEMA_VERSION}"})

    patient_id: str = Field(min_length=1, max_length=64, pattern=r"^\S(.*\S)?$",
                            description="Pseudonymous identifier, 1-64 characters, no leading or trailing space. No names needed.",
                            json_schema_extra=_meta(label="Patient ID"))

    @field_validator("patient_id")
    @classmethod
    def _patient_id_characters(cls, value: str) -> str:
        # No NUL, control or invisible direction characters: the one shared check (prescribe.identifiers).
        from .identifiers import identifier_text
        return identifier_text(value)

    age_years: int = Field(ge=18, le=110, description="Age in whole years.",
                           json_schema_extra=_meta("years", (40, 95), "Age"))
    sex: Sex = Field(description="Sex, as used by the published norms.", json_schema_extra=_meta(label="Sex"))
    body_mass_kg: float = Field(ge=BODY_MASS_RANGE_KG[0], le=BODY_MASS_RANGE_KG[1], description="Body mass.",
                                json_schema_extra=_meta("kg", (40, 120), "Body mass", 0.5))
    height_cm: float = Field(ge=100, le=230, description="Standing height.",
                             json_schema_extra=_meta("cm", (140, 195), "Height", 0.5))
    t_scores: TScores = Field(default_factory=TScores,
                              description="DXA T-scores by site; the lowest measured site decides the category.")
    fractures: list[Fracture] = Field(default_factory=list, description="Past fractures after age 18.")
    falls_past_year: int = Field(0, ge=0, le=1000, description="Falls in the past 12 months.",
                                 json_schema_extra=_meta("falls", (0, 6), "Falls in past year"))
    timed_up_and_go_s: float | None = Field(None, ge=0, le=600,
                                            description="Timed Up and Go: rise from a chair, walk 3 m, turn, walk back and sit down.",
                                            json_schema_extra=_meta("s", (5, 30), "Timed Up and Go", 0.1))
    chair_stand_30s: int | None = Field(None, ge=0, le=100,
                                        description="30-second chair stand: full stands completed in 30 s, arms folded.",
                                        json_schema_extra=_meta("stands", (0, 25), "30-s chair stand"))
    tandem_stance_s: float | None = Field(None, ge=0, le=10,
                                          description="Tandem stance held, in seconds (the test stops at 10).",
                                          json_schema_extra=_meta("s", (0, 10), "Tandem stance", 0.5))
    glucocorticoids: Glucocorticoids | None = Field(None, description="Oral glucocorticoids, prednisolone equivalent.")
    conditions: list[ConditionCode] = Field(default_factory=list,
                                            description="Condition codes from the documented vocabulary.")
    pain_score: int = Field(0, ge=0, le=10, description="Current pain at intake, the person's baseline: 0 (none) "
                            "to 10 (worst imaginable). Pain during or after a session is logged with the session.",
                            json_schema_extra=_meta("0-10", (0, 10), "Baseline pain (at intake)"))

    @field_validator("conditions")
    @classmethod
    def _known_conditions(cls, value: list[str]) -> list[str]:
        if len(set(value)) != len(value):
            raise ValueError("a condition code is listed twice")
        return value

    @field_validator("body_mass_kg", "height_cm", "timed_up_and_go_s", "tandem_stance_s")
    @classmethod
    def _finite(cls, value: float | None) -> float | None:
        if value is not None and not math.isfinite(value):
            raise ValueError("not a finite number")
        return value

    @property
    def bmi(self) -> float:
        return self.body_mass_kg / (self.height_cm / 100.0) ** 2


#: Our three severity levels of a screening flag, strongest first.
SEVERITIES: dict[str, str] = {
    "clear_first": "A clinician must clear the person before loading.",
    "adapt": "Adapt the program.",
    "note": "Note for the clinician.",
}
Severity = Literal["clear_first", "adapt", "note"]
DensityCategory = Literal["normal", "osteopenia", "osteoporosis", "severe_osteoporosis", "unknown"]


class Flag(BaseModel):
    """A screening rule that fired for this person."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    rule: str
    severity: Severity
    message: str
    source: str
    title: str = ""
    max_impact_level: int | None = None
    avoid: list[str] = Field(default_factory=list)


class ScreeningResult(BaseModel):
    """What the screening engine returns for one person (PRODUCT.md contract, extended)."""

    model_config = ConfigDict(extra="forbid", frozen=True)

    patient_id: str
    bone_density_category: DensityCategory
    falls_risk: bool
    max_impact_level: int = Field(ge=0, le=3)
    avoid: list[str]
    refer: bool
    flags: list[Flag]
    cautions: list[str]
    # Extensions (documented in DEVELOPERS.md)
    lowest_t_score: float | None = None
    lowest_t_score_site: str | None = None
    balance_first: bool = False
    supervision: bool = False
    ruleset_version: str = ""


# ---------------------------------------------------------------------------
# Turning pydantic's errors into our messages
# ---------------------------------------------------------------------------

_MISSING = object()


def _field_schema(loc: tuple) -> dict:
    """The JSON-schema entry of the field at ``loc`` (for the 'allowed' text)."""
    schema = RECORD_SCHEMA
    node: dict = schema
    defs = schema.get("$defs", {})
    for part in loc:
        if isinstance(part, int):
            node = _resolve(node, defs)
            node = node.get("items", {}) if "items" in node else node
            continue
        node = _resolve(node, defs)
        props = node.get("properties", {})
        if part not in props:
            return {}
        node = props[part]
    return _resolve(node, defs)


def _resolve(node: dict, defs: dict) -> dict:
    if "$ref" in node:
        return defs.get(node["$ref"].split("/")[-1], {})
    if "anyOf" in node:
        for option in node["anyOf"]:
            if option.get("type") != "null":
                merged = dict(_resolve(option, defs))
                for key, val in node.items():
                    if key not in ("anyOf", "default"):
                        merged.setdefault(key, val)
                return merged
    if node.get("type") == "array" and "items" in node and "$ref" in node["items"]:
        return {**node, "items": _resolve(node["items"], defs)}
    return node


def describe_allowed(loc: tuple) -> str:
    """Plain words for what the field at ``loc`` accepts, from the schema itself."""
    node = _field_schema(loc)
    if loc and loc[-1] == "conditions":
        return "a list of distinct condition codes from: " + ", ".join(CONDITIONS)
    if "enum" in node:
        return "one of " + ", ".join(repr(v) for v in node["enum"])
    if "const" in node:
        return repr(node["const"])
    kind = node.get("type")
    unit = node.get("unit")
    lo = node.get("minimum", node.get("exclusiveMinimum"))
    hi = node.get("maximum", node.get("exclusiveMaximum"))
    if kind in ("integer", "number"):
        noun = "a whole number" if kind == "integer" else "a number"
        if lo is not None and hi is not None:
            text = f"{noun} from {_num(lo)} to {_num(hi)}"
        elif lo is not None:
            text = f"{noun} of at least {_num(lo)}"
        elif hi is not None:
            text = f"{noun} of at most {_num(hi)}"
        else:
            text = noun
        return text + (f" ({unit})" if unit else "")
    if kind == "string":
        lo_len, hi_len = node.get("minLength"), node.get("maxLength")
        if lo_len is not None and hi_len is not None:
            return f"text of {lo_len} to {hi_len} characters without leading or trailing spaces"
        return "text"
    if kind == "boolean":
        return "true or false"
    if kind == "array":
        return "a list"
    if kind == "object" or "properties" in node:
        props = ", ".join(node.get("properties", {}))
        return f"an object with the fields {props}" if props else "an object"
    return "a valid value"


def _num(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else str(x)


def _loc_text(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def problems_from_validation(err: ValidationError, data: Any) -> list[FieldProblem]:
    """One :class:`FieldProblem` per bad field, in the record's field order."""
    problems: list[FieldProblem] = []
    seen: set[str] = set()
    for e in err.errors(include_url=False):
        loc = tuple(p for p in e["loc"] if not (isinstance(p, str) and p in ("function-after", "function-before")))
        # pydantic adds the union member name (e.g. 'float') to the location: drop it.
        loc = tuple(p for p in loc if p not in ("float", "int", "str", "bool", "TScores", "Fracture",
                                                  "Glucocorticoids", "list[Fracture]", "none"))
        field = _loc_text(loc) or "record"
        if field in seen:
            continue
        seen.add(field)
        etype = e["type"]
        value = e.get("input", _MISSING)
        if etype == "missing":
            problems.append(FieldProblem(field, None, describe_allowed(loc), kind="missing"))
        elif etype == "extra_forbidden":
            parent = loc[:-1]
            known = ", ".join(_field_schema(parent).get("properties", {}) or
                              PatientRecord.model_fields)
            problems.append(FieldProblem(field, value, f"a known field ({known})", kind="unknown_field"))
        elif etype == "model_type" or etype == "dict_type":
            problems.append(FieldProblem(field, value, describe_allowed(loc) if loc else "a JSON object"))
        else:
            problems.append(FieldProblem(field, value, describe_allowed(loc)))
    return problems


def parse_record(data: Any, source: str | None = None) -> PatientRecord:
    """Validate a record given as a dict (parsed JSON).

    Raises
    ------
    InputError
        With one problem per bad field.
    """
    if not isinstance(data, dict):
        raise InputError([FieldProblem("record", data, "a JSON object with the patient record's fields")], source)
    try:
        return PatientRecord.model_validate(data)
    except ValidationError as err:
        raise InputError(problems_from_validation(err, data), source) from None


def read_json_file(path: str | Path, what: str = "file") -> Any:
    """Read JSON from a file, turning every failure into an :class:`InputError`.

    The one strict reader of :mod:`prescribe.fileio` (a key given twice, nesting past
    the documented depth or a file over the documented size is refused).
    """
    return fileio.read_json_file(path, what)


def load_record(path: str | Path) -> PatientRecord:
    """Read and validate a patient record from a JSON file."""
    return parse_record(read_json_file(path, "patient record file"), source=str(path))


def record_json_schema() -> dict:
    """The JSON Schema of the patient record, with our unit and range annotations."""
    schema = PatientRecord.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema.setdefault("$comment", f"schema version {SCHEMA_VERSION}")
    schema["x-condition-codes"] = CONDITIONS
    schema["x-fracture-sites"] = FRACTURE_SITES
    schema["x-movement-patterns"] = MOVEMENT_PATTERNS
    return schema


RECORD_SCHEMA = PatientRecord.model_json_schema()

#: Per top-level field: label, unit, bounds, typical range, step and help text, for forms.
FIELD_META: dict[str, dict] = {}
for _name, _node in RECORD_SCHEMA["properties"].items():
    _r = _resolve(_node, RECORD_SCHEMA.get("$defs", {}))
    FIELD_META[_name] = {
        "label": _r.get("label", _node.get("label", _name.replace("_", " ").capitalize())),
        "unit": _r.get("unit"),
        "minimum": _r.get("minimum"),
        "maximum": _r.get("maximum"),
        "soft_range": _r.get("soft_range"),
        "step": _r.get("step"),
        "type": _r.get("type"),
        "description": _node.get("description", _r.get("description", "")),
        "required": _name in RECORD_SCHEMA.get("required", []),
        "allowed": describe_allowed((_name,)),
    }
