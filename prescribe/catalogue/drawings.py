"""Drawings of an exercise's start and end position, as SVG text, from its pose data.

Our own simple style: a round-capped stick figure (the far-side limbs grey, the body and
near-side limbs black, the head a circle), the floor and any props in grey, start on the
left and end on the right with an arrow between.  Few elements, so WeasyPrint lays a
drawing out cheaply: one ``<path>`` for the props and floor, one for the far limbs, one
for the body; no text inside the SVG (the template prints "Start" and "End" beside it as
page text).  Pure: pose data in, SVG text out.
"""

from __future__ import annotations

from html import escape

from .poses import HEAD_RADIUS, SURFACES, Pose, Posture, key_points

#: SVG units per body height.
UNIT = 100.0
PANEL_W = 140.0
GAP = 26.0
PAD = 6.0
INK, FAR, PROP = "#000000", "#707070", "#5c5c5c"


def _props(posture: Posture, pts: dict, to_svg) -> list[str]:
    """Path commands for the surfaces the figure rests on, the extra props, and what is held."""
    out: list[str] = []
    spans: dict[str, list[float]] = {}
    for contact in posture.contacts:
        point, _, surface = contact.partition("@")
        if surface not in ("floor", "mat"):
            spans.setdefault(surface, []).append(pts[point][0])
    for prop in posture.props:
        spans.setdefault(prop.kind, []).append(pts["hip"][0] + prop.x)
    for surface, xs in spans.items():
        left, right = min(xs) - 0.1, max(xs) + 0.1
        height = SURFACES[surface]
        if surface == "wall":
            x = max(xs)
            (x0, y0), (_, y1) = to_svg((x, 0)), to_svg((x, 1.15))
            out.append(f"M{x0:.1f},{y0:.1f}V{y1:.1f}")
        elif surface == "towel":
            cx, cy = to_svg((xs[0], height / 2))
            r = height / 2 * UNIT
            out.append(f"M{cx - r:.1f},{cy:.1f}a{r:.1f},{r:.1f} 0 1,0 {2 * r:.1f},0a{r:.1f},{r:.1f} 0 1,0 "
                       f"{-2 * r:.1f},0")
        elif surface == "chair":
            (x0, top), (x1, floor) = to_svg((left, height)), to_svg((right, 0))
            _, back = to_svg((0, height + 0.24))
            out.append(f"M{x0:.1f},{back:.1f}V{floor:.1f}M{x0:.1f},{top:.1f}H{x1:.1f}V{floor:.1f}")
        elif surface == "counter":
            (x0, top), (_, floor) = to_svg((left, height)), to_svg((0, 0))
            x1 = to_svg((left + 0.3, 0))[0]
            out.append(f"M{x1:.1f},{top:.1f}H{x0:.1f}V{floor:.1f}")
        else:  # bench, box, step, block: a box under the points
            (x0, top), (x1, floor) = to_svg((left, height)), to_svg((right, 0))
            out.append(f"M{x0:.1f},{floor:.1f}V{top:.1f}H{x1:.1f}V{floor:.1f}")
    hand = to_svg(pts["hand_n"])
    if posture.holds == "kettlebell":
        out.append(f"M{hand[0] - 5:.1f},{hand[1] + 5:.1f}a5,5 0 1,0 10,0a5,5 0 1,0 -10,0")
    elif posture.holds == "dumbbell":
        out.append(f"M{hand[0] - 5:.1f},{hand[1]:.1f}h10M{hand[0] - 5:.1f},{hand[1] - 3:.1f}v6"
                   f"M{hand[0] + 5:.1f},{hand[1] - 3:.1f}v6")
    elif posture.holds == "bar":
        cx, cy = to_svg(pts["neck"])
        out.append(f"M{cx - 9:.1f},{cy:.1f}a4,4 0 1,0 8,0a4,4 0 1,0 -8,0")
    elif posture.holds == "dowel":
        (hx, hy), (nx, ny) = to_svg(pts["hip"]), to_svg(pts["head"])
        out.append(f"M{hx - 5 + (hx - nx) * 0.1:.1f},{hy + (hy - ny) * 0.1:.1f}"
                   f"L{nx - 5 - (hx - nx) * 0.25:.1f},{ny - (hy - ny) * 0.25:.1f}")
    elif posture.holds == "band":
        toe = to_svg(pts["toe_n"])
        out.append(f"M{hand[0]:.1f},{hand[1]:.1f}L{toe[0]:.1f},{toe[1]:.1f}")
    return out


