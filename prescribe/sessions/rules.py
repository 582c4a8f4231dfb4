"""The next-step rules, read from ``prescribe/data/rules/sessions.toml`` (beside the
screening rules, ``data/rules/screening/``).

Each rule is data: an id, the decision it asks for, a test ``kind`` with parameters,
a message and a source.  The kinds (what the engine can test):

``symptom_any``            any of ``codes`` among the symptoms of the sessions in scope
``fell``                   a fall since the last session (``fell_since_last``)
``pain_during_above``      pain during the latest session above ``above``
``pain_next_morning_above`` the latest next-morning pain (last two sessions) above ``above``
``pain_not_settled``       that next-morning pain above ``safe_max`` and above the intake pain
``pain_rising``            mean pain during, last week with sessions vs the one before, up by ``by`` or more
``session_rpe_above``      session effort (CR10) of the latest session above ``above``
``adherence_below``        last week's sessions done / planned below ``fraction``
``break_days_at_least``    days since the last session (or the start) at least ``days``
``no_sessions``            nothing logged yet
``reps_beyond_target``     a lift done with ``min_extra_reps`` or more beyond its target at the same load in
                           ``sessions_running`` sessions running, effort at most ``max_rpe``
``always``                 the default
``paused``                 the program is paused (until a clinician records the resumption: ``prescribe resume``)
``weak_window``            next week is held by prescribe.stimulus (weeks 3-5 after a new or larger stimulus of
                          either kind, or labelled a window): turns progress into hold
"""

from __future__ import annotations

import hashlib
import tomllib
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from typing import Any

from ..errors import RuleFileError

DECISIONS = ("progress", "hold", "step_back", "stop_and_refer")
#: Strength of each decision: the strongest wins.
RANK = {d: i for i, d in enumerate(DECISIONS)}
KINDS = ("symptom_any", "fell", "pain_during_above", "pain_next_morning_above", "pain_not_settled", "pain_rising",
         "session_rpe_above", "adherence_below", "break_days_at_least", "no_sessions", "reps_beyond_target",
         "always", "weak_window", "paused")
RULES_FILE = "rules/sessions.toml"


@dataclass(frozen=True)
class SessionRule:
    id: str
    title: str
    decision: str
    kind: str
    message: str
    source: str
    params: dict[str, Any] = field(default_factory=dict)

    def __hash__(self) -> int:
        return hash(self.id)


@dataclass(frozen=True)
class SessionRuleSet:
    version: str
    rules: tuple[SessionRule, ...]

    def by_kind(self, kind: str) -> list[SessionRule]:
        return [r for r in self.rules if r.kind == kind]

    def get(self, rule_id: str) -> SessionRule:
        for r in self.rules:
            if r.id == rule_id:
                return r
        raise KeyError(rule_id)


def parse_rules(text: str, where: str = RULES_FILE) -> SessionRuleSet:
    """Check and read a rule file; :class:`RuleFileError` names the rule and the problem."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise RuleFileError(where, None, f"not valid TOML ({exc})") from None
    rules, seen = [], set()
    for raw in data.get("rules", []):
        rid = raw.get("id")
        if not isinstance(rid, str) or not rid:
            raise RuleFileError(where, None, "a rule without an id")
        if rid in seen:
            raise RuleFileError(where, rid, "the id is used twice")
        seen.add(rid)
        for key in ("title", "decision", "kind", "message", "source"):
            if not isinstance(raw.get(key), str) or not raw[key].strip():
                raise RuleFileError(where, rid, f"{key} is missing (every rule needs a {key})")
        if raw["decision"] not in DECISIONS:
            raise RuleFileError(where, rid, f"decision {raw['decision']!r} is not one of {', '.join(DECISIONS)}")
        if raw["kind"] not in KINDS:
            raise RuleFileError(where, rid, f"kind {raw['kind']!r} is not one of {', '.join(KINDS)}")
        params = {k: v for k, v in raw.items() if k not in ("id", "title", "decision", "kind", "message", "source")}
        rules.append(SessionRule(rid, raw["title"], raw["decision"], raw["kind"], raw["message"].strip(),
                                 raw["source"].strip(), params))
    digest = hashlib.sha256(text.encode("utf-8")).hexdigest()[:8]
    return SessionRuleSet(f"{data.get('version', '0')}+{digest}", tuple(rules))


@lru_cache(maxsize=1)
def default_rules() -> SessionRuleSet:
    """The packaged rule set."""
    text = resources.files("prescribe.data").joinpath(RULES_FILE).read_text(encoding="utf-8")
    return parse_rules(text)
