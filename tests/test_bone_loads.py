"""Bone-load models checked against their sources' own numbers."""

from __future__ import annotations

import math

import numpy as np
import pytest

from prescribe.loading.bone_loads import (CORTICAL_MODULUS_MPA, anchored_contact_force_bw,
                                          carter_hayes_modulus_mpa, carter_hayes_strength_mpa,
                                          density_ratio_from_t_score, density_scaled, shaft_stresses_mpa,
                                          stress_strain_curve)
from prescribe.errors import InputError
from prescribe.loading.mechanics import CORTICAL_STRENGTH_MPA, axial_stress_mpa, tube_bending_stress_mpa

# Bergmann et al. 2001, J Biomech 34:859-871: hip contact force walking at about 4 km/h
# 238% BW, upstairs 251% BW, downstairs 260% BW (published_facts E, status V).
BERGMANN_2001 = {"walking": 2.38, "upstairs": 2.51, "downstairs": 2.60}
# Bergmann, Graichen & Rohlmann 1993, J Biomech 26:969-990: jogging about 550% BW (V).
BERGMANN_1993_JOGGING = 5.5
# Looker et al. 1998, Osteoporos Int 8:468-489: femoral neck young-adult 0.858 +- 0.120 g/cm^2 (from memory).
LOOKER_1998 = (0.858, 0.120)


# ------------------------------------------------------------ joint contact
def test_anchored_contact_reproduces_its_anchor_exactly():
    # A movement with the anchor's own ground force gets the measured hip force back.
    for measured in BERGMANN_2001.values():
        assert anchored_contact_force_bw(1.2, 1, measured, 1.2) == pytest.approx(measured, abs=1e-12)
    assert anchored_contact_force_bw(2.2, 1, BERGMANN_1993_JOGGING, 2.2) == pytest.approx(5.5)


def test_anchored_contact_scales_with_ground_force_and_legs():
    out = anchored_contact_force_bw(np.array([1.2, 2.4, 4.8]), 1, 2.38, 1.2)
    assert out.tolist() == pytest.approx([2.38, 4.76, 9.52])
    # Two legs share the ground force: each hip carries half.
    assert anchored_contact_force_bw(4.8, 2, 2.38, 1.2) == pytest.approx(4.76)
    # Muscles' pull included: more than the ground force through the leg whenever the
    # measured ratio exceeds 1 (every in-vivo anchor above does: 2.38 / 1.2 = 1.98).
    assert anchored_contact_force_bw(3.0, 1, 2.38, 1.2) > 3.0


@pytest.mark.parametrize("call, field", [
    (lambda: anchored_contact_force_bw(-1, 1, 2.38, 1.2), "grf_bw"),
    (lambda: anchored_contact_force_bw(1, 3, 2.38, 1.2), "legs"),
    (lambda: anchored_contact_force_bw(1, 1, 0, 1.2), "anchor_contact_bw"),
    (lambda: anchored_contact_force_bw(1, 1, 2.38, 0), "anchor_grf_bw"),
    (lambda: density_ratio_from_t_score(-7.5), "t_score"),
    (lambda: density_ratio_from_t_score(float("nan")), "t_score"),
    (lambda: carter_hayes_strength_mpa(0.0), "apparent_density_g_cm3"),
    (lambda: density_scaled(100, 0), "density_ratio"),
    (lambda: shaft_stresses_mpa(100, 20, 25, 5), "inner_diameter_mm"),
    (lambda: shaft_stresses_mpa(-5, 26, 13, 5), "force_n"),
    (lambda: stress_strain_curve(0, 100), "modulus_mpa"),
])
def test_bad_input_names_the_argument(call, field):
    with pytest.raises(InputError) as info:
        call()
    assert info.value.problems[0].field == field


# ------------------------------------------------------------ density and strength
def test_t_score_to_density_follows_the_definition():
    # WHO 1994 (Technical Report Series 843): T = (BMD - young mean) / young SD.  With the
    # femoral-neck reference of Looker et al. 1998 (from memory), T = -2.5 is
    # (0.858 - 2.5 x 0.120) / 0.858 = 65.0% of the young mean.
    mean, sd = LOOKER_1998
    assert density_ratio_from_t_score(-2.5) == pytest.approx((mean - 2.5 * sd) / mean, abs=1e-12)
    assert density_ratio_from_t_score(-2.5) == pytest.approx(0.650, abs=0.001)
    assert density_ratio_from_t_score(0.0) == 1.0
    t = np.array([-4.0, -2.5, -1.0, 0.0, 1.0])
    assert np.all(np.diff(density_ratio_from_t_score(t)) > 0)
    # The whole range of the patient record stays positive.
    assert density_ratio_from_t_score(-7.0) > 0


