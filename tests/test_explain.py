"""The loads explained: contract fields, published anchors and the pictures as data."""

from __future__ import annotations

import numpy as np
import pytest

from prescribe.catalogue import default_catalogue
from prescribe.errors import InputError
from prescribe.loading.explain import (DEFAULT_BODY_MASS_KG, DEFAULT_T_SCORE, FEMUR_SHAFT,
                                       HIP_MEASURED_MAX_BW, explain_exercise, force_bars, stress_strain_picture)

G = 9.80665
CONTRACT = {"exercise_id", "body_mass_kg", "peak_grf_bw", "peak_grf_n", "joint_contact_force_bw",
            "joint_friction_n", "bone_stress_mpa", "strength_mpa", "sources"}

# Bergmann et al. 2001, J Biomech 34:859-871: walking at about 4 km/h 238% BW; upstairs
# 251% BW (status V).  The source reports means of four patients; their spread between
# patients was of the order of 10-20% (from memory), so the checks allow 10%.
BERGMANN_2001_WALKING_BW = 2.38
BERGMANN_2001_UPSTAIRS_BW = 2.51
# Bergmann, Graichen & Rohlmann 1993, J Biomech 26:969-990: jogging about 550% BW;
# stumbling 720% and 870% BW (status V).
BERGMANN_1993_JOGGING_BW = 5.5


@pytest.mark.parametrize("ex", default_catalogue().all(), ids=lambda e: e.exercise_id)
def test_every_exercise_has_the_contract_fields_and_hip_above_ground_force(ex):
    r = explain_exercise(ex.exercise_id)
    assert CONTRACT <= set(r)
    assert r["peak_grf_n"] == pytest.approx(r["peak_grf_bw"] * r["body_mass_kg"] * G, abs=0.01)
    # The muscles' pull is included: the hip carries more than the ground force alone.
    assert r["joint_contact_force_bw"] > r["peak_grf_bw"]
    assert r["joint_contact_force_bw"] <= max(HIP_MEASURED_MAX_BW, r["peak_grf_bw"] * 4)
    assert r["joint_friction_n"] == pytest.approx(r["friction_coefficient"] * r["joint_contact_force_n"], abs=0.01)
    assert r["bone_stress_mpa"] == pytest.approx(r["joint_contact_force_n"] / r["bone_stress_site"]["area_mm2"],
                                                 rel=2e-3, abs=0.006)
    assert r["strength_mpa"]["this_person"] < r["strength_mpa"]["healthy"]
    assert r["assumptions"] and r["sources"] and len(r["plain_words"]) == 2
    assert any("clinical judgment" in c for c in r["cautions"])


def test_walking_hip_contact_force_matches_bergmann_2001():
    r = explain_exercise("walking", body_mass_kg=64)
    assert r["joint_contact_force_bw"] == pytest.approx(BERGMANN_2001_WALKING_BW, rel=0.10)
    assert r["joint_contact_force_n"] == pytest.approx(r["joint_contact_force_bw"] * 64 * G, abs=1.0)
    # Muscle pull plus the ground force through the stance leg make the contact force.
    assert r["muscle_force_bw"] + r["ground_force_per_leg_bw"] == pytest.approx(r["joint_contact_force_bw"], abs=0.01)
    assert r["muscle_force_bw"] > 0


def test_step_up_and_jogging_match_bergmann():
    assert explain_exercise("step_up")["joint_contact_force_bw"] == pytest.approx(BERGMANN_2001_UPSTAIRS_BW, rel=0.10)
    assert explain_exercise("jogging")["joint_contact_force_bw"] == pytest.approx(BERGMANN_1993_JOGGING_BW, rel=0.10)


def test_knee_where_data_exist():
    # Kutzner et al. 2010, J Biomech 43:2164-2173 (from memory): knee 261% BW in walking.
    assert explain_exercise("walking")["knee_contact_force_bw"] == pytest.approx(2.61, rel=0.10)
    assert explain_exercise("tandem_stance")["knee_contact_force_bw"] is None


def test_friction_in_published_cartilage_range():
    # Ateshian et al. 1998 (0.002 upwards) and Bonnevie et al. 2011 (0.025): 0.002-0.03.
    r = explain_exercise("jogging", body_mass_kg=80)
    assert 0.002 <= r["friction_coefficient"] <= 0.03
    lo, hi = r["joint_friction_range_n"]
    assert lo == pytest.approx(0.002 * r["joint_contact_force_n"], abs=0.01)
    assert hi == pytest.approx(0.03 * r["joint_contact_force_n"], abs=0.01)
    # A few tens of newtons against several kilonewtons of contact force.
    assert r["joint_friction_n"] < 0.05 * r["joint_contact_force_n"]


