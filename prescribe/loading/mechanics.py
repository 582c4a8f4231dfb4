"""Mechanics of bone loading: landing forces, bone stress, joint contact and friction.

Pure, vectorised functions: scalars or arrays in, the same shape out (a float for
all-scalar input).  Impossible input raises :class:`~prescribe.errors.InputError`
naming the argument.  These are teaching-grade models for planning, not patient-
specific finite-element analysis; every figure is an estimate.
"""

from __future__ import annotations

import numpy as np

from .._arrays import G, body_mass, checked, out
from ..errors import InputError

__all__ = [
    "landing_peak_grf_bw", "landing_peak_force_n", "loading_rate_bw_s", "bw_to_newtons",
    "axial_stress_mpa", "tube_bending_stress_mpa", "safety_factor", "CORTICAL_STRENGTH_MPA",
    "joint_contact_force_bw", "JOINT_PRESETS", "friction_force_n", "CARTILAGE_FRICTION",
]

#: Ultimate strength of human femoral cortical bone [MPa] by (mode, direction).
#: Reilly & Burstein 1975, J Biomech 8:393-405; values from memory (published_facts.md
#: status M): weaker in tension than compression, weaker across than along the bone.
CORTICAL_STRENGTH_MPA: dict[tuple[str, str], float] = {
    ("tension", "longitudinal"): 133.0,
    ("compression", "longitudinal"): 193.0,
    ("tension", "transverse"): 51.0,
    ("compression", "transverse"): 133.0,
    ("shear", "longitudinal"): 68.0,
}

#: Friction coefficient of articular cartilage (dimensionless).  Ateshian et al. 1998,
#: J Tribol 120:241-248: 0.002 to 0.3 or more depending on load, speed and time
#: (low while fluid pressure carries the load, rising as it subsides).
CARTILAGE_FRICTION = {"low": 0.002, "typical": 0.02, "high": 0.3}

#: Static single-joint lever models (all lever arms from memory; textbook magnitudes).
#: supported_fraction: share of body mass above the joint carried by the limb(s).
JOINT_PRESETS: dict[str, dict[str, float]] = {
    # Single-leg stance in walking: body less the stance leg (~16% of mass) over the hip;
    # body centre of mass ~0.10 m medial to the hip centre, abductor lever ~0.05 m.
    "hip_single_leg_stance": {"supported_fraction": 0.84, "external_moment_arm_m": 0.10,
                              "muscle_moment_arm_m": 0.05, "legs": 1},
    # Parallel squat: body less the shanks (~10%) shared by two knees; load line ~0.12 m
    # behind the knee, patellar-tendon lever ~0.045 m.
    "knee_squat": {"supported_fraction": 0.90, "external_moment_arm_m": 0.12,
                   "muscle_moment_arm_m": 0.045, "legs": 2},
    # Two-foot landing, knee at ~45 degrees: load line ~0.08 m behind the knee.
    "knee_landing": {"supported_fraction": 0.90, "external_moment_arm_m": 0.08,
                     "muscle_moment_arm_m": 0.045, "legs": 2},
}


