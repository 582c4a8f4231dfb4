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
import re
from datetime import date
from pathlib import Path
from typing import Any, Literal, Mapping

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator, model_serializer, model_validator
from pydantic_core import PydanticCustomError

from . import fileio
from .errors import FieldProblem, InputError

SCHEMA_VERSION = "2"

#: Record versions this release reads: 1 (the first stage's fields) and 2 (the third
#: stage's: medicines, cancer, surgeries, Z-scores, menopause, cognition, living
#: situation, the name the handout uses).  A record without ``record_version`` is version 1.
RECORD_VERSIONS: tuple[int, ...] = (1, 2)

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
    "narrow_base_stance": "Standing or walking heel-to-toe or on one leg (a base narrower than feet together).",
}

T_SCORE_SITES: tuple[str, ...] = ("lumbar_spine", "femoral_neck", "total_hip")

#: Medicine classes the record accepts (``medications[].class``).  The vocabulary may grow;
#: classes are never renamed.  What each class changes is in the rules (data/rules/screening/medication.toml).
MEDICATION_CLASSES: dict[str, str] = {
    "denosumab": "Denosumab (an antiresorptive injection every 6 months).",
    "bisphosphonate": "A bisphosphonate (alendronate, risedronate, ibandronate, zoledronic acid).",
    "romosozumab": "Romosozumab (a bone-forming monthly injection, 12 months).",
    "teriparatide": "Teriparatide (a bone-forming daily injection).",
    "abaloparatide": "Abaloparatide (a bone-forming daily injection).",
    "menopausal_hormone_therapy": "Menopausal hormone therapy (oestrogen, with or without a progestogen).",
    "serm": "A selective oestrogen receptor modulator (raloxifene, bazedoxifene).",
    "glucocorticoid": "An oral glucocorticoid (give the dose under glucocorticoids as well).",
    "androgen_deprivation": "Androgen deprivation therapy (for prostate cancer).",
    "aromatase_inhibitor": "An aromatase inhibitor (anastrozole, letrozole, exemestane; for breast cancer).",
    "anticoagulant": "An anticoagulant (warfarin, apixaban, rivaroxaban, dabigatran, edoxaban, heparins).",
    "sedative_hypnotic": "A sedative or hypnotic (benzodiazepines, zopiclone, zolpidem and the like).",
}

#: Operations the record accepts (``surgeries[].procedure``).
SURGERY_PROCEDURES: dict[str, str] = {
    "hip_replacement": "Total or partial hip replacement (arthroplasty).",
    "knee_replacement": "Total or partial knee replacement (arthroplasty).",
    "spinal_fusion": "Fusion of spinal segments.",
    "vertebroplasty": "Vertebroplasty or kyphoplasty (cement in a fractured vertebra).",
    "other": "Another operation.",
}

#: The sides an operation may be on (``surgeries[].side``).
SURGERY_SIDES: tuple[str, ...] = ("left", "right", "both", "none")

#: Menopausal status (women).
MENOPAUSE_STATUSES: dict[str, str] = {
    "premenopausal": "Regular periods; before the menopausal transition.",
    "perimenopausal": "In the menopausal transition (irregular periods).",
    "postmenopausal": "Twelve months or more since the last period, or after removal of both ovaries.",
}

#: Cognitive impairment as assessed by the clinician.
COGNITION_LEVELS: dict[str, str] = {
    "none": "No cognitive impairment.",
    "mild": "Mild cognitive impairment: manages a written home program with reminders.",
    "moderate": "Moderate impairment (for example moderate dementia): cannot follow a written home program alone.",
    "severe": "Severe impairment: needs another person for all exercise.",
}

#: What is known of bone metastases (``cancer.bone_metastases``).
BONE_METASTASES: dict[str, str] = {
    "excluded": "A clinician has recorded that there are no bone metastases.",
    "unknown": "Not assessed or not known.",
    "present": "Bone metastases are present.",
}