def test_strength_scaled_by_density_squared_and_weaker_in_tension():
    r = explain_exercise("heel_drop_forceful", t_score=-2.5)
    # Reilly & Burstein 1975 (from memory): tension 133 < compression 193 MPa.
    by_mode = r["strength_by_mode_mpa"]
    assert by_mode["tension"]["healthy"] < by_mode["compression"]["healthy"]
    # Carter & Hayes 1977: strength ~ density^2; T = -2.5 -> 0.650^2 = 0.4225 of healthy.
    assert by_mode["compression"]["this_person"] / by_mode["compression"]["healthy"] == pytest.approx(0.4225, abs=0.002)
    assert by_mode["tension"]["this_person"] / by_mode["tension"]["healthy"] == pytest.approx(0.4225, abs=0.002)
    healthy = explain_exercise("heel_drop_forceful", t_score=0.0)
    assert healthy["strength_mpa"]["this_person"] == healthy["strength_mpa"]["healthy"]
    # Lower density: the same load uses a larger share of the bone's strength.
    assert r["share_of_strength"] > healthy["share_of_strength"]
    assert r["safety_factor"]["compression"] < healthy["safety_factor"]["compression"]


def test_defaults_are_documented_and_flagged():
    r = explain_exercise("walking")
    assert r["body_mass_kg"] == DEFAULT_BODY_MASS_KG and not r["body_mass_given"]
    assert r["t_score"] == DEFAULT_T_SCORE and not r["t_score_given"]
    assert any("Body mass not given" in a for a in r["assumptions"])
    assert any("T-score not given" in a for a in r["assumptions"])
    given = explain_exercise("walking", body_mass_kg=58, t_score=-1.2)
    assert not any("not given" in a for a in given["assumptions"])
    assert FEMUR_SHAFT.site in r["bone_stress_site"]["site"]


def test_external_load_adds_to_ground_force_of_loaded_lifts_only():
    base = explain_exercise("back_squat", body_mass_kg=60)
    loaded = explain_exercise("back_squat", body_mass_kg=60, external_load_kg=30)
    assert loaded["peak_grf_bw"] == pytest.approx(base["peak_grf_bw"] + 0.5, abs=1e-3)
    assert loaded["joint_contact_force_bw"] > base["joint_contact_force_bw"]
    with pytest.raises(InputError) as info:
        explain_exercise("walking", external_load_kg=10)
    assert info.value.problems[0].field == "external_load_kg"


@pytest.mark.parametrize("kwargs, field", [
    ({"exercise_id": "moon_walk"}, "exercise_id"),
    ({"exercise_id": "walking", "body_mass_kg": 24.9}, "body_mass_kg"),
    ({"exercise_id": "walking", "body_mass_kg": 301}, "body_mass_kg"),
    ({"exercise_id": "walking", "t_score": -7.1}, "t_score"),
    ({"exercise_id": "walking", "t_score": 5.5}, "t_score"),
])
def test_bad_input_names_the_field(kwargs, field):
    with pytest.raises(InputError) as info:
        explain_exercise(**kwargs)
    assert info.value.problems[0].field == field


def test_t_scores_below_the_typical_range_are_flagged():
    low = explain_exercise("walking", t_score=-6.0)
    assert any("below the typical range" in n for n in low["notes"])
    assert not any("below the typical range" in n for n in explain_exercise("walking", t_score=-4.5)["notes"])
    # A modelled (not measured) ground force says so.
    assert any("estimate" in n for n in explain_exercise("drop_landing")["notes"])
    assert not explain_exercise("heel_drop_forceful", t_score=-2.0)["notes"]


def test_plain_words_follow_the_margin():
    gentle = explain_exercise("walking", t_score=-1.0)["plain_words"]
    assert "wide margin" in gentle[1] and "2.4 times your body weight" in gentle[0]
    hard = explain_exercise("heel_drop_forceful", t_score=-4.5)["plain_words"]
    assert "clinician has checked it" in hard[1]
    assert "both feet" in hard[0]


