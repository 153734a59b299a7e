"""Batched Bessel functions for mode evaluation.

J_m(x) for many (order, argument) pairs at once comes from a table on a uniform grid
x_i = i h (h = 1/20) built by backward recurrence in the order,
    J_{m-1}(x) = (2 m / x) J_m(x) - J_{m+1}(x),
over blocks of ORDER_BLOCK orders, each seeded with the two exact orders above it; between
nodes a quintic Hermite interpolant uses J, J' = (J_{m-1} - J_{m+1}) / 2 and
J'' = (J_{m-2} - 2 J_m + J_{m+2}) / 4, stored as its six power coefficients, one flat array
per power (p(t) = sum_j c_j t^j, t = (x - x_i) / h),
and evaluated by a Horner sum in blocks of a few thousand (order, argument) pairs so the
gathers and temporaries stay in cache.  The interpolation error is at most
h^6 max|J^(6)| / 46080 < 4e-13 (|J^(k)| <= 1).  Each node's values depend on that node
alone, so a table grown to larger arguments appends nodes and keeps the old ones.

Modified Bessel ratios I_m(x) / I_m(y) use exponentially scaled values (ive), so
arguments up to 1e3 and beyond neither overflow nor lose digits.
"""

from __future__ import annotations

import threading

import numpy as np
from scipy import special

STEP = 1.0 / 20.0
BLOCK = 8192  # (order, argument) pairs per evaluation block (measured best of 256..16384)


#: orders per block of the backward recurrence: each block is seeded with exact values just
#: above it, so an order's table values never depend on how many orders the table holds (a
#: process that once needed more harmonics gives the same numbers as a fresh one)
ORDER_BLOCK = 8


def _node_values(max_order: int, x: np.ndarray):
    """J, h J' and h^2 J'' at nodes x (one row per order 0..max_order), each (orders, n)."""
    top = max_order + 2  # need J up to order max_order + 2 for J''
    blocks = top // ORDER_BLOCK + 1
    vals = np.empty((blocks * ORDER_BLOCK, x.size))
    pos = x > 0
    xs = x[pos]
    for b in range(blocks):
        lo, hi = b * ORDER_BLOCK, (b + 1) * ORDER_BLOCK   # orders lo .. hi - 1 from seeds hi, hi + 1
        above, seed = special.jv(hi + 1, xs), special.jv(hi, xs)
        cur = seed
        for m in range(hi, lo, -1):
            cur, above = (2.0 * m / xs) * cur - above, cur
            vals[m - 1, pos] = cur
        # where the seeds underflow (small x, high order) the recurrence carries no
        # information: evaluate those nodes order by order instead
        weak = np.flatnonzero(pos)[np.abs(seed) < 1e-250]
        if weak.size:
            xw = x[weak]
            for m in range(lo, hi):
                vals[m, weak] = special.jv(m, xw)
    vals = vals[: top + 1]
    vals[:, ~pos] = 0.0
    vals[0, ~pos] = 1.0

    def order(m):
        return vals[abs(m)] * (-1.0 if (m < 0 and m % 2) else 1.0)

    orders = range(max_order + 1)
    f = vals[: max_order + 1].copy()
    g = STEP * np.stack([0.5 * (order(m - 1) - order(m + 1)) for m in orders])
    s = STEP * STEP * np.stack([0.25 * (order(m - 2) - 2.0 * order(m) + order(m + 2)) for m in orders])
    return f, g, s


def _hermite_powers(f, g, s):
    """Power coefficients c_0..c_5 of the quintic Hermite interpolant on each interval
    [x_i, x_i + h] from J, h J', h^2 J'' at both ends; (6, orders, n - 1)."""
    f0, g0, s0 = f[:, :-1], g[:, :-1], s[:, :-1]
    f1, g1, s1 = f[:, 1:], g[:, 1:], s[:, 1:]
    return np.stack([
        f0, g0, 0.5 * s0,
        -10.0 * f0 - 6.0 * g0 - 1.5 * s0 + 10.0 * f1 - 4.0 * g1 + 0.5 * s1,
        15.0 * f0 + 8.0 * g0 + 1.5 * s0 - 15.0 * f1 + 7.0 * g1 - s1,
        -6.0 * f0 - 3.0 * g0 - 0.5 * s0 + 6.0 * f1 - 3.0 * g1 + 0.5 * s1,
    ])


