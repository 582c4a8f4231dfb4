"""Loads inside the body and the strength of the bone that carries them.

Pure, vectorised model functions (scalars or arrays in, the same shape out; a float for
all-scalar input) behind ``prescribe explain``: the joint contact force scaled from an
in-vivo measurement, bone density from a T-score, strength from density (Carter & Hayes
1977), bending of a hollow shaft, and the points of a stress-strain curve.  Impossible
input raises :class:`~prescribe.errors.InputError` naming the argument.

These are teaching-grade models for explaining a program to a person, not a patient-
specific finite-element analysis: every figure is an estimate.
"""

from __future__ import annotations

import numpy as np

from .._arrays import checked, out
from ..errors import InputError

__all__ = [
    "anchored_contact_force_bw", "density_ratio_from_t_score", "carter_hayes_strength_mpa",
    "carter_hayes_modulus_mpa", "density_scaled", "shaft_stresses_mpa", "stress_strain_curve",
    "T_SCORE_RANGE", "FEMORAL_NECK_YOUNG_BMD_G_CM2", "FEMORAL_NECK_YOUNG_SD_G_CM2",
    "CORTICAL_MODULUS_MPA",
]

#: T-scores the models accept: the patient record's range (records.py).
T_SCORE_RANGE = (-7.0, 5.0)

#: Young-adult reference of femoral-neck areal BMD by DXA [g/cm^2]: mean and SD of white
#: women aged 20-29 in NHANES III, the reference of the WHO T-score at the hip.  Looker et
#: al. 1998, Osteoporos Int 8:468-489 (from memory: 0.858 and 0.120 g/cm^2).
FEMORAL_NECK_YOUNG_BMD_G_CM2 = 0.858
FEMORAL_NECK_YOUNG_SD_G_CM2 = 0.120


def anchored_contact_force_bw(grf_bw, legs, anchor_contact_bw, anchor_grf_bw):
    """Joint contact force scaled from an in-vivo measurement of a like movement [BW].

    Instrumented implants measure the whole joint force, muscles' pull included, during
    a movement whose ground reaction force is known.  Their ratio carries over to a like
    movement with another ground force, shared by the legs on the ground:

    .. math:: F_{joint} = \\frac{F_{anchor}}{G_{anchor}} \\cdot \\frac{G}{n}

    Parameters
    ----------
    grf_bw : float or array_like
        Peak ground reaction force of the movement, both feet together [BW], 0-20.
    legs : int or array_like
        Legs sharing it at the peak [-], 1 or 2.
    anchor_contact_bw : float or array_like
        Joint contact force measured in the anchor movement [BW], > 0.
    anchor_grf_bw : float or array_like
        Ground reaction force through the measured leg in the anchor movement [BW], > 0.

    Returns
    -------
    float or numpy.ndarray
        Joint contact force of one joint of the loaded leg [BW].

    References
    ----------
    Bergmann G et al. 2001, J Biomech 34:859-871 (hip, walking about 4 km/h 238% BW,
    upstairs 251%, downstairs 260%); Bergmann G, Graichen F & Rohlmann A 1993,
    J Biomech 26:969-990 (hip, jogging about 550% BW).  Proportional scaling is our
    assumption: the muscles' share grows with the ground force.
    """
    g = checked("grf_bw", grf_bw, low=0, high=20, allowed="a ground reaction force from 0 to 20 BW")
    n = checked("legs", legs, low=1, high=2, whole=True, allowed="1 or 2")
    fa = checked("anchor_contact_bw", anchor_contact_bw, low=0, low_open=True)
    ga = checked("anchor_grf_bw", anchor_grf_bw, low=0, low_open=True)
    return out(fa / ga * g / n, grf_bw, legs, anchor_contact_bw, anchor_grf_bw)


def density_ratio_from_t_score(t_score, young_mean_g_cm2=FEMORAL_NECK_YOUNG_BMD_G_CM2,
                               young_sd_g_cm2=FEMORAL_NECK_YOUNG_SD_G_CM2):
    """Bone density as a share of the young-adult mean, from a T-score [-].

    The T-score counts standard deviations from the young-adult mean, so

    .. math:: \\frac{\\rho}{\\rho_{young}} = \\frac{\\mu + T\\sigma}{\\mu} = 1 + T \\frac{\\sigma}{\\mu}

    With the femoral-neck reference (0.858 +- 0.120 g/cm^2) a T-score of -2.5 is 65% of
    the young-adult density.  The areal (DXA) ratio is taken as the ratio of apparent
    (volumetric) density: an assumption, since DXA also reflects bone size.

    Parameters
    ----------
    t_score : float or array_like
        T-score [SD], -7 to +5 (the patient record's range).
    young_mean_g_cm2, young_sd_g_cm2 : float
        Young-adult reference mean and SD [g/cm^2], > 0.

    Returns
    -------
    float or numpy.ndarray
        Density over the young-adult mean [-], > 0.

    References
    ----------
    WHO 1994, Technical Report Series 843 (T-score definition); Looker AC et al. 1998,
    Osteoporos Int 8:468-489 (NHANES III femoral-neck reference; values from memory).
    """
    lo, hi = T_SCORE_RANGE
    t = checked("t_score", t_score, low=lo, high=hi, allowed=f"a T-score from {lo:g} to {hi:g}")
    mu = checked("young_mean_g_cm2", young_mean_g_cm2, low=0, low_open=True)
    sd = checked("young_sd_g_cm2", young_sd_g_cm2, low=0, low_open=True)
    ratio = 1.0 + t * sd / mu
    if np.any(ratio <= 0):
        raise InputError.single("t_score", t_score, f"a T-score above {-float(np.min(mu / sd)):.2f} "
                                "for this reference (the density would be zero or less)")
    return out(ratio, t_score, young_mean_g_cm2, young_sd_g_cm2)


