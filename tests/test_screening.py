"""Screening thresholds at and around their published boundaries, each check beside its source.

Every check is run through both evaluators (per record and vectorised) by the ``both``
fixture, so a threshold cannot hold in one and drift in the other.
"""

from __future__ import annotations

import pytest

from prescribe.cautions import STANDARD_CAUTIONS
from prescribe.records import CONDITIONS, MOVEMENT_PATTERNS, parse_record
from prescribe.screening import (RULESET_VERSION, chair_stand_norm_low, screen, screen_many)

SPINE = {"loaded_spinal_flexion", "loaded_spinal_twisting"}


def person(**fields):
    """An invented 70-year-old woman with normal bone density and nothing else of note."""
    data = {"patient_id": "NTC-9000", "age_years": 70, "sex": "female", "body_mass_kg": 62.0,
            "height_cm": 160.0, "t_scores": {"lumbar_spine": 0.0}}
    data.update(fields)
    return parse_record(data)


@pytest.fixture(params=["single", "batch"])
def run(request):
    """Screen with the per-record evaluator or the vectorised one (same answers expected)."""
    if request.param == "single":
        return screen
    return lambda record: screen_many([record])[0]


def rules_of(result) -> list[str]:
    return [f.rule for f in result.flags]


# ---------------------------------------------------------------------------
# WHO T-score categories. Source: WHO Study Group 1994, Assessment of fracture risk and its
# application to screening for postmenopausal osteoporosis, WHO Technical Report Series 843:
# normal >= -1; osteopenia between -1 and -2.5; osteoporosis <= -2.5; severe (established)
# osteoporosis = <= -2.5 plus a fragility fracture (the severe category: from memory).
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("t, category", [
    (0.5, "normal"), (-1.0, "normal"), (-1.1, "osteopenia"), (-2.4, "osteopenia"),
    (-2.5, "osteoporosis"), (-2.6, "osteoporosis"), (-5.0, "osteoporosis"),
])
def test_who_category_at_and_around_its_boundaries(run, t, category):
    result = run(person(t_scores={"femoral_neck": t}))
    assert result.bone_density_category == category
    assert result.lowest_t_score == t


def test_lowest_site_decides(run):
    # WHO 1994 as applied in practice: the lowest measured site decides (common practice for DXA reports).
    result = run(person(t_scores={"lumbar_spine": -0.4, "femoral_neck": -1.8, "total_hip": -2.6}))
    assert result.bone_density_category == "osteoporosis"
    assert (result.lowest_t_score, result.lowest_t_score_site) == (-2.6, "total_hip")


def test_normal_and_osteopenia_allow_high_impact(run):
    # Brooke-Wavell et al. 2022 (Br J Sports Med 56:837-846): without fractures or other limits,
    # impact and progressive resistance training are encouraged; cap 3 with no other flags.
    normal = run(person(t_scores={"lumbar_spine": -0.2}))
    assert (normal.max_impact_level, normal.flags, normal.avoid, normal.refer) == (3, [], [], False)
    low = run(person(t_scores={"lumbar_spine": -1.7}))
    assert low.max_impact_level == 3 and rules_of(low) == ["bone_density.osteopenia"]


def test_osteoporosis_without_fracture_allows_moderate_impact_with_spine_care(run):
    # Brooke-Wavell et al. 2022: moderate impact for osteoporosis; Giangregorio et al. 2014 (Too Fit
    # To Fracture, Osteoporos Int 25:821-835) and Beck et al. 2017 (ESSA, J Sci Med Sport 20:438-445):
    # no loaded spinal flexion or twisting.
    result = run(person(t_scores={"lumbar_spine": -2.5}))
    assert result.max_impact_level == 2
    assert SPINE <= set(result.avoid)
    assert not result.refer


def test_fragility_fracture_with_osteoporosis_is_severe(run):
    # WHO 1994 (severe = osteoporosis plus fragility fracture; from memory); Brooke-Wavell et al. 2022:
    # after fragility fractures, impact no higher than brisk walking (level 1).
    result = run(person(t_scores={"total_hip": -2.5},
                        fractures=[{"site": "wrist", "months_ago": 40, "low_trauma": True}]))
    assert result.bone_density_category == "severe_osteoporosis"
    assert result.max_impact_level == 1
    # Supervised progression at first: common practice (no published source found for it).
    assert result.supervision


def test_high_trauma_fracture_does_not_make_osteoporosis_severe(run):
    # WHO 1994: only a fragility (low-trauma) fracture counts toward the severe category.
    result = run(person(t_scores={"total_hip": -2.7},
                        fractures=[{"site": "wrist", "months_ago": 40, "low_trauma": False}]))
    assert result.bone_density_category == "osteoporosis"
    assert result.max_impact_level == 2


