"""Radial factors of a hollow part's wall data: data on one wall (the data wall w), the
other wall o homogeneous.

For axial wavenumber beta [1/m] and harmonic m the radial factor solves
    q'' + q'/r - (beta^2 + m^2 / r^2) q = 0,     a <= r <= b,
with B_o[q] = 0 on the other wall and q(r_w) = 1.  From two solutions f1, f2:
    N(r) = B_o[f2] f1(r) - B_o[f1] f2(r)     (B_o[N] = 0 by construction),   q = N / N(r_w).
beta > 0: f1, f2 are the modified Bessel functions, exponentially scaled so nothing
overflows (beta b up to 1e3 and beyond; scipy ive / kve):
    data on the side (r_w = b):  f1 = I_m(beta r) e^{-beta b} = ive(beta r) e^{-beta (b - r)},
                                 f2 = K_m(beta r) e^{beta a}  = kve(beta r) e^{-beta (r - a)};
    data on the bore (r_w = a):  f1 = K_m(beta r) e^{beta a},  f2 = I_m(beta r) e^{-beta b};
each is at most of order one on [a, b] and largest at its own wall.
beta = 0: f1 = 1, f2 = ln(r / r_w) (m = 0); f1 = (r / b)^m, f2 = (a / r)^m (side data) or
f1 = (a / r)^m, f2 = (r / b)^m (bore data) (m >= 1).
B_o[f] = f(r_o) ('D'), k df/dn ('N'), k df/dn + h f ('R'), with the outward normal of the
other wall (+r on the side, -r on the bore).
"""

from __future__ import annotations

import numpy as np
from scipy import special

from .faces import EndCondition

OUTWARD = {"side": 1.0, "bore": -1.0}  # sign of dr along each wall's outward normal


def _scaled_bessel(kind, m, beta, r, a, b):
    """(f, df/dr) of a scaled modified Bessel solution at radii r: kind 'I' (scaled by
    e^{-beta b}) or 'K' (scaled by e^{beta a}); arrays broadcast together; beta > 0, r > 0.
    Derivatives from two orders (DLMF 10.29.2, from memory), sums of like-signed terms:
    I_m' = I_{m+1} + (m / x) I_m,  K_m' = -(K_{m-1} + (m / x) K_m)."""
    x = beta * r
    if kind == "I":
        e = np.exp(-beta * (b - r))
        f = special.ive(m, x)
        df = beta * (special.ive(m + 1, x) + m / x * f) * e
    else:
        e = np.exp(-beta * (r - a))
        f = special.kve(m, x)
        df = -beta * (special.kve(m - 1, x) + m / x * f) * e
    return f * e, df


def _power_pair(m, r, r_w, a, b, wall):
    """(f1, f1', f2, f2') of the beta = 0 solutions at radii r (m integer array)."""
    m = np.asarray(m, float)
    ln = np.log(r / r_w)
    up, down = (r / b) ** m, (a / r) ** m  # (r/b)^m and (a/r)^m, both <= 1 on [a, b]
    dup, ddown = m * up / r, -m * down / r
    zero = m == 0
    if wall == "side":
        f1, d1, f2, d2 = up, dup, down, ddown
    else:
        f1, d1, f2, d2 = down, ddown, up, dup
    f1 = np.where(zero, 1.0, f1)
    d1 = np.where(zero, 0.0, d1)
    f2 = np.where(zero, ln, f2)
    d2 = np.where(zero, 1.0 / r, d2)
    return f1, d1, f2, d2


class WallRadial:
    """Radial factors q (q(r_w) = 1) for arrays m (int, (K,)) and beta ((K,), [1/m]) of data
    on `wall` ('side' or 'bore') of the hollow part a <= r <= b, the other wall homogeneous
    of kind `other` (an EndCondition); k [W/(m K)]."""

    def __init__(self, wall, other: EndCondition, m, beta, a, b, k):
        self.wall, self.other = wall, other
        self.m = np.asarray(m, dtype=np.intp)
        self.beta = np.asarray(beta, dtype=float)
        self.a, self.b, self.k = float(a), float(b), float(k)
        self.r_w = self.a if wall == "bore" else self.b
        self.r_o = self.b if wall == "bore" else self.a
        o_wall = "side" if wall == "bore" else "bore"
        f1, d1, f2, d2 = self._pair(np.array([self.r_o]))
        s_o = OUTWARD[o_wall]
        self.c1 = other.operator(f2[0], s_o * d2[0], self.k)  # N = c1 f1 - c2 f2
        self.c2 = other.operator(f1[0], s_o * d1[0], self.k)
        n_w, _ = self._combination(np.array([self.r_w]))
        self.n_w = n_w[0]

    def _pair(self, r):
        """(f1, f1', f2, f2') at radii r, each (P, K)."""
        r = np.asarray(r, float)[:, None]
        m, beta = self.m[None, :], self.beta[None, :]
        pos = beta > 0
        sb = np.where(pos, beta, 1.0)
        first, second = ("I", "K") if self.wall == "side" else ("K", "I")
        with np.errstate(over="ignore", invalid="ignore", under="ignore"):
            f1, d1 = _scaled_bessel(first, m, sb, r, self.a, self.b)
            f2, d2 = _scaled_bessel(second, m, sb, r, self.a, self.b)
        p1, q1, p2, q2 = _power_pair(m, r, self.r_w, self.a, self.b, self.wall)
        return (np.where(pos, f1, p1), np.where(pos, d1, q1), np.where(pos, f2, p2),
                np.where(pos, d2, q2))

    def _combination(self, r):
        f1, d1, f2, d2 = self._pair(r)
        return self.c1 * f1 - self.c2 * f2, self.c1 * d1 - self.c2 * d2

    def values(self, r):
        """q, dq/dr [1/m] and m q / r [1/m] at radii r (P,), each (P, K).  The Bessel
        functions are evaluated once per distinct radius: points of a grid, the layers of a
        plan's candidates or sensors drilled to a few depths share a handful of radii."""
        r = np.asarray(r, float).ravel()
        radii, back = np.unique(r, return_inverse=True)          # sorted: always map back
        n, dn = self._combination(radii)
        n, dn = n[back.ravel()], dn[back.ravel()]
        q, dq = n / self.n_w, dn / self.n_w
        return q, dq, self.m * q / r[:, None]

    def outward_derivative(self, wall):
        """dq/dn at a wall with its outward normal [1/m], (K,)."""
        r = self.a if wall == "bore" else self.b
        _, dq, _ = self.values(np.array([r]))
        return OUTWARD[wall] * dq[0]

    def ring_integrals(self):
        """integral_a^b q r dr [m^2], (K,): [r q']_a^b / beta^2 for beta > 0 (q'' + q'/r =
        beta^2 q when m = 0); for beta = 0, m = 0 the integrals of 1 and ln(r / r_w).
        Meaningful for m = 0 (the powers use no other)."""
        a, b = self.a, self.b
        _, dq, _ = self.values(np.array([a, b]))
        beta = self.beta
        sb = np.where(beta > 0, beta, 1.0)
        curved = (b * dq[1] - a * dq[0]) / sb ** 2

        def ln_int(r):  # integral of r ln(r / r_w) dr up to r
            return 0.5 * r * r * np.log(r / self.r_w) - 0.25 * r * r
        i1 = 0.5 * (b * b - a * a)
        i2 = ln_int(b) - ln_int(a)
        flat = (self.c1 * i1 - self.c2 * i2) / self.n_w
        return np.where(beta > 0, curved, flat)
