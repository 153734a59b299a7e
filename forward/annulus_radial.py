"""Radial eigenfunctions of the hollow part a <= r <= b (end-face data), SI units.

    R'' + R'/r + (kappa^2 - m^2/r^2) R = 0,   a < r < b,
    B_bore[R] = 0 at r = a (outward normal -r),   B_side[R] = 0 at r = b (outward normal +r),

with B = T ('D'), k dT/dn ('N'), k dT/dn + h T ('R') (`faces.EndCondition.operator`).  With
Z a cylinder function of order m and z = kappa c at a wall of radius c, each wall reads
    beta_c[Z] = p_c Z(z) + q_c z Z'(z) = 0,
    (p, q) = (1, 0) 'D', (0, 1) 'N', (-Bi_a, 1) 'R' on the bore, (Bi_b, 1) 'R' on the side,
Bi_a = h_a a / k, Bi_b = h_b b / k.  The solution meeting the bore condition is
    u(r) = s (beta_a[Y] J_m(kappa r) - beta_a[J] Y_m(kappa r))     (s = -1 for a 'D' bore),
and by the Wronskian J Y' - J' Y = 2 / (pi z), exactly u(a) = 2 q_a / pi, a u'(a) = -2 s p_a / pi.
kappa is an eigenvalue when beta_b[u] = 0, the cross product of J_m and Y_m at both walls.

Why no root is missed.  Pruefer angle omega(r) of u: u = rho sin(omega), r u' = rho cos(omega),
omega(a) = atan2(q_a, -p_a) mod pi in [0, pi), the same for every kappa.  For the
Sturm-Liouville problem (r u')' + (kappa^2 r - m^2 / r) u = 0 the angle Omega(kappa) = omega(b)
is continuous and strictly increasing in kappa^2 (Sturm comparison), and the n-th eigenvalue
(n = 0, 1, ...) is the unique solution of Omega(kappa) = omega_b + n pi, omega_b =
atan2(q_b, -p_b) in (0, pi].  Omega is computed in closed form, no integration: with the
modulus-phase form J = M cos(theta), Y = M sin(theta), theta' = 2 / (pi z M^2) > 0, u is
proportional to M(kappa r) sin(phi(r)), phi(r) = theta(kappa r) - theta(kappa a) + phi_a,
phi_a in [0, pi) fixed by cot(omega(a)) = g + s_ cot(phi_a), g = z M'/M, s_ = 2 / (pi M^2);
u and phi vanish together, so omega(b) = i pi + arccot(g + s_ cot(phi_b - i pi)) with
i = ceil(phi_b / pi) - 1.  theta is unwrapped from atan2(Y, J) by the branch nearest Debye's
phase sqrt(z^2 - m^2) - m arccos(m / z) - pi/4 (-pi/2 for z <= m), which is within 1 rad of
theta everywhere (tested on a dense grid), well inside the pi needed.  The targets
omega_b + n pi are explicit; Omega is sampled on a grid from kappa = m / b (every eigenvalue
exceeds it: Rayleigh quotient >= m^2 / b^2; for m = 0 from a start lowered until Omega is
below the first target) to past the last target, so every target lies between two samples.
Where Omega stays within pi of the target over that bracket, the cross product
beta_b[u] = -rho |(p_b, q_b)| sin(Omega - omega_b) has exactly this one root there and is
refined directly (`solve_bracketed`); otherwise Omega - target is first narrowed until it
does.  So no root can be skipped or found twice.  (The cross product is the better scaled
function to finish on: near a 'D' side Omega's slope is only ~1/(kappa b) of phi's.)
kappa = 0 is the first eigenvalue only for m = 0 with both walls 'N' (the constant mode).

Normalization (the rule): unit mean square over the cross-section,
    integral_a^b R^2 r dr = (b^2 - a^2) / 2,
sign such that R > 0 just outside the bore.  The coefficients of J_m and Y_m are first
divided by max(|beta_a[J]|, |beta_a[Y]|), so the dominant one is 1 and the other at most 1;
Y_m(kappa a) (up to ~1e90 for m = 50, b/a = 100) is then only ever multiplied by the tiny
ratio beta_a[J] / beta_a[Y], and no product overflows or cancels all digits.

Closed forms (cylinder functions, Z' = dZ/dz):
    integral R^2 r dr = [r^2 R'^2 + (kappa^2 r^2 - m^2) R^2]_a^b / (2 kappa^2)      [m^2]
    integral R r dr   = (a R'(a) - b R'(b)) / kappa^2          (m = 0)            [m^2]
`values` reads J_m, Y_m from `modulus_phase` tables where kappa r > m + 2 (~2e-13 of the
modulus), from scipy below; the roots use scipy only.  Root tables of the dimensionless
kappa a are cached per (m, b/a, kinds, Bi's) in `roots.ROOT_CACHE`.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import special

from .bracketing import solve_bracketed
from .errors import ForwardModelError
from .faces import EndCondition
from .modulus_phase import far_values
from .roots import ROOT_CACHE

TWO_PI_INV = 2.0 / math.pi  # the Wronskian z (J Y' - J' Y)

WALLS = ("bore", "side")
ROUGH = 1e-7  # relative width to which Omega narrows a bracket wider than +-pi


def _wall_pq(cond: EndCondition, biot: float, wall: str):
    """(p, q) of beta[Z] = p Z(z) + q z Z'(z) on a wall, from its kind and Bi."""
    if cond.kind == "D":
        return 1.0, 0.0
    if cond.kind == "N":
        return 0.0, 1.0
    if cond.kind == "R":
        return (-biot if wall == "bore" else biot), 1.0
    raise ValueError(f"unknown wall kind {cond.kind!r}: expected 'D', 'N' or 'R'")