#: Short words for codes that are not plain words themselves (the intake form's lists show
#: these; the meanings above say more).  Carried in the JSON schema as ``choice_labels``.
MEDICATION_LABELS: dict[str, str] = {
    "denosumab": "Denosumab",
    "bisphosphonate": "Bisphosphonate",
    "romosozumab": "Romosozumab",
    "teriparatide": "Teriparatide",
    "abaloparatide": "Abaloparatide",
    "menopausal_hormone_therapy": "Menopausal hormone therapy",
    "serm": "SERM (raloxifene, bazedoxifene)",
    "glucocorticoid": "Oral glucocorticoid",
    "androgen_deprivation": "Androgen deprivation therapy",
    "aromatase_inhibitor": "Aromatase inhibitor",
    "anticoagulant": "Anticoagulant",
    "sedative_hypnotic": "Sedative or hypnotic",
}
SURGERY_LABELS: dict[str, str] = {
    "hip_replacement": "Hip replacement",
    "knee_replacement": "Knee replacement",
    "spinal_fusion": "Spinal fusion",
    "vertebroplasty": "Vertebroplasty or kyphoplasty",
    "other": "Another operation",
}
SURGERY_SIDE_LABELS: dict[str, str] = {"left": "left", "right": "right", "both": "both sides",
                                       "none": "no side (spine)"}

#: Spinal levels a vertebral fracture may name (``fractures[].level``): C1-C7, T1-T12, L1-L5.
VERTEBRAL_LEVEL_PATTERN = r"^(C[1-7]|T([1-9]|1[0-2])|L[1-5])$"

#: Fields that only a version-2 record has.
RECORD_V2_FIELDS: tuple[str, ...] = ("display_name", "z_scores", "menopause", "medications", "cancer",
                                     "surgeries", "cognition", "lives_alone", "has_carer")

Sex = Literal["female", "male"]
FractureSite = Literal["vertebra", "hip", "wrist", "humerus", "pelvis", "rib", "other"]
ConditionCode = Literal[tuple(CONDITIONS)]  # type: ignore[valid-type]
MedicationClass = Literal[tuple(MEDICATION_CLASSES)]  # type: ignore[valid-type]
SurgeryProcedure = Literal[tuple(SURGERY_PROCEDURES)]  # type: ignore[valid-type]
SurgerySide = Literal[SURGERY_SIDES]  # type: ignore[valid-type]
MenopauseStatus = Literal[tuple(MENOPAUSE_STATUSES)]  # type: ignore[valid-type]
CognitionLevel = Literal[tuple(COGNITION_LEVELS)]  # type: ignore[valid-type]
MetastasesStatus = Literal[tuple(BONE_METASTASES)]  # type: ignore[valid-type]


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


def finite_number(value: float | None) -> float | None:
    """Pydantic validator of the records: a number that is finite (NaN and infinity are no
    measurement), or None.  The patient record, the session record and the retest use it."""
    if value is not None and not math.isfinite(value):
        raise ValueError("not a finite number")
    return value


_DAY = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}")


def day_text(value: str) -> str:
    """Pydantic validator of the records: a day written as YYYY-MM-DD and nothing else (Python
    alone would also read ``20261205`` and the week date ``2026-W49-6``).  The session record's
    ``session_date`` and the retest's ``date`` use it."""
    try:
        if not _DAY.fullmatch(value):
            raise ValueError
        return date.fromisoformat(value).isoformat()
    except ValueError:
        raise ValueError("a date as YYYY-MM-DD") from None


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


def lowest_score(scores: Mapping[str, float | None] | None) -> tuple[str, float] | None:
    """The lowest DXA score of ``scores`` (T- or Z-scores by site) and its site, or None when no
    site was measured; on a tie the first site in :data:`T_SCORE_SITES` order.

    The one place the lowest measured site is chosen: the record's models, the screening's
    per-record features and its result's site read it (the vectorised batch evaluator works the
    same out over columns, held equal by the screening property test).  The lowest measured site
    decides the density category (WHO 1994, Technical Report Series 843).
    """
    if not scores:
        return None
    best: tuple[str, float] | None = None
    for site in T_SCORE_SITES:
        value = scores.get(site)
        if value is not None and (best is None or value < best[1]):
            best = (site, value)
    return best


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
        return lowest_score(self.model_dump())