def carter_hayes_strength_mpa(apparent_density_g_cm3, strain_rate_per_s=0.01):
    """Compressive strength of bone from its apparent density (Carter & Hayes 1977) [MPa].

    .. math:: \\sigma_{ult} = 68 \\, \\dot\\varepsilon^{0.06} \\rho^2

    Strength rises with the square of apparent density, for trabecular and cortical
    bone alike, and a little with strain rate.

    Parameters
    ----------
    apparent_density_g_cm3 : float or array_like
        Apparent density (mass over total volume) [g/cm^3], 0 < rho <= 2.2.
    strain_rate_per_s : float or array_like, default 0.01
        Strain rate [1/s], 1e-6 to 100.

    Returns
    -------
    float or numpy.ndarray
        Ultimate compressive strength [MPa].

    References
    ----------
    Carter DR & Hayes WC 1977, J Bone Joint Surg Am 59:954-962 (constants from memory).
    """
    rho = checked("apparent_density_g_cm3", apparent_density_g_cm3, low=0, high=2.2, low_open=True)
    rate = checked("strain_rate_per_s", strain_rate_per_s, low=1e-6, high=100.0)
    return out(68.0 * rate ** 0.06 * rho ** 2, apparent_density_g_cm3, strain_rate_per_s)


def carter_hayes_modulus_mpa(apparent_density_g_cm3, strain_rate_per_s=0.01):
    """Elastic modulus of bone from its apparent density (Carter & Hayes 1977) [MPa].

    .. math:: E = 3790 \\, \\dot\\varepsilon^{0.06} \\rho^3

    Parameters
    ----------
    apparent_density_g_cm3 : float or array_like
        Apparent density [g/cm^3], 0 < rho <= 2.2.
    strain_rate_per_s : float or array_like, default 0.01
        Strain rate [1/s], 1e-6 to 100.

    Returns
    -------
    float or numpy.ndarray
        Elastic modulus [MPa].

    References
    ----------
    Carter DR & Hayes WC 1977, J Bone Joint Surg Am 59:954-962 (constants from memory).
    """
    rho = checked("apparent_density_g_cm3", apparent_density_g_cm3, low=0, high=2.2, low_open=True)
    rate = checked("strain_rate_per_s", strain_rate_per_s, low=1e-6, high=100.0)
    return out(3790.0 * rate ** 0.06 * rho ** 3, apparent_density_g_cm3, strain_rate_per_s)


def density_scaled(value_healthy, density_ratio, exponent=2.0):
    """A material property scaled by a power of relative density [same unit as the value].

    .. math:: P = P_{healthy} \\left( \\rho / \\rho_{young} \\right)^k

    ``k = 2`` for strength (Carter & Hayes 1977).  Used for both compressive and tensile
    strength (the square law was measured in compression; applying it in tension is an
    assumption) and, in the stress-strain picture, for stiffness too, so that the yield
    strain stays the same whatever the density (Morgan & Keaveny 2001: yield strain
    roughly uniform within a site; from memory).

    Parameters
    ----------
    value_healthy : float or array_like
        The property at young-adult density, >= 0.
    density_ratio : float or array_like
        Density over the young-adult mean [-], 0 < r <= 2.
    exponent : float, default 2
        Power of the density [-], 0 to 4.

    Returns
    -------
    float or numpy.ndarray
        The property at this density.

    References
    ----------
    Carter DR & Hayes WC 1977, J Bone Joint Surg Am 59:954-962.
    """
    v = checked("value_healthy", value_healthy, low=0)
    r = checked("density_ratio", density_ratio, low=0, high=2.0, low_open=True)
    k = checked("exponent", exponent, low=0, high=4)
    return out(v * r ** k, value_healthy, density_ratio, exponent)


