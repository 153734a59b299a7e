"""Geometry and material of the solid cylinder (SI units throughout)."""

from __future__ import annotations

import math
from dataclasses import dataclass

from .errors import ForwardModelError

FACE_NAMES = ("bottom", "top", "side")


def normal_component(face, grad):
    """dT/dn with the outward normal of a face (bottom -z, top +z, side +r) from a gradient
    (3, ...) given as (d/dr, (1/r) d/dtheta, d/dz)."""
    return {"bottom": -grad[2], "top": grad[2], "side": grad[0]}[face]


@dataclass(frozen=True)
class Cylinder:
    """Solid cylinder 0 <= r <= radius, 0 <= z <= height (height = math.inf: semi-infinite).

    radius [m], height [m], conductivity k [W/(m K)] (None when no face needs it).
    """

    radius: float
    height: float
    conductivity: float | None = None

    def __post_init__(self):
        if not (math.isfinite(self.radius) and self.radius > 0):
            raise ForwardModelError(f"radius must be a positive length, got {self.radius!r} m")
        if not (self.height > 0) or math.isnan(self.height):
            raise ForwardModelError(f"height must be a positive length or infinite, got {self.height!r} m")
        if self.conductivity is not None and not (math.isfinite(self.conductivity) and self.conductivity > 0):
            raise ForwardModelError(
                f"conductivity must be a positive value in W/(m*K), got {self.conductivity!r}")

    @property
    def semi_infinite(self) -> bool:
        return math.isinf(self.height)

    @property
    def faces(self) -> tuple[str, ...]:
        """Names of the faces this part has ('top' is absent when semi-infinite)."""
        return ("bottom", "side") if self.semi_infinite else FACE_NAMES

    def contains(self, r, z, tol: float = 1e-9):
        """Boolean mask: points (r [m], z [m]) inside or on the part, with a relative tolerance."""
        import numpy as np

        r = np.asarray(r, dtype=float)
        z = np.asarray(z, dtype=float)
        scale = self.radius if self.semi_infinite else max(self.radius, self.height)
        eps = tol * scale
        inside = (r >= -eps) & (r <= self.radius + eps) & (z >= -eps)
        if not self.semi_infinite:
            inside &= z <= self.height + eps
        return inside
