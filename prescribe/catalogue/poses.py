"""Start and end positions of an exercise, as joint angles, and the stick figure they make.

Each catalogue entry carries a ``pose`` (see docs/catalogue.md): the view (side or
front), whether the movement has a flight phase, and two postures, ``start`` and ``end``.
A posture is a set of joint angles in degrees plus the points that rest on a surface
(``contacts``) and the props in the picture.  :func:`key_points` turns a posture into 2D
key points by forward kinematics over a body of fixed segment lengths; the drawing code
(:mod:`prescribe.catalogue.drawings`) draws them.  Pure functions, no I/O.

Angles (side view: the person faces right; front view: the person faces the viewer)::

    trunk     trunk from vertical; + leans forward (side) or to the picture's right (front).
              90 is lying face down, -90 lying on the back (side view).
    neck      head forward of the trunk line (flexion +).
    hip       [near, far] flexion + / extension - (side); abduction + (front).
    knee      [near, far] flexion (0 straight); front view: 0 only.
    ankle     [near, far] dorsiflexion + / plantarflexion - (toes pointed).
    shoulder  [near, far] flexion + (180: arm overhead) / extension - (side); abduction (front).
    elbow     [near, far] flexion (0 straight).

In the front view "near" is the limb on the left of the picture and "far" the one on the right.
"""

from __future__ import annotations

import math
from typing import Literal

from pydantic import BaseModel, ConfigDict, Field, model_validator

#: Segment lengths as fractions of body height, rounded from the anthropometric table of
#: Drillis & Contini 1966 as reproduced in Winter, Biomechanics and Motor Control of
#: Human Movement, 4th ed. 2009, Fig. 4.1 (from memory): shoulder 0.818, hip 0.530,
#: knee 0.285, ankle 0.039 of height; upper arm 0.186, forearm 0.146, hand 0.108,
#: foot 0.152.  Neck-to-head-centre, head radius and hip and shoulder widths are ours.
SEGMENTS: dict[str, float] = {
    "trunk": 0.288, "neck": 0.11, "upper_arm": 0.186, "forearm": 0.19, "thigh": 0.245, "shank": 0.246,
    "heel": 0.039, "foot": 0.13, "toe_front": 0.045, "hip_half_width": 0.085, "shoulder_half_width": 0.125,
}
HEAD_RADIUS = 0.062

#: Height of each surface a point can rest on, as a fraction of body height (a 172 cm
#: adult; common sizes, common practice): box 30 cm, step and block 17 cm, kitchen
#: counter 91 cm; a seated person's hip joint on a chair or bench of 45 cm about 48 cm up;
#: "mat": the hip and shoulder joints of a person lying on the floor, about 14 cm up.
#: A wall is vertical: a point "@wall" places the wall, it does not set a height.
SURFACES: dict[str, float | None] = {
    "floor": 0.0, "chair": 0.28, "bench": 0.28, "box": 0.17, "step": 0.10, "block": 0.10,
    "counter": 0.53, "towel": 0.05, "mat": 0.08, "wall": None,
}
HELD = ("dumbbell", "kettlebell", "bar", "band", "dowel")
SIDE_POINTS = ("hip", "neck", "head", "knee_n", "knee_f", "ankle_n", "ankle_f", "heel_n", "heel_f",
               "toe_n", "toe_f", "elbow_n", "elbow_f", "hand_n", "hand_f")
FRONT_POINTS = SIDE_POINTS + ("hip_n", "hip_f", "shoulder_n", "shoulder_f")

#: Human joint ranges [degrees]: average active ranges of the American Academy of
#: Orthopaedic Surgeons (Joint Motion: Method of Measuring and Recording, 1965; from
#: memory): hip flexion 120, extension 30, abduction 45; knee flexion 135; ankle
#: dorsiflexion 20, plantarflexion 50; shoulder flexion 180, extension 60, abduction
#: 180; elbow flexion 150; neck flexion 45, extension 45.  A few degrees are allowed
#: over the averages (ranges vary between people; common practice).
JOINT_RANGES: dict[str, dict[str, tuple[float, float]]] = {
    "side": {"neck": (-45, 45), "hip": (-30, 125), "knee": (0, 140), "ankle": (-50, 25),
             "shoulder": (-60, 180), "elbow": (0, 150)},
    "front": {"neck": (-45, 45), "hip": (-30, 45), "knee": (0, 0), "ankle": (-50, 25),
              "shoulder": (0, 180), "elbow": (0, 150)},
}

Pair = tuple[float, float]


class Prop(BaseModel):
    """A prop in the picture: a surface under a point is drawn from the contacts; these are extra."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    kind: Literal["chair", "bench", "box", "step", "block", "counter", "wall", "towel"]
    #: Where, from the hip [fraction of body height, + forward].
    x: float = Field(ge=-1.5, le=1.5)


class Posture(BaseModel):
    """One position: joint angles [degrees], the points resting on a surface, props, what is held."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    trunk: float = Field(0.0, ge=-95, le=95)
    neck: float = 0.0
    hip: Pair = (0.0, 0.0)
    knee: Pair = (0.0, 0.0)
    ankle: Pair = (0.0, 0.0)
    shoulder: Pair = (0.0, 0.0)
    elbow: Pair = (0.0, 0.0)
    #: "point@surface", e.g. "heel_n@floor", "hip@chair", "hand_n@counter".  The first one
    #: places the figure; the others must then lie on their surfaces (tested).
    contacts: tuple[str, ...] = Field(default=(), max_length=8)
    props: tuple[Prop, ...] = ()
    holds: Literal[HELD] | None = None  # type: ignore[valid-type]

    @model_validator(mode="after")
    def _contacts_known(self) -> "Posture":
        for contact in self.contacts:
            point, _, surface = contact.partition("@")
            if point not in FRONT_POINTS or surface not in SURFACES:
                raise ValueError(f"contact {contact!r} must be point@surface with a point from "
                                 f"{', '.join(FRONT_POINTS)} and a surface from {', '.join(SURFACES)}")
        return self