def _orders(m, z):
    """(J_m, Y_m) at z > 0: one Hankel-function call H1 = J + i Y where z > m (3-5x faster
    than jv and yv, same accuracy there); jv and yv below, where J_m is far smaller than |H1|."""
    m, z = np.broadcast_arrays(np.asarray(m), np.asarray(z, dtype=float))
    far = z > m + 1.0
    if far.all():
        h = special.hankel1(m, z)
        return h.real, h.imag
    j, y = np.empty(z.shape), np.empty(z.shape)
    h = special.hankel1(m[far], z[far])
    j[far], y[far] = h.real, h.imag
    near = ~far
    j[near], y[near] = special.jv(m[near], z[near]), special.yv(m[near], z[near])
    return j, y


def _cylinder(m, z):
    """J_m, Y_m, z J_m', z Y_m' at z > 0 (z Z' = m Z - z Z_{m+1})."""
    j, y = _orders(m, z)
    j1, y1 = _orders(np.asarray(m) + 1, z)
    return j, y, m * j - z * j1, m * y - z * y1


def _cylinder_fast(m, z):
    """_cylinder for many (order, argument) pairs: tabulated modulus and phase where
    z > m + 2 (`modulus_phase`, ~1e-13 of the modulus), _cylinder below."""
    m, z = np.broadcast_arrays(np.asarray(m), np.asarray(z, dtype=float))
    far = z > m + 2.0
    out = [np.empty(z.shape) for _ in range(4)]
    near = ~far
    if near.any():
        for o, v in zip(out, _cylinder(m[near], z[near])):
            o[near] = v
    if far.any():
        mf, zf = m[far], z[far]
        order = np.argsort(mf, kind="stable")
        bounds = np.flatnonzero(np.diff(mf[order])) + 1
        vals = [np.empty(zf.size) for _ in range(4)]
        for grp in np.split(order, bounds):
            for v, w in zip(vals, far_values(int(mf[grp[0]]), zf[grp])):
                v[grp] = w
        for o, v in zip(out, vals):
            o[far] = v
    return out


def _phase_estimate(m: int, z):
    """Debye's phase of (J_m, Y_m): sqrt(z^2 - m^2) - m arccos(m/z) - pi/4 for z > m, else -pi/2."""
    if m == 0:
        return z - 0.25 * math.pi
    zz = np.maximum(z, m)
    est = np.sqrt(zz * zz - m * m) - m * np.arccos(m / zz) - 0.25 * math.pi
    return np.where(z > m, est, -0.5 * math.pi)


def bessel_phase(m, z, j, y):
    """Continuous phase theta of (J_m, Y_m) = M (cos theta, sin theta), theta(0+) = -pi/2 [rad]."""
    base = np.arctan2(y, j)
    return base + 2.0 * math.pi * np.round((_phase_estimate(m, z) - base) / (2.0 * math.pi))


