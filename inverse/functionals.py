"""Linear functionals of the unknown face: face mean, total power in and zone averages.

Each is value = k + f . c (f (K,), k a number) in the face's unit (K or W/m^2; W for the
power), from a Gauss x trapezoid rule on the face.
"""

from __future__ import annotations

import numpy as np

from .face_grid import quadrature


def face_functionals(design, zones=()) -> list:
    """(name, f (K,), k) for the face mean, the total power into the part and each zone on
    the unknown face: value = k + f . c, in the face's unit (K or W/m^2; W for the power).
    Zones on another face or covering nothing are left out (inverse.fit warns about them)."""
    basis, cyl = design.basis, design.cylinder
    face = basis.face
    quad = quadrature(face, cyl.radius, cyl.height)
    Bq = basis.face_values(quad.u, quad.v)
    kq = basis.known_face_values(quad.u, quad.v)

    def average(weights):
        total = float(weights.sum())
        return weights @ Bq / total, float(weights @ kq) / total

    f_mean, k_mean = average(quad.weights)
    out = [("mean", f_mean, k_mean)]
    if basis.quantity == "heat_flux":
        area = float(quad.weights.sum())
        out.append(("total_power", f_mean * area, k_mean * area))
    else:
        out.append(("total_power", basis.powers(), float(basis.known_power())))
    for zone in zones or ():
        if (getattr(zone, "face", None) or face) != face:
            continue
        mask = np.asarray(zone.contains(quad.u, quad.v), dtype=bool)
        if mask.any():
            out.append((zone.name,) + average(quad.weights * mask))
    return out
