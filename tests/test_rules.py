"""The rule library: the shipped files validate, cover what they must, and a malformed file
fails with the file, the rule id and what is wrong."""

from __future__ import annotations

import shutil
import textwrap

import pytest

from prescribe.errors import RuleFileError
from prescribe.records import CONDITIONS, parse_record
from prescribe.screening.rules import DEFAULT_RULES_DIR, FEATURES, load_rules
from prescribe.screening import RULESET_VERSION, screen, screen_many

FAMILIES = {"bone_density", "fractures", "falls_balance", "medication", "conditions", "pain", "cancer", "surgery",
            "person"}


def test_shipped_library_loads_with_every_family():
    rules = load_rules()
    assert {r.family for r in rules} == FAMILIES
    assert sorted(rules.files) == sorted(f"{f}.toml" for f in FAMILIES)
    assert len(set(rules.ids)) == len(rules) >= 20
    assert rules.version == RULESET_VERSION


def test_every_rule_is_complete_and_sourced():
    for rule in load_rules():
        assert rule.title and rule.message and rule.source
        assert rule.severity in {"clear_first", "adapt", "note"}
        assert rule.features and all(f in FEATURES for f in rule.features)
        if rule.certainty == "common_practice":
            assert "common practice" in rule.source


def test_required_coverage_exists():
    ids = set(load_rules().ids)
    for rid in ("bone_density.osteopenia", "bone_density.osteoporosis", "bone_density.severe_osteoporosis",
                "bone_density.not_measured", "fractures.vertebral", "fractures.recent", "fractures.hip",
                "falls.one_fall", "falls.timed_up_and_go", "falls.tandem_stance", "falls.chair_stand",
                "medication.glucocorticoids", "pain.mild_to_moderate", "pain.severe"):
        assert rid in ids
    assert {f"conditions.{c}" for c in CONDITIONS} <= ids


GOOD = """
family = "trial"
[[rules]]
id = "trial.heavy"
title = "Heavy"
severity = "note"
when = { feature = "body_mass_kg", op = ">=", value = 120 }
effect = { max_impact_level = 1 }
message = "Heavy: lower impact."
source = "common practice"
"""


def write(tmp_path, text: str, name: str = "trial.toml"):
    (tmp_path / name).write_text(textwrap.dedent(text), encoding="utf-8")
    return tmp_path


def test_a_custom_rule_folder_drives_both_evaluators(tmp_path):
    rules = load_rules(write(tmp_path, GOOD))
    heavy = parse_record({"patient_id": "NTC-7", "age_years": 50, "sex": "male", "body_mass_kg": 120,
                          "height_cm": 180})
    light = heavy.model_copy(update={"body_mass_kg": 119.5, "patient_id": "NTC-8"})
    for result in (screen(heavy, rules), screen_many([heavy], rules)[0]):
        assert [f.rule for f in result.flags] == ["trial.heavy"] and result.max_impact_level == 1
        assert result.ruleset_version == rules.version != RULESET_VERSION
    assert screen(light, rules).flags == []


def test_version_changes_when_a_rule_file_changes(tmp_path):
    first = load_rules(write(tmp_path, GOOD)).version
    second = load_rules(write(tmp_path, GOOD.replace("120", "125"))).version
    assert first != second and first.split("+")[0] == second.split("+")[0]


def test_shipped_copy_loads_from_elsewhere(tmp_path):
    for path in DEFAULT_RULES_DIR.glob("*.toml"):
        shutil.copy(path, tmp_path / path.name)
    assert load_rules(tmp_path).version == RULESET_VERSION