def shaft_stresses_mpa(force_n, outer_diameter_mm, inner_diameter_mm, eccentricity_mm):
    """Axial, bending and peak surface stresses of a hollow shaft under an off-axis force [MPa].

    A force :math:`F` along the shaft, acting :math:`e` off its axis, compresses the whole
    section and bends it, compressing one side and stretching the other:

    .. math::

        A = \\frac{\\pi}{4}(D^2 - d^2), \\quad I = \\frac{\\pi}{64}(D^4 - d^4), \\quad
        \\sigma_a = \\frac{F}{A}, \\quad \\sigma_b = \\frac{F e \\, D/2}{I}

    peak compression :math:`\\sigma_a + \\sigma_b`, peak tension
    :math:`\\max(0, \\sigma_b - \\sigma_a)`.

    Parameters
    ----------
    force_n : float or array_like
        Compressive force along the shaft [N], >= 0.
    outer_diameter_mm, inner_diameter_mm : float or array_like
        Periosteal and endosteal diameters [mm], D > 0, 0 <= d < D.
    eccentricity_mm : float or array_like
        Distance of the force's line from the shaft axis [mm], 0-100.

    Returns
    -------
    dict of float or numpy.ndarray
        ``area_mm2``, ``axial`` (F/A), ``bending``, ``compression`` and ``tension`` [MPa].

    References
    ----------
    Normal stress and Euler-Bernoulli bending of an annulus (any mechanics of materials
    text); compare :func:`prescribe.loading.mechanics.axial_stress_mpa` and
    :func:`prescribe.loading.mechanics.tube_bending_stress_mpa`.
    """
    f = checked("force_n", force_n, low=0)
    big = checked("outer_diameter_mm", outer_diameter_mm, low=0, low_open=True)
    small = checked("inner_diameter_mm", inner_diameter_mm, low=0)
    if np.any(small >= big):
        raise InputError.single("inner_diameter_mm", inner_diameter_mm,
                                "a diameter >= 0 and smaller than outer_diameter_mm")
    e = checked("eccentricity_mm", eccentricity_mm, low=0, high=100)
    area = np.pi / 4.0 * (big ** 2 - small ** 2)
    inertia = np.pi / 64.0 * (big ** 4 - small ** 4)
    axial = f / area
    bending = f * e * (big / 2.0) / inertia
    inputs = (force_n, outer_diameter_mm, inner_diameter_mm, eccentricity_mm)
    return {"area_mm2": out(area + 0 * f, *inputs), "axial": out(axial, *inputs),
            "bending": out(bending, *inputs), "compression": out(axial + bending, *inputs),
            "tension": out(np.maximum(bending - axial, 0.0), *inputs)}


def stress_strain_curve(modulus_mpa, ultimate_mpa, yield_fraction=0.9, plastic_share=0.5,
                        points=6):
    """Points of a bone stress-strain curve up to failure: (strain [-], stress [MPa]).

    Bone has no toe region: the curve leaves the origin on its straight elastic line of
    slope :math:`E` up to yield at :math:`\\sigma_y = y \\sigma_{ult}`,
    :math:`\\varepsilon_y = \\sigma_y / E`; a short plastic region follows, bending over
    to the ultimate stress at :math:`\\varepsilon_u = \\varepsilon_y (1 + p)`
    (a quadratic with zero slope at the ultimate point), and the bone then breaks (the
    last point drops to zero stress at the same strain).

    Parameters
    ----------
    modulus_mpa : float
        Elastic modulus [MPa], > 0.
    ultimate_mpa : float
        Ultimate strength [MPa], > 0.
    yield_fraction : float, default 0.9
        Yield over ultimate stress [-], 0.5-1 (illustrative; common practice for a
        teaching diagram).
    plastic_share : float, default 0.5
        Length of the plastic region over the elastic strain [-], 0-1 (short: bone is
        damaged beyond its linear region and breaks soon after).
    points : int, default 6
        Points on the plastic region, 2-50.

    Returns
    -------
    strain, stress : numpy.ndarray
        Strain [-] and stress [MPa], origin first, the failure point last.

    References
    ----------
    Shape as described for cortical bone by Reilly DT & Burstein AH 1975, J Biomech
    8:393-405: linear, no toe region, short post-yield region before fracture.
    """
    e_mod = float(checked("modulus_mpa", modulus_mpa, low=0, low_open=True))
    s_u = float(checked("ultimate_mpa", ultimate_mpa, low=0, low_open=True))
    y = float(checked("yield_fraction", yield_fraction, low=0.5, high=1.0))
    p = float(checked("plastic_share", plastic_share, low=0, high=1.0))
    n = int(checked("points", points, low=2, high=50, whole=True))
    s_y = y * s_u
    eps_y = s_y / e_mod
    eps_u = eps_y * (1.0 + p)
    u = np.linspace(0.0, 1.0, n + 1)[1:]
    plastic_strain = eps_y + u * (eps_u - eps_y)
    plastic_stress = s_y + (s_u - s_y) * (1.0 - (1.0 - u) ** 2)
    strain = np.concatenate([[0.0, eps_y], plastic_strain, [eps_u]])
    stress = np.concatenate([[0.0, s_y], plastic_stress, [0.0]])
    return strain, stress


#: Elastic modulus of human femoral cortical bone along the shaft [MPa]: about 17 GPa.
#: Reilly DT & Burstein AH 1975, J Biomech 8:393-405 (from memory; published_facts E).
CORTICAL_MODULUS_MPA = 17_000.0
