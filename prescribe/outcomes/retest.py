"""The retest record: what was measured at a review (PRODUCT.md, "Reassessment and outcomes").

A retest is {patient_id, date, timed_up_and_go_s, chair_stand_30s, tandem_stance_s,
falls_since_last, pain_score, body_mass_kg, height_cm, t_scores, z_scores, note}.

The fields it shares with the patient record (the tests, pain, weight, height, the DXA
scores) are the record's own fields: their bounds, units, labels and help text are taken
from :class:`prescribe.records.PatientRecord` here, never written a second time.  Only what
the record does not have (the date, falls since the last visit, the note) is defined in
this module.  A measure left out (null) was not measured at this retest.

Validation happens once, at the boundary (:func:`parse_retest`); a bad retest raises
:class:`prescribe.errors.InputError` naming each bad field, its value and what is allowed.
"""

from __future__ import annotations

from datetime import date
from typing import Any

from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator
from pydantic.fields import FieldInfo
from pydantic_core import PydanticUndefined

from ..errors import FieldProblem, InputError
from ..sessions.records import check_day_in_program
from ..records import (FIELD_META, PatientRecord, TScores, ZScores, _meta, _resolve, day_text, field_meta,
                       finite_number)

__all__ = ["RetestRecord", "RETEST_MEASURES", "RETEST_FIELD_META", "RETEST_SCHEMA", "parse_retest",
           "check_retest_date"]

#: Measures the retest shares with the patient record (the record's fields, same name).
RETEST_MEASURES: tuple[str, ...] = ("timed_up_and_go_s", "chair_stand_30s", "tandem_stance_s", "pain_score",
                                    "body_mass_kg", "height_cm")

NOTE_MAX = 2000


def _as_record(name: str, description: str | None = None, label: str | None = None) -> Any:
    """The patient record's field ``name`` (bounds, unit, label, help), optional here: not measured is null."""
    info = PatientRecord.model_fields[name]
    kw: dict[str, Any] = {"default": None}
    if description:
        kw["description"] = description
    if label:
        kw["json_schema_extra"] = {**(info.json_schema_extra or {}), "label": label}
    return FieldInfo.merge_field_infos(info, **kw)


def _required(info: FieldInfo) -> FieldInfo:
    """The same field without a default: the retest must say it."""
    info.default = PydanticUndefined
    return info


class RetestRecord(BaseModel):
    """One retest of a stored person (PRODUCT.md, "Reassessment and outcomes")."""

    model_config = ConfigDict(extra="forbid", strict=True, frozen=True,
                              json_schema_extra={"title": "prescribe retest"})

    patient_id: str = FieldInfo.merge_field_infos(PatientRecord.model_fields["patient_id"],
                                                  description="The stored person's pseudonymous id.")
    date: str = Field(description="The day of the retest (YYYY-MM-DD): not in the future, not before the "
                      "program's start_date.", json_schema_extra=_meta(label="Retest date"))
    timed_up_and_go_s: float | None = _as_record("timed_up_and_go_s")
    chair_stand_30s: int | None = _as_record("chair_stand_30s")
    tandem_stance_s: float | None = _as_record("tandem_stance_s")
    falls_since_last: int = _required(FieldInfo.merge_field_infos(
        PatientRecord.model_fields["falls_past_year"],
        description="Falls since the last visit (the intake or the previous retest).",
        json_schema_extra=_meta("falls", (0, 6), "Falls since the last visit")))
    pain_score: int | None = _as_record("pain_score", "Usual pain now: 0 (none) to 10 (worst imaginable).",
                                                   "Usual pain now")
    body_mass_kg: float | None = _as_record("body_mass_kg")
    height_cm: float | None = _as_record("height_cm", "Standing height, measured (a loss of 2 cm or more "
                                         "since the first measurement is flagged).")
    t_scores: TScores = Field(default_factory=TScores, description="DXA T-scores by site, when there is a "
                              "new scan; leave empty otherwise.")
    z_scores: ZScores = Field(default_factory=ZScores, description="DXA Z-scores by site, when there is a "
                              "new scan; leave empty otherwise.")
    note: str = Field("", max_length=NOTE_MAX, description="What the clinician noted at the retest.",
                      json_schema_extra=_meta(label="Note"))

    # the record's own checks of a measure and of a day (prescribe/records.py), as the session record's
    _finite = field_validator("timed_up_and_go_s", "tandem_stance_s", "body_mass_kg", "height_cm")(finite_number)
    _day = field_validator("date")(day_text)

    @property
    def day(self) -> date:
        return date.fromisoformat(self.date)

    def measured(self) -> dict[str, float]:
        """The measures taken at this retest, by name (``t_scores.femoral_neck`` for a DXA site)."""
        out = {name: getattr(self, name) for name in RETEST_MEASURES if getattr(self, name) is not None}
        for group in ("t_scores", "z_scores"):
            for site, value in getattr(self, group).model_dump().items():
                if value is not None:
                    out[f"{group}.{site}"] = value
        return out