def landing_peak_grf_bw(drop_height_m, contact_time_s, rebound=False, pulse_factor=np.pi / 2):
    """Peak ground reaction force of a landing, by impulse and momentum [BW].

    The body falls from ``drop_height_m`` (or from the peak of a jump of that
    height) and touches down at :math:`v = \\sqrt{2 g h}`.  Over the contact time
    :math:`T` the ground must remove that momentum (and, for a rebound, give it back)
    while also carrying body weight:

    .. math::

        \\int F\\,dt = k m v + m g T, \\qquad
        \\frac{F_{peak}}{m g} = p \\left( \\frac{k v}{g T} + 1 \\right)

    with :math:`k = 1` for a landing that stops (drop landing) and :math:`k = 2` for
    one that rebounds (continuous hops, skipping), and :math:`p` the ratio of peak to
    mean force of the force pulse (:math:`\\pi/2` for a half-sine).  Body mass
    cancels, so the result is in body weights.

    Parameters
    ----------
    drop_height_m : float or array_like
        Fall height or jump height [m], 0 < h <= 2.
    contact_time_s : float or array_like
        Time from touchdown to stopping (or to take-off for a rebound) [s], 0 < T <= 2.
    rebound : bool, default False
        True when the landing is followed directly by another take-off.
    pulse_factor : float, default pi/2
        Peak-to-mean force ratio of the pulse [-], 1 <= p <= 4 (1 = constant force).

    Returns
    -------
    float or numpy.ndarray
        Peak vertical ground reaction force [BW].

    References
    ----------
    Impulse-momentum theorem (Newton's second law integrated over the contact).
    Checked against force-plate ranges: star and stride jumps 3.90-5.38 BW
    (Clissold et al. 2019, Clin Biomech 73:1-8); hops 4.02-4.93 BW (Clissold group
    2022, Am J Sports Sci 10(1)).
    """
    h = checked("drop_height_m", drop_height_m, low=0, high=2.0, low_open=True,
                allowed="a height above 0 up to 2 m")
    t = checked("contact_time_s", contact_time_s, low=0, high=2.0, low_open=True,
                allowed="a time above 0 up to 2 s")
    p = checked("pulse_factor", pulse_factor, low=1.0, high=4.0)
    k = np.where(np.asarray(rebound, dtype=bool), 2.0, 1.0)
    v = np.sqrt(2.0 * G * h)
    return out(p * (k * v / (G * t) + 1.0), drop_height_m, contact_time_s, rebound, pulse_factor)


def bw_to_newtons(peak_grf_bw, body_mass_kg):
    """A force in body weights as newtons: :math:`F = f \\, m g` [N].

    Parameters
    ----------
    peak_grf_bw : float or array_like
        Force [BW], >= 0.
    body_mass_kg : float or array_like
        Body mass [kg], 25-300 (the patient record's range).

    Returns
    -------
    float or numpy.ndarray
        Force [N].

    References
    ----------
    Definition of body weight, with standard gravity g = 9.80665 m/s^2.
    """
    f = checked("peak_grf_bw", peak_grf_bw, low=0)
    m = body_mass(body_mass_kg)
    return out(f * m * G, peak_grf_bw, body_mass_kg)


def landing_peak_force_n(drop_height_m, contact_time_s, body_mass_kg, rebound=False,
                         pulse_factor=np.pi / 2):
    """Peak ground reaction force of a landing [N]: :func:`landing_peak_grf_bw` x m g.

    Parameters
    ----------
    drop_height_m, contact_time_s, rebound, pulse_factor
        As in :func:`landing_peak_grf_bw` ([m], [s], bool, [-]).
    body_mass_kg : float or array_like
        Body mass [kg], 25-300.

    Returns
    -------
    float or numpy.ndarray
        Peak force [N].

    References
    ----------
    As :func:`landing_peak_grf_bw`.
    """
    bw = landing_peak_grf_bw(drop_height_m, contact_time_s, rebound, pulse_factor)
    return bw_to_newtons(bw, body_mass_kg)


def loading_rate_bw_s(peak_grf_bw, rise_time_s):
    """Average loading rate from touchdown to the force peak [BW/s].

    .. math:: LR = F_{peak} / t_{rise}

    Parameters
    ----------
    peak_grf_bw : float or array_like
        Peak force [BW], >= 0.
    rise_time_s : float or array_like
        Time from touchdown to the peak [s], 0 < t <= 1.

    Returns
    -------
    float or numpy.ndarray
        Loading rate [BW/s].

    References
    ----------
    Peak over time to peak, as force-plate studies of osteogenic exercise report it
    (e.g. heel drop 4.9 BW at 357 BW/s, i.e. ~14 ms to peak: Int J Sci Technol Soc
    2021, 9:294-300).
    """
    f = checked("peak_grf_bw", peak_grf_bw, low=0)
    t = checked("rise_time_s", rise_time_s, low=0, high=1.0, low_open=True,
                allowed="a time above 0 up to 1 s")
    return out(f / t, peak_grf_bw, rise_time_s)


