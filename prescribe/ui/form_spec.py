"""What the intake form shows, read from the patient record's own schema (no widgets here).

The limits, units and help text come from :data:`prescribe.records.FIELD_META` and
``PatientRecord.model_json_schema()``; this module never keeps a second copy of them.
It also turns what was typed into the form (text) into the dict that
:func:`prescribe.records.parse_record` validates, so every message the form shows
is the record's own message ("age_years must be a whole number from 18 to 110 (years), not 12.").
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..records import CONDITIONS, FIELD_META, FRACTURE_SITES, RECORD_SCHEMA, T_SCORE_SITES, describe_allowed

#: Top-level fields typed as text boxes (numbers are typed, never clamped by the widget).
SCALAR_FIELDS: tuple[str, ...] = ("patient_id", "age_years", "sex", "body_mass_kg", "height_cm",
                                  "falls_past_year", "timed_up_and_go_s", "chair_stand_30s",
                                  "tandem_stance_s", "pain_score")


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


def _spec_from_node(key: str, node: dict, loc: tuple, required: bool) -> FieldSpec:
    kind = "choice" if "enum" in node else node.get("type", "string")
    label = node.get("label") or f"{FIELD_META[loc[0]]['label']} - {str(loc[-1]).replace('_', ' ')}"
    soft = node.get("soft_range")
    return FieldSpec(key=key, label=label, kind=kind, unit=node.get("unit"), help=node.get("description", ""),
                     allowed=describe_allowed(loc), required=required,
                     choices=tuple(node.get("enum", ())), soft_range=tuple(soft) if soft else None)


def intake_fields() -> list[FieldSpec]:
    """The scalar inputs of the form, in the record's order, then T-scores and glucocorticoids."""
    specs: list[FieldSpec] = []
    for name in SCALAR_FIELDS:
        meta = FIELD_META[name]
        node = dict(RECORD_SCHEMA["properties"][name])
        kind = meta["type"]
        if "enum" in node:
            kind = "choice"
        specs.append(FieldSpec(key=name, label=meta["label"], kind=kind, unit=meta["unit"],
                               help=meta["description"], allowed=meta["allowed"], required=meta["required"],
                               choices=tuple(node.get("enum", ())),
                               soft_range=tuple(meta["soft_range"]) if meta["soft_range"] else None))
    for site in T_SCORE_SITES:
        specs.append(_spec_from_node(f"t_scores.{site}", _nested("TScores", site), ("t_scores", site), False))
    for prop in ("mg_per_day", "months"):
        specs.append(_spec_from_node(f"glucocorticoids.{prop}", _nested("Glucocorticoids", prop),
                                     ("glucocorticoids", prop), False))
    return specs


def fracture_fields() -> list[FieldSpec]:
    """The inputs of one fracture row (site, months ago, low trauma)."""
    props = RECORD_SCHEMA["$defs"]["Fracture"]["properties"]
    return [_spec_from_node(f"fractures.{p}", props[p], ("fractures", 0, p), True) for p in props]


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


def record_data(values: dict[str, Any], fractures: list[dict] | None = None,
                conditions: list[str] | None = None, glucocorticoids_taken: bool = False) -> dict:
    """The record dict from the form's raw values (keys as in :func:`intake_fields`).

    Empty optional boxes are left out, so the record's defaults apply; an empty required
    box is left out too, so the record reports it as required.
    """
    kinds = {s.key: s.kind for s in intake_fields()}
    data: dict[str, Any] = {}
    t_scores: dict[str, Any] = {}
    gluco: dict[str, Any] = {}
    for key, raw in values.items():
        value = convert_text(raw, kinds.get(key, "string"))
        if value is None:
            continue
        if key.startswith("t_scores."):
            t_scores[key.split(".", 1)[1]] = value
        elif key.startswith("glucocorticoids."):
            gluco[key.split(".", 1)[1]] = value
        else:
            data[key] = value
    if t_scores:
        data["t_scores"] = t_scores
    if glucocorticoids_taken:
        data["glucocorticoids"] = gluco
    if fractures:
        kinds_f = {s.key.split(".", 1)[1]: s.kind for s in fracture_fields()}
        rows = []
        for row in fractures:
            rows.append({k: convert_text(v, kinds_f.get(k, "string")) for k, v in row.items()
                         if convert_text(v, kinds_f.get(k, "string")) is not None})
        data["fractures"] = rows
    if conditions:
        data["conditions"] = list(conditions)
    return data


def form_values(record_dict: dict) -> dict:
    """The reverse of :func:`record_data`: the text each box shows for a saved record."""
    out: dict[str, Any] = {}
    for spec in intake_fields():
        head, _, tail = spec.key.partition(".")
        value = record_dict.get(head)
        if tail:
            value = (value or {}).get(tail) if isinstance(value, dict) else None
        if spec.kind == "choice":
            out[spec.key] = value
        else:
            out[spec.key] = "" if value is None else _num(value) if isinstance(value, (int, float)) else str(value)
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