RETEST_SCHEMA = RetestRecord.model_json_schema()

#: What each of the retest's own fields accepts, in words (the shared ones come from FIELD_META).
_OWN_ALLOWED = {
    "date": "a date as YYYY-MM-DD, not in the future and not before the program's start_date",
    "falls_since_last": "a whole number of falls from {minimum} to {maximum}".format(**FIELD_META["falls_past_year"]),
    "note": f"text of at most {NOTE_MAX} characters",
}

#: Per top-level field: label, unit, bounds, typical range, step, help text and what is allowed,
#: for the app's retest form (like :data:`prescribe.records.FIELD_META` for the intake form).
RETEST_FIELD_META: dict[str, dict] = {}
for _name in RETEST_SCHEMA["properties"]:
    _shared = FIELD_META.get(_name) if _name in RETEST_MEASURES or _name in ("patient_id", "t_scores", "z_scores") \
        else None
    RETEST_FIELD_META[_name] = field_meta(
        RETEST_SCHEMA, _name, (_shared["allowed"] + (", or null when not measured" if _name in RETEST_MEASURES else "")
                               if _shared else _OWN_ALLOWED.get(_name, "")))


def _allowed(loc: tuple) -> str:
    head = str(loc[0]) if loc else ""
    if head in ("t_scores", "z_scores") and len(loc) > 1:
        node = RETEST_SCHEMA["$defs"]["TScores" if head == "t_scores" else "ZScores"]["properties"].get(str(loc[1]), {})
        node = _resolve(node, {})
        return f"a number from {node.get('minimum', -7):g} to {node.get('maximum', 5):g} (SD), or null"
    meta = RETEST_FIELD_META.get(head)
    return meta["allowed"] if meta else "a valid value"


def parse_retest(data: Any, source: str | None = None) -> RetestRecord:
    """Validate a retest (parsed JSON); :class:`InputError` names each bad field."""
    if not isinstance(data, dict):
        raise InputError([FieldProblem("retest", data, "a JSON object with the retest's fields: "
                                       + ", ".join(RetestRecord.model_fields))], source)
    try:
        return RetestRecord.model_validate(data)
    except ValidationError as err:
        problems: list[FieldProblem] = []
        seen: set[str] = set()
        for e in err.errors(include_url=False):
            loc = tuple(p for p in e["loc"] if not (isinstance(p, str) and p in
                                                    ("float", "int", "str", "none", "function-after")))
            field = ".".join(str(p) for p in loc) or "retest"
            if field in seen:
                continue
            seen.add(field)
            if e["type"] == "extra_forbidden":
                parent = RETEST_SCHEMA["$defs"]["TScores"]["properties"] if len(loc) > 1 else RetestRecord.model_fields
                problems.append(FieldProblem(field, e.get("input"), f"a known field ({', '.join(parent)})",
                                             kind="unknown_field"))
            elif e["type"] == "missing":
                problems.append(FieldProblem(field, None, _allowed(loc), kind="missing"))
            else:
                problems.append(FieldProblem(field, e.get("input"), _allowed(loc)))
        raise InputError(problems, source) from None


def check_retest_date(retest: RetestRecord, start_date: str | date | None, today: date | None = None,
                      source: str | None = None) -> None:
    """Refuse a retest in the future or before the program's start date (InputError naming ``date``),
    with the session record's own check."""
    check_day_in_program("date", retest.day, start_date, today, source)
