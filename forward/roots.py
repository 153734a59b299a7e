"""Eigenvalues of the cylinder's separated problems.

Radial (end-face data), side condition at r = a, Bi = h a / k:
    'D'  J_m(lambda) = 0
    'N'  J_m'(lambda) = 0            (m = 0 also has lambda = 0)
    'R'  lambda J_m'(lambda) + Bi J_m(lambda) = 0
Every root is bracketed before it is refined: zeros of J_0 lie one in each
((n - 1/2) pi, n pi); zeros of J_{m+1} interlace those of J_m; zeros of J_m' lie one in
(m, j_{m,1}) and one between consecutive zeros of J_m; the n-th Robin root lies in
(j'_{m,n}, j_{m,n}) (with j'_{0,1} = 0) because it moves monotonically from the
Neumann to the Dirichlet root as Bi grows.

Axial (side data), end conditions at z = 0 and z = L with Bi = h L / k: with the
Pruefer form Z = sin(mu z / L + phi_b), phi = atan2(mu, Bi) (D: 0, N: pi/2), the n-th
root (n = 0, 1, ...) solves mu + phi_b(mu) + phi_t(mu) = (n + 1) pi, a strictly
increasing function of mu, so it lies in [n pi, (n + 1) pi] and is unique there.

Root tables are cached (`_RootCache`, bounded, least recently used dropped first): J_m'
zeros per m, Robin roots per (m, Bi), axial roots per (end kinds, Bi's).  A longer request
refines only the roots it lacks (each root depends on its own bracket alone), and a Robin
family for a new Bi starts from the cached roots of the nearest Bi below and above (the
n-th root grows strictly with Bi, so they bracket it), so calibration's rebuilds with
nearby h cost a few iterations per root.
"""

from __future__ import annotations

import functools
import threading
from collections import OrderedDict
from pathlib import Path

import numpy as np
from scipy import special

from .bracketing import solve_bracketed

#: zeros of J_m and J_m' computed once by this module (write_zero_tables) and shipped with
#: the package: a fresh process (every command) starts from them instead of bracketing
#: ~10^4 roots again (1.5 s of the demo's fit)
ZERO_TABLE_FILE = Path(__file__).with_name("bessel_zero_tables.npz")
ZERO_TABLE_SIZE = (64, 320, 256)     # m = 0..64; first 320 zeros of J_m, 256 of J_m'


def _jv(m, x):
    return special.jv(m, x)


def _jvp(m, x):
    return special.jvp(m, x)


_zero_lock = threading.Lock()
_zero_table = np.zeros((0, 0))


@functools.lru_cache(maxsize=1)
def _shipped_tables():
    """(zeros of J_m (M+1, N), zeros of J_m' (M+1, N')) from ZERO_TABLE_FILE, or None."""
    try:
        with np.load(ZERO_TABLE_FILE) as f:
            return np.array(f["j"]), np.array(f["jp"])
    except (OSError, KeyError, ValueError):
        return None


def _bessel_zero_table(m_max: int, n: int, shipped: bool = True) -> np.ndarray:
    """Zeros j_{m,k} of J_m for m = 0..m_max (at least), first n (at least) of each.

    One table, grown by doubling, serves every request: the cascade from the zeros of
    J_0 through the interlacing brackets is run once per growth (starting from the shipped
    table, ZERO_TABLE_FILE).
    """
    global _zero_table
    with _zero_lock:
        if shipped and _zero_table.size == 0 and _shipped_tables() is not None:
            _zero_table = _shipped_tables()[0]
        have_m, have_n = _zero_table.shape[0] - 1, _zero_table.shape[1]
        if have_m >= m_max and have_n >= n:
            return _zero_table
        m_max = max(m_max, have_m, 8)
        n = max(n, have_n, 64)
        m_max = 8 * int(np.ceil(m_max / 8))
        n = 64 * int(np.ceil(n / 64))
        count = n + m_max + 1
        k = np.arange(1, count + 1)
        zeros = solve_bracketed(lambda x, i: _jv(0, x), (k - 0.5) * np.pi, k * np.pi)
        rows = [zeros[:n]]
        for m in range(1, m_max + 1):
            zeros = solve_bracketed(lambda x, i, m=m: _jv(m, x), zeros[:-1], zeros[1:])
            rows.append(zeros[:n])
        _zero_table = np.array(rows)
        return _zero_table


