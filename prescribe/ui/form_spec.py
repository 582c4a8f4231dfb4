"""What the intake form shows, read from the patient record's own schema (no widgets here).

The limits, units and help text come from :data:`prescribe.records.FIELD_META` and
``PatientRecord.model_json_schema()``; this module never keeps a second copy of them.
It also turns what was typed into the form (text) into the dict that
:func:`prescribe.records.parse_record` validates, so every message the form shows
is the record's own message ("age_years must be a whole number from 18 to 110 (years), not 12.").
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from typing import Any

from ..records import (BONE_METASTASES, COGNITION_LEVELS, CONDITIONS, FIELD_META, FRACTURE_SITES,
                       MEDICATION_CLASSES, MENOPAUSE_STATUSES, RECORD_SCHEMA, RECORD_V2_FIELDS, SURGERY_PROCEDURES,
                       T_SCORE_SITES, describe_allowed)

#: Top-level fields with one box each: numbers and text are typed (never clamped by the
#: widget), a vocabulary or yes/no is chosen from a list.
SCALAR_FIELDS: tuple[str, ...] = ("patient_id", "display_name", "age_years", "sex", "menopause", "body_mass_kg",
                                  "height_cm", "falls_past_year", "timed_up_and_go_s", "chair_stand_30s",
                                  "tandem_stance_s", "pain_score", "cognition", "lives_alone", "has_carer")

#: Fields shown and used for women only (the record refuses them for men).
WOMEN_ONLY: tuple[str, ...] = ("menopause",)

#: The lists of rows (one row an item): record field -> its item's definition in the schema.
ROW_LISTS: dict[str, str] = {"fractures": "Fracture", "medications": "Medication", "surgeries": "Surgery"}

#: What each code of a vocabulary means (hover text), by the record path of the field.
CHOICE_HELP: dict[str, dict[str, str]] = {
    "medications.class": MEDICATION_CLASSES, "surgeries.procedure": SURGERY_PROCEDURES,
    "menopause": MENOPAUSE_STATUSES, "cognition": COGNITION_LEVELS,
    "cancer.bone_metastases": BONE_METASTASES, "fractures.site": FRACTURE_SITES,
}

#: What a yes/no list shows (None: not given).
YES_NO: tuple[tuple[str, bool], ...] = (("yes", True), ("no", False))


@dataclass(frozen=True)
class FieldSpec:
    """One input of the intake form.

    ``key`` is the record path the message belongs to (``age_years``,
    ``t_scores.femoral_neck``, ``glucocorticoids.mg_per_day``).
    """

    key: str
    label: str
    kind: str                      # integer | number | string | choice
    unit: str | None = None
    help: str = ""
    allowed: str = ""
    required: bool = False
    choices: tuple[str, ...] = ()
    soft_range: tuple[float, float] | None = None
    extra: dict = field(default_factory=dict)
    #: Plain words for each of ``choices`` (the schema's ``choice_labels``, else the code as words).
    choice_labels: tuple[str, ...] = ()

    @property
    def options(self) -> list[tuple[str, Any]]:
        """(words shown, value) of a list: the vocabulary's codes, or yes and no."""
        if self.kind == "boolean":
            return list(YES_NO)
        return list(zip(self.choice_labels or self.choices, self.choices))

    def words(self, value: Any) -> str:
        """The words a list shows for ``value``."""
        return next((label for label, v in self.options if v == value), str(value))

    @property
    def placeholder(self) -> str:
        """A hint inside the empty box: the typical range and unit, or 'optional'."""
        parts = []
        if self.soft_range:
            lo, hi = self.soft_range
            parts.append(f"typically {_num(lo)}-{_num(hi)}")
        if self.unit:
            parts.append(self.unit)
        if not self.required:
            parts.append("optional")
        return ", ".join(parts)


def _num(x: float) -> str:
    return str(int(x)) if float(x).is_integer() else str(x)


