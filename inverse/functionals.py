"""Linear functionals of the unknown face: face mean, total power in and zone averages.

Each is value = k + f . c (f (K,), k a number) in the face's unit (K or W/m^2; W for the
power), from a Gauss x trapezoid rule on the face.  `design` is any model columns object
with .face(u, v), .powers(), .face_name, .quantity and .cylinder (design.Design, or the
zone model's columns); one with .face_grid(along, around) is evaluated on the rule's grid
lines, block by block (face_grid.face_sums).
"""

from __future__ import annotations

import numpy as np

from ..forward.geometry import is_wall
from .face_grid import face_sums, quadrature


def face_functionals(design, zones=()) -> list:
    """(name, f (K,), k) for the face mean, the total power into the part and each zone on
    the unknown face: value = k + f . c, in the face's unit (K or W/m^2; W for the power).
    Zones on another face or covering nothing are left out (inverse.fit warns about them)."""
    cyl, face = design.cylinder, design.face_name
    quad = quadrature(face, cyl, breaks=_breaks(list(zones or ()) + list(
        getattr(design, "zones", ())), face, cyl.wall_radius(face)))
    masks = [(zone.name, np.asarray(zone.contains(quad.u, quad.v), dtype=bool)) for zone in zones or ()
             if (getattr(zone, "face", None) or face) == face]
    masks = [(name, mask) for name, mask in masks if mask.any()]
    weights = np.vstack([quad.weights] + [quad.weights * mask for _, mask in masks])
    sums, known = face_sums(design, quad, weights)
    area = weights.sum(axis=1)
    f, k = sums / area[:, None], known / area                 # each weight vector's average
    out = [("mean", f[0], float(k[0]))]
    if design.quantity == "heat_flux":
        out.append(("total_power", f[0] * area[0], float(k[0] * area[0])))
    else:
        out.append(("total_power",) + design.powers())
    return out + [(name, f[i], float(k[i])) for i, (name, _) in enumerate(masks, start=1)]


def _breaks(zones, face, radius):
    """Zone edges on `face` (Zone objects; other zone objects have no known edges), or None."""
    from .zone_edges import zone_breaks

    along, around = [], []
    for zone in zones:
        if hasattr(zone, "indicator") and (zone.face or face) == face:
            a, b = zone_breaks(zone, is_wall(face), radius)
            along += a
            around += b
    return (along, around) if along or around else None


def functional_matrix(design, zones=()):
    """(names, F (q, K), k (q,)) of face_functionals stacked, for joint propagation."""
    funcs = face_functionals(design, zones)
    return ([f[0] for f in funcs], np.array([f[1] for f in funcs]), np.array([f[2] for f in funcs]))