def bessel_zeros(m: int, n: int) -> np.ndarray:
    """First n positive zeros of J_m (m >= 0)."""
    return _bessel_zero_table(int(m), int(n) + 1)[m, :n].copy()


class _RootCache:
    """Bounded table of root families: key -> the longest array of leading roots found."""

    def __init__(self, max_entries: int = 2048):
        self.max_entries = int(max_entries)
        self._data: OrderedDict = OrderedDict()
        self._lock = threading.Lock()
        self.hits = self.misses = 0

    def get(self, key, n, extend):
        """First n roots of family `key`; extend(have, n) returns roots have..n-1."""
        with self._lock:
            have = self._data.get(key)
            if have is not None:
                self._data.move_to_end(key)
                if have.size >= n:
                    self.hits += 1
                    return have[:n].copy()
        self.misses += 1
        have = np.zeros(0) if have is None else have
        full = np.concatenate([have, extend(have.size, n)])
        with self._lock:
            self._data[key] = full
            self._data.move_to_end(key)
            while len(self._data) > self.max_entries:
                self._data.popitem(last=False)
        return full[:n].copy()

    def neighbours(self, match, value, n):
        """Cached arrays (of at least n roots) of the keys accepted by match(key) whose
        value (match's number) is the nearest below and above `value`: (below, above)."""
        below = above = None
        with self._lock:
            for key, arr in self._data.items():
                v = match(key)
                if v is None or arr.size < n:
                    continue
                if v < value and (below is None or v > below[0]):
                    below = (v, arr)
                if v > value and (above is None or v < above[0]):
                    above = (v, arr)
        return (below[1][:n] if below else None), (above[1][:n] if above else None)

    def __contains__(self, key):
        with self._lock:
            return key in self._data

    def seed(self, key, roots):
        """Store the leading roots `roots` of family `key` unless more are cached already."""
        with self._lock:
            have = self._data.get(key)
            if have is None or have.size < roots.size:
                self._data[key] = np.array(roots, dtype=float)

    def clear(self):
        with self._lock:
            self._data.clear()
            self.hits = self.misses = 0


ROOT_CACHE = _RootCache()


def bessel_derivative_zeros(m: int, n: int, include_zero: bool = True) -> np.ndarray:
    """First n roots lambda >= 0 of J_m'(lambda) = 0; for m = 0 the first is lambda = 0."""
    m, n = int(m), int(n)
    if m == 0:
        pos = bessel_zeros(1, n)  # J_0' = -J_1
        return np.concatenate([[0.0], pos[: n - 1]]) if include_zero else pos

    def extend(have, n):
        j = bessel_zeros(m, n)
        lo = np.concatenate([[float(m)], j[:-1]])
        return solve_bracketed(lambda x, i: _jvp(m, x), lo[have:], j[have:])

    shipped = _shipped_tables()
    if shipped is not None and m < shipped[1].shape[0] and ("N", m) not in ROOT_CACHE:
        ROOT_CACHE.seed(("N", m), shipped[1][m])
    return ROOT_CACHE.get(("N", m), n, extend)


def compute_zero_tables(m_max: int = ZERO_TABLE_SIZE[0], n_j: int = ZERO_TABLE_SIZE[1],
                        n_jp: int = ZERO_TABLE_SIZE[2]):
    """(zeros of J_m, zeros of J_m' for m >= 1) for m = 0..m_max, computed here by the
    bracketing cascade without the shipped table: (m_max + 1, n_j) and (m_max + 1, n_jp)
    (row 0 of the second: the zeros of J_1, which are J_0''s positive zeros)."""
    global _zero_table
    with _zero_lock:
        kept, _zero_table = _zero_table, np.zeros((0, 0))
    try:
        j = _bessel_zero_table(m_max, n_j + 1, shipped=False)
        # the J_m' roots bracketed between J_m zeros (the m = 0 row: J_0' = -J_1)
        jp = [j[1, :n_jp]]
        for m in range(1, m_max + 1):
            lo = np.concatenate([[float(m)], j[m, :n_jp - 1]])
            jp.append(solve_bracketed(lambda x, i, m=m: _jvp(m, x), lo, j[m, :n_jp]))
        return j[: m_max + 1, :n_j].copy(), np.array(jp)
    finally:
        with _zero_lock:
            _zero_table = kept


