"""The loads explained: what the bone and the joint feel in one exercise, for one person.

:func:`explain_exercise` applies the model functions of :mod:`prescribe.loading.mechanics` and
:mod:`prescribe.loading.bone_loads` to one catalogue entry (the ``prescribe explain`` command,
the app's explanation panel and the clinician's handout page read it), and lists every
assumption and source it used.  :func:`stress_strain_picture` and :func:`force_bars`
give the points of the two pictures as plain data; drawing them is the caller's job.

Every figure is an estimate from simple published relations, for explaining a program
to a person; it does not predict a fracture, and a licensed clinician reviews every
program.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from .._arrays import G, body_mass, checked
from .bone_loads import (CORTICAL_MODULUS_MPA, FEMORAL_NECK_YOUNG_BMD_G_CM2,
                         FEMORAL_NECK_YOUNG_SD_G_CM2, T_SCORE_RANGE, anchored_contact_force_bw,
                         density_ratio_from_t_score, density_scaled, shaft_stresses_mpa,
                         stress_strain_curve)
from ..catalogue import Catalogue, Exercise, default_catalogue
from ..cautions import with_standard
from ..errors import InputError
from .mechanics import CARTILAGE_FRICTION, CORTICAL_STRENGTH_MPA, JOINT_PRESETS
from ..records import TScores

__all__ = ["explain_exercise", "stress_strain_picture", "force_bars", "Motion", "MOTIONS",
           "motion_of", "DEFAULT_BODY_MASS_KG", "DEFAULT_T_SCORE", "FEMUR_SHAFT",
           "FRICTION_COEFFICIENT", "FRICTION_RANGE", "OSTEOGENIC_GRF_BW", "OSTEOGENIC_RATE_BW_S",
           "HIP_MEASURED_MAX_BW", "plain_words"]

#: Body mass used when none is given [kg]: a round adult reference (common practice).
DEFAULT_BODY_MASS_KG = 70.0
#: T-score used when none is given: the WHO threshold of osteoporosis (WHO 1994, Technical
#: Report Series 843), the cautious choice for the people this tool serves.
DEFAULT_T_SCORE = -2.5
#: Lowest T-score of the record's typical range (the soft range of records.TScores): below
#: it the straight-line density mapping is flagged as out of range.
T_SCORE_TYPICAL_LOW = float(TScores.model_fields["femoral_neck"].json_schema_extra["soft_range"][0])
#: Largest external load (bar, dumbbells, vest) the explanation accepts [kg].
MAX_EXTERNAL_LOAD_KG = 300.0

#: Friction coefficient of the hip's cartilage [-]: 0.02, inside 0.002-0.03 (Ateshian et al.
#: 1998, J Tribol 120:241-248: 0.002 while fluid pressure carries the load; Bonnevie et al.
#: 2011, Tribol Lett 41:83-95: 0.025 at 1-5 mm/s).
FRICTION_COEFFICIENT = CARTILAGE_FRICTION["typical"]
FRICTION_RANGE = (0.002, 0.03)

#: Osteogenic thresholds of a landing: more than 3 BW and more than 43 BW/s, the "previously
#: determined osteogenic thresholds" the jump-landings were held against in Clissold, Cronin,
#: De Souza, Wilson & Winwood 2019, "Bilateral multidirectional jumps with reactive
#: jump-landings achieve osteogenic thresholds with and without instruction in premenopausal
#: women", Clin Biomech 73:1-8 (doi 10.1016/j.clinbiomech.2019.12.025; abstract checked).
OSTEOGENIC_GRF_BW = 3.0
OSTEOGENIC_RATE_BW_S = 43.0

#: The largest hip contact force measured in vivo [BW]: 870% BW when stumbling (Bergmann,
#: Graichen & Rohlmann 1993, J Biomech 26:969-990).  The landing model, extrapolated from
#: jogging, is not taken beyond it.
HIP_MEASURED_MAX_BW = 8.7


@dataclass(frozen=True)
class ShaftSite:
    """The documented site where bone stress is worked out: a long-bone shaft as a tube."""

    site: str
    outer_diameter_mm: float
    inner_diameter_mm: float
    eccentricity_mm: float
    source: str
    eccentricity_source: str


#: Femoral mid-shaft: outer 26 mm, inner 13 mm (from memory: adult femoral mid-diaphysis
#: dimensions of this order, Ruff & Hayes 1983, Am J Phys Anthropol 60:359-381).  The hip
#: contact force is taken to run down the shaft 10 mm off its axis: a net lever after the
#: thigh muscles' tension-band relief, calibrated so the model's surface stresses in jogging
#: (about 14 MPa tension) and in landings above 5 BW (about 35 MPa) match in-vivo strains
#: (850 microstrain tension running, Lanyon et al. 1975, Acta Orthop Scand 46:256-268;
#: more than 2000 microstrain above 5 BW, Hillam et al. 2015, J Biomech) times E = 17 GPa.
FEMUR_SHAFT = ShaftSite(
    site="femoral mid-shaft (cortical bone, a hollow tube)",
    outer_diameter_mm=26.0, inner_diameter_mm=13.0, eccentricity_mm=10.0,
    source="Adult femoral mid-shaft, outer 26 mm and inner 13 mm diameter (from memory; of the "
           "order reported by Ruff & Hayes 1983, Am J Phys Anthropol 60:359-381)",
    eccentricity_source="Net bending lever 10 mm, calibrated on in-vivo strains: 850 microstrain in "
                        "running (Lanyon et al. 1975, Acta Orthop Scand 46:256-268) and over 2000 "
                        "microstrain above 5 BW (Hillam et al. 2015, J Biomech) times E = 17 GPa",
)


@dataclass(frozen=True)
class Motion:
    """A kind of movement and the in-vivo measurement (or lever model) its joint loads follow.

    ``hip`` and ``knee`` are (contact force [BW], ground force through that leg [BW],
    source) of the anchor, or None where no data exist for that joint.
    """

    key: str
    label: str
    hip: tuple[float, float, str]
    knee: tuple[float, float, str] | None


_LEVER_HIP = JOINT_PRESETS["hip_single_leg_stance"]
_LEVER_KNEE_LANDING = JOINT_PRESETS["knee_landing"]
_LEVER_KNEE_SQUAT = JOINT_PRESETS["knee_squat"]


def _lever_ratio(preset: dict[str, float]) -> float:
    """Contact force per unit ground force through the leg of a static lever preset [-]."""
    return preset["supported_fraction"] * (1.0 + preset["external_moment_arm_m"] / preset["muscle_moment_arm_m"])


_BERGMANN_2001 = "Bergmann G et al. 2001, J Biomech 34:859-871"
_KELLER_1996 = "Keller TS et al. 1996, Clin Biomech 11(5):253-259"
_KUTZNER_2010 = "Kutzner I et al. 2010, J Biomech 43:2164-2173 (from memory)"
_LEVER = "static lever model (prescribe.loading.mechanics.JOINT_PRESETS; lever arms from memory)"

MOTIONS: dict[str, Motion] = {
    "gait": Motion("gait", "walking-like steps, one leg at a time",
                   (2.38, 1.2, f"hip 238% BW walking at about 4 km/h ({_BERGMANN_2001}) at a walking "
                               f"ground force of 1.2 BW ({_KELLER_1996})"),
                   (2.61, 1.2, f"knee 261% BW walking ({_KUTZNER_2010}) at 1.2 BW ({_KELLER_1996})")),
    "stairs_up": Motion("stairs_up", "stepping up, one leg at a time",
                        (2.51, 1.2, f"hip 251% BW going upstairs ({_BERGMANN_2001}); stair ground force "
                                    "taken as walking's 1.2 BW (assumption)"),
                        (3.16, 1.2, f"knee 316% BW upstairs ({_KUTZNER_2010}); ground force 1.2 BW (assumption)")),
    "stairs_down": Motion("stairs_down", "stepping up and down, one leg at a time",
                          (2.60, 1.2, f"hip 260% BW going downstairs ({_BERGMANN_2001}); stair ground force "
                                      "taken as walking's 1.2 BW (assumption)"),
                          (3.46, 1.2, f"knee 346% BW downstairs ({_KUTZNER_2010}); ground force 1.2 BW "
                                      "(assumption)")),
    "running": Motion("running", "jogging-like strides with a flight phase, one leg at a time",
                      (5.5, 2.2, "hip about 550% BW jogging (Bergmann G, Graichen F & Rohlmann A 1993, "
                                 f"J Biomech 26:969-990) at a jogging ground force of 2.2 BW ({_KELLER_1996})"),
                      (_lever_ratio(_LEVER_KNEE_LANDING), 1.0, f"knee in a landing, {_LEVER}")),
    "landing": Motion("landing", "landings, stamps and heel drops",
                      (5.5, 2.2, "no in-vivo hip data for jumps in our sources: the ratio of jogging "
                                 "(Bergmann, Graichen & Rohlmann 1993, J Biomech 26:969-990; ground force "
                                 f"2.2 BW, {_KELLER_1996}), the nearest measured movement with a landing"),
                      (_lever_ratio(_LEVER_KNEE_LANDING), 1.0, f"knee in a landing, {_LEVER}")),
    "rise": Motion("rise", "rising, squatting and hinging on both feet",
                   (1.90, 0.5, f"hip 190% BW rising from a chair ({_BERGMANN_2001}; this value from memory) "
                               "with body weight shared by two legs"),
                   (_lever_ratio(_LEVER_KNEE_SQUAT), 1.0, f"knee in a squat, {_LEVER}")),
    "stance": Motion("stance", "standing work, feet on the floor",
                     (_lever_ratio(_LEVER_HIP), 1.0, f"hip in single-leg stance, {_LEVER}"), None),
    "unloaded": Motion("unloaded", "lying or seated: no weight through the legs",
                       (0.5, 0.0, "muscle pull alone, about half body weight (from memory: the order of "
                                  "in-vivo hip loads in lying exercises, OrthoLoad data, Bergmann et al. "
                                  "2016, PLoS ONE 11:e0155612); not scaled by ground force"), None),
}

#: Exercises whose movement or number of loaded legs the category rules below would miss.
_MOTION_OF: dict[str, tuple[str, int]] = {
    "jogging": ("running", 1), "aerobic_dance": ("running", 1),
    "stamp_gentle": ("landing", 1), "side_stamp_gentle": ("landing", 1),
    "stamp_forceful": ("landing", 1), "side_stamp_forceful": ("landing", 1),
    "step_up": ("stairs_up", 1), "step_aerobics_basic": ("stairs_down", 1),
    "tandem_walk": ("gait", 1), "heel_and_toe_walking": ("gait", 1), "stepping_practice": ("gait", 1),
    "calf_raise": ("stance", 2), "overhead_press": ("stance", 2), "wall_push_up": ("stance", 2),
    "incline_push_up": ("stance", 2), "supported_dumbbell_row": ("stance", 2), "wall_slide": ("stance", 2),
}


def motion_of(ex: Exercise) -> tuple[Motion, int]:
    """The movement kind of a catalogue entry and the legs that share its ground force.

    Named entries first (:data:`_MOTION_OF`); then: no ground force -> unloaded; impact
    level 1 -> gait; impact levels 2-3 -> landing; other resistance work -> rise;
    balance and posture work -> stance.  One leg where the entry's patterns include
    single-leg stance, else two.
    """
    if ex.exercise_id in _MOTION_OF:
        key, legs = _MOTION_OF[ex.exercise_id]
        return MOTIONS[key], legs
    one_leg = "single_leg_stance" in ex.patterns
    if ex.peak_grf_bw == 0:
        return MOTIONS["unloaded"], 2
    if ex.category == "impact":
        return (MOTIONS["gait"], 1) if ex.impact_level <= 1 else (MOTIONS["landing"], 1 if one_leg else 2)
    if ex.category == "resistance":
        return MOTIONS["rise"], 1 if one_leg else 2
    return MOTIONS["stance"], 1 if one_leg else 2


def _r(value: float, digits: int = 2) -> float:
    return round(float(value), digits)


def _inputs(body_mass_kg, t_score, external_load_kg, ex: Exercise) -> tuple[float, float, float]:
    mass = float(body_mass(body_mass_kg))
    t_lo, t_hi = T_SCORE_RANGE
    t = float(checked("t_score", t_score, low=t_lo, high=t_hi, allowed=f"a T-score from {t_lo:g} to {t_hi:g}"))
    load = float(checked("external_load_kg", external_load_kg, low=0, high=MAX_EXTERNAL_LOAD_KG,
                         allowed=f"a load from 0 to {MAX_EXTERNAL_LOAD_KG:g} kg"))
    if load > 0 and not ex.grf_plus_external_load:
        raise InputError.single("external_load_kg", load,
                                f"0 for {ex.exercise_id}, which is done without a bar, dumbbell or vest")
    return mass, t, load


def explain_exercise(exercise_id: str, body_mass_kg: float | None = None, t_score: float | None = None,
                     external_load_kg: float = 0.0, catalogue: Catalogue | None = None) -> dict[str, Any]:
    """The loads of one exercise for one person, with every assumption and source.

    Parameters
    ----------
    exercise_id : str
        A catalogue id.
    body_mass_kg : float, optional
        Body mass [kg], 25-300; default :data:`DEFAULT_BODY_MASS_KG` (70 kg).
    t_score : float, optional
        The person's (lowest) T-score [SD], -7 to +5; default :data:`DEFAULT_T_SCORE` (-2.5).
    external_load_kg : float, default 0
        Bar, dumbbells or vest carried [kg], 0-300; only for entries that take a load.
    catalogue : Catalogue, optional
        Default: the packaged catalogue.

    Returns
    -------
    dict
        exercise_id, name, body_mass_kg, t_score, peak_grf_bw, peak_grf_n, loading_rate_bw_s,
        joint_contact_force_bw (hip), knee_contact_force_bw, muscle_force_bw,
        joint_friction_n, bone_stress_mpa (axial, F/A at :data:`FEMUR_SHAFT`),
        peak_stress_mpa, strength_mpa {healthy, this_person} (compressive),
        strength_by_mode_mpa, safety_factor, plain_words, assumptions, sources, cautions.

    References
    ----------
    See :data:`MOTIONS`, :data:`FEMUR_SHAFT` and :mod:`prescribe.loading.bone_loads`.
    """
    cat = catalogue or default_catalogue()
    ex = cat.get(exercise_id)
    mass_given, t_given = body_mass_kg is not None, t_score is not None
    mass, t, load = _inputs(DEFAULT_BODY_MASS_KG if body_mass_kg is None else body_mass_kg,
                            DEFAULT_T_SCORE if t_score is None else t_score, external_load_kg, ex)
    weight_n = mass * G
    motion, legs = motion_of(ex)
    grf_bw = ex.peak_grf_bw + (load / mass if ex.grf_plus_external_load else 0.0)
    grf_leg_bw = grf_bw / legs

    # Joint contact: anchored on an in-vivo measurement of the like movement (hip), or a
    # static lever model where no such measurement is in our sources.
    hip_anchor, hip_anchor_grf, hip_source = motion.hip
    if motion.key == "unloaded":
        hip_bw = hip_anchor
        hip_range = (0.25, 1.0)
    else:
        hip_bw = anchored_contact_force_bw(grf_bw, legs, hip_anchor, hip_anchor_grf)
        if motion.key == "landing":
            hip_bw = min(hip_bw, max(HIP_MEASURED_MAX_BW, grf_leg_bw))
        low_ratio = min(MOTIONS["gait"].hip[0] / MOTIONS["gait"].hip[1], hip_anchor / hip_anchor_grf)
        high_ratio = max(MOTIONS["running"].hip[0] / MOTIONS["running"].hip[1], hip_anchor / hip_anchor_grf)
        hip_range = (min(low_ratio * grf_leg_bw, hip_bw), max(high_ratio * grf_leg_bw, hip_bw))
    knee_bw = None
    if motion.knee is not None and grf_bw > 0:
        knee_bw = _r(anchored_contact_force_bw(grf_bw, legs, motion.knee[0], motion.knee[1]), 4)
    hip_n = hip_bw * weight_n
    muscle_bw = hip_bw - grf_leg_bw

    # Bone stress at the femoral shaft, and the bone's strength at this density.
    site = FEMUR_SHAFT
    stresses = shaft_stresses_mpa(hip_n, site.outer_diameter_mm, site.inner_diameter_mm, site.eccentricity_mm)
    ratio = density_ratio_from_t_score(t)
    strength_healthy = {"compression": CORTICAL_STRENGTH_MPA[("compression", "longitudinal")],
                        "tension": CORTICAL_STRENGTH_MPA[("tension", "longitudinal")]}
    strength_person = {k: _r(density_scaled(v, ratio, 2.0), 2) for k, v in strength_healthy.items()}
    peak = {"compression": _r(stresses["compression"], 3), "tension": _r(stresses["tension"], 3)}
    with np.errstate(divide="ignore"):
        safety = {k: (_r(strength_person[k] / peak[k], 2) if peak[k] > 0 else None) for k in peak}
    share = max(peak[k] / strength_person[k] for k in peak)

    rate = ex.loading_rate_bw_s
    result: dict[str, Any] = {
        "exercise_id": ex.exercise_id,
        "name": ex.name,
        "category": ex.category,
        "impact_level": ex.impact_level,
        "body_mass_kg": mass,
        "body_mass_given": mass_given,
        "t_score": t,
        "t_score_given": t_given,
        "external_load_kg": load,
        "peak_grf_bw": _r(grf_bw, 4),
        "peak_grf_n": _r(grf_bw * weight_n, 2),
        "peak_grf_range_bw": list(ex.peak_grf_range_bw),
        "loading_rate_bw_s": rate,
        "loading_rate_n_s": _r(rate * weight_n, 0) if rate is not None else None,
        "movement": motion.key,
        "movement_label": motion.label,
        "legs_loaded": legs,
        "ground_force_per_leg_bw": _r(grf_leg_bw, 4),
        "joint": "hip",
        "joint_contact_force_bw": _r(hip_bw, 4),
        "joint_contact_force_n": _r(hip_n, 2),
        "joint_contact_force_range_bw": [_r(hip_range[0], 4), _r(hip_range[1], 4)],
        "muscle_force_bw": _r(muscle_bw, 4),
        "muscle_force_n": _r(muscle_bw * weight_n, 2),
        "knee_contact_force_bw": knee_bw,
        "knee_contact_force_n": _r(knee_bw * weight_n, 2) if knee_bw is not None else None,
        "friction_coefficient": FRICTION_COEFFICIENT,
        "joint_friction_n": _r(FRICTION_COEFFICIENT * hip_n, 3),
        "joint_friction_range_n": [_r(FRICTION_RANGE[0] * hip_n, 3), _r(FRICTION_RANGE[1] * hip_n, 3)],
        "bone_stress_mpa": _r(stresses["axial"], 3),
        "bone_stress_site": {
            "site": site.site,
            "area_mm2": _r(stresses["area_mm2"], 2),
            "outer_diameter_mm": site.outer_diameter_mm,
            "inner_diameter_mm": site.inner_diameter_mm,
            "force_n": _r(hip_n, 2),
            "stress": "the hip contact force over the shaft's cross-sectional area (axial)",
            "source": site.source,
        },
        "bending_stress_mpa": _r(stresses["bending"], 3),
        "bending_eccentricity_mm": site.eccentricity_mm,
        "peak_stress_mpa": peak,
        "density_ratio": _r(ratio, 4),
        "strength_mpa": {"healthy": strength_healthy["compression"],
                         "this_person": strength_person["compression"]},
        "strength_by_mode_mpa": {k: {"healthy": strength_healthy[k], "this_person": strength_person[k]}
                                 for k in strength_healthy},
        "safety_factor": safety,
        "share_of_strength": _r(share, 3),
        "modulus_mpa": {"healthy": CORTICAL_MODULUS_MPA,
                        "this_person": _r(density_scaled(CORTICAL_MODULUS_MPA, ratio, 2.0), 0)},
    }
    notes = []
    if t < T_SCORE_TYPICAL_LOW:
        notes.append(f"T-score {t:g} is below the typical range (from {T_SCORE_TYPICAL_LOW:g}): the straight-line "
                     "T-score to density mapping was not made for such low values, and the strength it gives is "
                     "not a reliable figure. Treat the comparison with strength as out of range.")
    if ex.source_kind != "force_plate":
        notes.append("The ground force of this exercise is an estimate, not a force-plate measurement.")
    result["notes"] = notes
    result["osteogenic"] = bool(grf_bw > OSTEOGENIC_GRF_BW and (rate or 0) > OSTEOGENIC_RATE_BW_S)
    result["plain_words"] = plain_words(result)
    result["assumptions"] = _assumptions(ex, motion, legs, mass_given, t_given, load)
    result["sources"] = _sources(ex, motion)
    result["cautions"] = with_standard([
        "These loads are estimates from simple published relations, for explaining a program; "
        "they do not predict a fracture or replace an assessment.",
    ])
    return result


def _assumptions(ex: Exercise, motion: Motion, legs: int, mass_given: bool, t_given: bool,
                 load: float) -> list[str]:
    site = FEMUR_SHAFT
    items = []
    if not mass_given:
        items.append(f"Body mass not given: {DEFAULT_BODY_MASS_KG:g} kg (a round adult reference; common practice).")
    if not t_given:
        items.append(f"T-score not given: {DEFAULT_T_SCORE:g}, the WHO threshold of osteoporosis (WHO 1994), "
                     "the cautious choice.")
    items += [
        f"Peak ground reaction force and loading rate: the catalogue's figures for {ex.exercise_id} "
        f"({ex.source_kind.replace('_', ' ')}: {ex.source}).",
        "Newtons: BW x body mass x standard gravity 9.80665 m/s^2.",
        f"Movement kind: {motion.label}; the ground force is shared by {legs} "
        f"leg{'s' if legs > 1 else ''} at the peak.",
        f"Hip contact force: {motion.hip[2]}; scaled in proportion to the ground force through the leg "
        "(our assumption). It includes the muscles' pull, so it is more than the ground force alone."
        + (f" Landings are not taken above {HIP_MEASURED_MAX_BW:g} BW, the largest hip load measured in vivo "
           "(stumbling, Bergmann, Graichen & Rohlmann 1993)." if motion.key == "landing" else ""),
        "Muscle pull at the hip: the hip contact force less the ground force through that leg.",
        "Knee contact force: " + (motion.knee[2] + "." if motion.knee is not None
                                  else "no published figure for this kind of movement in our sources."),
        f"Joint friction: coefficient {FRICTION_COEFFICIENT:g} (cartilage range {FRICTION_RANGE[0]:g}-"
        f"{FRICTION_RANGE[1]:g}: Ateshian et al. 1998; Bonnevie et al. 2011) times the hip contact force.",
        f"Bone stress site: {site.site}; {site.source}. The whole hip contact force runs down the shaft; "
        "bone_stress_mpa is that force over the cortical area (axial).",
        f"Bending: {site.eccentricity_source}; the peak stresses add it to (compression) or take the axial "
        "stress from it (tension).",
        "Healthy strength: femoral cortical bone along the shaft, compression 193 MPa and tension 133 MPa "
        "(Reilly & Burstein 1975; values from memory): bone is far weaker in tension.",
        f"T-score to density: density / young-adult mean = 1 + T x {FEMORAL_NECK_YOUNG_SD_G_CM2:g} / "
        f"{FEMORAL_NECK_YOUNG_BMD_G_CM2:g} (femoral-neck reference, Looker et al. 1998, from memory); the "
        "areal (DXA) ratio is taken as the apparent-density ratio, and the femoral-neck ratio for the shaft.",
        "Strength at this density: healthy strength x (density ratio)^2 (Carter & Hayes 1977), in "
        "compression and, by assumption, in tension.",
        "Stress-strain picture: modulus 17 GPa (Reilly & Burstein 1975, from memory) scaled like strength, "
        "so yield strain is the same at any density (Morgan & Keaveny 2001, from memory); yield at 90% "
        "of the ultimate stress and a plastic region half the elastic strain (illustrative).",
    ]
    if load > 0:
        items.append(f"External load {load:g} kg added to the ground force as {load:g} / body mass BW.")
    elif ex.grf_plus_external_load:
        items.append("No external load given: body weight only; a bar or dumbbells add to every force.")
    if ex.loading_rate_bw_s is None:
        items.append("Loading rate: none in the catalogue for this exercise (the feet stay in contact; "
                     "no landing).")
    return items


def _sources(ex: Exercise, motion: Motion) -> list[str]:
    out = [
        ex.source,
        "Bergmann G et al. 2001, J Biomech 34:859-871 (in-vivo hip contact forces)",
        "Bergmann G, Graichen F & Rohlmann A 1993, J Biomech 26:969-990 (hip, jogging and stumbling)",
        "Bergmann G et al. 2016, PLoS ONE 11:e0155612 (OrthoLoad data)",
        "Keller TS et al. 1996, Clin Biomech 11(5):253-259 (walking and running ground forces)",
        "Ateshian GA et al. 1998, J Tribol 120:241-248 (cartilage friction)",
        "Bonnevie ED et al. 2011, Tribol Lett 41:83-95 (cartilage friction 0.025)",
        "Reilly DT & Burstein AH 1975, J Biomech 8:393-405 (cortical bone strength and stiffness)",
        "Carter DR & Hayes WC 1977, J Bone Joint Surg Am 59:954-962 (strength ~ density squared)",
        "WHO 1994, Technical Report Series 843 (T-score)",
        "Looker AC et al. 1998, Osteoporos Int 8:468-489 (femoral-neck young-adult reference)",
        "Lanyon LE et al. 1975, Acta Orthop Scand 46:256-268 (in-vivo bone strain)",
        "Hillam RA et al. 2015, J Biomech (in-vivo strain above 5 BW)",
        "Clissold et al. 2019, Clin Biomech 73:1-8 (osteogenic thresholds 3 BW, 43 BW/s)",
    ]
    if motion.knee is not None and "Kutzner" in motion.knee[2]:
        out.append("Kutzner I et al. 2010, J Biomech 43:2164-2173 (in-vivo knee contact forces; from memory)")
    return out


def _times(x: float) -> str:
    return f"{x:.1f}".rstrip("0").rstrip(".") if x < 10 else f"{x:.0f}"


def plain_words(result: dict[str, Any]) -> list[str]:
    """Two sentences for the person: what the hip and the thigh bone feel, and what it means."""
    name = result["name"]
    hip = result["joint_contact_force_bw"]
    if result["movement"] == "unloaded":
        first = (f"{name}: almost no weight goes through your legs; only the working muscles pull on your "
                 f"hip, about {_times(hip)} times your body weight at most.")
    else:
        if result["legs_loaded"] > 1:
            floor, joint = "shared by both feet", "each hip joint carries"
        else:
            floor, joint = "through one foot", "your hip joint carries"
        first = (f"{name}: the floor pushes back with about {_times(result['peak_grf_bw'])} times your body "
                 f"weight, {floor}, and the muscles around your hip pull at the same moment, so {joint} about "
                 f"{_times(hip)} times your body weight.")
    pct = max(1, round(100 * result["share_of_strength"]))
    density = "your bone density" if result["t_score_given"] else f"a T-score of {result['t_score']:g}"
    signal = ("a strong signal for the bone to build up" if result["osteogenic"]
              else "a steady load on the bone")
    share = result["share_of_strength"]
    if share < 1 / 3:
        second = f"At {density} that is about {pct}% of what your thigh bone can take: {signal}, with a wide margin."
    elif share < 2 / 3:
        second = (f"At {density} that is about {pct}% of what your thigh bone can take: {signal}, with a smaller "
                  "margin than most exercises, so keep to the amount and technique your clinician sets.")
    elif share < 1:
        second = (f"At {density} that is about {pct}% of what your thigh bone can take, close to its limit: "
                  "do not do this exercise unless your clinician has checked it with you.")
    else:
        second = (f"At {density} that is more than this simple model says your thigh bone can take: do not do "
                  "this exercise unless your clinician has checked it with you.")
    return [first, second]


def stress_strain_picture(result: dict[str, Any]) -> dict[str, Any]:
    """The stress-strain picture of an explanation as data: two curves and a marker.

    Healthy and this person's cortical bone in compression (:func:`prescribe.loading.bone_loads.
    stress_strain_curve`): the person's curve is less stiff and breaks at a lower stress;
    both leave the origin on a straight line (no toe region) and have a short plastic
    region.  The marker sits on the person's curve at the exercise's peak compressive
    stress.  Strains are in percent.
    """
    curves = {}
    for key in ("healthy", "this_person"):
        strain, stress = stress_strain_curve(result["modulus_mpa"][key],
                                             result["strength_by_mode_mpa"]["compression"][key])
        curves[key] = {"strain_pct": [round(float(x) * 100, 4) for x in strain],
                       "stress_mpa": [round(float(x), 2) for x in stress],
                       "modulus_mpa": result["modulus_mpa"][key],
                       "ultimate_mpa": result["strength_by_mode_mpa"]["compression"][key]}
    stress = result["peak_stress_mpa"]["compression"]
    person = curves["this_person"]
    marker_strain = _strain_on_curve(person["strain_pct"], person["stress_mpa"], stress)
    return {
        "title": f"{result['name']}: where it loads the thigh bone",
        "x_label": "strain (% stretch or squeeze)",
        "y_label": "stress (MPa)",
        "curves": curves,
        "labels": {"healthy": "healthy adult bone",
                   "this_person": "this person's bone" if result["t_score_given"]
                   else f"bone at T-score {result['t_score']:g}"},
        "marker": {"strain_pct": marker_strain, "stress_mpa": stress,
                   "label": f"{result['name']} ({stress:.0f} MPa)"},
    }


def _strain_on_curve(strain_pct: list[float], stress_mpa: list[float], stress: float) -> float:
    """The strain where the rising part of a curve reaches ``stress`` (its last rising point if never)."""
    rising = [(e, s) for e, s in zip(strain_pct, stress_mpa)][:-1]  # the last point is the break
    for (e0, s0), (e1, s1) in zip(rising, rising[1:]):
        if s0 <= stress <= s1 and s1 > s0:
            return round(e0 + (stress - s0) * (e1 - e0) / (s1 - s0), 4)
    return rising[-1][0]


def force_bars(result: dict[str, Any]) -> list[dict[str, Any]]:
    """The bar picture as data: body weight, ground force, muscle pull and hip contact force.

    Each bar has key, label, bw and n (newtons at the explanation's body mass).  Where two
    legs share the ground force, a bar for one leg's share comes after the total; the
    muscle pull plus the ground force through one leg make the hip contact force.
    """
    weight_n = result["body_mass_kg"] * G
    bars = [("body_weight", "Body weight", 1.0),
            ("ground_force", "Ground force", result["peak_grf_bw"])]
    if result["legs_loaded"] > 1:
        bars.append(("ground_force_per_leg", "Ground force, one leg", result["ground_force_per_leg_bw"]))
    bars += [("muscle_force", "Muscle pull, at the hip", result["muscle_force_bw"]),
             ("joint_contact_force", "Hip joint, contact force", result["joint_contact_force_bw"])]
    return [{"key": k, "label": label, "bw": round(float(bw), 3), "n": round(float(bw) * weight_n, 1)}
            for k, label, bw in bars]