def axial_stress_mpa(force_n, area_mm2):
    """Axial (normal) stress of a force over a cross-section [MPa].

    .. math:: \\sigma = F / A

    Parameters
    ----------
    force_n : float or array_like
        Axial force [N]; positive for compression or tension alike (magnitude).
    area_mm2 : float or array_like
        Cross-sectional area of bone carrying it [mm^2], > 0.

    Returns
    -------
    float or numpy.ndarray
        Stress [MPa] (= N/mm^2), signed as ``force_n``.

    References
    ----------
    Definition of normal stress (e.g. any mechanics of materials text).  Compare with
    :data:`CORTICAL_STRENGTH_MPA` (Reilly & Burstein 1975, J Biomech 8:393-405).
    """
    f = checked("force_n", force_n)
    a = checked("area_mm2", area_mm2, low=0, low_open=True, allowed="an area above 0 mm^2")
    return out(f / a, force_n, area_mm2)


def tube_bending_stress_mpa(moment_nm, outer_diameter_mm, inner_diameter_mm=0.0):
    """Peak bending stress at the surface of a hollow circular tube [MPa].

    A long-bone shaft as a hollow cortical tube:

    .. math::

        I = \\frac{\\pi}{64}(D^4 - d^4), \\qquad \\sigma = \\frac{M \\, D/2}{I}

    tension on one side, compression on the other.

    Parameters
    ----------
    moment_nm : float or array_like
        Bending moment [N m].
    outer_diameter_mm : float or array_like
        Outer (periosteal) diameter D [mm], > 0.
    inner_diameter_mm : float or array_like, default 0
        Inner (endosteal, marrow cavity) diameter d [mm], 0 <= d < D.

    Returns
    -------
    float or numpy.ndarray
        Surface stress [MPa], signed as ``moment_nm``.

    References
    ----------
    Euler-Bernoulli beam theory, second moment of area of an annulus (any mechanics of
    materials text).  Endosteal resorption with age enlarges d, which raises the
    stress for the same moment.
    """
    m = checked("moment_nm", moment_nm)
    big = checked("outer_diameter_mm", outer_diameter_mm, low=0, low_open=True,
                  allowed="a diameter above 0 mm")
    small = checked("inner_diameter_mm", inner_diameter_mm, low=0)
    if np.any(small >= big):
        raise InputError.single("inner_diameter_mm", inner_diameter_mm,
                                "a diameter >= 0 and smaller than outer_diameter_mm")
    second_moment = np.pi / 64.0 * (big ** 4 - small ** 4)
    return out(m * 1000.0 * (big / 2.0) / second_moment, moment_nm, outer_diameter_mm,
               inner_diameter_mm)


def safety_factor(stress_mpa, mode="compression", direction="longitudinal", strength_scale=1.0):
    """Safety factor: cortical strength over the applied stress [-].

    .. math:: SF = s \\, \\sigma_{ult}(mode, direction) / |\\sigma|

    Parameters
    ----------
    stress_mpa : float or array_like
        Applied stress [MPa]; its magnitude is used; 0 gives infinity.
    mode : {"compression", "tension", "shear"}
        Kind of stress.
    direction : {"longitudinal", "transverse"}
        Along the bone's long axis or across it (shear: longitudinal only).
    strength_scale : float or array_like, default 1
        Share of normal strength [-], 0 < s <= 1.5; below 1 for weaker (e.g.
        osteoporotic) bone, which fails at lower stress.

    Returns
    -------
    float or numpy.ndarray
        Strength over stress [-]; below 1 means failure is expected.

    References
    ----------
    Reilly & Burstein 1975, J Biomech 8:393-405 (values in
    :data:`CORTICAL_STRENGTH_MPA`, from memory).
    """
    key = (mode, direction)
    if key not in CORTICAL_STRENGTH_MPA:
        if mode not in {m for m, _ in CORTICAL_STRENGTH_MPA}:
            raise InputError.single("mode", mode, "one of compression, tension, shear")
        raise InputError.single("direction", direction,
                                "one of " + ", ".join(d for m, d in CORTICAL_STRENGTH_MPA if m == mode)
                                + f" for {mode}")
    s = checked("stress_mpa", stress_mpa)
    scale = checked("strength_scale", strength_scale, low=0, high=1.5, low_open=True)
    strength = CORTICAL_STRENGTH_MPA[key] * scale
    with np.errstate(divide="ignore"):
        result = np.where(s == 0, np.inf, strength / np.where(s == 0, 1.0, np.abs(s)))
    return out(result, stress_mpa, strength_scale)


