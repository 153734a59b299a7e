"""Eigenvalue families and mode blocks of a part: what a known-data series and the unknown
face's basis ask of the geometry (one place for both).

A family object answers, for a face carrying data (the other faces homogeneous of their
kinds): its eigenvalues for harmonic m (dimensionless: lambda = kappa * span on an end face,
mu = beta * L on a wall), the block of modes for arrays (m, is_sin, eigenvalue), and the
interval of the face's non-angular coordinate s (r on an end face, z on a wall).
`SolidFamilies` serves the solid cylinder (forward/modes.py); the hollow part's
`AnnulusFamilies` lives in forward/annulus_families.py.
"""

from __future__ import annotations

from .geometry import Cylinder, is_wall
from .modes import EndFaceModes, SideModes
from .roots import axial_eigenvalues, radial_eigenvalues


class SolidFamilies:
    """Families of the solid cylinder: Bessel J_m radial functions for end-face data (side
    condition), axial sines for side data (end conditions)."""

    def __init__(self, cylinder: Cylinder, kinds: dict, conductivity: float):
        self.cylinder, self.kinds, self.k = cylinder, kinds, conductivity

    def complete_terms(self, face):
        """Terms per harmonic that carry the face's data exactly (no truncation), or None."""
        return None

    def interval(self, face):
        """(lo, hi) [m] of the face coordinate s: r on an end face, z on the side."""
        cyl = self.cylinder
        return (0.0, cyl.height) if is_wall(face) else (0.0, cyl.radius)

    def eigenvalues(self, face, m, n):
        kinds, k, cyl = self.kinds, self.k, self.cylinder
        if is_wall(face):
            b, t = kinds["bottom"], kinds["top"]
            return axial_eigenvalues(b.kind, t.kind, n, b.biot(k, cyl.height), t.biot(k, cyl.height))
        side = kinds["side"]
        return radial_eigenvalues(side.kind, m, n, side.biot(k, cyl.radius))

    def modes(self, face, m, is_sin, ev):
        kinds, cyl = self.kinds, self.cylinder
        if is_wall(face):
            return SideModes(cyl.radius, cyl.height, self.k, kinds["side"], kinds["bottom"],
                             kinds["top"], m, is_sin, ev)
        far = "top" if face == "bottom" else "bottom"
        return EndFaceModes(face, cyl.radius, cyl.height, self.k, kinds[face], kinds.get(far),
                            m, is_sin, ev)


def families_for(cylinder: Cylinder, kinds: dict, conductivity: float):
    """The family object of a part (solid or hollow)."""
    if cylinder.hollow:
        from .annulus_families import AnnulusFamilies

        return AnnulusFamilies(cylinder, kinds, conductivity)
    return SolidFamilies(cylinder, kinds, conductivity)