def test_no_t_score_is_unknown_treated_conservatively_and_asks_for_dxa(run):
    # Common practice: unknown bone density is treated as osteoporosis until measured.
    result = run(person(t_scores={}))
    assert result.bone_density_category == "unknown"
    assert result.lowest_t_score is None and result.lowest_t_score_site is None
    assert "bone_density.not_measured" in rules_of(result)
    assert "DXA" in result.flags[0].message
    assert result.max_impact_level == 2 and SPINE <= set(result.avoid)


# ---------------------------------------------------------------------------
# Fractures
# ---------------------------------------------------------------------------

def test_low_trauma_vertebral_fracture_is_spine_sparing_and_brisk_walking_at_most(run):
    # Brooke-Wavell et al. 2022, "Strong, Steady and Straight" (Br J Sports Med 56:837-846): after
    # vertebral fracture, impact no more than brisk walking; avoid marked or loaded spinal flexion.
    result = run(person(t_scores={"lumbar_spine": -1.5},
                        fractures=[{"site": "vertebra", "months_ago": 24, "low_trauma": True}]))
    assert "fractures.vertebral" in rules_of(result)
    assert result.max_impact_level == 1
    assert SPINE | {"end_range_spinal_flexion"} <= set(result.avoid)
    # The vertebral-fracture rule itself avoids loaded twisting as well as flexion (Giangregorio et
    # al. 2014, Too Fit To Fracture, Osteoporos Int 25:821-835), not only through other rules.
    flag = next(f for f in result.flags if f.rule == "fractures.vertebral")
    assert SPINE <= set(flag.avoid)


def test_high_trauma_vertebral_fracture_is_not_a_fragility_fracture(run):
    # Brooke-Wavell et al. 2022 apply the limit to osteoporotic (fragility) vertebral fractures.
    result = run(person(fractures=[{"site": "vertebra", "months_ago": 24, "low_trauma": False}]))
    assert "fractures.vertebral" not in rules_of(result)
    assert result.max_impact_level == 3


# Siris et al. 2014, The clinical diagnosis of osteoporosis (National Bone Health Alliance position
# statement), Osteoporos Int 25:1439-1443, from memory: a low-trauma hip fracture, or a vertebral
# fracture, diagnoses osteoporosis whatever the T-score (or without one).
@pytest.mark.parametrize("site, t_scores", [
    ("vertebra", {"lumbar_spine": -1.8}), ("vertebra", {"lumbar_spine": 0.5}), ("vertebra", {}),
    ("hip", {"femoral_neck": -1.2}), ("hip", {}), ("vertebra", {"total_hip": -2.4}),
])
def test_fragility_hip_or_vertebral_fracture_is_osteoporosis_whatever_the_t_score(run, site, t_scores):
    result = run(person(t_scores=t_scores, fractures=[{"site": site, "months_ago": 30, "low_trauma": True}]))
    assert result.bone_density_category == "osteoporosis"
    assert "bone_density.clinical_osteoporosis" in rules_of(result)
    assert "bone_density.osteopenia" not in rules_of(result)
    # Brooke-Wavell et al. 2022: after vertebral fracture impact no more than brisk walking;
    # Giangregorio et al. 2014: no loaded flexion or twisting.
    assert result.max_impact_level <= 1 and SPINE <= set(result.avoid)


@pytest.mark.parametrize("fracture, t, category", [
    ({"site": "vertebra", "months_ago": 30, "low_trauma": True}, -2.5, "severe_osteoporosis"),  # WHO 1994
    ({"site": "vertebra", "months_ago": 30, "low_trauma": False}, -1.8, "osteopenia"),  # high trauma
    ({"site": "hip", "months_ago": 30, "low_trauma": False}, -1.8, "osteopenia"),
    ({"site": "wrist", "months_ago": 30, "low_trauma": True}, -1.8, "osteopenia"),  # not hip or spine
])
def test_clinical_osteoporosis_boundaries(run, fracture, t, category):
    # Siris et al. 2014 (from memory): only low-trauma hip and vertebral fractures diagnose osteoporosis
    # by themselves; with T <= -2.5 the WHO severe category (WHO 1994, from memory) still applies.
    result = run(person(t_scores={"lumbar_spine": t}, fractures=[fracture]))
    assert result.bone_density_category == category
    assert "bone_density.clinical_osteoporosis" not in rules_of(result)


