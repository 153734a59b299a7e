"""Unit-data modes: the field of one eigenfunction of data on one face, the other faces
homogeneous of their own kinds.  Every family returns per-mode columns, shape (P, K).

End face F (bottom z = 0 or top z = L), zeta = distance from F, kappa = lambda / a:
    u = J_m(kappa r) Theta_m(theta) Z(zeta) / B_F[Z]
    Z(zeta) = exp(-kappa zeta) + rho exp(-kappa (2 L - zeta))      (decaying exponentials)
    rho = -1 (far face 'D'), +1 ('N'), (k kappa - h)/(k kappa + h) ('R'); 0 if L infinite
    B_F[Z] = Z(0) ('D'), -k Z'(0) ('N'), -k Z'(0) + h Z(0) ('R')   (outward normal -zeta)
Side r = a, beta = mu / L:
    u = Theta_m(theta) Z(z) q(r) / B_side[q],   q(r) = I_m(beta r) / I_m(beta a)  ((r/a)^m if beta = 0)
    Z(z) = sin(beta z + phi_b),  B_side[q] = 1 ('D'), k q'(a) ('N'), k q'(a) + h ('R')
Theta_m = cos(m theta) or sin(m theta).  Gradients are returned as (d/dr, (1/r) d/dtheta, d/dz).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from .bessel import besselj, besselj_envelope, besselj_triplet, ive_orders
from .errors import IllPosedError
from .faces import EndCondition
from .roots import pruefer_phase

__all__ = ["EndCondition", "EndFaceModes", "SideModes"]


def _theta_parts(m, is_sin, theta):
    """Theta_m(theta) and dTheta/dtheta / m (so m = 0 needs no special case).  cos and sin
    are taken once per distinct angle (sensors on a few radial lines, a plan's candidate
    grid) and gathered: the same numbers."""
    theta = np.asarray(theta, float)
    angles, back = np.unique(theta, return_inverse=True)
    back = back.reshape(theta.shape)
    arg = np.multiply.outer(angles, m)
    c, s = np.cos(arg), np.sin(arg)
    return np.where(is_sin, s, c)[back], np.where(is_sin, c, -s)[back]


@dataclass
class EndFaceModes:
    """Modes carrying data on an end face ('bottom' or 'top')."""

    face: str
    radius: float
    height: float
    conductivity: float
    near: EndCondition
    far: EndCondition | None  # None for a semi-infinite part
    m: np.ndarray
    is_sin: np.ndarray
    lam: np.ndarray
    _radial_memo: tuple | None = field(default=None, repr=False)

    def __post_init__(self):
        self.m = np.asarray(self.m, dtype=np.intp)
        self.is_sin = np.asarray(self.is_sin, dtype=bool)
        self.lam = np.asarray(self.lam, dtype=float)
        a, L, k = self.radius, self.height, self.conductivity
        kappa = self.lam / a
        self.kappa = kappa
        flat = kappa == 0
        if self.far is None:
            rho = np.zeros_like(kappa)
        else:
            rho = self.far.reflection(np.where(flat, 1.0, kappa), k) + np.zeros_like(kappa)
        e = np.exp(-2.0 * kappa * L) if math.isfinite(L) else np.zeros_like(kappa)
        z0 = 1.0 + rho * e
        dz0 = -kappa * (1.0 - rho * e)
        # kappa = 0 (m = 0 with an 'N' side): linear or constant axial factor.
        if flat.any():
            if self.far is None or self.far.kind == "N":
                z0f, dz0f, self._flat_slope, self._flat_at_far = 1.0, 0.0, 0.0, 1.0
            elif self.far.kind == "D":
                z0f, dz0f, self._flat_slope, self._flat_at_far = L, -1.0, -1.0, 0.0
            else:
                g = self.far.h / k
                z0f, dz0f, self._flat_slope, self._flat_at_far = 1.0 + g * L, -g, -g, 1.0
            z0 = np.where(flat, z0f, z0)
            dz0 = np.where(flat, dz0f, dz0)
        b = self.near.operator(z0, -dz0, k)  # outward normal -zeta
        if np.any(b == 0):
            raise IllPosedError(
                f"data on the {self.face} face cannot be carried: no face fixes the temperature level")
        self.rho, self.norm_b, self.flat = rho, b, flat

    @property
    def size(self):
        return self.lam.size

    def axial(self, zeta):
        """Zhat(zeta) = Z / B and dZhat/dzeta, shape (P, K)."""
        kappa, rho, L = self.kappa, self.rho, self.height
        zeta = np.asarray(zeta, float)[:, None]
        e1 = np.exp(-kappa * zeta)
        if math.isfinite(L):
            e2 = rho * np.exp(-kappa * (2.0 * L - zeta))
        else:
            e2 = 0.0
        z = e1 + e2
        dz = kappa * (e2 - e1)
        if self.flat.any():
            if math.isfinite(L):
                t = L - zeta
                zf = self._flat_at_far - self._flat_slope * t
            else:
                zf = np.ones_like(zeta)
            z = np.where(self.flat, zf, z)
            dz = np.where(self.flat, self._flat_slope, dz)
        return z / self.norm_b, dz / self.norm_b

    def zeta(self, z):
        return np.asarray(z, float) if self.face == "bottom" else self.height - np.asarray(z, float)

    def fields(self, r, theta, z, gradient=True):
        """Temperature per unit coefficient (P, K) and, optionally, its gradient (3, P, K).
        The Bessel functions are evaluated once per distinct radius and gathered."""
        r = np.asarray(r, float)
        radii, back = np.unique(r, return_inverse=True)
        back = back.reshape(r.shape)
        x = np.multiply.outer(radii, self.kappa)
        th, dth = _theta_parts(self.m, self.is_sin, np.asarray(theta, float))
        zh, dzh = self.axial(self.zeta(z))
        if not gradient:
            return self._radial_at(radii)[back] * th * zh, None
        jm1, j, jp1 = besselj_triplet(self.m, x)
        self._remember(radii, j)
        jm1, j, jp1 = jm1[back], j[back], jp1[back]
        t = j * th * zh
        sign = 1.0 if self.face == "bottom" else -1.0
        grad = np.stack([
            self.kappa * 0.5 * (jm1 - jp1) * th * zh,
            self.kappa * 0.5 * (jm1 + jp1) * dth * zh,
            sign * j * th * dzh,
        ])
        return t, grad

    def grid_factors(self, r, z, gradient=True):
        """Separable factors on grid lines (forward/grid.py): J_m(kappa r) (R, K), its
        d/dr and m J_m / r = kappa (J_{m-1} + J_{m+1}) / 2 [1/m], Zhat(zeta(z)) (Z, K) and
        dZhat/dz [1/m] (None when not gradient)."""
        r = np.asarray(r, float)
        zh, dzh = self.axial(self.zeta(z))
        if not gradient:
            return self._radial_at(r), None, None, zh, None
        jm1, j, jp1 = besselj_triplet(self.m, np.multiply.outer(r, self.kappa))
        self._remember(r, j)
        sign = 1.0 if self.face == "bottom" else -1.0
        return (j, self.kappa * 0.5 * (jm1 - jp1), self.kappa * 0.5 * (jm1 + jp1), zh,
                sign * dzh)

    def eigenfunctions_grid(self, r, theta):
        """Phi on grid lines r x theta, (R, T, K): J_m once per r line, Theta_m once per angle."""
        th, _ = _theta_parts(self.m, self.is_sin, np.asarray(theta, float))
        jr = besselj(self.m, np.multiply.outer(np.asarray(r, float), self.kappa))
        return jr[:, None, :] * th[None, :, :]

    def eigenfunctions(self, r, theta):
        """Phi = J_m(lambda r / a) Theta_m(theta) on the face, (Q, K)."""
        th, _ = _theta_parts(self.m, self.is_sin, np.asarray(theta, float))
        return besselj(self.m, np.multiply.outer(np.asarray(r, float), self.kappa)) * th

    def radial_values(self, s, index=slice(None)):
        """Radial factors J_m(kappa r) of the modes `index` at radii s [m], (S, K_index)."""
        return besselj(self.m[index], np.multiply.outer(np.asarray(s, float), self.kappa[index]))

    def tail_envelopes(self, r, z, index):
        """Envelopes of the modes `index` at radii r and heights z, ((R, K_i), (Z, K_i)), each
        at least the size of that factor for every later term at the same point (the
        truncation estimate of series.KnownSeries sums them over a harmonic's last terms):
        radial bessel.besselj_envelope(m, kappa r) (where |J_m| still grows along the terms,
        near the axis, the bound of its largest value); axial |Zhat(zeta(z))|, which falls
        with kappa at every z."""
        r = np.asarray(r, float)
        radial = besselj_envelope(self.m[index], np.multiply.outer(r, self.kappa[index]),
                                  j=self._radial_at(r)[:, index])
        zh, _ = self.axial(self.zeta(z))
        return radial, np.abs(zh[:, index])

    def _radial_at(self, radii):
        """J_m(kappa r) at radii [m], (R, K).  The last radii's values are kept (`_remember`):
        a chunk's field (or a grid's factors) and its truncation estimate ask for the same
        radii (series.KnownSeries), so J_m is looked up once for both."""
        radii = np.asarray(radii, float)
        memo = self._radial_memo
        if memo is not None and memo[0].shape == radii.shape and np.array_equal(memo[0], radii):
            return memo[1]
        return self._remember(radii, besselj(self.m, np.multiply.outer(radii, self.kappa)))

    def _remember(self, radii, j):
        """Keep J_m(kappa r) at these radii for the next `_radial_at` (one tuple, replaced whole)."""
        self._radial_memo = (np.array(radii, float, copy=True), j)
        return j

    def area_integrals(self):
        """integral over the face of Phi dA [m^2] (m = 0 cos only; zero otherwise):
        2 pi a^2 J_1(lambda) / lambda (pi a^2 for lambda = 0)."""
        lam, a = self.lam, self.radius
        safe = np.where(lam > 0, lam, 1.0)
        j1 = besselj(np.ones_like(self.m), lam)
        area = np.where(lam > 0, 2.0 * np.pi * a * a * j1 / safe, np.pi * a * a)
        return np.where((self.m == 0) & ~self.is_sin, area, 0.0)

    def norms(self):
        """integral over the face of Phi^2 dA [m^2] = a^2/2 [J_m'^2 + (1 - m^2/lambda^2) J_m^2] * (2 pi or pi)."""
        lam, m, a = self.lam, self.m, self.radius
        safe = np.where(lam > 0, lam, 1.0)
        j = besselj(m, lam)
        jp = m / safe * j - besselj(m + 1, lam)     # J_m' = (m / x) J_m - J_{m+1}
        radial = 0.5 * a * a * np.where(lam > 0, jp ** 2 + (1.0 - (m / safe) ** 2) * j ** 2, 1.0)
        return radial * np.where(m == 0, 2.0 * np.pi, np.pi)

    def surface_eigenvalues(self):
        """kappa^2 [1/m^2]: -Laplacian_face Phi = kappa^2 Phi."""
        return self.kappa ** 2

    def face_flux_factor(self):
        """k dT/dn on the data face per unit coefficient (times Phi): -k Zhat'(0) [W/m^2 per unit]."""
        _, dzh = self.axial(np.zeros(1))
        return -self.conductivity * dzh[0]

    def face_temperature_factor(self):
        """T on the data face per unit coefficient (times Phi): Zhat(0)."""
        zh, _ = self.axial(np.zeros(1))
        return zh[0]

    def powers(self):
        """Heat INTO the part [W] per unit coefficient through each face (only m = 0 cos carries any)."""
        a, L, k = self.radius, self.height, self.conductivity
        lam, kappa = self.lam, self.kappa
        axisym = (self.m == 0) & ~self.is_sin
        safe = np.where(lam > 0, lam, 1.0)
        j1 = besselj(np.ones_like(self.m), lam)
        area_int = np.where(lam > 0, 2.0 * np.pi * a * a * j1 / safe, np.pi * a * a)
        zh0, dzh0 = self.axial(np.zeros(1))
        out = {self.face: np.where(axisym, -k * dzh0[0] * area_int, 0.0)}
        far_face = "top" if self.face == "bottom" else "bottom"
        if math.isfinite(L):
            _, dzhl = self.axial(np.array([L]))
            out[far_face] = np.where(axisym, k * dzhl[0] * area_int, 0.0)
            # side: k kappa J_0'(lambda) 2 pi a int_0^L Zhat = -k lambda J_1 2 pi int Zhat
            int_z = (dzhl[0] - dzh0[0]) / np.where(kappa > 0, kappa ** 2, 1.0)
        else:
            int_z = -dzh0[0] / np.where(kappa > 0, kappa ** 2, 1.0)
        out["side"] = np.where(axisym & (lam > 0), -k * lam * j1 * 2.0 * np.pi * int_z, 0.0)
        return out


@dataclass
class SideModes:
    """Modes carrying data on the side r = a (finite height only)."""

    radius: float
    height: float
    conductivity: float
    near: EndCondition
    bottom: EndCondition
    top: EndCondition
    m: np.ndarray
    is_sin: np.ndarray
    mu: np.ndarray

    def __post_init__(self):
        self.m = np.asarray(self.m, dtype=np.intp)
        self.is_sin = np.asarray(self.is_sin, dtype=bool)
        self.mu = np.asarray(self.mu, dtype=float)
        a, L, k = self.radius, self.height, self.conductivity
        self.beta = self.mu / L
        self.phi = pruefer_phase(self.bottom.kind, self.mu, self.bottom.biot(k, L))
        dq = self._ratio_derivative_at_rim()
        b = self.near.operator(np.ones_like(self.mu), dq, k) + 0.0 * dq
        if np.any(b == 0):
            raise IllPosedError("data on the side cannot be carried: no face fixes the temperature level")
        self.norm_b = b

    @property
    def size(self):
        return self.mu.size

    def _ratio_derivative_at_rim(self):
        """q'(a) = beta I_m'(beta a) / I_m(beta a) (m / a when beta = 0) [1/m]."""
        a, beta, m = self.radius, self.beta, self.m
        out = m / a + 0.0 * beta
        pos = beta > 0
        if pos.any():
            x = beta[pos] * a
            mm = m[pos]
            iv = ive_orders(int(mm.max()) + 1, x)
            cols = np.arange(x.size)
            ip = 0.5 * (iv[np.abs(mm - 1), cols] + iv[mm + 1, cols])
            out = out.astype(float)
            out[pos] = beta[pos] * ip / iv[mm, cols]
        return out

    def _radial(self, r):
        """q(r), q'(r) and m q(r)/r, each (P, K)."""
        a, beta, m = self.radius, self.beta, self.m
        r = np.asarray(r, float)
        P, K = r.size, m.size
        q = np.empty((P, K))
        dq = np.empty((P, K))
        mq_r = np.empty((P, K))
        flat = beta == 0
        if flat.any():
            mf = m[flat]
            rho = (r / a)[:, None]
            q[:, flat] = rho ** mf
            pw = np.where(mf >= 1, rho ** np.maximum(mf - 1, 0), 0.0)
            dq[:, flat] = (mf / a) * pw
            mq_r[:, flat] = (mf / a) * pw
        pos = ~flat
        if pos.any():
            ub, inv = np.unique(beta[pos], return_inverse=True)
            mp = m[pos]
            top = int(mp.max()) + 1
            xr = np.multiply.outer(r, ub)  # (P, U)
            ivr = ive_orders(top, xr)  # (top+2, P, U)
            iva = ive_orders(top, ub * a)  # (top+2, U)
            scale = np.exp(np.multiply.outer(r - a, ub))[:, inv]  # exp(beta (r - a)) <= 1
            den = iva[mp, inv][None, :]
            im = ivr[mp, :, inv].T
            im1 = ivr[np.abs(mp - 1), :, inv].T
            ip1 = ivr[mp + 1, :, inv].T
            bp = beta[pos]
            q[:, pos] = im / den * scale
            dq[:, pos] = bp * 0.5 * (im1 + ip1) / den * scale
            mq_r[:, pos] = bp * 0.5 * (im1 - ip1) / den * scale
        return q, dq, mq_r

    def axial(self, z):
        arg = np.multiply.outer(np.asarray(z, float), self.beta) + self.phi
        return np.sin(arg), self.beta * np.cos(arg)

    def fields(self, r, theta, z, gradient=True):
        th, dth = _theta_parts(self.m, self.is_sin, np.asarray(theta, float))
        zz, dzz = self.axial(z)
        q, dq, mq_r = self._radial(r)
        t = th * zz * q / self.norm_b
        if not gradient:
            return t, None
        grad = np.stack([th * zz * dq, dth * zz * mq_r, th * dzz * q]) / self.norm_b
        return t, grad

    def eigenfunctions(self, theta, z):
        th, _ = _theta_parts(self.m, self.is_sin, np.asarray(theta, float))
        zz, _ = self.axial(z)
        return th * zz

    def eigenfunctions_grid(self, theta, z):
        """Phi on grid lines theta x z, (T, Z, K)."""
        th, _ = _theta_parts(self.m, self.is_sin, np.asarray(theta, float))
        zz, _ = self.axial(z)
        return th[:, None, :] * zz[None, :, :]

    def grid_factors(self, r, z, gradient=True):
        """Separable factors on grid lines (forward/grid.py): q / B (R, K), q' / B,
        m q / (r B) [1/m], Z (Z, K) and Z' [1/m] (None when not gradient)."""
        zz, dzz = self.axial(z)
        q, dq, mq_r = self._radial(r)
        b = self.norm_b
        if not gradient:
            return q / b, None, None, zz, None
        return q / b, dq / b, mq_r / b, zz, dzz

    def tail_envelopes(self, r, z, index):
        """Envelopes of the modes `index` ((R, K_i), (Z, K_i); see EndFaceModes): radial
        |q(r) / B|, which falls with beta at every r inside the wall; axial 1 (|sin| <= 1: at a
        height near a held end sin(mu z / L) still grows along the terms)."""
        q, _, _ = self._radial(np.asarray(r, float))
        return np.abs(q[:, index] / self.norm_b[index]), np.ones((np.size(z), np.size(self.m[index])))

    def axial_norms(self):
        """integral_0^L Z^2 dz = L [1/2 - (sin(2 mu + 2 phi) - sin(2 phi)) / (4 mu)] [m]."""
        mu, phi, L = self.mu, self.phi, self.height
        safe = np.where(mu > 0, mu, 1.0)
        return L * np.where(mu > 0, 0.5 - (np.sin(2 * mu + 2 * phi) - np.sin(2 * phi)) / (4 * safe),
                            np.sin(phi) ** 2)

    def area_integrals(self):
        """integral over the wall of Phi dA [m^2] (m = 0 cos only; zero otherwise):
        2 pi a integral_0^L sin(beta z + phi) dz."""
        beta, mu, phi = self.beta, self.mu, self.phi
        safe = np.where(beta > 0, beta, 1.0)
        int_z = np.where(beta > 0, (np.cos(phi) - np.cos(mu + phi)) / safe, self.height * np.sin(phi))
        return np.where((self.m == 0) & ~self.is_sin, 2.0 * np.pi * self.radius * int_z, 0.0)

    def norms(self):
        """integral over the side of Phi^2 dA = a * (2 pi or pi) * integral Z^2 dz [m^2]."""
        return self.radius * np.where(self.m == 0, 2 * np.pi, np.pi) * self.axial_norms()

    def surface_eigenvalues(self):
        """beta^2 + m^2 / a^2 [1/m^2]: -Laplacian_side Phi = (beta^2 + m^2/a^2) Phi."""
        return self.beta ** 2 + (self.m / self.radius) ** 2

    def face_flux_factor(self):
        """k dT/dr at r = a per unit coefficient (times Phi) [W/m^2 per unit]."""
        return self.conductivity * self._ratio_derivative_at_rim() / self.norm_b

    def face_temperature_factor(self):
        return 1.0 / self.norm_b

    def powers(self):
        """Heat INTO the part [W] per unit coefficient through each face (m = 0 cos only)."""
        a, L, k = self.radius, self.height, self.conductivity
        mu, beta, phi = self.mu, self.beta, self.phi
        axisym = (self.m == 0) & ~self.is_sin
        # integral_0^L sin(beta z + phi) dz
        safe_b = np.where(beta > 0, beta, 1.0)
        int_z = np.where(beta > 0, (np.cos(phi) - np.cos(mu + phi)) / safe_b, L * np.sin(phi))
        side = k * self._ratio_derivative_at_rim() / self.norm_b * 2 * np.pi * a * int_z
        # integral_0^a q(r) r dr = a I_1(beta a) / (beta I_0(beta a))   (a^2 / 2 for beta = 0)
        iv = ive_orders(1, beta * a)
        rad = np.where(beta > 0, a * iv[1] / (safe_b * np.where(iv[0] > 0, iv[0], 1.0)), 0.5 * a * a)
        _, dz0 = self.axial(np.zeros(1))
        _, dzl = self.axial(np.array([L]))
        bottom = -k * dz0[0] / self.norm_b * 2 * np.pi * rad
        top = k * dzl[0] / self.norm_b * 2 * np.pi * rad
        zero = np.zeros_like(mu)
        return {"side": np.where(axisym, side, zero), "bottom": np.where(axisym, bottom, zero),
                "top": np.where(axisym, top, zero)}