def write_zero_tables(path=ZERO_TABLE_FILE):
    """Write compute_zero_tables() to `path` (the shipped file; run after changing the
    root finding: tests/test_forward_roots.py checks the file against a fresh computation)."""
    j, jp = compute_zero_tables()
    np.savez_compressed(path, j=j, jp=jp)


def robin_radial_roots(m: int, n: int, biot: float) -> np.ndarray:
    """First n roots of lambda J_m'(lambda) + Bi J_m(lambda) = 0, Bi = h a / k > 0."""
    m, n, biot = int(m), int(n), float(biot)

    def f(x, i):
        return x * _jvp(m, x) + biot * _jv(m, x)

    def extend(have, n):
        lo = bessel_derivative_zeros(m, n)[have:]
        hi = bessel_zeros(m, n)[have:]
        # roots of the nearest cached Bi's bracket this one (monotone in Bi)
        below, above = ROOT_CACHE.neighbours(
            lambda key: key[2] if key[0] == "R" and key[1] == m else None, biot, n)
        lo2 = np.maximum(lo, below[have:]) if below is not None else lo
        hi2 = np.minimum(hi, above[have:]) if above is not None else hi
        if below is not None or above is not None:
            idx = np.arange(lo.size)
            ok = (f(lo2, idx) * f(hi2, idx) <= 0) & (lo2 <= hi2)
            lo, hi = np.where(ok, lo2, lo), np.where(ok, hi2, hi)
        return solve_bracketed(f, lo, hi)

    return ROOT_CACHE.get(("R", m, biot), n, extend)


def radial_eigenvalues(kind: str, m: int, n: int, biot: float = 0.0) -> np.ndarray:
    """First n radial eigenvalues lambda for side kind 'D', 'N' or 'R' (Bi = h a / k)."""
    if kind == "D":
        return bessel_zeros(m, n)
    if kind == "N":
        return bessel_derivative_zeros(m, n)
    if kind == "R":
        return robin_radial_roots(m, n, biot)
    raise ValueError(f"unknown side kind {kind!r}")


def pruefer_phase(kind: str, mu, biot: float = 0.0):
    """phi = atan2(mu, Bi) for one end: 0 for 'D', pi/2 for 'N', in (0, pi/2) for 'R'."""
    mu = np.asarray(mu, dtype=float)
    if kind == "D":
        return np.zeros_like(mu)
    if kind == "N":
        return np.full_like(mu, 0.5 * np.pi)
    return np.arctan2(mu, biot)


def axial_eigenvalues(bottom: str, top: str, n: int, biot_bottom: float = 0.0,
                      biot_top: float = 0.0) -> np.ndarray:
    """First n axial eigenvalues mu = beta L (n = 0, 1, ...) for end kinds 'D', 'N', 'R'.

    Z_n(z) = sin(mu_n z / L + phi_b(mu_n)); mu_0 = 0 only when both ends are 'N'.
    """
    if bottom != "R" and top != "R":
        k = np.arange(int(n), dtype=float)
        shift = {("D", "D"): 1.0, ("N", "N"): 0.0}.get((bottom, top), 0.5)
        return (k + shift) * np.pi
    biot_bottom, biot_top = float(biot_bottom), float(biot_top)

    def g(mu):
        return mu + pruefer_phase(bottom, mu, biot_bottom) + pruefer_phase(top, mu, biot_top)

    def extend(have, n):
        k = np.arange(have, n, dtype=float)
        target = (k + 1) * np.pi
        return solve_bracketed(lambda x, i: g(x) - target[i], k * np.pi, (k + 1) * np.pi)

    key = ("A", bottom, top, biot_bottom if bottom == "R" else 0.0, biot_top if top == "R" else 0.0)
    return ROOT_CACHE.get(key, int(n), extend)