def _figure(posture: Posture, view: str, x_left: float, floor_y: float) -> tuple[list[str], list[str], list[str]]:
    pts = key_points(posture, view)
    xs = [x for x, _ in pts.values()]
    centre = (min(xs) + max(xs)) / 2
    shift = x_left + PANEL_W / 2 - centre * UNIT

    def to_svg(p):
        return p[0] * UNIT + shift, floor_y - p[1] * UNIT

    def chain(names) -> str:
        """One polyline through the key points: a path command a point, not two a segment."""
        coords = [to_svg(pts[n]) for n in names]
        return "M" + "L".join(f"{x:.1f},{y:.1f}" for x, y in coords)

    near, far = [], []
    for side in ("n", "f"):
        leg_root = "hip" if view == "side" else f"hip_{side}"
        arm_root = "neck" if view == "side" else f"shoulder_{side}"
        # Seen from the side, the far limbs are grey; seen from the front, both sides are black.
        limbs = far if view == "side" and side == "f" else near
        limbs.append(chain((leg_root, f"knee_{side}", f"ankle_{side}", f"heel_{side}", f"toe_{side}")))
        limbs.append(chain((arm_root, f"elbow_{side}", f"hand_{side}")))
    near.append(chain(("hip", "neck")))
    if view == "front":
        near.append(chain(("hip_n", "hip_f")) + chain(("shoulder_n", "shoulder_f")))
    # The head: a circle whose edge meets the neck line.
    (nx, ny), (hx, hy) = to_svg(pts["neck"]), to_svg(pts["head"])
    r = HEAD_RADIUS * UNIT
    length = max(((hx - nx) ** 2 + (hy - ny) ** 2) ** 0.5, 1e-9)
    ex, ey = hx - (hx - nx) / length * r, hy - (hy - ny) / length * r
    near.append(f"M{nx:.1f},{ny:.1f}L{ex:.1f},{ey:.1f}")
    near.append(f"M{hx - r:.1f},{hy:.1f}a{r:.1f},{r:.1f} 0 1,0 {2 * r:.1f},0a{r:.1f},{r:.1f} 0 1,0 {-2 * r:.1f},0")
    props = [f"M{x_left + 2:.1f},{floor_y:.1f}H{x_left + PANEL_W - 2:.1f}"] + _props(posture, pts, to_svg)
    return props, far, near


def _top(posture: Posture, view: str) -> float:
    pts = key_points(posture, view)
    return max(max(y for _, y in pts.values()), pts["head"][1] + HEAD_RADIUS, 0.3)


def pose_svg(pose: Pose, title: str = "", label: str | None = None) -> str:
    """The start (left) and end (right) positions of ``pose`` as one small SVG.

    ``title`` (escaped) names the exercise for screen readers; ``label``, when given, is
    the whole accessible label instead (the person's pages give it in the person's language).
    """
    top = max(_top(pose.start, pose.view), _top(pose.end, pose.view))
    floor_y = PAD + top * UNIT + 4
    height = floor_y + PAD
    width = 2 * PANEL_W + GAP
    props, far, near = [], [], []
    for posture, x_left in ((pose.start, 0.0), (pose.end, PANEL_W + GAP)):
        p, f, n = _figure(posture, pose.view, x_left, floor_y)
        props += p
        far += f
        near += n
    # An arrow from start to end, between the panels.
    ax, ay = PANEL_W + 4, floor_y - min(0.5, top / 2) * UNIT
    props.append(f"M{ax:.1f},{ay:.1f}h{GAP - 8:.1f}m-6,-5l6,5l-6,5")
    if label is None:
        label = f"{title}: start and end position" if title else "Start and end position"
    label = escape(label)
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="pose" viewBox="0 0 {width:.0f} {height:.0f}" '
            f'role="img" fill="none" stroke-linecap="round" stroke-linejoin="round"><title>{label}</title>'
            f'<path class="props" d="{"".join(props)}" stroke="{PROP}" stroke-width="2.5"/>'
            f'<path class="far" d="{"".join(far)}" stroke="{FAR}" stroke-width="5"/>'
            f'<path class="body" d="{"".join(near)}" stroke="{INK}" stroke-width="5.5"/></svg>')
