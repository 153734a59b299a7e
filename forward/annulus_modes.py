"""Unit-data modes of a hollow part a <= r <= b (the solid part's are in modes.py, whose
axial and angular machinery these reuse).

End face F (bottom or top), zeta = distance from F, kappa = lam / (b - a):
    u = R(r) Theta_m(theta) Z(zeta) / B_F[Z],   R: radial eigenfunction meeting both walls'
    homogeneous conditions (forward/annulus_radial.py), Z as for the solid part.
Wall w (side r = b or bore r = a), beta = mu / L:
    u = Theta_m(theta) Z(z) q(r) / B_w[q],   q: modified-Bessel factor meeting the other
    wall's condition, q(r_w) = 1 (forward/wall_radial.py), Z = sin(beta z + phi_b).
Heat INTO the part through each face per unit coefficient (m = 0 cos only):
    end data:  data face -k Zhat'(0) 2 pi int R r dr, far face k Zhat'(L) 2 pi int R r dr,
               wall k dR/dn 2 pi r_w int_0^L Zhat dzeta   (int Zhat = (Zhat'(L) - Zhat'(0)) / kappa^2);
    wall data: wall k dq/dn 2 pi r int_0^L Z dz / B for each wall,
               bottom -k Z'(0) 2 pi int q r dr / B, top k Z'(L) 2 pi int q r dr / B.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .annulus_radial import AnnulusRadial
from .faces import EndCondition
from .modes import EndFaceModes, SideModes, _theta_parts
from .wall_radial import WallRadial


def _axisym(modes):
    return (modes.m == 0) & ~modes.is_sin


@dataclass
class AnnulusEndModes(EndFaceModes):
    """Modes carrying data on an end face of a hollow part; `radius` is the wall thickness
    b - a (kappa = lam / thickness), inner_radius a [m], bore and side the walls' kinds."""

    inner_radius: float = 0.0
    bore: EndCondition | None = None
    side: EndCondition | None = None

    def __post_init__(self):
        super().__post_init__()
        self.a, self.b = self.inner_radius, self.inner_radius + self.radius
        self.radial = self._radial_of(slice(None))

    def _radial_of(self, index):
        return AnnulusRadial(self.bore, self.side, self.m[index], self.kappa[index], self.a,
                             self.b, self.conductivity)

    def radial_values(self, s, index=slice(None)):
        """R of the modes `index` at radii s [m], (S, K_index)."""
        whole = isinstance(index, slice) and index == slice(None)
        radial = self.radial if whole else self._radial_of(index)
        return radial.values(np.asarray(s, float).ravel())[0]

    def tail_envelopes(self, r, z, index):
        """Envelopes of the modes `index` ((R, K_i), (Z, K_i); see EndFaceModes): radial 1,
        the bound the estimate has always taken for a wall-to-wall radial function; axial
        |Zhat(zeta(z))|."""
        zh, _ = self.axial(self.zeta(z))
        return np.ones((np.size(r), np.size(self.m[index]))), np.abs(zh[:, index])

    def fields(self, r, theta, z, gradient=True):
        r = np.asarray(r, float).ravel()
        th, dth = _theta_parts(self.m, self.is_sin, np.asarray(theta, float).ravel())
        zh, dzh = self.axial(self.zeta(z))
        rr, dr, mr = self.radial.values(r)
        t = rr * th * zh
        if not gradient:
            return t, None
        sign = 1.0 if self.face == "bottom" else -1.0
        return t, np.stack([dr * th * zh, mr * dth * zh, sign * rr * th * dzh])

    def grid_factors(self, r, z, gradient=True):
        rr, dr, mr = self.radial.values(np.asarray(r, float).ravel())
        zh, dzh = self.axial(self.zeta(z))
        if not gradient:
            return rr, None, None, zh, None
        sign = 1.0 if self.face == "bottom" else -1.0
        return rr, dr, mr, zh, sign * dzh

    def eigenfunctions(self, r, theta):
        th, _ = _theta_parts(self.m, self.is_sin, np.asarray(theta, float).ravel())
        return self.radial.values(np.asarray(r, float).ravel())[0] * th

    def eigenfunctions_grid(self, r, theta):
        th, _ = _theta_parts(self.m, self.is_sin, np.asarray(theta, float).ravel())
        rr = self.radial.values(np.asarray(r, float).ravel())[0]
        return rr[:, None, :] * th[None, :, :]

    def norms(self):
        """integral over the face of Phi^2 dA [m^2] = (2 pi or pi) int_a^b R^2 r dr."""
        return self.radial.norms() * np.where(self.m == 0, 2.0 * np.pi, np.pi)

    def area_integrals(self):
        return np.where(_axisym(self), 2.0 * np.pi * self.radial.ring_integrals(), 0.0)

    def powers(self):
        k, L, kappa = self.conductivity, self.height, self.kappa
        ring = self.area_integrals()
        _, dzh0 = self.axial(np.zeros(1))
        _, dzhl = self.axial(np.array([L]))
        far = "top" if self.face == "bottom" else "bottom"
        safe = np.where(kappa > 0, kappa ** 2, 1.0)
        int_z = np.where(kappa > 0, (dzhl[0] - dzh0[0]) / safe, 0.0)
        out = {self.face: -k * dzh0[0] * ring, far: k * dzhl[0] * ring}
        for wall, r_w, sign in (("side", self.b, 1.0), ("bore", self.a, -1.0)):
            _, dr = self.radial.at_wall(wall)
            out[wall] = np.where(_axisym(self), sign * k * dr * 2.0 * np.pi * r_w * int_z, 0.0)
        return out


@dataclass
class WallModes(SideModes):
    """Modes carrying data on a wall of a hollow part: `radius` is the data wall's radius,
    wall 'side' or 'bore', inner_radius a and outer_radius b [m], other the other wall's
    homogeneous kind."""

    wall: str = "side"
    inner_radius: float = 0.0
    outer_radius: float = 0.0
    other: EndCondition | None = None

    def _ratio_derivative_at_rim(self):
        """dq/dn at the data wall, outward normal [1/m]."""
        self.radial = WallRadial(self.wall, self.other, self.m, self.beta, self.inner_radius,
                                 self.outer_radius, self.conductivity)
        return self.radial.outward_derivative(self.wall)

    def _radial(self, r):
        return self.radial.values(np.asarray(r, float).ravel())

    def powers(self):
        k, L, beta, mu, phi = self.conductivity, self.height, self.beta, self.mu, self.phi
        axisym = _axisym(self)
        safe_b = np.where(beta > 0, beta, 1.0)
        int_z = np.where(beta > 0, (np.cos(phi) - np.cos(mu + phi)) / safe_b, L * np.sin(phi))
        out = {}
        for wall, r_w in (("side", self.outer_radius), ("bore", self.inner_radius)):
            dq = self.radial.outward_derivative(wall)
            out[wall] = np.where(axisym, k * dq / self.norm_b * 2 * np.pi * r_w * int_z, 0.0)
        ring = self.radial.ring_integrals()
        _, dz0 = self.axial(np.zeros(1))
        _, dzl = self.axial(np.array([L]))
        out["bottom"] = np.where(axisym, -k * dz0[0] / self.norm_b * 2 * np.pi * ring, 0.0)
        out["top"] = np.where(axisym, k * dzl[0] / self.norm_b * 2 * np.pi * ring, 0.0)
        return out