class _Walls:
    """Both walls' (p, q) and the Pruefer targets of one family (dimensionless: a = 1, b = ratio)."""

    def __init__(self, inner: EndCondition, outer: EndCondition, m: int, ratio: float,
                 biot_a: float, biot_b: float):
        self.m, self.ratio = int(m), float(ratio)
        self.pa, self.qa = _wall_pq(inner, biot_a, "bore")
        self.pb, self.qb = _wall_pq(outer, biot_b, "side")
        self.omega_b = math.atan2(self.qb, -self.pb)  # in (0, pi]

    def omega(self, lam):
        """Pruefer angle of u at r = b for kappa a = lam (> 0), increasing in lam [rad]."""
        m, lam = self.m, np.asarray(lam, float)
        x, yb = lam, lam * self.ratio
        jx, yx, djx, dyx = _cylinder(m, x)
        jy, yy, djy, dyy = _cylinder(m, yb)
        mx, my = np.hypot(jx, yx), np.hypot(jy, yy)
        if self.qa == 0.0:
            phi_a = np.zeros_like(x)
        else:  # cot(phi_a) = (-p/q - g) / s_, scaled by q M
            dmx = (jx * djx + yx * dyx) / mx  # x M'
            phi_a = np.arctan2(self.qa * TWO_PI_INV / mx, -self.pa * mx - self.qa * dmx)
        phi_b = bessel_phase(m, yb, jy, yy) - bessel_phase(m, x, jx, yx) + phi_a
        i = np.ceil(phi_b / math.pi) - 1.0
        rest = phi_b - i * math.pi  # in (0, pi]
        sn, cs = np.sin(rest), np.cos(rest)
        dmy = (jy * djy + yy * dyy) / my  # y M'
        return i * math.pi + np.arctan2(my * sn, dmy * sn + TWO_PI_INV / my * cs)

    def roots(self, have: int, n: int) -> np.ndarray:
        """Roots have..n-1 of the family (kappa a), each bracketed on a grid of Omega.

        The grid always runs from the family's start (m / ratio, or lower for m = 0), also
        when roots 0..have-1 are known: a grid starting at a known root puts that root on a
        bracket's end, where the cross product's sign is rounding noise (the bracket then
        holds no sign change, or the known root is found again)."""
        first = 1 if self.has_zero_mode else 0
        start = max(have, first)
        out = np.zeros(n - have)
        if start >= n:
            return out
        targets = self.omega_b + math.pi * np.arange(first, n)
        span = self.ratio - 1.0
        lo = self.m / self.ratio if self.m > 0 else 1e-3 / self.ratio
        for _ in range(200):  # m = 0: lower the start until no eigenvalue lies below it
            if self.m > 0 or self.omega(np.array([lo]))[0] < targets[0]:
                break
            lo *= 0.125
        hi = max(lo, 2.0 * self.m) + (targets[-1] + 2.0 * math.pi) / (0.8 * span)
        while self.omega(np.array([hi]))[0] <= targets[-1]:
            hi = 2.0 * hi
        grid = np.linspace(lo, hi, max(33, 3 * targets.size + 1))
        omega = np.maximum.accumulate(self.omega(grid))
        wanted = targets[start - first:]
        k = np.clip(np.searchsorted(omega, wanted), 1, grid.size - 1)
        out[start - have:] = self._refine(grid[k - 1], grid[k], omega[k - 1], omega[k], wanted)
        return out

    def _refine(self, lo, hi, om_lo, om_hi, targets):
        """Roots in brackets [lo, hi] of Omega - target.  Where Omega stays within pi of the
        target over the bracket, the cross product beta_b[u] = -rho |(p_b, q_b)| sin(Omega -
        omega_b) changes sign there once and is refined directly (well scaled, where Omega is
        flat near a 'D' side, slope ~ 1/(kappa b)); elsewhere Omega is first narrowed to a
        relative width ROUGH, which leaves such a bracket."""
        ok = (om_lo <= targets) & (om_hi >= targets) & (om_lo > targets - math.pi) & (om_hi < targets + math.pi)
        if not ok.all():
            bad = ~ok
            rough = solve_bracketed(lambda lam, idx: self.omega(lam) - targets[bad][idx],
                                    lo[bad], hi[bad], xtol=ROUGH)
            width = 2.0 * ROUGH * np.maximum(1.0, rough)
            lo, hi = lo.copy(), hi.copy()
            lo[bad], hi[bad] = np.maximum(rough - width, lo[bad]), np.minimum(rough + width, hi[bad])
            om_lo, om_hi = self.omega(lo), self.omega(hi)
            ok = (om_lo < targets) & (om_hi > targets) & (om_lo > targets - math.pi) & (om_hi < targets + math.pi)
        out = np.empty(targets.size)
        if ok.any():
            out[ok] = solve_bracketed(lambda lam, idx: self.cross(lam), lo[ok], hi[ok])
        if (~ok).any():  # not expected; the Pruefer angle alone then gives the root
            out[~ok] = solve_bracketed(lambda lam, idx: self.omega(lam) - targets[~ok][idx],
                                       lo[~ok], hi[~ok])
        return out

    def cross(self, lam):
        """beta_b[u] for kappa a = lam, u's bore coefficients and beta_b each divided by the
        larger of their two entries (so finite and O(1)); zero exactly at the eigenvalues."""
        m, lam = self.m, np.asarray(lam, float)
        jx, yx, djx, dyx = _cylinder(m, lam)
        jy, yy, djy, dyy = _cylinder(m, lam * self.ratio)
        aj, ay = self.pa * jx + self.qa * djx, self.pa * yx + self.qa * dyx
        bj, by = self.pb * jy + self.qb * djy, self.pb * yy + self.qb * dyy
        sign = -1.0 if self.qa == 0.0 else 1.0
        return sign * (ay * bj - aj * by) / (np.maximum(np.abs(aj), np.abs(ay))
                                             * np.maximum(np.abs(bj), np.abs(by)))

    @property
    def has_zero_mode(self):
        return self.m == 0 and self.qa == 1.0 and self.pa == 0.0 and self.qb == 1.0 and self.pb == 0.0