class Pose(BaseModel):
    """The start and end position of an exercise."""

    model_config = ConfigDict(frozen=True, extra="forbid")

    view: Literal["side", "front"] = "side"
    #: True where both feet leave the ground during the movement (jumps, hops, jogging).
    flight: bool = False
    start: Posture
    end: Posture

    @model_validator(mode="after")
    def _front_knees_straight(self) -> "Pose":
        if self.view == "front":
            for name in ("start", "end"):
                if any(getattr(self, name).knee):
                    raise ValueError(f"{name}.knee must be [0, 0] in the front view (a knee bends "
                                     "towards the viewer there; draw it from the side)")
        return self


def _dir(angle_deg: float) -> tuple[float, float]:
    """Unit vector at ``angle_deg`` from straight up, + towards the picture's right (y up)."""
    a = math.radians(angle_deg)
    return math.sin(a), math.cos(a)


def _step(p: tuple[float, float], length: float, angle: float) -> tuple[float, float]:
    dx, dy = _dir(angle)
    return p[0] + length * dx, p[1] + length * dy


def _raw_points(posture: Posture, view: str) -> dict[str, tuple[float, float]]:
    s = SEGMENTS
    t = posture.trunk
    hip = (0.0, 0.0)
    neck = _step(hip, s["trunk"], t)
    pts = {"hip": hip, "neck": neck, "head": _step(neck, s["neck"], t + posture.neck)}
    for i, side in enumerate(("n", "f")):
        if view == "side":
            root_leg, root_arm = hip, neck
            thigh = t + 180 - posture.hip[i]
            shank = thigh + posture.knee[i]
            arm = t + 180 - posture.shoulder[i]
            fore = arm - posture.elbow[i]
        else:
            sigma = -1 if side == "n" else 1  # near: the picture's left
            root_leg = _step(hip, s["hip_half_width"] * sigma, t + 90)
            root_arm = _step(neck, s["shoulder_half_width"] * sigma, t + 90)
            pts[f"hip_{side}"], pts[f"shoulder_{side}"] = root_leg, root_arm
            thigh = t + 180 - sigma * posture.hip[i]
            shank = thigh
            arm = t + 180 - sigma * posture.shoulder[i]
            fore = arm - sigma * posture.elbow[i]
        knee = _step(root_leg, s["thigh"], thigh)
        ankle = _step(knee, s["shank"], shank)
        heel = _step(ankle, s["heel"], shank)
        if view == "side":
            toe = _step(heel, s["foot"], shank - 90 - posture.ankle[i])
        else:
            toe = (heel[0] + sigma * s["toe_front"], heel[1])
        elbow = _step(root_arm, s["upper_arm"], arm)
        pts.update({f"knee_{side}": knee, f"ankle_{side}": ankle, f"heel_{side}": heel, f"toe_{side}": toe,
                    f"elbow_{side}": elbow, f"hand_{side}": _step(elbow, s["forearm"], fore)})
    return pts


def key_points(posture: Posture, view: str = "side") -> dict[str, tuple[float, float]]:
    """Key points [fractions of body height; x + to the picture's right, y up from the floor].

    The figure is raised or lowered so that its first contact rests on its surface (a
    wall sets no height); with no contact, its lowest point is on the floor.
    """
    pts = _raw_points(posture, view)
    lift = None
    for contact in posture.contacts:
        point, _, surface = contact.partition("@")
        height = SURFACES[surface]
        if height is not None:
            lift = height - pts[point][1]
            break
    if lift is None:
        lift = -min(y for _, y in pts.values())
    return {k: (x, y + lift) for k, (x, y) in pts.items()}


def segments(view: str = "side") -> list[tuple[str, str]]:
    """The pairs of key points joined by a body segment (drawn as lines; lengths fixed)."""
    out = [("hip", "neck"), ("neck", "head")]
    if view == "front":
        out += [("hip_n", "hip_f"), ("shoulder_n", "shoulder_f")]
    for side in ("n", "f"):
        leg_root = "hip" if view == "side" else f"hip_{side}"
        arm_root = "neck" if view == "side" else f"shoulder_{side}"
        out += [(leg_root, f"knee_{side}"), (f"knee_{side}", f"ankle_{side}"), (f"ankle_{side}", f"heel_{side}"),
                (f"heel_{side}", f"toe_{side}"), (arm_root, f"elbow_{side}"), (f"elbow_{side}", f"hand_{side}")]
    return out


def contact_errors(posture: Posture, view: str = "side") -> dict[str, float]:
    """How far each contact point is from its surface [fraction of body height]; walls excluded."""
    pts = key_points(posture, view)
    out = {}
    for contact in posture.contacts:
        point, _, surface = contact.partition("@")
        height = SURFACES[surface]
        if height is not None:
            out[contact] = pts[point][1] - height
    return out


def angles_out_of_range(posture: Posture, view: str = "side") -> list[str]:
    """Joint angles outside the human ranges of :data:`JOINT_RANGES` ("hip[0] = 140 not in -30..125")."""
    out = []
    for joint, (low, high) in JOINT_RANGES[view].items():
        value = getattr(posture, joint)
        values = value if isinstance(value, tuple) else (value,)
        for i, v in enumerate(values):
            if not low <= v <= high:
                out.append(f"{joint}[{i}] = {v:g} not in {low:g}..{high:g}")
    return out