# (text to swap into GOOD, or a whole file), expected rule id in the message, expected words
BAD_CASES = [
    ('op = ">="', 'op = "=>"', "trial.heavy", "unknown op '=>'"),
    ('feature = "body_mass_kg"', 'feature = "weight"', "trial.heavy", "unknown feature 'weight'"),
    ('severity = "note"', 'severity = "urgent"', "trial.heavy", "severity must be one of"),
    ('max_impact_level = 1', 'max_impact_level = 4', "trial.heavy", "max_impact_level must be a whole number from 0 to 3"),
    ('max_impact_level = 1', 'avoid = ["situps"]', "trial.heavy", "unknown: ['situps']"),
    ('source = "common practice"', 'source = "my notes"', "trial.heavy", "citation with its year"),
    ('source = "common practice"\n', '', "trial.heavy", "'source' must be non-empty text"),
    ('value = 120', 'value = "heavy"', "trial.heavy", "must be a number"),
    ('id = "trial.heavy"', 'id = "Heavy Rule"', "Heavy Rule", "dotted lower-case"),
    ('title = "Heavy"', 'title = "Heavy"\ncolour = "red"', "trial.heavy", "unknown key(s) ['colour']"),
    ('severity = "note"', 'severity = "clear_first"', "trial.heavy", "clear_first rule must set effect.refer"),
    ('when = { feature = "body_mass_kg", op = ">=", value = 120 }',
     'when = { all = [] }', "trial.heavy", "non-empty list"),
    ('when = { feature = "body_mass_kg", op = ">=", value = 120 }',
     'when = { feature = "sex", op = "<", value = "female" }', "trial.heavy", "does not apply"),
    ('when = { feature = "body_mass_kg", op = ">=", value = 120 }',
     'when = { feature = "timed_up_and_go_s", op = "missing", value = 1 }', "trial.heavy", "takes no value"),
    ('when = { feature = "body_mass_kg", op = ">=", value = 120 }',
     'when = { feature = "has_condition:gout", op = "==", value = true }', "trial.heavy", "unknown feature"),
    ('effect = { max_impact_level = 1 }', 'effect = { category = "fragile" }', "trial.heavy", "effect.category"),
]


@pytest.mark.parametrize("old, new, rule_id, words", BAD_CASES)
def test_malformed_rule_names_file_rule_and_problem(tmp_path, old, new, rule_id, words):
    assert old in GOOD
    write(tmp_path, GOOD.replace(old, new, 1))
    with pytest.raises(RuleFileError) as caught:
        load_rules(tmp_path)
    err = caught.value
    assert err.file == "trial.toml" and err.rule_id == rule_id
    assert words in str(err) and "trial.toml" in str(err)


def test_invalid_toml_names_the_file(tmp_path):
    write(tmp_path, GOOD.replace('title = "Heavy"', 'title = "Heavy'))
    with pytest.raises(RuleFileError, match=r"trial\.toml: is not valid TOML"):
        load_rules(tmp_path)


def test_missing_when_and_missing_family(tmp_path):
    write(tmp_path, GOOD.replace('when = { feature = "body_mass_kg", op = ">=", value = 120 }\n', ""))
    with pytest.raises(RuleFileError, match="'when'.*is required"):
        load_rules(tmp_path)
    write(tmp_path, GOOD.replace('family = "trial"\n', ""))
    with pytest.raises(RuleFileError, match="needs a 'family'"):
        load_rules(tmp_path)


def test_duplicate_rule_ids_across_files(tmp_path):
    write(tmp_path, GOOD, "a.toml")
    write(tmp_path, GOOD, "b.toml")
    with pytest.raises(RuleFileError) as caught:
        load_rules(tmp_path)
    assert caught.value.file == "b.toml" and caught.value.rule_id == "trial.heavy"
    assert "already used in a.toml" in str(caught.value)


def test_empty_or_missing_folder(tmp_path):
    with pytest.raises(RuleFileError, match="no \\*.toml rule files"):
        load_rules(tmp_path)
    with pytest.raises(RuleFileError, match="not a folder"):
        load_rules(tmp_path / "nowhere")


def test_rule_without_an_id_is_named_by_position(tmp_path):
    write(tmp_path, GOOD.replace('id = "trial.heavy"\n', ""))
    with pytest.raises(RuleFileError) as caught:
        load_rules(tmp_path)
    assert caught.value.rule_id == "#1 (no id)"


def test_every_falls_risk_rule_puts_balance_first_caps_impact_and_supervises():
    # CDC STEADI (2017, 2019) screening plus Brooke-Wavell et al. 2022 (Br J Sports Med 56:837-846):
    # people at risk of falling train balance first, with impact limited and supervised at first.
    falls = [r for r in load_rules() if r.effect.falls_risk]
    assert len(falls) >= 5
    for rule in falls:
        assert rule.effect.balance_first and rule.effect.supervision, rule.id
        assert rule.effect.max_impact_level is not None and rule.effect.max_impact_level <= 2, rule.id