def _nested(def_name: str, prop: str) -> dict:
    node = RECORD_SCHEMA["$defs"][def_name]["properties"][prop]
    for option in node.get("anyOf", []):
        if option.get("type") != "null":
            return {**option, **{k: v for k, v in node.items() if k != "anyOf"}}
    return node


def _choice_labels(node: dict) -> tuple[str, ...]:
    enum = node.get("enum", ())
    labels = node.get("choice_labels") or {}
    return tuple(labels.get(code, code.replace("_", " ")) for code in enum)


def _spec_from_node(key: str, node: dict, loc: tuple, required: bool) -> FieldSpec:
    kind = "choice" if "enum" in node else node.get("type", "string")
    label = node.get("label") or f"{FIELD_META[loc[0]]['label']} - {str(loc[-1]).replace('_', ' ')}"
    soft = node.get("soft_range")
    return FieldSpec(key=key, label=label, kind=kind, unit=node.get("unit"), help=node.get("description", ""),
                     allowed=describe_allowed(loc), required=required,
                     choices=tuple(node.get("enum", ())), soft_range=tuple(soft) if soft else None,
                     choice_labels=_choice_labels(node))


def _required_in(def_name: str) -> set[str]:
    return set(RECORD_SCHEMA["$defs"][def_name].get("required", ()))


def _top_level(name: str) -> dict:
    node = RECORD_SCHEMA["properties"][name]
    for option in node.get("anyOf", []):
        if option.get("type") != "null":
            return {**option, **{k: v for k, v in node.items() if k != "anyOf"}}
    return node


def intake_fields() -> list[FieldSpec]:
    """Every one-box input of the form: the top-level fields in :data:`SCALAR_FIELDS`' order,
    then the T- and Z-scores by site, glucocorticoids and cancer."""
    specs: list[FieldSpec] = []
    for name in SCALAR_FIELDS:
        meta = FIELD_META[name]
        node = _top_level(name)
        kind = meta["type"]
        if "enum" in node:
            kind = "choice"
        specs.append(FieldSpec(key=name, label=meta["label"], kind=kind, unit=meta["unit"],
                               help=meta["description"], allowed=meta["allowed"], required=meta["required"],
                               choices=tuple(node.get("enum", ())),
                               soft_range=tuple(meta["soft_range"]) if meta["soft_range"] else None,
                               choice_labels=_choice_labels(node)))
    for site in T_SCORE_SITES:
        specs.append(_spec_from_node(f"t_scores.{site}", _nested("TScores", site), ("t_scores", site), False))
        specs.append(_spec_from_node(f"z_scores.{site}", _nested("ZScores", site), ("z_scores", site), False))
    for prop in ("mg_per_day", "months"):
        specs.append(_spec_from_node(f"glucocorticoids.{prop}", _nested("Glucocorticoids", prop),
                                     ("glucocorticoids", prop), False))
    for prop in RECORD_SCHEMA["$defs"]["Cancer"]["properties"]:
        # Cancer is optional: its boxes are too (the record asks for 'active' once either is given).
        specs.append(_spec_from_node(f"cancer.{prop}", _nested("Cancer", prop), ("cancer", prop), False))
    return specs


def row_fields(list_field: str) -> list[FieldSpec]:
    """The inputs of one row of a list (``fractures``, ``medications``, ``surgeries``), in the
    schema's order, each keyed ``LIST.PROP``."""
    def_name = ROW_LISTS[list_field]
    props = RECORD_SCHEMA["$defs"][def_name]["properties"]
    required = _required_in(def_name)
    return [_spec_from_node(f"{list_field}.{p}", _nested(def_name, p), (list_field, 0, p), p in required)
            for p in props]


def fracture_fields() -> list[FieldSpec]:
    """The inputs of one fracture row (site, months ago, low trauma, vertebral level)."""
    return row_fields("fractures")


def medication_fields() -> list[FieldSpec]:
    """The inputs of one medicine row (class, months taken, months since the last dose)."""
    return row_fields("medications")


def surgery_fields() -> list[FieldSpec]:
    """The inputs of one operation row (procedure, side, months ago, surgeon's clearance)."""
    return row_fields("surgeries")