@pytest.mark.parametrize("months, fires", [(0, True), (2.9, True), (3.0, False), (3.1, False)])
def test_fracture_in_last_three_months_needs_clearance(run, months, fires):
    # Common practice: a fracture under 3 months old is cleared by the treating clinician first.
    result = run(person(fractures=[{"site": "wrist", "months_ago": months, "low_trauma": False}]))
    assert ("fractures.recent" in rules_of(result)) is fires
    assert result.refer is fires
    if fires:
        assert result.max_impact_level == 0
        assert result.flags[0].severity == "clear_first"


def test_hip_fracture_needs_clearance_and_referral_at_any_time(run):
    # Common practice (clearance after hip fracture); impact cap after fracture from Brooke-Wavell 2022.
    result = run(person(fractures=[{"site": "hip", "months_ago": 60, "low_trauma": False}]))
    assert "fractures.hip" in rules_of(result)
    assert result.refer and result.max_impact_level == 1 and result.balance_first


def test_two_fragility_fractures_cap_impact_at_brisk_walking(run):
    # Brooke-Wavell et al. 2022: people with multiple fractures, impact no higher than brisk walking.
    one = run(person(fractures=[{"site": "wrist", "months_ago": 50, "low_trauma": True}]))
    two = run(person(fractures=[{"site": "wrist", "months_ago": 50, "low_trauma": True},
                                {"site": "rib", "months_ago": 20, "low_trauma": True}]))
    assert "fractures.multiple" not in rules_of(one) and one.max_impact_level == 2
    assert "fractures.multiple" in rules_of(two) and two.max_impact_level == 1


# ---------------------------------------------------------------------------
# Falls and balance
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("tug, fires", [(11.9, False), (12.0, True), (12.1, True), (30.0, True)])
def test_timed_up_and_go_cut_off(run, tug, fires):
    # CDC STEADI Timed Up and Go form: "an older adult who takes >= 12 seconds ... is at risk for falling".
    result = run(person(timed_up_and_go_s=tug))
    assert ("falls.timed_up_and_go" in rules_of(result)) is fires
    assert result.falls_risk is fires
    if fires:
        assert result.balance_first and result.supervision and result.max_impact_level <= 1


@pytest.mark.parametrize("held, fires", [(0.0, True), (9.9, True), (10.0, False)])
def test_tandem_stance_under_ten_seconds(run, held, fires):
    # CDC STEADI 4-Stage Balance Test: unable to hold the tandem stance 10 s = increased fall risk.
    result = run(person(tandem_stance_s=held))
    assert ("falls.tandem_stance" in rules_of(result)) is fires
    assert result.falls_risk is fires


@pytest.mark.parametrize("falls, rule, refer", [(0, None, False), (1, "falls.one_fall", False),
                                                (2, "falls.recurrent", True), (5, "falls.recurrent", True)])
def test_falls_in_past_year(run, falls, rule, refer):
    # CDC STEADI algorithm (from memory): any fall in the past year screens positive; two or more
    # falls = high risk, refer for a multifactorial falls assessment.
    result = run(person(falls_past_year=falls))
    fired = [r for r in rules_of(result) if r.startswith("falls.")]
    assert fired == ([rule] if rule else [])
    assert result.falls_risk is (falls > 0)
    assert result.refer is refer


# Rikli & Jones 1999, J Aging Phys Act 7:162-181: lower bound of the normal 30-s chair stand range by
# age band (seen in secondary sources; the men 65-69 bound is 12 on the CDC STEADI form and a
# secondary copy of the table, 13 on another page; the rule uses 12, see docs/rules.md).
RIKLI_JONES_LOWER = {
    "female": {60: 12, 65: 11, 70: 10, 75: 10, 80: 9, 85: 8, 90: 4},
    "male": {60: 14, 65: 12, 70: 12, 75: 11, 80: 10, 85: 8, 90: 7},
}


@pytest.mark.parametrize("sex", ["female", "male"])
@pytest.mark.parametrize("band", [60, 65, 70, 75, 80, 85, 90])
def test_chair_stand_norm_table(sex, band):
    low = RIKLI_JONES_LOWER[sex][band]
    for age in (band, band + 4):
        assert chair_stand_norm_low(age, sex) == low