class ZScores(_Strict):
    """Z-scores by DXA site (standard deviations from the mean for the person's age and sex)."""

    lumbar_spine: float | None = Field(None, ge=-7, le=5, description="Z-score at the lumbar spine (L1-L4).",
                                       json_schema_extra=_meta("SD", (-4.0, 2.0), "Lumbar spine Z-score", 0.1))
    femoral_neck: float | None = Field(None, ge=-7, le=5, description="Z-score at the femoral neck.",
                                       json_schema_extra=_meta("SD", (-4.0, 2.0), "Femoral neck Z-score", 0.1))
    total_hip: float | None = Field(None, ge=-7, le=5, description="Z-score at the total hip.",
                                    json_schema_extra=_meta("SD", (-4.0, 2.0), "Total hip Z-score", 0.1))

    def lowest(self) -> tuple[str, float] | None:
        """The lowest Z-score and its site, or None when no site was measured."""
        return lowest_score(self.model_dump())


class Fracture(_Strict):
    """One past fracture."""

    site: FractureSite = Field(description="Where the bone broke.")
    months_ago: float = Field(ge=0, le=1200, description="How long ago, in months.",
                              json_schema_extra=_meta("months", (0, 240)))
    low_trauma: bool = Field(description="True for a fragility fracture: a fall from standing height or less, or no trauma.")
    level: str | None = Field(None, pattern=VERTEBRAL_LEVEL_PATTERN,
                              description="For a vertebral fracture: the vertebra, C1-C7, T1-T12 or L1-L5 (e.g. T12).",
                              json_schema_extra={**_meta(label="Vertebral level"),
                                                 "allowed": "a vertebra from C1-C7, T1-T12 or L1-L5 (e.g. 'T12')"})

    @model_validator(mode="after")
    def _level_only_for_vertebra(self) -> "Fracture":
        if self.level is not None and self.site != "vertebra":
            raise PydanticCustomError("level_site", "level applies to site vertebra only")
        return self

    @model_serializer(mode="wrap")
    def _compact(self, handler):
        data = handler(self)
        if isinstance(data, dict) and data.get("level", 0) is None:
            del data["level"]               # a version-1 fracture writes as it did
        return data


