"""Where a new thermocouple may go: drilling rules as plain arithmetic on positions (SI).

A hole is drilled straight in from one face: from an end face (top: z = L - depth; bottom:
z = depth) the hole is axial at (r, theta); from the side it is radial at (theta, z) and
r = a - depth.  A candidate position is admissible when

    depth_min <= depth <= depth_max                    (depth along the hole [m])
    distance to every face >= face_distance            [m]
    distance to every other sensor >= spacing          [m] (existing ones and earlier picks)
    hole clear of every existing sensor's hole         [m] (hole_clearance: the present holes
                                                        taken from existing_face, default the
                                                        same face, within spacing;
                                                        and of every earlier pick's hole,
                                                        clear_of_pick)
    theta outside every excluded angular range         [rad, periodic]
    r and z outside every excluded radial / axial range [m].

`candidate_grid` lays a grid over the admissible region; `admissible` checks any list of
positions (a user's candidates file) against the same rules.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .errors import InverseError

DRILL_FACES = ("top", "bottom", "side")
#: which covariance of a fit the planner updates (inverse.plan.state_from_fit); a choice list
#: kept here, in the planner's light module, so reading a case file loads no statistics
COVARIANCES = ("mixture", "dominant")
#: default minimum distance of a sensor tip from any face [m] (common practice, no source)
DEFAULT_FACE_DISTANCE = 0.002
#: default minimum spacing between sensors [m] (common practice, no source)
DEFAULT_SPACING = 0.005
#: default grid: angular step [rad], positions along the face (radial or axial) and depths
DEFAULT_ANGLE_STEP = math.radians(15.0)
DEFAULT_ALONG = 12
DEFAULT_DEPTHS = 4


@dataclass(frozen=True)
class PlanRules:
    """Drilling rules (SI, radians).  drill_face None: opposite the unknown face (see
    `default_drill_face`); existing_face: the face the present sensors' holes were drilled
    from (None: assumed drill_face's).  exclude_theta: [(lo, hi)] angular ranges [rad]; exclude_r /
    exclude_z: [(lo, hi)] radial / axial ranges [m]; depth_max None: as deep as the part
    allows."""

    drill_face: str | None = None
    existing_face: str | None = None
    depth_min: float = 0.0
    depth_max: float | None = None
    face_distance: float = DEFAULT_FACE_DISTANCE
    spacing: float = DEFAULT_SPACING
    exclude_theta: tuple = field(default_factory=tuple)
    exclude_r: tuple = field(default_factory=tuple)
    exclude_z: tuple = field(default_factory=tuple)
    angle_step: float = DEFAULT_ANGLE_STEP
    along: int = DEFAULT_ALONG
    depths: int = DEFAULT_DEPTHS


def angle_count(step: float) -> int:
    """Angles of the candidate grid for an angular step [rad]: 2 pi / step rounded, at least 1."""
    return max(1, int(round(2 * math.pi / step)))


def grid_size(rules: PlanRules) -> int:
    """The most candidates candidate_grid makes: positions along x angles x depths (fewer on
    a long part, and before the drilling rules take some out)."""
    return rules.along * angle_count(rules.angle_step) * rules.depths


def default_drill_face(unknown_face: str, cylinder) -> str:
    """The face holes are drilled from when the case does not say: the end opposite an
    unknown end face (the side when that end does not exist), the top (bottom of a
    semi-infinite part) for an unknown side, the outer wall for an unknown bore or any face
    of a long part."""
    if unknown_face == "bore" or getattr(cylinder, "long", False):
        return "side"
    semi = math.isinf(cylinder.height)
    if unknown_face == "bottom":
        return "side" if semi else "top"
    if unknown_face == "top":
        return "bottom"
    return "bottom" if semi else "top"


def drill_face(rules: PlanRules, unknown_face: str, cylinder) -> str:
    """The face new holes go in from (checked, as the present holes' face when given)."""
    face = rules.drill_face or default_drill_face(unknown_face, cylinder)
    for f in (face, rules.existing_face):
        if f is None:
            continue
        if f not in DRILL_FACES:
            raise InverseError(f"holes are drilled from one of {', '.join(DRILL_FACES)}, got {f!r}")
        if getattr(cylinder, "long", False) and f != "side":
            raise InverseError("a long part is drilled from its outer wall (side): it has no end faces")
        if f == "top" and math.isinf(cylinder.height):
            raise InverseError("a semi-infinite part has no top face to drill from")
    return face


def depth_of(face: str, cylinder, r, z) -> np.ndarray:
    """Depth [m] of positions along holes drilled from `face`."""
    if face == "top":
        return cylinder.height - np.asarray(z, float)
    if face == "bottom":
        return np.asarray(z, float)
    return cylinder.radius - np.asarray(r, float)


def _in_ranges(x, ranges, periodic=False):
    x = np.asarray(x, float)
    out = np.zeros(x.shape, dtype=bool)
    for lo, hi in ranges:
        if periodic:
            span = (hi - lo) % (2 * math.pi) or (2 * math.pi if hi != lo else 0.0)
            out |= ((x - lo) % (2 * math.pi)) <= span
        else:
            out |= (x >= lo) & (x <= hi)
    return out


def _xyz(r, theta, z):
    r, theta, z = (np.asarray(v, float) for v in (r, theta, z))
    return np.column_stack([r * np.cos(theta), r * np.sin(theta), z])


def hole_ends(face: str, cylinder, r, theta, z):
    """(start, tip) (N, 3) [m] of holes drilled from `face` to the tips (r, theta, z): an end
    face's hole is axial, from z = L (top) or 0 (bottom) at (r, theta); the side's is radial,
    from r = a at (theta, z).  On a long part z is 0 (nothing varies along the axis)."""
    r, theta, z = (np.atleast_1d(np.asarray(v, float)) for v in (r, theta, z))
    if getattr(cylinder, "long", False):
        z = np.zeros_like(r)
    tip = _xyz(r, theta, z)
    if face == "side":
        start = _xyz(np.full_like(r, cylinder.radius), theta, z)
    else:
        start = tip.copy()
        start[:, 2] = cylinder.height if face == "top" else 0.0
    return start, tip


def segment_distance(p0, p1, q0, q1) -> np.ndarray:
    """Smallest distance [m] between segments p0-p1 (N, 3) and q0-q1 (M, 3), (N, M): the
    closest points s, t in [0, 1] of the two lines, clamped to the segments (a segment of
    zero length is its point)."""
    d1 = (p1 - p0)[:, None, :]
    d2 = (q1 - q0)[None, :, :]
    w = p0[:, None, :] - q0[None, :, :]
    a, e = np.sum(d1 * d1, axis=2), np.sum(d2 * d2, axis=2)
    b, c, f = np.sum(d1 * d2, axis=2), np.sum(d1 * w, axis=2), np.sum(d2 * w, axis=2)
    tiny = 1e-30
    point_p, point_q = a <= tiny, e <= tiny
    den = a * e - b * b
    s = np.where(den > 1e-12 * np.maximum(a * e, tiny), np.clip((b * f - c * e) / np.maximum(den, tiny), 0, 1), 0.0)
    t_line = np.where(point_q, 0.0, (b * s + f) / np.maximum(e, tiny))
    t = np.clip(t_line, 0.0, 1.0)
    # where t was clamped (or q is a point), s is p's nearest point to q(t)
    s = np.where((t != t_line) | point_q, np.clip((b * t - c) / np.maximum(a, tiny), 0, 1), s)
    s = np.where(point_p, 0.0, s)
    t = np.where(point_p & ~point_q, np.clip(f / np.maximum(e, tiny), 0, 1), t)
    gap = w + s[:, :, None] * d1 - t[:, :, None] * d2
    return np.sqrt(np.sum(gap * gap, axis=2))


def hole_clearance(face: str, cylinder, r, theta, z, existing, existing_face: str | None = None) -> np.ndarray:
    """Smallest distance [m] between the hole drilled from `face` to each position (r, theta,
    z) and the holes of the existing sensors (r, theta, z), drilled from `existing_face`
    (default: the same face): the distance of the two segments, face to tip
    (segment_distance; parallel holes from one end face are sqrt(r^2 + r_e^2 - 2 r r_e
    cos(dtheta)) apart; level radial holes from the side rho sin(dtheta) apart, rho the
    shallower tip's radius).  inf without existing sensors."""
    r = np.atleast_1d(np.asarray(r, float))
    if np.atleast_1d(existing[0]).size == 0:
        return np.full(r.shape, np.inf)
    p0, p1 = hole_ends(face, cylinder, r, theta, z)
    q0, q1 = hole_ends(existing_face or face, cylinder, *existing)
    out = np.empty(r.shape)
    for i in range(0, r.size, 2048):
        out[i:i + 2048] = segment_distance(p0[i:i + 2048], p1[i:i + 2048], q0, q1).min(axis=1)
    return out


def clear_of_pick(positions, pick: int, spacing: float, face: str | None = None, cylinder=None) -> np.ndarray:
    """True for each candidate (positions (r, theta, z) [m, rad, m]) still drillable once a
    sensor goes in at candidate `pick`: its tip at least `spacing` [m] from the pick's tip and,
    when the drilling face is given, its hole at least `spacing` from the pick's hole
    (hole_clearance: every new hole comes from that face)."""
    r, theta, z = (np.atleast_1d(np.asarray(v, float)) for v in positions)
    at = (r[pick:pick + 1], theta[pick:pick + 1], z[pick:pick + 1])
    if face is None:
        return min_distance(_xyz(r, theta, z), _xyz(*at)) >= spacing
    # a hole holds its tip, so the holes' distance is at most the tips'
    return hole_clearance(face, cylinder, r, theta, z, at) >= spacing


def min_distance(points, others) -> np.ndarray:
    """Distance [m] from each of `points` (P, 3) to the nearest of `others` (Q, 3) (inf if none),
    in blocks so 5,000 x 5,000 stays small."""
    P = np.asarray(points, float)
    Q = np.asarray(others, float)
    out = np.full(P.shape[0], np.inf)
    if Q.size == 0:
        return out
    for i in range(0, P.shape[0], 2048):
        d2 = ((P[i:i + 2048, None, :] - Q[None, :, :]) ** 2).sum(axis=2)
        out[i:i + 2048] = np.sqrt(d2.min(axis=1))
    return out


def admissible(rules: PlanRules, face: str, cylinder, r, theta, z, existing=None):
    """(mask, reason) for positions (r, theta, z) [m, rad, m]: mask True where every rule
    holds; reason: the first rule each rejected position breaks ('' when admissible).
    existing: (r, theta, z) of the sensors already in the part, or None."""
    r, theta, z = (np.atleast_1d(np.asarray(v, float)) for v in (r, theta, z))
    a, L = cylinder.radius, cylinder.height
    a_i = getattr(cylinder, "inner_radius", 0.0)
    long = getattr(cylinder, "long", False)
    reason = np.full(r.shape, "", dtype=object)

    def reject(bad, why):
        reason[(reason == "") & bad] = why

    depth = depth_of(face, cylinder, r, z)
    dmax = rules.depth_max if rules.depth_max is not None else np.inf
    outside = (r < a_i) | (r > a) if long else (r < a_i) | (r > a) | (z < 0) | (z > L)
    reject(outside, "outside the part")
    reject((depth < rules.depth_min) | (depth > dmax), "depth outside the allowed range")
    to_face = a - r
    if a_i > 0:
        to_face = np.minimum(to_face, r - a_i)
    if not long:
        to_face = np.minimum(to_face, z)
    if math.isfinite(L) and not long:
        to_face = np.minimum(to_face, L - z)
    reject(to_face < rules.face_distance, "too close to a face")
    reject(_in_ranges(theta, rules.exclude_theta, periodic=True), "in an excluded angular range")
    reject(_in_ranges(r, rules.exclude_r), "in an excluded radial range")
    reject(_in_ranges(z, rules.exclude_z), "in an excluded axial range")
    if existing is not None and len(existing[0]):
        near = min_distance(_xyz(r, theta, z), _xyz(*existing)) < rules.spacing
        reject(near, "too close to an existing sensor")
        other = rules.existing_face or face
        where = (f"drilled from the {other}" if rules.existing_face else
                 f"if that one was drilled from the {face} too; [plan] existing_from says where they were")
        reject(hole_clearance(face, cylinder, r, theta, z, existing, other) < rules.spacing,
               f"on the path of an existing sensor's hole ({where})")
    return reason == "", reason


def candidate_grid(rules: PlanRules, face: str, cylinder, existing=None):
    """(r, theta, z) [m, rad, m] of the admissible points of a grid over the drillable
    region: `along` positions across the face (r for end holes, z for side holes, cell
    centres), angles every `angle_step`, `depths` depths from depth_min to depth_max."""
    a, L = cylinder.radius, cylinder.height
    a_i = getattr(cylinder, "inner_radius", 0.0)
    g = rules.face_distance
    if face == "side":
        top = L if math.isfinite(L) else 4.0 * a
        along = g + (top - 2 * g) * (np.arange(rules.along) + 0.5) / rules.along
        if getattr(cylinder, "long", False):
            along = np.zeros(1)  # nothing varies along a long part
        deep = a - a_i - g
    else:
        lo = a_i + g if a_i > 0 else 0.0
        along = lo + (a - g - lo) * (np.arange(rules.along) + 0.5) / rules.along
        deep = (L if math.isfinite(L) else 4.0 * a) - g
    dmax = min(rules.depth_max if rules.depth_max is not None else deep, deep)
    dmin = max(rules.depth_min, g)
    if dmax < dmin:
        upper = ("[plan] depth_max" if rules.depth_max is not None and rules.depth_max <= deep else
                 f"the part's {'wall' if face == 'side' else 'height'} less [plan] face_distance")
        lower = "[plan] depth_min" if rules.depth_min >= g else "[plan] face_distance"
        top_mm = round(max(dmax, 0.0) * 1e3, 9)     # a thin wall less twice the distance: 0, not 1e-15
        raise InverseError(f"no depth is allowed: the depth range ends at {top_mm:.3g} mm ({upper}), below "
                           f"{dmin * 1e3:.3g} mm ({lower}); lower {lower}, or give the positions with "
                           f"--candidates")
    depths = np.linspace(dmin, dmax, rules.depths) if rules.depths > 1 else np.array([0.5 * (dmin + dmax)])
    n_theta = angle_count(rules.angle_step)
    theta = 2 * math.pi * np.arange(n_theta) / n_theta
    S, TH, D = np.meshgrid(along, theta, depths, indexing="ij")
    S, TH, D = S.ravel(), TH.ravel(), D.ravel()
    if face == "side":
        r, z = a - D, S
    elif face == "top":
        r, z = S, L - D
    else:
        r, z = S, D
    ok, why = admissible(rules, face, cylinder, r, TH, z, existing)
    if not ok.any():
        raise InverseError(f"none of the {ok.size} positions of the [plan] grid meets the [plan] rules "
                           f"({'; '.join(sorted(set(why)))}): relax them")
    return r[ok], TH[ok], z[ok]
