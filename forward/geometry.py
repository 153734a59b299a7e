"""Geometry and material of the part: a solid cylinder or a hollow one (SI units throughout).

Solid:  0 <= r <= radius, 0 <= z <= height (height = math.inf: semi-infinite).
Hollow: inner_radius <= r <= radius; faces bottom, top, side (outer wall, r = radius) and
bore (inner wall, r = inner_radius).  A long hollow part (`long=True`) is the plane r-theta
problem of a tube where nothing varies along the axis: its faces are the two walls only.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .errors import ForwardModelError

FACE_NAMES = ("bottom", "top", "side", "bore")
WALLS = ("side", "bore")


def is_wall(face: str) -> bool:
    """True for a wall (face coordinates theta, z), False for an end (r, theta)."""
    return face in WALLS


def normal_component(face, grad):
    """dT/dn with the outward normal of a face (bottom -z, top +z, side +r, bore -r) from a
    gradient (3, ...) given as (d/dr, (1/r) d/dtheta, d/dz)."""
    return {"bottom": -grad[2], "top": grad[2], "side": grad[0], "bore": -grad[0]}[face]


@dataclass(frozen=True)
class Cylinder:
    """A cylindrical part: radius [m], height [m] (math.inf: semi-infinite, solid parts only),
    conductivity k [W/(m K)] (None when no face needs it), inner_radius [m] (0: solid),
    long (hollow parts only: nothing varies along z; height is then ignored and infinite)."""

    radius: float
    height: float
    conductivity: float | None = None
    inner_radius: float = 0.0
    long: bool = False

    def __post_init__(self):
        if not (math.isfinite(self.radius) and self.radius > 0):
            raise ForwardModelError(f"radius must be a positive length, got {self.radius!r} m")
        if not (self.height > 0) or math.isnan(self.height):
            raise ForwardModelError(f"height must be a positive length or infinite, got {self.height!r} m")
        if self.conductivity is not None and not (math.isfinite(self.conductivity) and self.conductivity > 0):
            raise ForwardModelError(
                f"conductivity must be a positive value in W/(m*K), got {self.conductivity!r}")
        a = self.inner_radius
        if not (math.isfinite(a) and 0 <= a < self.radius):
            raise ForwardModelError(
                f"inner_radius must be 0 (solid) or a length below the radius {self.radius} m, got {a!r} m")
        if self.long and a == 0:
            raise ForwardModelError("a long part must be hollow: give inner_radius as a length")
        if self.long:
            object.__setattr__(self, "height", math.inf)
        elif a > 0 and math.isinf(self.height):
            raise ForwardModelError(
                "a hollow part needs a finite height, or height = \"long\" for a tube where "
                "nothing varies along the axis")

    @property
    def hollow(self) -> bool:
        return self.inner_radius > 0

    @property
    def semi_infinite(self) -> bool:
        """A solid part without a top face (height infinite)."""
        return math.isinf(self.height) and not self.long

    @property
    def thickness(self) -> float:
        """Radial extent of the material [m]: the wall thickness, or the radius when solid."""
        return self.radius - self.inner_radius

    @property
    def faces(self) -> tuple[str, ...]:
        """Names of the faces this part has."""
        if self.long:
            return WALLS
        if self.semi_infinite:
            return ("bottom", "side")
        return FACE_NAMES if self.hollow else FACE_NAMES[:3]

    def wall_radius(self, face: str) -> float:
        """Radius [m] of a wall: the radius for 'side', inner_radius for 'bore'."""
        return self.inner_radius if face == "bore" else self.radius

    def face_span(self, face: str) -> float:
        """Length [m] of a face along its non-angular coordinate: the height on a wall (the
        radius on a long part's walls, which have no z extent), the wall thickness on an end."""
        if is_wall(face):
            return self.radius if math.isinf(self.height) else self.height
        return self.thickness

    @property
    def axial_length(self) -> float:
        """Length [m] the field is taken over along z: the height, or 1 m on a long part (its
        areas and powers are per metre of length)."""
        return 1.0 if self.long else self.height

    def datum_span(self, face: str) -> float:
        """Length [m] that turns a face datum into a temperature size (a flux q gives
        q span / k): the wall thickness (the radius when solid), on a wall also at most the
        height."""
        return min(self.thickness, self.height) if is_wall(face) else self.thickness

    def face_area(self, face: str) -> float:
        """Area of a face [m^2]: 2 pi r_w L on a wall (per metre of length on a long part),
        pi (b^2 - a^2) on an end."""
        if is_wall(face):
            return 2 * math.pi * self.wall_radius(face) * self.axial_length
        return math.pi * (self.radius ** 2 - self.inner_radius ** 2)

    def depth(self, face: str, r, z):
        """Distance [m] of points (r, z) from a face: the sensors' depth below it."""
        import numpy as np

        r, z = np.asarray(r, float), np.asarray(z, float)
        if face == "side":
            return self.radius - r
        if face == "bore":
            return r - self.inner_radius
        return np.abs(z - (0.0 if face == "bottom" else self.height))

    def contains(self, r, z, tol: float = 1e-9):
        """Boolean mask: points (r [m], z [m]) inside or on the part, with a relative tolerance
        (any z on a long part)."""
        import numpy as np

        r = np.asarray(r, dtype=float)
        z = np.asarray(z, dtype=float)
        scale = self.radius if math.isinf(self.height) else max(self.radius, self.height)
        eps = tol * scale
        inside = (r >= self.inner_radius - eps) & (r <= self.radius + eps)
        if self.long:
            return inside & np.isfinite(z)
        inside &= z >= -eps
        if not self.semi_infinite:
            inside &= z <= self.height + eps
        return inside