class _JTable:
    def __init__(self, max_order: int, max_arg: float):
        self.max_order = int(max_order)
        n_nodes = int(np.ceil(max_arg / STEP)) + 2
        fgs = _node_values(self.max_order, np.arange(n_nodes) * STEP)
        self._set_powers(_hermite_powers(*fgs), fgs)

    def _set_powers(self, powers, fgs):
        """powers: (6, orders, intervals); one flat array per power (zero at the last node);
        fgs: J, h J', h^2 J'' at the nodes (only the last node is kept, for growing)."""
        n_orders, n_int = powers.shape[1], powers.shape[2]
        self.n_nodes = n_int + 1
        self.max_arg = (self.n_nodes - 2) * STEP
        self.powers = []
        for j in range(6):
            full = np.zeros((n_orders, self.n_nodes))
            full[:, :-1] = powers[j]
            self.powers.append(full.ravel())
        self._last = tuple(a[:, -1:].copy() for a in fgs)

    @property
    def v(self):
        """J_m at the nodes, (orders, nodes)."""
        v = self.powers[0].reshape(-1, self.n_nodes).copy()
        v[:, -1] = self._last[0][:, 0]
        return v

    def extended(self, max_arg: float) -> "_JTable":
        """The same table with nodes appended up to max_arg (old nodes kept as they are)."""
        n_new = int(np.ceil(max_arg / STEP)) + 2
        old = self.n_nodes
        if n_new <= old:
            return self
        add = _node_values(self.max_order, np.arange(old, n_new) * STEP)
        bridge = tuple(np.concatenate([a, b], axis=1) for a, b in zip(self._last, add))
        new_powers = _hermite_powers(*bridge)  # intervals from the old last node on
        out = _JTable.__new__(_JTable)
        out.max_order = self.max_order
        powers = np.empty((6, self.max_order + 1, n_new - 1))
        for j in range(6):
            powers[j, :, :old - 1] = self.powers[j].reshape(-1, old)[:, :-1]
            powers[j, :, old - 1:] = new_powers[j]
        out._set_powers(powers, add)
        return out

    def __call__(self, m, x):
        m = np.asarray(m, dtype=np.intp)
        if m.ndim == 0:  # one order (projections): gather from that order's rows alone
            rows = slice(int(m) * self.n_nodes, (int(m) + 1) * self.n_nodes)
            return self._horner([c[rows] for c in self.powers], None, np.asarray(x, dtype=float))
        m, x = np.broadcast_arrays(m, np.asarray(x, dtype=float))
        return self._horner(self.powers, m, x)

    def _horner(self, powers, m, x):
        """The interpolant at x from the power arrays; m: orders (row offsets), or None when
        `powers` are one order's rows."""
        shape = x.shape
        x = x.ravel()
        m = None if m is None else m.ravel()
        out = np.empty(x.size)
        c0, c1, c2, c3, c4, c5 = powers
        n = min(BLOCK, x.size)
        t = np.empty(n)
        idx = np.empty(n, dtype=np.intp)
        acc = np.empty(n)
        tmp = np.empty(n)
        last = self.n_nodes - 2
        for start in range(0, x.size, BLOCK):
            stop = min(start + BLOCK, x.size)
            k = stop - start
            tb, ib, ab, cb = t[:k], idx[:k], acc[:k], tmp[:k]
            np.multiply(x[start:stop], 1.0 / STEP, out=tb)
            np.minimum(tb.astype(np.intp), last, out=ib)
            tb -= ib
            if m is not None:
                ib += m[start:stop] * self.n_nodes
            # c0 + t (c1 + t (c2 + t (c3 + t (c4 + t c5)))), innermost first
            np.take(c5, ib, out=ab, mode="clip")
            ab *= tb
            for c in (c4, c3, c2, c1):
                np.take(c, ib, out=cb, mode="clip")
                ab += cb
                ab *= tb
            np.take(c0, ib, out=cb, mode="clip")
            np.add(cb, ab, out=out[start:stop])
        return out.reshape(shape)


_lock = threading.Lock()
_table: _JTable | None = None


def _get_table(max_order: int, max_arg: float) -> _JTable:
    global _table
    with _lock:
        t = _table
        if t is not None and t.max_order >= max_order and t.max_arg < max_arg:
            t = _table = t.extended(float(2.0 ** np.ceil(np.log2(max_arg + 64.0))))
        elif t is None or t.max_order < max_order or t.max_arg < max_arg:
            new_order = max(max_order, t.max_order if t else 0)
            new_order = max(int(8 * np.ceil((new_order + 1) / 8)), 2 * (t.max_order if t else 0), 16)
            new_arg = max(max_arg, t.max_arg if t else 0.0)
            new_arg = float(2.0 ** np.ceil(np.log2(new_arg + 64.0)))
            t = _table = _JTable(new_order, new_arg)
        return t


