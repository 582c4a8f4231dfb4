"""Screening rules as data: loading, validating and the feature vocabulary.

Each rule family lives in one TOML file under ``prescribe/data/rules/screening/``.  A rule
names its condition as structured data (``all`` / ``any`` / ``not`` of leaf tests
``{feature, op, value}``) over a documented set of *derived features* (see
:data:`FEATURES`).  No string is ever evaluated as code.  The same compiled rule
is evaluated by the per-record evaluator and by the vectorised one in
:mod:`prescribe.screening`.

The file format is documented in ``docs/rules.md``.
"""

from __future__ import annotations

import hashlib
import re
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Union

from ..errors import RuleFileError
from ..fileio import decode_text
from ..records import (BONE_METASTASES, COGNITION_LEVELS, CONDITIONS, MEDICATION_CLASSES, MENOPAUSE_STATUSES,
                       MOVEMENT_PATTERNS, SEVERITIES, SURGERY_PROCEDURES)

#: Where the shipped rule files live.
DEFAULT_RULES_DIR = Path(__file__).parent.parent / "data" / "rules" / "screening"

#: The release of the rule library; the hash of the files is appended at load time.
RULESET_RELEASE = "2026.12-1"

#: Density categories a rule may set, weakest first (the strongest fired one wins).
CATEGORY_RANK: dict[str, int] = {"normal": 0, "osteopenia": 1, "osteoporosis": 2, "severe_osteoporosis": 3,
                                 # Judged by Z-score (before the menopause, under 50): never mixed with the above.
                                 "within_expected_range_for_age": 4, "below_expected_range_for_age": 5}

#: Severity order used to sort flags: strongest first.
SEVERITY_RANK: dict[str, int] = {name: i for i, name in enumerate(SEVERITIES)}

#: How sure the rule's evidence is (same letters as the published facts table).
CERTAINTIES: dict[str, str] = {
    "verified": "the number was seen in the cited source",
    "secondary": "seen only in a secondary source quoting it",
    "from_memory": "recalled from memory; confirm before relying on it",
    "common_practice": "a rule of thumb of the trade with no single published source",
}

# ---------------------------------------------------------------------------
# The feature vocabulary
# ---------------------------------------------------------------------------

NUMBER, BOOL, TEXT = "number", "bool", "text"


@dataclass(frozen=True)
class Feature:
    """One derived feature a rule condition may test."""

    name: str
    kind: str  # number | bool | text
    description: str
    unit: str | None = None
    choices: tuple[str, ...] = ()


_BASE_FEATURES: tuple[Feature, ...] = (
    Feature("age_years", NUMBER, "Age.", "years"),
    Feature("sex", TEXT, "Sex as recorded.", choices=("female", "male")),
    Feature("body_mass_kg", NUMBER, "Body mass.", "kg"),
    Feature("bmi", NUMBER, "Body mass index.", "kg/m^2"),
    Feature("lowest_t_score", NUMBER, "Lowest measured DXA T-score of lumbar spine, femoral neck and "
            "total hip; missing when no site was measured.", "SD"),
    Feature("t_score_measured", BOOL, "At least one DXA T-score was recorded."),
    Feature("low_trauma_fracture", BOOL, "Any low-trauma (fragility) fracture."),
    Feature("low_trauma_fracture_count", NUMBER, "Number of low-trauma fractures.", "fractures"),
    Feature("low_trauma_vertebral_fracture", BOOL, "Any low-trauma vertebral fracture."),
    Feature("low_trauma_hip_fracture", BOOL, "Any low-trauma (fragility) hip fracture."),
    Feature("hip_fracture", BOOL, "Any hip fracture, whatever the trauma."),
    Feature("months_since_last_fracture", NUMBER, "Months since the most recent fracture of any kind; "
            "missing when none.", "months"),
    Feature("falls_past_year", NUMBER, "Falls in the past 12 months.", "falls"),
    Feature("timed_up_and_go_s", NUMBER, "Timed Up and Go; missing when not tested.", "s"),
    Feature("tandem_stance_s", NUMBER, "Tandem stance held; missing when not tested.", "s"),
    Feature("chair_stand_30s", NUMBER, "30-second chair stand; missing when not tested.", "stands"),
    Feature("chair_stand_norm_low", NUMBER, "Lower bound of the normal range of the 30-s chair stand for "
            "the person's age band and sex (Rikli & Jones 1999); missing under 60 years.", "stands"),
    Feature("chair_stand_below_norm", BOOL, "30-s chair stand below the lower bound of the normal range "
            "for age and sex; false when not tested or under 60 years."),
    Feature("glucocorticoid_mg_per_day", NUMBER, "Oral glucocorticoid dose, prednisolone equivalent; "
            "0 when none.", "mg/day"),
    Feature("glucocorticoid_months", NUMBER, "Months of glucocorticoid use; 0 when none.", "months"),
    Feature("pain_score", NUMBER, "Current pain, 0-10.", "0-10"),
    # Version-2 record (PRODUCT.md "The patient record, version 2").
    Feature("density_reference", TEXT, "Which score judges bone density: 'z_score' for premenopausal women "
            "and anyone under 50 (ISCD official positions), 't_score' otherwise.", choices=("t_score", "z_score")),
    Feature("lowest_z_score", NUMBER, "Lowest measured DXA Z-score of lumbar spine, femoral neck and total "
            "hip; missing when no site was measured.", "SD"),
    Feature("z_score_measured", BOOL, "At least one DXA Z-score was recorded."),
    Feature("menopause", TEXT, "Menopausal status as recorded; 'unknown' when not recorded.",
            choices=(*MENOPAUSE_STATUSES, "unknown")),
    Feature("cancer_active", BOOL, "Cancer under treatment or not in remission."),
    Feature("bone_metastases", TEXT, "What is known of bone metastases; 'unknown' when no cancer record "
            "says otherwise.", choices=tuple(BONE_METASTASES)),
    Feature("cognition", TEXT, "Cognitive impairment as recorded; 'unknown' when not recorded.",
            choices=(*COGNITION_LEVELS, "unknown")),
    Feature("lives_alone", BOOL, "Lives alone (false when not recorded)."),
    Feature("has_carer", BOOL, "Has a carer who can help with exercise (false when not recorded)."),
    Feature("falls_risk", BOOL, "The screening's own falls-risk finding: true when a rule that marks falls "
            "risk fired. Worked out first; a rule that tests it is evaluated after those rules."),
)