# ------------------------------------------------------------------ pictures as data
def test_stress_strain_picture_points():
    r = explain_exercise("heel_drop_forceful", body_mass_kg=62, t_score=-2.6)
    pic = stress_strain_picture(r)
    healthy, person = pic["curves"]["healthy"], pic["curves"]["this_person"]
    for curve in (healthy, person):
        e, s = np.array(curve["strain_pct"]), np.array(curve["stress_mpa"])
        # No toe region: starts at the origin on a straight line of slope E.
        assert e[0] == 0 and s[0] == 0
        assert s[1] / (e[1] / 100) == pytest.approx(curve["modulus_mpa"], rel=1e-3)
        # Short plastic region, then the break.
        assert e[-2] - e[1] < e[1]
        assert s[-1] == 0 and max(s) == pytest.approx(curve["ultimate_mpa"], abs=0.01)
    # Osteoporotic bone: lower stiffness and lower ultimate strength.
    assert person["modulus_mpa"] < healthy["modulus_mpa"]
    assert max(person["stress_mpa"]) < max(healthy["stress_mpa"])
    # The marker sits on the person's elastic line at the exercise's peak stress.
    m = pic["marker"]
    assert m["stress_mpa"] == r["peak_stress_mpa"]["compression"]
    assert m["stress_mpa"] == pytest.approx(person["modulus_mpa"] * m["strain_pct"] / 100, rel=1e-3)


def test_marker_on_plastic_region_when_stress_passes_yield():
    # A forceful stamp (hip capped at 8.7 BW) for 70 kg at T = -3.35: the person's strength
    # is 0.5314^2 x 193 = 54.5 MPa, yield 49 MPa, the peak stress about 52 MPa.
    r = explain_exercise("stamp_forceful", body_mass_kg=70, t_score=-3.35)
    pic = stress_strain_picture(r)
    person, m = pic["curves"]["this_person"], pic["marker"]
    assert person["stress_mpa"][1] < m["stress_mpa"] < person["ultimate_mpa"]
    assert person["strain_pct"][1] < m["strain_pct"] < person["strain_pct"][-2]
    assert "close to its limit" in r["plain_words"][1]


def test_marker_at_the_break_when_stress_passes_strength():
    r = explain_exercise("stamp_forceful", body_mass_kg=90, t_score=-5.0)
    pic = stress_strain_picture(r)
    person, m = pic["curves"]["this_person"], pic["marker"]
    assert m["stress_mpa"] > person["ultimate_mpa"]
    assert m["strain_pct"] == person["strain_pct"][-2]
    assert r["share_of_strength"] > 1 and r["safety_factor"]["compression"] < 1
    assert "more than this simple model says" in r["plain_words"][1]


def test_force_bars_add_up():
    r = explain_exercise("heel_drop_forceful", body_mass_kg=60)
    bars = {b["key"]: b for b in force_bars(r)}
    assert list(bars) == ["body_weight", "ground_force", "ground_force_per_leg", "muscle_force",
                          "joint_contact_force"]
    assert bars["body_weight"]["bw"] == 1.0
    assert bars["body_weight"]["n"] == pytest.approx(60 * G, abs=0.1)
    assert bars["ground_force"]["bw"] == pytest.approx(4.9)
    assert bars["ground_force_per_leg"]["bw"] + bars["muscle_force"]["bw"] == pytest.approx(
        bars["joint_contact_force"]["bw"], abs=0.01)
    assert bars["joint_contact_force"]["bw"] > bars["ground_force"]["bw"] > bars["body_weight"]["bw"]
    one_leg = [b["key"] for b in force_bars(explain_exercise("walking"))]
    assert "ground_force_per_leg" not in one_leg


def test_explain_is_domain_code():
    # Layering (DEVELOPERS.md): domain code never imports the widgets, the store or the handout.
    import subprocess
    import sys
    code = ("import sys, prescribe.loading.explain, prescribe.loading.bone_loads\n"
            "bad = sorted(m for m in sys.modules if m.split('.')[0] in ('ipywidgets', 'bqplot', 'voila')\n"
            "             or m.startswith(('prescribe.store', 'prescribe.handout', 'prescribe.ui')))\n"
            "print(','.join(bad))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == ""


@pytest.mark.parametrize("ex", default_catalogue().all(), ids=lambda e: e.exercise_id)
def test_figures_move_the_right_way(ex):
    # Body weight scales newtons, not body weights; lower density lowers strength, not load.
    light, heavy = explain_exercise(ex.exercise_id, 50, -2.0), explain_exercise(ex.exercise_id, 100, -2.0)
    assert heavy["joint_contact_force_bw"] == light["joint_contact_force_bw"]
    assert heavy["joint_contact_force_n"] == pytest.approx(2 * light["joint_contact_force_n"], abs=0.02)
    assert heavy["bone_stress_mpa"] == pytest.approx(2 * light["bone_stress_mpa"], abs=0.002)
    weaker = explain_exercise(ex.exercise_id, 50, -3.0)
    assert weaker["joint_contact_force_n"] == light["joint_contact_force_n"]
    assert weaker["strength_mpa"]["this_person"] < light["strength_mpa"]["this_person"]
    assert weaker["share_of_strength"] > light["share_of_strength"]