def _biots(inner, outer, a, b, k):
    return (inner.biot(k, a) if inner.kind == "R" else 0.0,
            outer.biot(k, b) if outer.kind == "R" else 0.0)


def _check_geometry(a, b, k):
    if not (0 < a < b and math.isfinite(b)) or not (k > 0 and math.isfinite(k)):
        raise ForwardModelError(
            f"annulus needs 0 < inner radius < outer radius and conductivity k > 0, got a = {a} m, "
            f"b = {b} m, k = {k} W/(m K)")


def annulus_eigenvalues(inner, outer, m: int, n: int, a: float, b: float, k: float) -> np.ndarray:
    """First n eigenvalues kappa [1/m], ascending, of the problem above; kappa = 0 is the
    first one only when m == 0 and both walls are 'N' (the constant mode)."""
    a, b, k, m, n = float(a), float(b), float(k), int(m), int(n)
    _check_geometry(a, b, k)
    if m < 0 or n < 0:
        raise ValueError(f"need m >= 0 and n >= 0, got m = {m}, n = {n}")
    biot_a, biot_b = _biots(inner, outer, a, b, k)
    ratio = b / a
    walls = _Walls(inner, outer, m, ratio, biot_a, biot_b)
    key = ("annulus", m, ratio, inner.kind, biot_a, outer.kind, biot_b)

    return ROOT_CACHE.get(key, n, walls.roots) / a