#: Every feature a condition may name, by name.  ``has_condition:<code>`` exists for each condition code.
FEATURES: dict[str, Feature] = {f.name: f for f in _BASE_FEATURES}
for _code, _text in CONDITIONS.items():
    FEATURES[f"has_condition:{_code}"] = Feature(f"has_condition:{_code}", BOOL, f"Condition recorded: {_text}")
for _code, _text in MEDICATION_CLASSES.items():
    FEATURES[f"medication:{_code}"] = Feature(f"medication:{_code}", BOOL, f"Medicine listed (taken now or "
                                              f"before): {_text}")
    FEATURES[f"months_since_last_dose:{_code}"] = Feature(
        f"months_since_last_dose:{_code}", NUMBER, f"Months since the last dose of: {_text} The most recent of "
        "the listed entries; missing when not listed or not known.", "months")
for _code, _text in SURGERY_PROCEDURES.items():
    FEATURES[f"surgery:{_code}"] = Feature(f"surgery:{_code}", BOOL, f"Operation recorded: {_text}")
    FEATURES[f"months_since_surgery:{_code}"] = Feature(
        f"months_since_surgery:{_code}", NUMBER, f"Months since the most recent: {_text} Missing when none.", "months")
    FEATURES[f"surgery_impact_uncleared:{_code}"] = Feature(
        f"surgery_impact_uncleared:{_code}", BOOL, f"An operation of this kind whose surgical team has not "
        f"cleared impact loading: {_text}")

#: Features worked out from the screening's own first pass (see :data:`FEATURES` ``falls_risk``).
OUTCOME_FEATURES: tuple[str, ...] = ("falls_risk",)

#: Comparison operators and the feature kinds they apply to.
OPERATORS: dict[str, tuple[str, ...]] = {
    "<": (NUMBER,), "<=": (NUMBER,), ">": (NUMBER,), ">=": (NUMBER,),
    "==": (NUMBER, BOOL, TEXT), "!=": (NUMBER, BOOL, TEXT),
    "in": (NUMBER, TEXT),
    "missing": (NUMBER,), "present": (NUMBER,),
}

# ---------------------------------------------------------------------------
# Compiled conditions
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class Test:
    """A leaf test: ``feature op value``.  A missing number never passes a comparison."""

    feature: str
    op: str
    value: Any = None


@dataclass(frozen=True)
class AllOf:
    parts: tuple["Condition", ...]


@dataclass(frozen=True)
class AnyOf:
    parts: tuple["Condition", ...]


@dataclass(frozen=True)
class Not:
    part: "Condition"


