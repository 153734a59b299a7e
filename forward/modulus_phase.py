"""Fast J_m, Y_m, J_m', Y_m' for z > m + 2 from tabulated modulus and phase.

    J_m = M cos(theta),  Y_m = M sin(theta),  theta' = 2 / (pi z M^2)
    M'' = -M'/z - (1 - m^2/z^2) M + 4 / (pi^2 z^2 M^3)          (Milne's equation)

Neither ln M nor f = theta - z oscillates, so both are tabulated per order on a uniform grid
in s = ln z (step STEP) with their first two s-derivatives at the nodes (from the Hankel
functions H1 = J + i Y of orders m and m + 1, Milne's equation, and beyond z = max(4m + 16,
64), where those forms cancel, Hankel's modulus series) and read back by quintic Hermite
interpolation (memory ~0.65 MB per order for z up to 6e5).  f is found without forming theta (whose rounding would be ulp(z)):
exp(i f) = (J + i Y) exp(-i z) / M, unwrapped to the branch nearest Debye's phase minus z.
On evaluation cos(theta) = cos z cos f - sin z sin f (likewise sin), z kept exact.  Tables
grow to larger z on demand (one per order, cached).
"""

from __future__ import annotations

import math
import threading

import numpy as np
from scipy import special

STEP = 1.0 / 512.0  # in ln z; quintic Hermite error ~ (STEP d)^6 / 46080, d the local scale

_lock = threading.Lock()
_tables: dict = {}


def _hermite(f0, g0, s0, f1, g1, s1):
    """Power coefficients c_0..c_5 on [0, 1] from value, h*d/ds, h^2*d2/ds2 at both ends."""
    return np.stack([
        f0, g0, 0.5 * s0,
        -10.0 * f0 - 6.0 * g0 - 1.5 * s0 + 10.0 * f1 - 4.0 * g1 + 0.5 * s1,
        15.0 * f0 + 8.0 * g0 + 1.5 * s0 - 15.0 * f1 + 7.0 * g1 - s1,
        -6.0 * f0 - 3.0 * g0 - 0.5 * s0 + 6.0 * f1 - 3.0 * g1 + 0.5 * s1,
    ])


def _node_data(m: int, z):
    """ln M, f = theta - z and their s-derivatives (times STEP, STEP^2) at nodes z."""
    h0, h1 = special.hankel1(m, z), special.hankel1(m + 1, z)
    j, y = h0.real, h0.imag
    dj, dy = m / z * j - h1.real, m / z * y - h1.imag
    mod = np.hypot(j, y)
    dm = (j * dj + y * dy) / mod  # M'
    ddm = -dm / z - (1.0 - (m / z) ** 2) * mod + 4.0 / (math.pi ** 2 * z * z * mod ** 3)
    g = z * dm / mod  # d ln M / ds
    gs = z * (dm / mod + z * (ddm / mod - (dm / mod) ** 2))
    turn = (h0 / mod) * np.exp(-1j * z)
    f = np.angle(turn)
    est = -m * m / (np.sqrt(z * z - m * m) + z) - m * np.arccos(m / z) - 0.25 * math.pi
    f = f + 2.0 * math.pi * np.round((est - f) / (2.0 * math.pi))
    w = 2.0 / (math.pi * z * mod * mod)  # theta' -> f_s = z (theta' - 1)
    fs = z * (w - 1.0)
    fss = -(4.0 / math.pi) * g / mod ** 2 - z
    # Far out these lose ~z eps to cancellation (w -> 1); there the modulus series gives them.
    far = z >= max(4.0 * m + 16.0, 64.0)
    if far.any():
        g[far], gs[far], fs[far], fss[far] = _series_derivatives(m, z[far])
    return (np.log(mod), STEP * g, STEP ** 2 * gs), (f, STEP * fs, STEP ** 2 * fss)


def _series_derivatives(m: int, z):
    """d ln M/ds, d2 ln M/ds2, f_s, f_ss from S = pi z M^2 / 2 = sum_k c_k z^(-2k) (Hankel's
    modulus expansion, Abramowitz & Stegun 9.2.28: c_0 = 1, c_k = c_(k-1) (2k - 1)/(2k)
    (mu - (2k - 1)^2) / 4, mu = 4 m^2), summed until the terms fall below 1e-18; z >= 4m + 16."""
    mu = 4.0 * m * m
    tail = np.zeros_like(z)  # S - 1
    d1 = np.zeros_like(z)  # sum k c_k z^-2k   (z S' = -2 d1)
    d2 = np.zeros_like(z)  # sum k^2 c_k z^-2k
    term = np.ones_like(z)
    for k in range(1, 60):
        term = term * (2 * k - 1) / (2 * k) * (mu - (2 * k - 1) ** 2) / (4.0 * z * z)
        tail += term
        d1 += k * term
        d2 += k * k * term
        if np.abs(term).max() < 1e-18:
            break
    S = 1.0 + tail
    g = -0.5 - d1 / S  # ln M = (ln S - ln z + const) / 2
    gs = 2.0 * d2 / S - 2.0 * (d1 / S) ** 2  # d/ds of -d1/S, with d/ds z^-2k = -2k z^-2k
    fs = -z * tail / S  # z (1/S - 1)
    fss = fs + 2.0 * z * d1 / (S * S)  # d/ds [z (1/S - 1)] = z (1/S - 1) + z (2 d1 / S^2)
    return g, gs, fs, fss


class _Table:
    def __init__(self, m: int, z_max: float):
        self.m = m
        self.s0 = math.log(m + 1.0)
        n = int(math.ceil((math.log(z_max) - self.s0) / STEP)) + 2
        s = self.s0 + STEP * np.arange(n)
        a, b = _node_data(m, np.exp(s))
        self.coef = [_hermite(*(v[:-1] for v in a), *(v[1:] for v in a)),
                     _hermite(*(v[:-1] for v in b), *(v[1:] for v in b))]
        self.s_max = s[-1]

    def __call__(self, z):
        """(ln M, f) at z (m + 1 <= z <= table end), each shaped like z."""
        t = (np.log(z) - self.s0) / STEP
        i = np.minimum(t.astype(np.intp), self.coef[0].shape[1] - 1)
        t -= i
        out = []
        for c in self.coef:
            acc = c[5][i]
            for k in (4, 3, 2, 1, 0):
                acc = acc * t + c[k][i]
            out.append(acc)
        return out


def _table(m: int, z_max: float) -> _Table:
    with _lock:
        t = _tables.get(m)
        if t is None or math.log(z_max) > t.s_max:
            t = _tables[m] = _Table(m, max(2.0 * z_max, 64.0 * (m + 1.0)))
        return t


def far_values(m: int, z):
    """J_m, Y_m, z J_m', z Y_m' at z > m + 2 (one order m, array z); z Z' = m Z - z Z_{m+1},
    order m + 1 from its own table."""
    z = np.asarray(z, dtype=float)
    cz, sz = np.cos(z), np.sin(z)
    out = []
    for order in (int(m), int(m) + 1):
        lnm, f = _table(order, float(z.max()))(z)
        mod, cf, sf = np.exp(lnm), np.cos(f), np.sin(f)
        out += [mod * (cz * cf - sz * sf), mod * (sz * cf + cz * sf)]
    j, y, j1, y1 = out
    return j, y, m * j - z * j1, m * y - z * y1