class AnnulusRadial:
    """Radial eigenfunctions R_i(r) for arrays m (int, (K,)) and kappa ((K,), [1/m]).

    R = (c_J J_m(kappa r) + c_Y Y_m(kappa r)) / scale, normalized as in the module docstring;
    kappa = 0 (m = 0, both walls 'N') gives R = 1.
    """

    def __init__(self, inner, outer, m, kappa, a, b, k):
        a, b, k = float(a), float(b), float(k)
        _check_geometry(a, b, k)
        self.m = np.atleast_1d(np.asarray(m, dtype=np.intp))
        self.kappa = np.atleast_1d(np.asarray(kappa, dtype=float))
        if self.m.shape != self.kappa.shape or np.any(self.m < 0) or np.any(self.kappa < 0):
            raise ValueError("m and kappa must be arrays of one shape with m >= 0 and kappa >= 0")
        self.a, self.b, self.k = a, b, k
        self.inner, self.outer = inner, outer
        biot_a, biot_b = _biots(inner, outer, a, b, k)
        pa, qa = _wall_pq(inner, biot_a, "bore")
        self.flat = self.kappa == 0
        if np.any(self.flat & ~((self.m == 0) & (inner.kind == "N") & (outer.kind == "N"))):
            raise ValueError("kappa = 0 is an eigenvalue only for m = 0 with both walls 'N'")
        kap = np.where(self.flat, 1.0, self.kappa)
        x = kap * a
        jx, yx, djx, dyx = _cylinder(self.m, x)
        beta_j, beta_y = pa * jx + qa * djx, pa * yx + qa * dyx
        big = np.maximum(np.abs(beta_j), np.abs(beta_y))
        if not np.all(np.isfinite(big)) or np.any(big == 0):
            raise ForwardModelError(
                "annulus radial functions out of floating-point range (Y_m(kappa a) overflows): "
                "inner radius too small for these orders")
        sign = -1.0 if qa == 0.0 else 1.0
        c_j, c_y = sign * beta_y / big, -sign * beta_j / big
        # bore values from the Wronskian: u(a) = 2 q / pi, a u'(a) = -2 s p / pi (per unit big)
        r_a = TWO_PI_INV * qa / big
        ar_a = -TWO_PI_INV * sign * pa / big
        y = kap * b
        jy, yy, djy, dyy = _cylinder(self.m, y)
        r_b, br_b = c_j * jy + c_y * yy, c_j * djy + c_y * dyy
        norm = self._norm(r_a, ar_a, r_b, br_b, x, y, kap)
        scale = np.sqrt(norm / (0.5 * (b * b - a * a)))
        if not np.all(np.isfinite(scale) & (scale > 0)):
            raise ForwardModelError("annulus radial functions: closed-form norm not positive "
                                    "(kappa is not an eigenvalue of these walls?)")
        self._c_j = np.where(self.flat, 1.0, c_j / scale)
        self._c_y = np.where(self.flat, 0.0, c_y / scale)
        self._wall = {  # (R, dR/dr) at each wall
            "bore": (np.where(self.flat, 1.0, r_a / scale), np.where(self.flat, 0.0, ar_a / (scale * a))),
            "side": (np.where(self.flat, 1.0, r_b / scale), np.where(self.flat, 0.0, br_b / (scale * b))),
        }

    def _norm(self, r_a, ar_a, r_b, br_b, x, y, kap):
        """[r^2 R'^2 + (kappa^2 r^2 - m^2) R^2]_a^b / (2 kappa^2) from wall values [m^2]."""
        m2 = self.m.astype(float) ** 2
        top = br_b ** 2 + (y * y - m2) * r_b ** 2
        bottom = ar_a ** 2 + (x * x - m2) * r_a ** 2
        return np.where(self.flat, 0.5 * (self.b ** 2 - self.a ** 2), (top - bottom) / (2.0 * kap * kap))

    @property
    def size(self):
        return self.m.size

    def values(self, r):
        """R, dR/dr [1/m] and m R / r [1/m] at radii r (P,) in [a, b], each (P, K)."""
        r = np.asarray(r, dtype=float).reshape(-1)
        if r.size and (r.min() < self.a * (1 - 1e-12) or r.max() > self.b * (1 + 1e-12)):
            raise ValueError(f"radii must lie in [{self.a}, {self.b}] m")
        z = np.multiply.outer(r, np.where(self.flat, 0.0, self.kappa))
        zs = np.where(z > 0, z, 1.0)
        j, yv, dj, dy = _cylinder_fast(self.m, zs)
        val = self._c_j * j + self._c_y * yv
        val = np.where(self.flat, 1.0, val)
        deriv = np.where(self.flat, 0.0, (self._c_j * dj + self._c_y * dy) / r[:, None])
        return val, deriv, self.m * val / r[:, None]

    def at_wall(self, wall):
        """(R, dR/dr) at r = a ('bore') or r = b ('side'), each (K,)."""
        if wall not in self._wall:
            raise ValueError(f"wall must be one of {WALLS}, got {wall!r}")
        return tuple(v.copy() for v in self._wall[wall])

    def norms(self):
        """integral_a^b R^2 r dr [m^2] by the closed form ((b^2 - a^2)/2 by the normalization)."""
        kap = np.where(self.flat, 1.0, self.kappa)
        (r_a, d_a), (r_b, d_b) = self._wall["bore"], self._wall["side"]
        return self._norm(r_a, self.a * d_a, r_b, self.b * d_b, kap * self.a, kap * self.b, kap)

    def ring_integrals(self):
        """integral_a^b R r dr [m^2]: (a R'(a) - b R'(b)) / kappa^2 for m = 0 ((b^2 - a^2)/2
        for kappa = 0); NaN for m != 0 (no closed form; a power's angular integral is 0 there)."""
        (_, d_a), (_, d_b) = self._wall["bore"], self._wall["side"]
        kap = np.where(self.flat, 1.0, self.kappa)
        out = (self.a * d_a - self.b * d_b) / (kap * kap)
        out = np.where(self.flat, 0.5 * (self.b ** 2 - self.a ** 2), out)
        return np.where(self.m == 0, out, np.nan)
