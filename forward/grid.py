"""Separable sums on tensor grids r_i x theta_j x z_l.

Every mode family here is a product Theta_g(theta) R_k(r) Z_k(z) (g = the mode's harmonic
and parity), so a coefficient sum on a grid is

    T[i, j, l] = sum_g Theta_g(theta_j) A_g[i, l],   A_g[i, l] = sum_{k in g} c_k R_k(r_i) Z_k(z_l):

the radial factor is evaluated once per r line, the axial once per z line and the angle
once per theta line, and the sum costs two matrix products instead of one special-function
evaluation per point and mode.
"""

from __future__ import annotations

import numpy as np

MAX_ENTRIES = 4_000_000  # r x z x harmonics entries per block of z lines


def harmonic_groups(m, is_sin):
    """(orders of the groups, their parities, group index of each mode)."""
    key = 2 * np.asarray(m, np.int64) + np.asarray(is_sin, np.int64)
    keys, inverse = np.unique(key, return_inverse=True)
    return keys // 2, (keys % 2).astype(bool), inverse


def angular(m, is_sin, theta, derivative=False):
    """Theta_m(theta) (T, G), or dTheta_m/dtheta / m when derivative."""
    arg = np.multiply.outer(np.asarray(theta, float), m)
    if derivative:
        return np.where(is_sin, np.cos(arg), -np.sin(arg))
    return np.where(is_sin, np.sin(arg), np.cos(arg))


def separable_sum(coef, m, is_sin, radial, axial, theta, derivative=False):
    """sum_k c_k Theta_k(theta_j) radial[i, k] axial[l, k] on the grid, shape (R, T, Z).

    radial (R, K), axial (Z, K); derivative: use dTheta/dtheta / m for the angle."""
    coef = np.asarray(coef, float)
    gm, gs, inv = harmonic_groups(m, is_sin)
    ang = angular(gm, gs, theta, derivative)  # (T, G)
    R, Z, G = radial.shape[0], axial.shape[0], gm.size
    order = np.argsort(inv, kind="stable")
    bounds = np.searchsorted(inv[order], np.arange(G + 1))
    out = np.empty((R, ang.shape[0], Z))
    step = max(1, MAX_ENTRIES // max(R * G, 1))
    for z0 in range(0, Z, step):
        zs = slice(z0, min(Z, z0 + step))
        A = np.empty((R, zs.stop - zs.start, G))
        for g in range(G):
            k = order[bounds[g]:bounds[g + 1]]
            A[:, :, g] = (radial[:, k] * coef[k]) @ axial[zs, k].T
        out[:, :, zs] = (A.reshape(-1, G) @ ang.T).reshape(R, -1, ang.shape[0]).transpose(0, 2, 1)
    return out


def grid_field(coef, m, is_sin, factors, theta, gradient):
    """Temperature (R, T, Z) and, when gradient, (3, R, T, Z) from a family's grid factors:
    factors = (radial, d/dr radial, m radial / r, axial, d/dz axial) (the last four only
    needed for the gradient)."""
    rad, drad, mrad, ax, dax = factors
    t = separable_sum(coef, m, is_sin, rad, ax, theta)
    if not gradient:
        return t, None
    g = np.stack([separable_sum(coef, m, is_sin, drad, ax, theta),
                  separable_sum(coef, m, is_sin, mrad, ax, theta, derivative=True),
                  separable_sum(coef, m, is_sin, rad, dax, theta)])
    return t, g