class Medication(_Strict):
    """One medicine class the person takes or took."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True, populate_by_name=False,
                              serialize_by_alias=True)

    class_: MedicationClass = Field(alias="class", description="The medicine class.",
                                    json_schema_extra={**_meta(label="Medicine"),
                                                       "choice_labels": MEDICATION_LABELS})
    months_on: float | None = Field(None, ge=0, le=1200, description="How long it has been (or was) taken, in months.",
                                    json_schema_extra=_meta("months", (0, 120), "Months taken", 1))
    months_since_last_dose: float | None = Field(
        None, ge=0, le=1200, description="Months since the last dose or injection; 0 while taken daily; "
        "empty when not known.", json_schema_extra=_meta("months", (0, 24), "Months since last dose", 0.5))


class Cancer(_Strict):
    """Cancer and what is known of bone metastases."""

    active: bool = Field(description="Cancer under treatment or not in remission.",
                         json_schema_extra=_meta(label="Active cancer"))
    bone_metastases: MetastasesStatus = Field(
        "unknown", description="Bone metastases: excluded (a clinician has recorded none), unknown or present.",
        json_schema_extra=_meta(label="Bone metastases"))


class Surgery(_Strict):
    """One operation that changes what loading is safe."""

    procedure: SurgeryProcedure = Field(description="The operation.", json_schema_extra={**_meta(label="Operation"),
                                                                      "choice_labels": SURGERY_LABELS})
    side: SurgerySide = Field("none", description="The side operated on: left, right, both, or none (the spine).",
                              json_schema_extra={**_meta(label="Side"),
                                                 "choice_labels": SURGERY_SIDE_LABELS})
    months_ago: float = Field(ge=0, le=1200, description="How long ago, in months.",
                              json_schema_extra=_meta("months", (0, 120), "Months ago", 0.5))
    surgeon_cleared_impact: bool = Field(False, description="The surgical team has cleared impact loading "
                                         "(jumping, hopping, heel drops) for this joint.",
                                         json_schema_extra=_meta(label="Surgeon cleared impact"))


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
    # Version 2 (PRODUCT.md "The patient record, version 2"): all optional.
    record_version: Literal[1, 2] | None = Field(None, description="2 for a record with the version-2 fields; "
                                                 "absent means 1.", json_schema_extra=_meta(label="Record version"))
    display_name: str | None = Field(None, min_length=1, max_length=80, pattern=r"^\S(.*\S)?$",
                                     description="How the person's own handout addresses them (kept out of "
                                     "exports unless asked for).", json_schema_extra=_meta(label="Name on the handout"))
    z_scores: ZScores = Field(default_factory=ZScores,
                              description="DXA Z-scores by site: bone density is judged by them before the "
                              "menopause and under 50.")
    menopause: MenopauseStatus | None = Field(None, description="Menopausal status (women only).",
                                              json_schema_extra=_meta(label="Menopause"))
    medications: list[Medication] = Field(default_factory=list,
                                          description="Medicines that change fracture, falls or bleeding risk, "
                                          "with how long taken and the last dose.")
    cancer: Cancer | None = Field(None, description="Cancer and what is known of bone metastases.")
    surgeries: list[Surgery] = Field(default_factory=list,
                                     description="Joint replacements and spinal operations, with side, date and "
                                     "the surgeon's clearance.")
    cognition: CognitionLevel | None = Field(None, description="Cognitive impairment: none, mild, moderate or severe.",
                                             json_schema_extra=_meta(label="Cognitive impairment"))
    lives_alone: bool | None = Field(None, description="Lives alone.", json_schema_extra=_meta(label="Lives alone"))
    has_carer: bool | None = Field(None, description="Has a carer or family member who can help with exercise.",
                                   json_schema_extra=_meta(label="Has a carer"))

    @field_validator("conditions")
    @classmethod
    def _known_conditions(cls, value: list[str]) -> list[str]:
        if len(set(value)) != len(value):
            raise ValueError("a condition code is listed twice")
        return value

    _finite = field_validator("body_mass_kg", "height_cm", "timed_up_and_go_s", "tandem_stance_s")(finite_number)

    @field_validator("display_name")
    @classmethod
    def _printable_name(cls, value: str | None) -> str | None:
        if value is not None and any(not ch.isprintable() for ch in value):
            raise PydanticCustomError("printable", "control or direction characters are not allowed")
        return value

    @model_validator(mode="after")
    def _version_and_sex(self) -> "PatientRecord":
        if self.menopause is not None and self.sex != "female":
            raise PydanticCustomError("menopause_sex", "menopause applies to sex female only")
        if self.record_version == 1:
            used = [name for name in RECORD_V2_FIELDS if name in self.model_fields_set]
            if used:
                raise PydanticCustomError("record_version", "record_version 1 cannot hold {fields}",
                                          {"fields": ", ".join(used)})
        return self

    @property
    def bmi(self) -> float:
        return self.body_mass_kg / (self.height_cm / 100.0) ** 2

    @model_serializer(mode="wrap")
    def _compact(self, handler):
        """Version-2 fields left at their defaults are not written, so a version-1 record
        writes as it did; a record that uses them writes ``record_version`` 2."""
        data = handler(self)
        if not isinstance(data, dict):
            return data
        for name in ("record_version", *RECORD_V2_FIELDS):
            if name in data and _is_default(data[name]):
                del data[name]
        if self.version == 2:
            data["record_version"] = 2
        return data

    @property
    def version(self) -> int:
        """The record version: 2 where a version-2 field is set or it says so, else 1."""
        if self.record_version is not None:
            return self.record_version
        return 2 if any(name in self.model_fields_set for name in RECORD_V2_FIELDS) else 1


#: Our three severity levels of a screening flag, strongest first.
SEVERITIES: dict[str, str] = {
    "clear_first": "A clinician must clear the person before loading.",
    "adapt": "Adapt the program.",
    "note": "Note for the clinician.",
}
Severity = Literal["clear_first", "adapt", "note"]
DensityCategory = Literal["normal", "osteopenia", "osteoporosis", "severe_osteoporosis", "unknown",
                          "within_expected_range_for_age", "below_expected_range_for_age"]


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
    until_cleared: bool = Field(False, description="The flag's referral and caps hold until a clinician "
                                "records the clearance.")
    lifted_by_clearance: bool = Field(False, description="A recorded clearance has lifted what this flag held.")


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
    # Version 2: which score judges bone density (ISCD: Z-score before the menopause and under 50).
    density_reference: Literal["t_score", "z_score"] = "t_score"
    lowest_z_score: float | None = None
    lowest_z_score_site: str | None = None
    max_pct_1rm: int | None = Field(None, description="Heaviest resistance load allowed [% 1RM]; null: no cap.")
    carer_led: bool = Field(False, description="Sessions supervised or led by a carer, a short program, and the "
                            "person's pages written for the carer.")
    hold_volume: bool = Field(False, description="No rise in volume until a clinician records the clearance.")
    person_notes: list[str] = Field(default_factory=list, description="What the fired rules say to the person "
                                    "(or carer) on the person's pages.")
    cleared: bool = Field(False, description="Screened with a recorded clearance (what waited for it is lifted).")


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
    if "allowed" in node:
        return node["allowed"]
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


def _is_default(value: Any) -> bool:
    """A version-2 value that says nothing: null, an empty list, or an object of nulls."""
    if value is None or value == []:
        return True
    return isinstance(value, dict) and all(v is None for v in value.values())


_UNION_MEMBER = re.compile(r"^(float|int|str|bool|none|(literal|list|dict)\[.*\]|[A-Z][A-Za-z0-9_]*)$")

#: Checks across fields (model validators): error type -> (the field it names, what is allowed).
_CROSS_FIELD: dict[str, tuple[str, str]] = {
    "level_site": ("level", "a vertebral level only where site is 'vertebra' (leave level empty for other sites)"),
    "menopause_sex": ("menopause", "empty for sex 'male' (menopausal status is recorded for women)"),
    "record_version": ("record_version", "2 (or leave it out) when version-2 fields (" + ", ".join(RECORD_V2_FIELDS)
                       + ") are given"),
}


def problems_from_validation(err: ValidationError, data: Any) -> list[FieldProblem]:
    """One :class:`FieldProblem` per bad field, in the record's field order."""
    problems: list[FieldProblem] = []
    seen: set[str] = set()
    for e in err.errors(include_url=False):
        loc = tuple(p for p in e["loc"] if not (isinstance(p, str) and p in ("function-after", "function-before")))
        # pydantic adds the union member name (e.g. 'float', 'Fracture') to the location: drop it.
        loc = tuple(p for p in loc if not (isinstance(p, str) and _UNION_MEMBER.match(p)))
        etype = e["type"]
        value = e.get("input", _MISSING)
        cross = _CROSS_FIELD.get(etype)
        if cross is not None:               # a check across fields: name the field it is about
            sub, allowed = cross
            loc = loc + (sub,)
            value = value.get(sub) if isinstance(value, dict) else getattr(value, sub, value)
        field = _loc_text(loc) or "record"
        if field in seen:
            continue
        seen.add(field)
        if cross is not None:
            problems.append(FieldProblem(field, value, allowed))
        elif etype == "printable":
            problems.append(FieldProblem(field, value, describe_allowed(loc) + " (printable characters only: "
                                         "no control or text-direction characters)"))
        elif etype == "missing":
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

def field_meta(schema: dict, name: str, allowed: str) -> dict:
    """Label, unit, bounds, typical range, step, help text and what is allowed of one top-level field
    of a model's JSON schema (the record's, or another record's such as the retest's), for forms."""
    node = schema["properties"][name]
    r = _resolve(node, schema.get("$defs", {}))
    return {
        "label": r.get("label", node.get("label", name.replace("_", " ").capitalize())),
        "unit": r.get("unit"),
        "minimum": r.get("minimum"),
        "maximum": r.get("maximum"),
        "soft_range": r.get("soft_range"),
        "step": r.get("step"),
        "type": r.get("type"),
        "description": node.get("description", r.get("description", "")),
        "required": name in schema.get("required", []),
        "allowed": allowed,
    }


#: Per top-level field: label, unit, bounds, typical range, step and help text, for forms.
FIELD_META: dict[str, dict] = {name: field_meta(RECORD_SCHEMA, name, describe_allowed((name,)))
                               for name in RECORD_SCHEMA["properties"]}