Condition = Union[Test, AllOf, AnyOf, Not]


@dataclass(frozen=True)
class Effect:
    """What a fired rule does to the screening result."""

    max_impact_level: int | None = None
    avoid: tuple[str, ...] = ()
    balance_first: bool = False
    supervision: bool = False
    refer: bool = False
    falls_risk: bool = False
    category: str | None = None
    caution: str | None = None
    # Version-2 effects (docs/rules.md "Effects").
    max_pct_1rm: int | None = None          # the heaviest resistance load allowed [% 1RM]
    carer_led: bool = False                 # supervised or carer-led sessions, a short program, carer's pages
    hold_volume: bool = False               # no rise in volume until the clearance is recorded
    person_note: str | None = None          # said to the person (or carer) on the person's pages
    until_cleared: bool = False             # refer, the caps and hold_volume wait for a recorded clearance
    after_clearance_max_impact_level: int | None = None   # the cap that stays once cleared

    def once_cleared(self) -> "Effect":
        """This effect after a clinician has recorded the clearance: what waited for it is lifted."""
        if not self.until_cleared:
            return self
        from dataclasses import replace
        return replace(self, refer=False, hold_volume=False, max_pct_1rm=None,
                       max_impact_level=self.after_clearance_max_impact_level)


@dataclass(frozen=True)
class Rule:
    """One screening rule (see docs/rules.md)."""

    id: str
    family: str
    title: str
    severity: str
    when: Condition
    effect: Effect
    message: str
    source: str
    certainty: str
    file: str
    features: tuple[str, ...] = ()


@dataclass(frozen=True)
class RuleSet:
    """The validated rules, in evaluation order (files by name, rules as written)."""

    rules: tuple[Rule, ...]
    version: str
    files: tuple[str, ...] = field(default=())

    def __len__(self) -> int:
        return len(self.rules)

    def __iter__(self):
        return iter(self.rules)

    def by_id(self, rule_id: str) -> Rule:
        for rule in self.rules:
            if rule.id == rule_id:
                return rule
        raise KeyError(rule_id)

    @property
    def ids(self) -> tuple[str, ...]:
        return tuple(r.id for r in self.rules)


# ---------------------------------------------------------------------------
# Loading and validation
# ---------------------------------------------------------------------------

_YEAR = re.compile(r"\b(19|20)\d\d\b")
_RULE_ID = re.compile(r"^[a-z][a-z0-9_]*(\.[a-z0-9_]+)+$")
_FILE_KEYS = {"family", "title", "description", "rules"}
_RULE_KEYS = {"id", "title", "severity", "when", "effect", "message", "source", "certainty"}
_EFFECT_KEYS = {"max_impact_level", "avoid", "balance_first", "supervision", "refer", "falls_risk",
                "category", "caution", "max_pct_1rm", "carer_led", "hold_volume", "person_note", "until_cleared",
                "after_clearance_max_impact_level"}


class _Bad(Exception):
    """A problem found while validating one rule (turned into RuleFileError)."""


def load_rules(directory: str | Path | None = None) -> RuleSet:
    """Load and validate every ``*.toml`` rule file in ``directory``.

    Parameters
    ----------
    directory : str or Path, optional
        Folder of rule files; the shipped library when omitted.

    Returns
    -------
    RuleSet
        The rules in a fixed order: files sorted by name, rules in file order.

    Raises
    ------
    RuleFileError
        Naming the file, the rule id (when known) and what is wrong.
    """
    folder = Path(directory) if directory is not None else DEFAULT_RULES_DIR
    if not folder.is_dir():
        raise RuleFileError(str(folder), None, "is not a folder of rule files")
    paths = sorted(folder.glob("*.toml"))
    if not paths:
        raise RuleFileError(str(folder), None, "holds no *.toml rule files")
    digest = hashlib.sha256()
    rules: list[Rule] = []
    seen: dict[str, str] = {}
    for path in paths:
        raw = path.read_bytes()
        digest.update(path.name.encode() + b"\0" + raw + b"\0")
        for rule in _load_file(path, raw):
            if rule.id in seen:
                raise RuleFileError(path.name, rule.id, f"the rule id is already used in {seen[rule.id]}")
            seen[rule.id] = path.name
            rules.append(rule)
    return RuleSet(tuple(rules), f"{RULESET_RELEASE}+{digest.hexdigest()[:8]}", tuple(p.name for p in paths))