def joint_contact_force_bw(body_mass_kg, external_load_kg=0.0, supported_fraction=0.84,
                           external_moment_arm_m=0.10, muscle_moment_arm_m=0.05, legs=1,
                           grf_bw=1.0):
    """Joint contact force from a static single-joint lever model [BW].

    The load above the joint, :math:`W = g\\,(f m + L) \\, a / n` (share ``f`` of body
    mass ``m`` plus external load ``L``, scaled by the dynamic ground force ``a`` in
    BW, shared by ``n`` legs), acts at ``external_moment_arm_m`` :math:`d` from the
    joint centre.  The muscle that balances it works at lever :math:`r`, so
    :math:`F_m = W d / r`, and with muscle and load taken as collinear:

    .. math:: F_{joint} = W + F_m = W \\left(1 + \\frac{d}{r}\\right)

    Muscle force, not body weight, dominates: with d/r = 2 the joint carries three
    times the load above it.  :data:`JOINT_PRESETS` gives lever arms for the hip in
    single-leg stance and the knee in a squat or landing.

    Parameters
    ----------
    body_mass_kg : float or array_like
        Body mass [kg], 25-300.
    external_load_kg : float or array_like, default 0
        Bar, dumbbells or vest carried [kg], 0-500.
    supported_fraction : float, default 0.84
        Share of body mass above the joint [-], 0 < f <= 1.
    external_moment_arm_m : float, default 0.10
        Lever of the load about the joint centre [m], 0-0.5.
    muscle_moment_arm_m : float, default 0.05
        Lever of the balancing muscle [m], 0 < r <= 0.2.
    legs : int, default 1
        Legs sharing the load (1 or 2).
    grf_bw : float or array_like, default 1
        Ground reaction force as a multiple of the static load [BW], 0-15 (1 standing;
        a landing's peak GRF for a landing).

    Returns
    -------
    float or numpy.ndarray
        Joint contact force [BW of the person].

    References
    ----------
    Static equilibrium of a lever (the classic single-leg-stance hip model; lever arms
    from memory).  Plausibility: instrumented hip implants measured 238% BW walking at
    about 4 km/h (Bergmann et al. 2001, J Biomech 34:859-871) and about 550% BW
    jogging (Bergmann, Graichen & Rohlmann 1993, J Biomech 26:969-990).
    """
    m = body_mass(body_mass_kg)
    load = checked("external_load_kg", external_load_kg, low=0, high=500)
    f = checked("supported_fraction", supported_fraction, low=0, high=1, low_open=True)
    d = checked("external_moment_arm_m", external_moment_arm_m, low=0, high=0.5)
    r = checked("muscle_moment_arm_m", muscle_moment_arm_m, low=0, high=0.2, low_open=True)
    n = checked("legs", legs, low=1, high=2, whole=True, allowed="1 or 2")
    a = checked("grf_bw", grf_bw, low=0, high=15)
    above_bw = (f * m + load) / m * a / n
    return out(above_bw * (1.0 + d / r), body_mass_kg, external_load_kg, supported_fraction,
               external_moment_arm_m, muscle_moment_arm_m, legs, grf_bw)


def friction_force_n(contact_force_n, friction_coefficient=CARTILAGE_FRICTION["typical"]):
    """Friction force in a joint: coefficient x joint contact force [N].

    .. math:: F_f = \\mu \\, F_{contact}

    Parameters
    ----------
    contact_force_n : float or array_like
        Joint contact (normal) force [N], >= 0.
    friction_coefficient : float or array_like, default 0.02
        Coefficient of friction of the joint surfaces [-], 0 < mu <= 1; cartilage
        0.002-0.3 (:data:`CARTILAGE_FRICTION`).

    Returns
    -------
    float or numpy.ndarray
        Friction force [N].

    References
    ----------
    Coulomb friction.  Cartilage coefficients: Ateshian et al. 1998, J Tribol
    120:241-248 (0.002 to 0.3 or more); Bonnevie et al. 2011, Tribol Lett 41:83-95
    (0.025 at 1-5 mm/s).
    """
    fc = checked("contact_force_n", contact_force_n, low=0)
    mu = checked("friction_coefficient", friction_coefficient, low=0, high=1, low_open=True,
                 allowed="a coefficient above 0 up to 1")
    return out(mu * fc, contact_force_n, friction_coefficient)