def choice_help(key: str, code: str) -> str:
    """What a vocabulary's code means (the record's own description), or ''."""
    return CHOICE_HELP.get(key, {}).get(code, "")


def plain_choices(field_path: str, message: str) -> str:
    """A record message about ``field_path`` with its vocabulary's codes in the form's words.

    "surgeries[0].procedure is required: one of 'hip_replacement', ..." lists the codes;
    the form shows "one of 'Hip replacement', ...".  Only the vocabulary of the field the
    message is about is replaced (``'none'`` is a side in one list, a level in another).
    """
    key = re.sub(r"\[\d+\]", "", field_path)
    spec = _specs_by_key().get(key)
    if spec is None or spec.kind not in ("choice", "boolean"):
        return message
    if spec.kind == "boolean":
        return message.replace("true or false", "yes or no")
    for code, words in zip(spec.choices, spec.choice_labels):
        message = message.replace(f"'{code}'", f"'{words}'")
    return message


def _specs_by_key() -> dict[str, FieldSpec]:
    specs = {s.key: s for s in intake_fields()}
    for list_field in ROW_LISTS:
        specs.update({s.key: s for s in row_fields(list_field)})
    return specs


def condition_choices() -> list[tuple[str, str]]:
    """(code, meaning) of every condition in the record's vocabulary."""
    return list(CONDITIONS.items())


def fracture_sites() -> list[tuple[str, str]]:
    return list(FRACTURE_SITES.items())


def convert_text(text: Any, kind: str) -> Any:
    """What was typed, as the record expects it; text that is not a number stays text.

    Returns ``None`` for an empty box.  Text that cannot be read as the field's kind is
    passed through unchanged, so the record's validation reports it with its own message.
    """
    if text is None:
        return None
    if not isinstance(text, str):
        return text
    text = text.strip()
    if text == "":
        return None
    if kind == "integer":
        try:
            return int(text)
        except ValueError:
            try:
                as_float = float(text.replace(",", "."))
            except ValueError:
                return text
            return int(as_float) if as_float.is_integer() else as_float
    if kind == "number":
        try:
            return float(text.replace(",", "."))
        except ValueError:
            return text
    return text


def shows_level(site: Any) -> bool:
    """A fracture row shows (and uses) its vertebral level only for a vertebral fracture."""
    return site == "vertebra"


def _rows(list_field: str, rows: list[dict] | None) -> list[dict]:
    kinds = {s.key.split(".", 1)[1]: s.kind for s in row_fields(list_field)}
    out = []
    for row in rows or []:
        item = {}
        for k, v in row.items():
            value = convert_text(v, kinds.get(k, "string"))
            if value is not None:
                item[k] = value
        if list_field == "fractures" and not shows_level(item.get("site")):
            item.pop("level", None)
        out.append(item)
    return out


def record_data(values: dict[str, Any], fractures: list[dict] | None = None,
                conditions: list[str] | None = None, glucocorticoids_taken: bool = False, *,
                medications: list[dict] | None = None, surgeries: list[dict] | None = None,
                record_version: int | None = None) -> dict:
    """The record dict from the form's raw values (keys as in :func:`intake_fields`; each row
    a dict keyed by the item's fields, as in :func:`row_fields`).

    Empty optional boxes are left out, so the record's defaults apply; an empty required
    box is left out too, so the record reports it as required.  Fields for women only
    (:data:`WOMEN_ONLY`) are left out unless sex is female, as is a fracture's level unless
    the fracture is vertebral.  ``record_version`` is passed on as it was (a reopened
    record that said 2 keeps saying it).
    """
    kinds = {s.key: s.kind for s in intake_fields()}
    data: dict[str, Any] = {}
    nested: dict[str, dict[str, Any]] = {}
    for key, raw in values.items():
        value = convert_text(raw, kinds.get(key, "string"))
        if value is None:
            continue
        if key in WOMEN_ONLY and values.get("sex") != "female":
            continue
        head, _, tail = key.partition(".")
        if tail:
            nested.setdefault(head, {})[tail] = value
        else:
            data[key] = value
    if record_version is not None:
        data["record_version"] = record_version
    for head in ("t_scores", "z_scores", "cancer"):
        if nested.get(head):
            data[head] = nested[head]
    if glucocorticoids_taken:
        data["glucocorticoids"] = nested.get("glucocorticoids", {})
    for list_field, rows in (("fractures", fractures), ("medications", medications), ("surgeries", surgeries)):
        if rows:
            data[list_field] = _rows(list_field, rows)
    if conditions:
        data["conditions"] = list(conditions)
    if data.get("record_version") == 1 and any(name in data for name in RECORD_V2_FIELDS):
        del data["record_version"]  # a version-1 record given version-2 details becomes version 2
    return data