def besselj(m, x) -> np.ndarray:
    """J_m(x) for integer orders m >= -1 and arguments x >= 0, broadcast together."""
    m = np.asarray(m, dtype=np.intp)
    x = np.asarray(x, dtype=float)
    if x.size == 0:
        return np.zeros(np.broadcast(m, x).shape)
    xmin, xmax = float(x.min()), float(x.max())
    if not (xmin >= 0 and np.isfinite(xmax)):
        raise ValueError("besselj needs finite arguments x >= 0")
    if m.min() >= 0:
        return _get_table(int(m.max()), xmax)(m, x)
    am = np.abs(m)  # J_{-1} = -J_1
    out = _get_table(int(am.max()), xmax)(am, x)
    return np.where(m < 0, -out, out)


def besselj_triplet(m, x):
    """(J_{m-1}(x), J_m(x), J_{m+1}(x)), orders m >= 0, for values and derivatives.

    J_m' = (J_{m-1} - J_{m+1}) / 2 and J_m(x) / x = (J_{m-1} + J_{m+1}) / (2 m).
    """
    m = np.asarray(m, dtype=np.intp)
    return besselj(m - 1, x), besselj(m, x), besselj(m + 1, x)


def ive_orders(max_order: int, x) -> np.ndarray:
    """exp(-x) I_m(x) for m = 0..max_order (+1 extra order), shape (max_order + 2,) + x.shape.

    Backward recurrence I_{m-1} = (2 m / x) I_m + I_{m+1} (stable for I, the minimal
    solution as m grows) from two exact seeds; entries whose seeds underflow are
    evaluated directly.
    """
    x = np.asarray(x, dtype=float)
    top = int(max_order) + 1
    out = np.empty((top + 1,) + x.shape)
    out[top] = special.ive(top, x)
    if top >= 1:
        out[top - 1] = special.ive(top - 1, x)
    pos = x > 0
    safe_x = np.where(pos, x, 1.0)
    for m in range(top - 1, 0, -1):
        out[m - 1] = (2.0 * m / safe_x) * out[m] + out[m + 1]
    weak = ~pos | (out[top - 1] < 1e-280)
    if weak.any():
        xs = x[weak]
        for m in range(top + 1):
            out[m][weak] = special.ive(m, xs)
    return out


#: |J_m(x)| <= LANDAU_B m^(-1/3) for every x >= 0 and order m >= 1 (Landau's bound, from
#: memory; tests/test_forward_truncation.py checks it against scipy for m = 1..64)
LANDAU_B = 0.674886


def besselj_envelope(m, x, j=None) -> np.ndarray:
    """An upper bound of sup_{x' >= x} |J_m(x')| for x > 0, non-increasing in x, for orders
    m >= 0 and x >= 0 broadcast together (at x = 0, |J_m(0)|: a series' terms at r = 0 all
    have x = 0): for x > m, sqrt(J_m^2 + x^2 J_m'^2 / (x^2 - m^2)), which
    decreases on (m, inf) (Sonine's theorem for the Bessel equation) and equals |J_m| at its
    maxima; elsewhere, and wherever it is larger, the bound of J_m's largest value, 1 (m = 0)
    or LANDAU_B m^(-1/3).  J_m' = (m / x) J_m - J_{m+1} (x > m > = 0 there); j: J_m(x) when
    the caller has it (the series' fields at the same points), else looked up."""
    m = np.asarray(m, dtype=np.intp)
    x = np.asarray(x, dtype=float)
    j = besselj(m, x) if j is None else np.asarray(j, float)
    beyond = x > m
    safe = np.where(beyond, x, 1.0)
    slope = m / safe * j - besselj(m + 1, x)
    top = np.where(m == 0, 1.0, np.minimum(1.0, LANDAU_B / np.cbrt(np.maximum(m, 1))))
    gain = np.where(beyond, x ** 2 / np.where(beyond, x ** 2 - m ** 2, 1.0), 0.0)
    out = np.where(beyond, np.minimum(top, np.sqrt(j ** 2 + gain * slope ** 2)), top)
    return np.where((x == 0) & (m > 0), 0.0, out)