def _load_file(path: Path, raw: bytes) -> list[Rule]:
    name = path.name
    try:
        data = tomllib.loads(decode_text(raw))
    except UnicodeDecodeError:
        raise RuleFileError(name, None, "is not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise RuleFileError(name, None, f"is not valid TOML ({exc})") from None
    unknown = set(data) - _FILE_KEYS
    if unknown:
        raise RuleFileError(name, None, f"unknown top-level key(s) {sorted(unknown)}; allowed: {sorted(_FILE_KEYS)}")
    family = data.get("family")
    if not isinstance(family, str) or not family.strip():
        raise RuleFileError(name, None, "needs a 'family' name (text)")
    entries = data.get("rules")
    if not isinstance(entries, list) or not entries:
        raise RuleFileError(name, None, "needs at least one [[rules]] table")
    out = []
    for i, entry in enumerate(entries):
        rid = entry.get("id") if isinstance(entry, dict) else None
        label = rid if isinstance(rid, str) else f"#{i + 1} (no id)"
        try:
            out.append(_parse_rule(entry, family, name))
        except _Bad as exc:
            raise RuleFileError(name, label, str(exc)) from None
    return out


def _text(entry: dict, key: str) -> str:
    value = entry.get(key)
    if not isinstance(value, str) or not value.strip():
        raise _Bad(f"'{key}' must be non-empty text, not {value!r}")
    return value.strip()


def _parse_rule(entry: Any, family: str, file: str) -> Rule:
    if not isinstance(entry, dict):
        raise _Bad("a rule must be a table")
    unknown = set(entry) - _RULE_KEYS
    if unknown:
        raise _Bad(f"unknown key(s) {sorted(unknown)}; allowed: {sorted(_RULE_KEYS)}")
    rid = _text(entry, "id")
    if not _RULE_ID.match(rid):
        raise _Bad(f"id {rid!r} must be dotted lower-case words such as 'falls.tug'")
    severity = _text(entry, "severity")
    if severity not in SEVERITIES:
        raise _Bad(f"severity must be one of {', '.join(SEVERITIES)}, not {severity!r}")
    certainty = entry.get("certainty", "verified")
    if certainty not in CERTAINTIES:
        raise _Bad(f"certainty must be one of {', '.join(CERTAINTIES)}, not {certainty!r}")
    if "when" not in entry:
        raise _Bad("'when' (the condition) is required")
    used: list[str] = []
    when = _parse_condition(entry["when"], "when", used)
    effect = _parse_effect(entry.get("effect", {}))
    if effect.falls_risk and any(f in OUTCOME_FEATURES for f in used):
        raise _Bad("a rule that tests the screening's falls_risk cannot set falls_risk itself")
    if severity == "clear_first" and not effect.refer:
        raise _Bad("a clear_first rule must set effect.refer = true")
    source = _text(entry, "source")
    if not (_YEAR.search(source) or "common practice" in source.lower()):
        raise _Bad("'source' must be a citation with its year (authors, year, title or journal) "
                   f"or say 'common practice', not {source!r}")
    return Rule(id=rid, family=family, title=_text(entry, "title"), severity=severity, when=when,
                effect=effect, message=_text(entry, "message"), source=source,
                certainty=certainty, file=file, features=tuple(dict.fromkeys(used)))


def _parse_condition(node: Any, where: str, used: list[str]) -> Condition:
    if not isinstance(node, dict) or not node:
        raise _Bad(f"{where} must be a table with 'all', 'any', 'not' or 'feature', not {node!r}")
    keys = set(node)
    for combiner, cls in (("all", AllOf), ("any", AnyOf)):
        if combiner in keys:
            if keys != {combiner}:
                raise _Bad(f"{where}: '{combiner}' cannot be mixed with {sorted(keys - {combiner})}")
            parts = node[combiner]
            if not isinstance(parts, list) or not parts:
                raise _Bad(f"{where}.{combiner} must be a non-empty list of conditions")
            return cls(tuple(_parse_condition(p, f"{where}.{combiner}[{i}]", used) for i, p in enumerate(parts)))
    if "not" in keys:
        if keys != {"not"}:
            raise _Bad(f"{where}: 'not' cannot be mixed with {sorted(keys - {'not'})}")
        return Not(_parse_condition(node["not"], f"{where}.not", used))
    if keys - {"feature", "op", "value"}:
        raise _Bad(f"{where}: unknown key(s) {sorted(keys - {'feature', 'op', 'value'})}; a test has "
                   "feature, op and value")
    name = node.get("feature")
    if name not in FEATURES:
        raise _Bad(f"{where}: unknown feature {name!r}; see docs/rules.md for the feature vocabulary")
    feat = FEATURES[name]
    op = node.get("op")
    if op not in OPERATORS:
        raise _Bad(f"{where}: unknown op {op!r}; allowed: {', '.join(OPERATORS)}")
    if feat.kind not in OPERATORS[op]:
        raise _Bad(f"{where}: op {op!r} does not apply to the {feat.kind} feature {name!r}")
    value = node.get("value")
    if op in ("missing", "present"):
        if "value" in node:
            raise _Bad(f"{where}: op {op!r} takes no value")
    elif op == "in":
        if not isinstance(value, list) or not value:
            raise _Bad(f"{where}: op 'in' needs a non-empty list value")
        value = tuple(_check_value(feat, v, where) for v in value)
    else:
        value = _check_value(feat, value, where)
    used.append(name)
    return Test(name, op, value)


def _check_value(feat: Feature, value: Any, where: str) -> Any:
    if feat.kind == NUMBER:
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise _Bad(f"{where}: value for {feat.name!r} must be a number, not {value!r}")
        return float(value)
    if feat.kind == BOOL:
        if not isinstance(value, bool):
            raise _Bad(f"{where}: value for {feat.name!r} must be true or false, not {value!r}")
        return value
    if value not in feat.choices:
        raise _Bad(f"{where}: value for {feat.name!r} must be one of {', '.join(feat.choices)}, not {value!r}")
    return value


def _parse_effect(node: Any) -> Effect:
    if not isinstance(node, dict):
        raise _Bad(f"'effect' must be a table, not {node!r}")
    unknown = set(node) - _EFFECT_KEYS
    if unknown:
        raise _Bad(f"effect: unknown key(s) {sorted(unknown)}; allowed: {sorted(_EFFECT_KEYS)}")
    level = node.get("max_impact_level")
    if level is not None and (isinstance(level, bool) or not isinstance(level, int) or not 0 <= level <= 3):
        raise _Bad(f"effect.max_impact_level must be a whole number from 0 to 3, not {level!r}")
    after = node.get("after_clearance_max_impact_level")
    if after is not None and (isinstance(after, bool) or not isinstance(after, int) or not 0 <= after <= 3):
        raise _Bad(f"effect.after_clearance_max_impact_level must be a whole number from 0 to 3, not {after!r}")
    if after is not None and not node.get("until_cleared"):
        raise _Bad("effect.after_clearance_max_impact_level needs until_cleared = true")
    if after is not None and level is not None and after < level:
        raise _Bad("effect.after_clearance_max_impact_level cannot be below max_impact_level (a clearance lifts)")
    pct = node.get("max_pct_1rm")
    if pct is not None and (isinstance(pct, bool) or not isinstance(pct, int) or not 0 < pct <= 100):
        raise _Bad(f"effect.max_pct_1rm must be a whole number from 1 to 100, not {pct!r}")
    avoid = node.get("avoid", [])
    if not isinstance(avoid, list) or any(a not in MOVEMENT_PATTERNS for a in avoid):
        bad = [a for a in avoid if a not in MOVEMENT_PATTERNS] if isinstance(avoid, list) else avoid
        raise _Bad(f"effect.avoid must list movement-pattern codes from: {', '.join(MOVEMENT_PATTERNS)}; "
                   f"unknown: {bad!r}")
    flags = {}
    for key in ("balance_first", "supervision", "refer", "falls_risk", "carer_led", "hold_volume", "until_cleared"):
        val = node.get(key, False)
        if not isinstance(val, bool):
            raise _Bad(f"effect.{key} must be true or false, not {val!r}")
        flags[key] = val
    category = node.get("category")
    if category is not None and category not in CATEGORY_RANK:
        raise _Bad(f"effect.category must be one of {', '.join(CATEGORY_RANK)}, not {category!r}")
    texts = {}
    for key in ("caution", "person_note"):
        text = node.get(key)
        if text is not None and (not isinstance(text, str) or not text.strip()):
            raise _Bad(f"effect.{key} must be non-empty text, not {text!r}")
        texts[key] = text.strip() if text else None
    if flags["until_cleared"] and not (flags["refer"] or level is not None or pct is not None or flags["hold_volume"]):
        raise _Bad("effect.until_cleared needs something to wait: refer, max_impact_level, max_pct_1rm or hold_volume")
    return Effect(max_impact_level=level, avoid=tuple(sorted(set(avoid))), category=category,
                  max_pct_1rm=pct, after_clearance_max_impact_level=after, **texts, **flags)
