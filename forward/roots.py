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
"""

from __future__ import annotations

import threading

import numpy as np
from scipy import special

from .bracketing import solve_bracketed


def _jv(m, x):
    return special.jv(m, x)


def _jvp(m, x):
    return special.jvp(m, x)


_zero_lock = threading.Lock()
_zero_table = np.zeros((0, 0))


def _bessel_zero_table(m_max: int, n: int) -> np.ndarray:
    """Zeros j_{m,k} of J_m for m = 0..m_max (at least), first n (at least) of each.

    One table, grown by doubling, serves every request: the cascade from the zeros of
    J_0 through the interlacing brackets is run once per growth.
    """
    global _zero_table
    with _zero_lock:
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


def bessel_derivative_zeros(m: int, n: int, include_zero: bool = True) -> np.ndarray:
    """First n roots lambda >= 0 of J_m'(lambda) = 0; for m = 0 the first is lambda = 0."""
    m, n = int(m), int(n)
    if m == 0:
        pos = bessel_zeros(1, n)  # J_0' = -J_1
        return np.concatenate([[0.0], pos[: n - 1]]) if include_zero else pos
    j = bessel_zeros(m, n)
    lo = np.concatenate([[float(m)], j[:-1]])
    return solve_bracketed(lambda x, i: _jvp(m, x), lo, j)


def robin_radial_roots(m: int, n: int, biot: float) -> np.ndarray:
    """First n roots of lambda J_m'(lambda) + Bi J_m(lambda) = 0, Bi = h a / k > 0."""
    m, n = int(m), int(n)
    j = bessel_zeros(m, n)
    jp = bessel_derivative_zeros(m, n)
    return solve_bracketed(lambda x, i: x * _jvp(m, x) + biot * _jv(m, x), jp, j)


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
    k = np.arange(int(n), dtype=float)
    if bottom != "R" and top != "R":
        shift = {("D", "D"): 1.0, ("N", "N"): 0.0}.get((bottom, top), 0.5)
        return (k + shift) * np.pi

    def g(mu):
        return mu + pruefer_phase(bottom, mu, biot_bottom) + pruefer_phase(top, mu, biot_top)

    target = (k + 1) * np.pi
    return solve_bracketed(lambda x, i: g(x) - target[i], k * np.pi, (k + 1) * np.pi)
