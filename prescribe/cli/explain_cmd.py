"""``prescribe explain``: the loads of one exercise on the joint and the bone, for one person."""

from __future__ import annotations

import sys

from ..loading.explain import DEFAULT_BODY_MASS_KG, DEFAULT_T_SCORE, explain_exercise
from ..records import BODY_MASS_RANGE_KG
from .output import emit_json, emit_table

TABLE_KEYS = ["exercise_id", "name", "body_mass_kg", "t_score", "external_load_kg", "peak_grf_bw",
              "peak_grf_n", "loading_rate_bw_s", "legs_loaded", "joint_contact_force_bw",
              "joint_contact_force_n", "muscle_force_bw", "knee_contact_force_bw", "friction_coefficient",
              "joint_friction_n", "bone_stress_mpa", "bending_stress_mpa", "density_ratio"]


def register(sub) -> None:
    p = sub.add_parser(
        "explain", help="the loads of one exercise on the hip and the thigh bone (JSON; --table for text)",
        description="What one exercise does to the joint and the bone: the peak ground reaction force "
                    "(BW and N), the loading rate, the hip contact force with the muscles' pull included "
                    "(the knee where data exist), the friction in the joint, the stress in the femoral "
                    "shaft and the bone's strength for a healthy adult and at this person's T-score, with "
                    "every assumption and source.  Estimates for explaining a program, not predictions.")
    p.add_argument("exercise_id", metavar="EXERCISE_ID", help="a catalogue id (see `prescribe exercises`)")
    p.add_argument("--body-mass-kg", type=float, default=None, metavar="M",
                   help="body mass in kg ({}-{}; default {:g})".format(*BODY_MASS_RANGE_KG, DEFAULT_BODY_MASS_KG))
    p.add_argument("--t-score", type=float, default=None, metavar="T",
                   help=f"the person's lowest T-score (-7 to +5; default {DEFAULT_T_SCORE:g}, the WHO "
                        "threshold of osteoporosis)")
    p.add_argument("--external-load-kg", type=float, default=0.0, metavar="L",
                   help="bar, dumbbells or vest carried, in kg (only for exercises that take a load; default 0)")
    p.add_argument("--table", action="store_true", help="key figures as text instead of JSON")
    p.set_defaults(func=run_explain)


def run_explain(args) -> int:
    result = explain_exercise(args.exercise_id, body_mass_kg=args.body_mass_kg, t_score=args.t_score,
                              external_load_kg=args.external_load_kg)
    if not args.table:
        emit_json(result)
        return 0
    rows = [{"figure": k, "value": result[k]} for k in TABLE_KEYS]
    rows += [{"figure": f"peak_stress_mpa.{k}", "value": v} for k, v in result["peak_stress_mpa"].items()]
    for mode, values in result["strength_by_mode_mpa"].items():
        rows += [{"figure": f"strength_mpa.{mode}.{who}", "value": v} for who, v in values.items()]
    rows += [{"figure": f"safety_factor.{k}", "value": v} for k, v in result["safety_factor"].items()]
    emit_table(rows, ["figure", "value"])
    out = sys.stdout
    out.write(f"\nstress site: {result['bone_stress_site']['site']}, area {result['bone_stress_site']['area_mm2']:g} mm^2\n")
    for text in result["notes"]:
        out.write(f"note: {text}\n")
    for text in result["plain_words"]:
        out.write(f"in plain words: {text}\n")
    for text in result["assumptions"]:
        out.write(f"assumption: {text}\n")
    for text in result["sources"]:
        out.write(f"source: {text}\n")
    for text in result["cautions"]:
        out.write(f"caution: {text}\n")
    return 0