def test_carter_hayes_1977_relations():
    # Carter & Hayes 1977, J Bone Joint Surg Am 59:954-962 (constants from memory):
    # sigma = 68 rate^0.06 rho^2 [MPa], E = 3790 rate^0.06 rho^3 [MPa].
    assert carter_hayes_strength_mpa(1.0, 1.0) == pytest.approx(68.0)
    assert carter_hayes_modulus_mpa(1.0, 1.0) == pytest.approx(3790.0)
    # Square and cube laws: doubling density gives 4x strength and 8x stiffness.
    assert carter_hayes_strength_mpa(1.6) / carter_hayes_strength_mpa(0.8) == pytest.approx(4.0)
    assert carter_hayes_modulus_mpa(1.6) / carter_hayes_modulus_mpa(0.8) == pytest.approx(8.0)
    # Cortical bone (apparent density about 1.8-1.9 g/cm^3, from memory) at a physiological
    # testing strain rate of 0.01-0.1 /s gives about the compressive strength Reilly & Burstein 1975
    # measured (193 MPa, from memory): within 20%.
    cortical = carter_hayes_strength_mpa(1.85, np.array([0.01, 0.1]))
    assert np.all(np.abs(cortical / CORTICAL_STRENGTH_MPA[("compression", "longitudinal")] - 1) < 0.2)
    # ... and, by the cube law, a modulus of the order of 17 GPa (within 30%, from memory).
    assert abs(carter_hayes_modulus_mpa(1.85, 0.01) / CORTICAL_MODULUS_MPA - 1) < 0.3


def test_density_scaled_strength_at_osteoporosis_threshold():
    # Square law (Carter & Hayes 1977) at T = -2.5: 0.650^2 = 42% of healthy strength.
    ratio = density_ratio_from_t_score(-2.5)
    assert density_scaled(193.0, ratio) == pytest.approx(193.0 * ratio ** 2)
    assert density_scaled(193.0, ratio) / 193.0 == pytest.approx(0.4225, abs=0.002)
    assert density_scaled(np.array([193.0, 133.0]), ratio).shape == (2,)


# ------------------------------------------------------------ stress in the shaft
def test_shaft_stresses_match_the_mechanics_formulas():
    force, big, small, e = 1600.0, 26.0, 13.0, 10.0
    s = shaft_stresses_mpa(force, big, small, e)
    area = math.pi / 4 * (big ** 2 - small ** 2)
    assert s["area_mm2"] == pytest.approx(area)
    assert s["axial"] == pytest.approx(axial_stress_mpa(force, area))
    # The bending part is the tube formula of prescribe.loading.mechanics with M = F e.
    assert s["bending"] == pytest.approx(tube_bending_stress_mpa(force * e / 1000.0, big, small))
    assert s["compression"] == pytest.approx(s["axial"] + s["bending"])
    assert s["tension"] == pytest.approx(s["bending"] - s["axial"])
    # No eccentricity, no bending and no tension.
    plain = shaft_stresses_mpa(force, big, small, 0.0)
    assert plain["bending"] == 0 and plain["tension"] == 0
    assert shaft_stresses_mpa(np.array([1.0, 2.0]), big, small, e)["axial"].shape == (2,)


def test_shaft_stress_of_jogging_is_of_in_vivo_strain_magnitude():
    # Jogging hip load 5.5 BW (Bergmann 1993) of a 70 kg person through the documented
    # femoral shaft: the tensile surface stress should be of the order of in-vivo running
    # strain 850 microstrain (Lanyon et al. 1975, Acta Orthop Scand 46:256-268) x E 17 GPa
    # = 14.5 MPa; a calibration, so within a factor of 1.5.
    s = shaft_stresses_mpa(5.5 * 70 * 9.80665, 26.0, 13.0, 10.0)
    target = 850e-6 * CORTICAL_MODULUS_MPA
    assert target / 1.5 < s["tension"] < target * 1.5
    # Above 5 BW in landings more than 2000 microstrain (Hillam et al. 2015): 34 MPa.
    heel_drop_hip = 4.9 / 2 * 5.5 / 2.2
    assert shaft_stresses_mpa(heel_drop_hip * 70 * 9.80665, 26.0, 13.0, 10.0)["compression"] > 0.9 * 34.0


# ------------------------------------------------------------ the stress-strain curve
def test_stress_strain_curve_has_no_toe_a_short_plastic_region_and_a_break():
    strain, stress = stress_strain_curve(17000.0, 193.0)
    assert strain[0] == 0 and stress[0] == 0
    # No toe region: the first segment's slope is the elastic modulus itself.
    assert stress[1] / strain[1] == pytest.approx(17000.0)
    # Yield at 90% of the ultimate stress; the ultimate is the highest point.
    assert stress[1] == pytest.approx(0.9 * 193.0)
    assert stress.max() == pytest.approx(193.0)
    # The plastic region is flatter than the elastic line and shorter than it.
    plastic_slope = (stress[2] - stress[1]) / (strain[2] - strain[1])
    assert plastic_slope < 0.5 * 17000.0
    assert strain[-2] - strain[1] < strain[1]
    assert np.all(np.diff(stress[:-1]) > 0)
    # It breaks: the last point drops to zero at the ultimate strain.
    assert stress[-1] == 0 and strain[-1] == strain[-2]


def test_weaker_bone_curve_is_less_stiff_and_breaks_lower():
    ratio = density_ratio_from_t_score(-2.5)
    hs, hst = stress_strain_curve(17000.0, 193.0)
    ps, pst = stress_strain_curve(density_scaled(17000.0, ratio), density_scaled(193.0, ratio))
    assert pst[1] / ps[1] < hst[1] / hs[1]
    assert pst.max() < hst.max()
    # Same yield strain at any density (Morgan & Keaveny 2001, from memory).
    assert ps[1] == pytest.approx(hs[1])