@pytest.mark.parametrize("sex, age, stands, fires", [
    ("female", 62, 11, True), ("female", 62, 12, False),
    ("female", 72, 9, True), ("female", 72, 10, False),
    ("male", 67, 11, True), ("male", 67, 12, False),
    ("male", 82, 9, True), ("male", 82, 10, False),
    ("female", 94, 3, True), ("female", 94, 4, False),
    ("female", 101, 3, True),   # above 94: the 90-94 band is used (common practice)
    ("female", 59, 0, False),   # under 60: no published norm, not judged
])
def test_chair_stand_below_norm_for_age_and_sex(run, sex, age, stands, fires):
    # Rikli & Jones 1999 normal ranges; CDC STEADI 30-Second Chair Stand: below average = fall risk.
    result = run(person(sex=sex, age_years=age, chair_stand_30s=stands))
    assert ("falls.chair_stand" in rules_of(result)) is fires
    assert result.falls_risk is fires
    # Below the norm (frail): low impact at most and supervised work (common practice).
    assert (result.max_impact_level <= 1) is fires
    assert result.supervision is fires


def test_norm_is_absent_under_sixty():
    assert chair_stand_norm_low(59, "male") is None


# ---------------------------------------------------------------------------
# Glucocorticoids. Kanis et al. 2011, Guidance for the adjustment of FRAX according to the dose of
# glucocorticoids, Osteoporos Int 22:809-816: 5 mg/day prednisolone or more for 3 months or more
# raises fracture risk; high doses raise the FRAX estimate further. That paper is about risk scores,
# not exercise: the moderate-impact cap and the spine-sparing patterns are common practice
# (Giangregorio et al. 2014, Osteoporos Int 25:821-835: no loaded flexion or twisting where vertebral
# fracture risk is high).
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("mg, months, fires", [
    (5.0, 3.0, True), (4.9, 3.0, False), (5.0, 2.9, False), (20.0, 12.0, True), (0.0, 100.0, False),
])
def test_glucocorticoid_threshold(run, mg, months, fires):
    result = run(person(glucocorticoids={"mg_per_day": mg, "months": months}))
    assert ("medication.glucocorticoids" in rules_of(result)) is fires
    assert (result.max_impact_level == 2) is fires
    # High vertebral fracture risk: loaded twisting is avoided as well as loaded flexion (common practice,
    # after Giangregorio et al. 2014).
    assert (SPINE <= set(result.avoid)) is fires


@pytest.mark.parametrize("mg, fires", [(7.4, False), (7.5, True), (7.6, True)])
def test_glucocorticoid_high_dose_starts_at_7_5_mg(run, mg, fires):
    # 7.5 mg/day prednisolone is already high dose (>= 7.5: the usual clinical threshold, Buckley et al.
    # 2017, Arthritis Rheumatol 69:1521-1537, from memory; Kanis et al. 2011 raise FRAX for high doses).
    result = run(person(glucocorticoids={"mg_per_day": mg, "months": 6.0}))
    assert ("medication.glucocorticoids_high_dose" in rules_of(result)) is fires
    flag = [f for f in result.flags if f.rule == "medication.glucocorticoids_high_dose"]
    if fires:
        assert flag[0].severity == "adapt" and SPINE <= set(flag[0].avoid)


@pytest.mark.parametrize("months, fires", [(2.9, False), (3.0, True)])
def test_glucocorticoid_high_dose_needs_three_months(run, months, fires):
    # Kanis et al. 2011: exposure for 3 months or more.
    result = run(person(glucocorticoids={"mg_per_day": 10.0, "months": months}))
    assert ("medication.glucocorticoids_high_dose" in rules_of(result)) is fires


# ---------------------------------------------------------------------------
# Pain. Thomee 1997 (Phys Ther 77:1690-1703) pain-monitoring model, as quoted secondarily:
# up to 5/10 acceptable, above 5 not.
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("pain, rule", [(0, None), (1, "pain.mild_to_moderate"), (5, "pain.mild_to_moderate"),
                                        (6, "pain.severe"), (10, "pain.severe")])
def test_pain_bands(run, pain, rule):
    result = run(person(pain_score=pain))
    fired = [r for r in rules_of(result) if r.startswith("pain.")]
    assert fired == ([rule] if rule else [])
    assert result.refer is (rule == "pain.severe")
    if rule == "pain.severe":
        # No impact until the pain is assessed: common practice (Thomee 1997 only says above 5/10 is
        # not acceptable during exercise).
        assert result.max_impact_level == 0


# ---------------------------------------------------------------------------
# Conditions (records.CONDITIONS). Effects are clinical judgment ("common practice") except the
# kyphosis spine advice (Giangregorio et al. 2014, Too Fit To Fracture).
# ---------------------------------------------------------------------------

