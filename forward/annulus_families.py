"""Eigenvalue families and mode blocks of a hollow part (see forward/families.py).

End-face data: radial eigenfunctions of the annulus (forward/annulus_radial.py), stored
dimensionless as lam = kappa (b - a).  Wall data: axial sines from the end conditions, as for
the solid part, with the modified-Bessel radial factor of forward/wall_radial.py.
A long part (plane r-theta problem) is served as a slab of unit height with insulated ends
and z-uniform data: its walls' families then hold the one axial mode mu = 0 (Z = 1), so
every power is per metre of length.
"""

from __future__ import annotations

from .annulus_modes import AnnulusEndModes, WallModes
from .annulus_radial import annulus_eigenvalues
from .faces import EndCondition
from .geometry import Cylinder, is_wall
from .roots import axial_eigenvalues


class AnnulusFamilies:
    def __init__(self, cylinder: Cylinder, kinds: dict, conductivity: float):
        self.cylinder, self.k = cylinder, conductivity
        self.kinds = dict(kinds)
        if cylinder.long:
            self.kinds.setdefault("bottom", EndCondition("N"))
            self.kinds.setdefault("top", EndCondition("N"))
        self.height = cylinder.axial_length
        self.max_terms = 1 if cylinder.long else None  # per harmonic on a wall

    def complete_terms(self, face):
        """A long part's wall data (uniform in z) are carried exactly by the one axial mode."""
        return 1 if (self.cylinder.long and is_wall(face)) else None

    def interval(self, face):
        cyl = self.cylinder
        return (0.0, self.height) if is_wall(face) else (cyl.inner_radius, cyl.radius)

    def eigenvalues(self, face, m, n):
        kinds, k, cyl, L = self.kinds, self.k, self.cylinder, self.height
        if is_wall(face):
            if cyl.long:
                n = 1
            b, t = kinds["bottom"], kinds["top"]
            return axial_eigenvalues(b.kind, t.kind, n, b.biot(k, L), t.biot(k, L))
        kappa = annulus_eigenvalues(kinds["bore"], kinds["side"], m, n, cyl.inner_radius,
                                    cyl.radius, k)
        return kappa * cyl.thickness

    def modes(self, face, m, is_sin, ev):
        kinds, cyl, k = self.kinds, self.cylinder, self.k
        if is_wall(face):
            other = "bore" if face == "side" else "side"
            return WallModes(cyl.wall_radius(face), self.height, k, kinds[face], kinds["bottom"],
                             kinds["top"], m, is_sin, ev, wall=face, inner_radius=cyl.inner_radius,
                             outer_radius=cyl.radius, other=kinds[other])
        far = "top" if face == "bottom" else "bottom"
        return AnnulusEndModes(face, cyl.thickness, cyl.height, k, kinds[face], kinds.get(far),
                               m, is_sin, ev, inner_radius=cyl.inner_radius, bore=kinds["bore"],
                               side=kinds["side"])
