"""Corner lifting: a harmonic polynomial field that makes the face data of every sub-problem
vanish where an end face meets a temperature-kind side.

    w = sum_m rho^m Theta_m(theta) [alpha_m + beta_m zeta + gamma_m (zeta^2 - c_m rho^2)
                                    + delta_m (zeta^3 - 3 c_m zeta rho^2)],
    rho = r / a,  zeta = z / L,  c_m = (a / L)^2 / (2 m + 2).

Each term is harmonic: r^m Theta_m is a 2-D harmonic, r^m Theta_m z is harmonic, and
r^m Theta_m (z^2 - r^2 / (2 m + 2)) is harmonic because Laplacian(r^m Theta_m r^2) =
(4 m + 4) r^m Theta_m and Laplacian(r^m Theta_m z^2) = 2 r^m Theta_m; likewise
Laplacian(r^m Theta_m z r^2) = (4 m + 4) z r^m Theta_m and Laplacian(r^m Theta_m z^3) =
6 z r^m Theta_m make the cubic term harmonic.  The lifting uses alpha..gamma; the cubic term
serves the wall's corner columns (`corner_columns.py`), whose traces need it.

At the rim (rho = 1) each end gives one condition per harmonic, by its kind:
    'D'  rim temperature     w                   = E   (the side's temperature there)
    'N'  rim heat flux in    k dw/dn             = Q   (the end's flux at the rim)
    'R'  rim Robin data      k dw/dn + h w       = H   (h times the ambient at the rim)
An end whose rim value is unknown (an unknown-flux face) gives no condition; its rim flux
is carried by extra basis columns instead (`rim_columns`).  With the conditions met the
residual data of the ends vanish at the rim, where the side's eigenfunctions vanish too,
so the end series converge uniformly and an estimated face is not dragged to zero there.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


def curvature_coefficient(m, radius, height):
    """c_m = (a / L)^2 / (2 m + 2) of the quadratic corner term (0 for a semi-infinite part)."""
    if not math.isfinite(height):
        return np.zeros(np.shape(m))
    return (radius / height) ** 2 / (2.0 * np.asarray(m, float) + 2.0)


def end_rows(end: str, condition, k: float, L: float, c: float) -> np.ndarray:
    """Row of the rim condition B[w] of one end on (alpha, beta, gamma); condition: the end's
    `EndCondition` (its boundary operator)."""
    if end == "bottom":  # zeta = 0, outward normal -z
        w = np.array([1.0, 0.0, -c])
        dn = np.array([0.0, -1.0, 0.0]) / L
    else:  # zeta = 1, outward normal +z
        w = np.array([1.0, 1.0, 1.0 - c])
        dn = np.array([0.0, 1.0, 2.0]) / L
    return condition.operator(w, dn, k)


def solve_rim(rows: list, values: list) -> np.ndarray:
    """(alpha, beta, gamma) meeting the rim conditions; gamma = 0 whenever (alpha, beta) can."""
    if not rows:
        return np.zeros(3)
    A = np.array(rows)
    b = np.array(values, float)
    two = A[:, :2]
    if np.linalg.matrix_rank(two, tol=1e-12 * max(1.0, np.abs(two).max())) == len(rows):
        ab = np.linalg.lstsq(two, b, rcond=None)[0]
        return np.array([ab[0], ab[1], 0.0])
    return np.linalg.lstsq(A, b, rcond=None)[0]


@dataclass
class PolynomialLifting:
    """sum over terms of rho^m Theta_m [alpha + beta zeta + gamma (zeta^2 - c_m rho^2)]."""

    radius: float
    height: float
    m: np.ndarray
    is_sin: np.ndarray
    alpha: np.ndarray
    beta: np.ndarray
    gamma: np.ndarray
    delta: np.ndarray | None = None

    def __post_init__(self):
        if self.delta is None:
            self.delta = np.zeros_like(np.asarray(self.gamma, float))

    @classmethod
    def empty_lifting(cls, radius, height):
        e = np.zeros(0)
        return cls(radius, height, e.astype(int), e.astype(bool), e, e, e, e)

    @classmethod
    def from_terms(cls, radius, height, terms):
        """From a list of (m, is_sin, (alpha, beta, gamma[, delta]))."""
        if not terms:
            return cls.empty_lifting(radius, height)
        m = np.array([t[0] for t in terms], dtype=int)
        s = np.array([t[1] for t in terms], dtype=bool)
        abc = np.array([tuple(t[2]) + (0.0,) * (4 - len(t[2])) for t in terms], dtype=float)
        return cls(radius, height, m, s, abc[:, 0], abc[:, 1], abc[:, 2], abc[:, 3])

    @property
    def empty(self):
        return self.m.size == 0

    def constant_value(self):
        """The lifting's value when it is a constant (0.0 when empty) [K], else None."""
        if self.empty:
            return 0.0
        if self.m.size == 1 and self.m[0] == 0 and not self.is_sin[0] and not (
                self.beta[0] or self.gamma[0] or self.delta[0]):
            return float(self.alpha[0])
        return None

    def _c(self):
        return curvature_coefficient(self.m, self.radius, self.height)

    def _angles(self, theta, gradient):
        """Theta_m (P, J) and, when gradient, dTheta_m/dtheta / m (P, J); sin and cos only
        where some term needs them (corner columns are single terms)."""
        arg = np.multiply.outer(np.asarray(theta, float), self.m)
        sin = np.sin(arg) if (self.is_sin.any() or gradient) else None
        cos = np.cos(arg) if (not self.is_sin.all() or gradient) else None
        th = sin if self.is_sin.all() else (cos if not self.is_sin.any() else np.where(self.is_sin, sin, cos))
        if not gradient:
            return th, None
        return th, np.where(self.is_sin, cos, -sin)

    def _parts(self, r, theta, z, gradient=True):
        a, L = self.radius, self.height
        rho = (np.asarray(r, float) / a)[:, None]
        th, dth_m = self._angles(theta, gradient)
        if math.isfinite(L):
            zeta = (np.asarray(z, float) / L)[:, None]
        else:
            zeta = np.zeros_like(rho)
        return rho, zeta, th, dth_m

    def temperature(self, r, theta, z):
        if self.empty:
            return np.zeros(np.asarray(r).shape)
        return self.columns(r, theta, z)[0] @ np.ones(self.m.size)

    def gradient(self, r, theta, z):
        if self.empty:
            return np.zeros((3,) + np.asarray(r).shape)
        return self.columns(r, theta, z, gradient=True)[1] @ np.ones(self.m.size)

    def field_values(self, r, theta, z):
        """(temperature (P,), gradient (3, P)) in one pass (what a Robin face's operator needs)."""
        if self.empty:
            shape = np.asarray(r).shape
            return np.zeros(shape), np.zeros((3,) + shape)
        t, g = self.columns(r, theta, z, gradient=True)
        ones = np.ones(self.m.size)
        return t @ ones, g @ ones

    def _rz_factors(self, rho, zeta, gradient):
        """Per-term factors multiplying Theta_m (rows: points or (r, z) pairs, columns:
        terms): rho^m P, and for the gradient d/dr, m rho^(m-1) P / a (with dTheta/m) and
        d/dz of rho^m P."""
        a, L = self.radius, self.height
        m, c, d = self.m, self._c(), self.delta
        poly = (self.alpha + self.beta * zeta + self.gamma * (zeta ** 2 - c * rho ** 2)
                + d * (zeta ** 3 - 3.0 * c * zeta * rho ** 2))
        pw = rho ** m
        if not gradient:
            return pw * poly, None, None, None
        pw1 = np.where(m >= 1, rho ** np.maximum(m - 1, 0), 0.0)
        d_poly_drho = -2.0 * c * self.gamma * rho - 6.0 * c * d * zeta * rho
        d_poly_dzeta = self.beta + 2.0 * self.gamma * zeta + 3.0 * d * (zeta ** 2 - c * rho ** 2)
        dr = (m * pw1 * poly + pw * d_poly_drho) / a
        dtheta = m * pw1 * poly / a
        dz = pw * d_poly_dzeta / (L if math.isfinite(L) else 1.0)
        return pw * poly, dr, dtheta, dz

    def _face_factors(self, face, rho, zeta, value, normal):
        """Per-term factors multiplying Theta_m on a face (rows: points or grid lines,
        columns: terms): of w (rho^m P) when value, of dw/dn along the face's outward normal
        (bottom -z, top +z, side +r, bore -r) when normal; None for what is not asked."""
        t, dr, _, dz = self._rz_factors(rho, zeta, normal)
        if not normal:
            return t, None
        d_dn = dz if face in ("bottom", "top") else dr
        return (t if value else None), (-d_dn if face in ("bottom", "bore") else d_dn)

    def on_face(self, face, r, theta, z, value=True, normal=True):
        """(w (P,) or None, dw/dn (P,) or None) at points of a face, dn along its outward
        normal (bottom -z, top +z, side +r, bore -r) [K, K/m]: only what a face's operator
        uses, with Theta_m alone (no d/dtheta, no gradient of three components)."""
        if self.empty:
            zero = np.zeros(np.asarray(r).shape)
            return (zero if value else None), (zero if normal else None)
        rho, zeta, th, _ = self._parts(r, theta, z, gradient=False)
        f = self._face_factors(face, rho, zeta, value, normal)
        return tuple(None if x is None else np.einsum("pj,pj->p", x, th) for x in f)

    def on_face_grid(self, face, s, theta, fixed, value=True, normal=True):
        """`on_face` on the grid of lines s x theta of a face, each (S, T): s = r on an end
        face (at z = fixed), z on a wall (at r = fixed) [m]; the factors once per s line, the
        angle once per theta line."""
        s, theta = np.asarray(s, float).ravel(), np.asarray(theta, float).ravel()
        if self.empty:
            zero = np.zeros((s.size, theta.size))
            return (zero if value else None), (zero if normal else None)
        a, L = self.radius, self.height
        finite = math.isfinite(L)
        if face in ("bottom", "top"):
            rho = (s / a)[:, None]
            zeta = np.full_like(rho, fixed / L if finite else 0.0)
        else:
            rho = np.full((s.size, 1), fixed / a)
            zeta = (s / L if finite else np.zeros_like(s))[:, None]
        th, _ = self._angles(theta, False)
        f = self._face_factors(face, rho, zeta, value, normal)
        return tuple(None if x is None else x @ th.T for x in f)

    def columns(self, r, theta, z, gradient=False):
        """Per-term temperature (P, J) and gradient (3, P, J) (d/dr, (1/r) d/dtheta, d/dz)."""
        rho, zeta, th, dth_m = self._parts(r, theta, z, gradient)
        t, dr, dtheta, dz = self._rz_factors(rho, zeta, gradient)
        if not gradient:
            return t * th, None
        return t * th, np.stack([dr * th, dtheta * dth_m, dz * th])

    def grid(self, r, theta, z, gradient=False):
        """Temperature (R, T, Z) and, when gradient, (3, R, T, Z) on the grid of lines
        r x theta x z: the angle once per theta line, the rest once per (r, z) pair."""
        a, L = self.radius, self.height
        r, theta, z = (np.asarray(x, float).ravel() for x in (r, theta, z))
        shape = (r.size, theta.size, z.size)
        if self.empty:
            return np.zeros(shape), (np.zeros((3,) + shape) if gradient else None)
        rho = np.repeat(r / a, z.size)[:, None]
        zeta = (np.tile(z, r.size) / L if math.isfinite(L) else np.zeros(r.size * z.size))[:, None]
        th, dth_m = self._angles(theta, gradient)

        def on_grid(f, ang):
            return (f @ ang.T).reshape(r.size, z.size, theta.size).transpose(0, 2, 1)

        t, dr, dtheta, dz = self._rz_factors(rho, zeta, gradient)
        if not gradient:
            return on_grid(t, th), None
        return on_grid(t, th), np.stack([on_grid(dr, th), on_grid(dtheta, dth_m), on_grid(dz, th)])

    def power(self, face, conductivity):
        """Heat INTO the part [W] through a face (m = 0 terms only carry any)."""
        if self.empty:
            return 0.0
        a, L, k = self.radius, self.height, conductivity
        sel = (self.m == 0) & ~self.is_sin
        if not sel.any():
            return 0.0
        be, ga, c = self.beta[sel], self.gamma[sel], self._c()[sel]
        de = self.delta[sel]
        if not math.isfinite(L):
            return 0.0
        area = math.pi * a * a
        # the mean of rho^2 over the end face is 1/2, of zeta over the side 1/2
        if face == "bottom":  # -k dw/dz at z = 0 = -(k / L)(beta - 3 c delta rho^2)
            return float(np.sum(-k * (be - 1.5 * c * de) / L) * area)
        if face == "top":  # k dw/dz at z = L = (k / L)(beta + 2 gamma + 3 delta (1 - c rho^2))
            return float(np.sum(k * (be + 2 * ga + 3 * de * (1.0 - 0.5 * c)) / L) * area)
        # side: k dw/dr at r = a = k (-2 c gamma - 6 c delta zeta) / a
        return float(np.sum(-k * c * (2.0 * ga + 3.0 * de) / a) * 2.0 * math.pi * a * L)