def _box_value(spec: FieldSpec, value: Any) -> Any:
    if spec.kind in ("choice", "boolean"):
        return value
    return "" if value is None else _num(value) if isinstance(value, (int, float)) else str(value)


def form_values(record_dict: dict) -> dict:
    """The reverse of :func:`record_data`: what each box shows for a saved record.

    One entry a box (text for a typed box, the value for a list), and under ``fractures``,
    ``medications`` and ``surgeries`` one dict a row in the same form.
    """
    out: dict[str, Any] = {}
    for spec in intake_fields():
        head, _, tail = spec.key.partition(".")
        value = record_dict.get(head)
        if tail:
            value = (value or {}).get(tail) if isinstance(value, dict) else None
        out[spec.key] = _box_value(spec, value)
    for list_field in ROW_LISTS:
        specs = {s.key.split(".", 1)[1]: s for s in row_fields(list_field)}
        out[list_field] = [{k: _box_value(spec, item.get(k)) for k, spec in specs.items()}
                           for item in record_dict.get(list_field) or []]
    return out


# -- the retest form (docs/reassess.md): from the retest's own field metadata ---------------

def retest_fields() -> list[FieldSpec]:
    """The inputs of the retest form, in the retest's field order (the patient comes from the open
    person), then the DXA scores by site; limits, units and help from
    :data:`prescribe.outcomes.retest.RETEST_FIELD_META` (the record's own, for the shared fields)."""
    from ..outcomes.retest import RETEST_FIELD_META
    specs: list[FieldSpec] = []
    for name, meta in RETEST_FIELD_META.items():
        if name in ("patient_id", "t_scores", "z_scores"):
            continue
        specs.append(FieldSpec(key=name, label=meta["label"], kind=meta["type"] or "string", unit=meta["unit"],
                               help=meta["description"], allowed=meta["allowed"], required=meta["required"],
                               soft_range=tuple(meta["soft_range"]) if meta["soft_range"] else None))
    for group, def_name in (("t_scores", "TScores"), ("z_scores", "ZScores")):
        for site in T_SCORE_SITES:
            node = RECORD_SCHEMA["$defs"][def_name]["properties"][site]
            node = next((o for o in node.get("anyOf", []) if o.get("type") != "null"), node) | \
                {k: v for k, v in node.items() if k != "anyOf"}
            specs.append(FieldSpec(key=f"{group}.{site}", label=node.get("label", site), kind="number",
                                   unit=node.get("unit"), help=node.get("description", ""),
                                   allowed=describe_allowed((group, site)), required=False,
                                   soft_range=tuple(node["soft_range"]) if node.get("soft_range") else None))
    return specs


def retest_data(values: dict[str, Any], patient_id: str) -> dict:
    """The retest dict from the form's raw values; empty boxes are left out (not measured)."""
    kinds = {s.key: s.kind for s in retest_fields()}
    data: dict[str, Any] = {"patient_id": patient_id}
    for key, raw in values.items():
        value = convert_text(raw, kinds.get(key, "string"))
        if value is None:
            continue
        head, _, tail = key.partition(".")
        if tail:
            data.setdefault(head, {})[tail] = value
        else:
            data[key] = value
    return data