CONDITION_EFFECTS = {
    # code: (refer, max level, patterns that must be avoided, falls risk)
    "uncontrolled_hypertension": (True, 1, {"breath_holding_strain"}, False),
    "recent_surgery": (True, 0, set(), False),
    "knee_osteoarthritis": (False, 2, {"deep_knee_flexion"}, False),
    "hip_osteoarthritis": (False, 2, {"deep_hip_flexion"}, False),
    # Hip replacement: flexion past 90 degrees, adduction and inward rotation are the usual precautions
    # after a posterior approach (common practice; they differ by approach: confirm with the surgeon).
    "hip_replacement": (False, 2, {"deep_hip_flexion", "hip_adduction_rotation"}, False),
    "pelvic_floor_dysfunction": (False, 1, {"breath_holding_strain"}, False),
    "peripheral_neuropathy": (False, 1, {"high_impact_landing"}, True),
    "thoracic_kyphosis": (False, 2, {"loaded_spinal_flexion", "end_range_spinal_flexion"}, False),
}


def test_every_condition_code_has_a_rule():
    assert set(CONDITION_EFFECTS) == set(CONDITIONS)


@pytest.mark.parametrize("code", sorted(CONDITIONS))
def test_condition_effect(run, code):
    refer, level, avoid, falls = CONDITION_EFFECTS[code]
    result = run(person(conditions=[code]))
    assert rules_of(result) == [f"conditions.{code}"]
    assert (result.refer, result.max_impact_level, result.falls_risk) == (refer, level, falls)
    assert avoid <= set(result.avoid)
    assert set(result.avoid) <= set(MOVEMENT_PATTERNS)


def test_the_pelvic_floor_cap_says_what_lifts_it(run):
    # Impact waits for pelvic floor assessment and training (common practice): the flag and the
    # caution say who assesses, and how the clinician records that the cap is lifted.
    result = run(person(conditions=["pelvic_floor_dysfunction"]))
    (flag,) = result.flags
    caution = next(c for c in result.cautions if "elvic floor" in c)
    for text in (flag.message, caution):
        assert "pelvic health physiotherapist" in text and "assess" in text and "train" in text
        assert "removing" in text and "pelvic_floor_dysfunction" in text and "clearance" in text
    # ... and recording it lifts the cap: without the condition, the cap is the bone's alone.
    assert run(person(conditions=[])).max_impact_level > result.max_impact_level


# ---------------------------------------------------------------------------
# How fired rules combine
# ---------------------------------------------------------------------------

def test_combination_takes_lowest_cap_union_of_patterns_and_orders_flags_by_severity(run):
    result = run(person(t_scores={"lumbar_spine": -2.8}, pain_score=7, conditions=["knee_osteoarthritis"],
                        timed_up_and_go_s=13.0))
    assert result.max_impact_level == 0                         # pain above 5/10 caps at 0
    assert result.avoid == sorted(set(result.avoid))
    assert {"deep_knee_flexion", *SPINE} <= set(result.avoid)
    order = {"clear_first": 0, "adapt": 1, "note": 2}
    assert [order[f.severity] for f in result.flags] == sorted(order[f.severity] for f in result.flags)
    assert result.flags[0].rule == "pain.severe"
    assert result.refer and result.falls_risk


def test_every_result_carries_the_standard_cautions_first(run):
    for record in (person(), person(pain_score=8), person(t_scores={})):
        result = run(record)
        assert result.cautions[:len(STANDARD_CAUTIONS)] == list(STANDARD_CAUTIONS)


def test_rule_specific_cautions_follow_the_standard_ones(run):
    result = run(person(fractures=[{"site": "vertebra", "months_ago": 12, "low_trauma": True}]))
    extra = result.cautions[len(STANDARD_CAUTIONS):]
    assert any("vertebral fracture" in c for c in extra)


def test_every_flag_names_its_source(run):
    result = run(person(t_scores={"lumbar_spine": -3.0}, falls_past_year=3, pain_score=3,
                        conditions=list(CONDITIONS), glucocorticoids={"mg_per_day": 10, "months": 10},
                        fractures=[{"site": "hip", "months_ago": 1, "low_trauma": True}]))
    assert len(result.flags) >= 12
    for flag in result.flags:
        assert flag.source and (any(ch.isdigit() for ch in flag.source) or "common practice" in flag.source)


def test_ruleset_version_is_stamped():
    assert RULESET_VERSION.startswith("2026.12-1+") and len(RULESET_VERSION.split("+")[1]) == 8
    assert screen(person()).ruleset_version == RULESET_VERSION


def test_many_people_keep_their_order():
    people = [person(patient_id=f"NTC-{i:04d}", pain_score=i % 11) for i in range(30)]
    assert [r.patient_id for r in screen_many(people)] == [p.patient_id for p in people]
    assert screen_many([]) == []
