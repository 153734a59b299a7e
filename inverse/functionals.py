"""Linear functionals of the unknown face: face mean, total power in and zone averages.

Each is value = k + f . c (f (K,), k a number) in the face's unit (K or W/m^2; W for the
power), from a Gauss x trapezoid rule on the face.  `design` is any model columns object
with .face(u, v), .powers(), .face_name, .quantity and .cylinder (design.Design, or the
zone model's columns); one with .face_grid(along, around) is evaluated on the rule's grid
lines (face_grid.face_on).
"""

from __future__ import annotations

import numpy as np

from ..forward.geometry import is_wall
from .face_grid import face_on, quadrature


def face_functionals(design, zones=()) -> list:
    """(name, f (K,), k) for the face mean, the total power into the part and each zone on
    the unknown face: value = k + f . c, in the face's unit (K or W/m^2; W for the power).
    Zones on another face or covering nothing are left out (inverse.fit warns about them)."""
    cyl, face = design.cylinder, design.face_name
    quad = quadrature(face, cyl, breaks=_breaks(list(zones or ()) + list(
        getattr(design, "zones", ())), face, cyl.wall_radius(face)))
    Bq, kq = face_on(design, quad)

    def average(weights):
        total = float(weights.sum())
        return weights @ Bq / total, float(weights @ kq) / total

    f_mean, k_mean = average(quad.weights)
    out = [("mean", f_mean, k_mean)]
    if design.quantity == "heat_flux":
        area = float(quad.weights.sum())
        out.append(("total_power", f_mean * area, k_mean * area))
    else:
        out.append(("total_power",) + design.powers())
    for zone in zones or ():
        if (getattr(zone, "face", None) or face) != face:
            continue
        mask = np.asarray(zone.contains(quad.u, quad.v), dtype=bool)
        if mask.any():
            out.append((zone.name,) + average(quad.weights * mask))
    return out


def _breaks(zones, face, radius):
    """Zone edges on `face` (Zone objects; other zone objects have no known edges), or None."""
    from .zones import zone_breaks

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
