"""Screening rules as data: loading, validating and the feature vocabulary.

Each rule family lives in one TOML file under ``prescribe/data/rules/``.  A rule
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
from ..records import CONDITIONS, MOVEMENT_PATTERNS, SEVERITIES

#: Where the shipped rule files live.
DEFAULT_RULES_DIR = Path(__file__).parent.parent / "data" / "rules"

#: The release of the rule library; the hash of the files is appended at load time.
RULESET_RELEASE = "2026.12-1"

#: Density categories a rule may set, weakest first (the strongest fired one wins).
CATEGORY_RANK: dict[str, int] = {"normal": 0, "osteopenia": 1, "osteoporosis": 2, "severe_osteoporosis": 3}

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
)

#: Every feature a condition may name, by name.  ``has_condition:<code>`` exists for each condition code.
FEATURES: dict[str, Feature] = {f.name: f for f in _BASE_FEATURES}
for _code, _text in CONDITIONS.items():
    FEATURES[f"has_condition:{_code}"] = Feature(f"has_condition:{_code}", BOOL, f"Condition recorded: {_text}")

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
                "category", "caution"}


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
    avoid = node.get("avoid", [])
    if not isinstance(avoid, list) or any(a not in MOVEMENT_PATTERNS for a in avoid):
        bad = [a for a in avoid if a not in MOVEMENT_PATTERNS] if isinstance(avoid, list) else avoid
        raise _Bad(f"effect.avoid must list movement-pattern codes from: {', '.join(MOVEMENT_PATTERNS)}; "
                   f"unknown: {bad!r}")
    flags = {}
    for key in ("balance_first", "supervision", "refer", "falls_risk"):
        val = node.get(key, False)
        if not isinstance(val, bool):
            raise _Bad(f"effect.{key} must be true or false, not {val!r}")
        flags[key] = val
    category = node.get("category")
    if category is not None and category not in CATEGORY_RANK:
        raise _Bad(f"effect.category must be one of {', '.join(CATEGORY_RANK)}, not {category!r}")
    caution = node.get("caution")
    if caution is not None and (not isinstance(caution, str) or not caution.strip()):
        raise _Bad(f"effect.caution must be non-empty text, not {caution!r}")
    return Effect(max_impact_level=level, avoid=tuple(sorted(set(avoid))), category=category,
                  caution=caution.strip() if caution else None, **flags)
