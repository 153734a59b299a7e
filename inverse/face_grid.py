"""Points on the unknown face: display grids and quadrature rules (SI, radians)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special


@dataclass
class FacePoints:
    """Face coordinates (u, v) = (r, theta) on end faces or (theta, z) on the side, the
    corresponding (r, theta, z), and quadrature weights w (dA [m^2]) when a rule."""

    face: str
    u: np.ndarray
    v: np.ndarray
    r: np.ndarray
    theta: np.ndarray
    z: np.ndarray
    weights: np.ndarray | None = None
    shape: tuple = ()


def _to_rtz(face, u, v, radius, height):
    if face == "side":
        return np.full(u.shape, radius), u, v
    z = 0.0 if face == "bottom" else height
    return u, v, np.full(u.shape, z)


def display_grid(face, radius, height, n_radial=41, n_theta=72):
    """Grid for maps and estimate.csv: end faces r = 0..a x theta on [0, 2 pi) (n_radial x
    n_theta); side theta x z = 0..L (n_radial heights x n_theta angles)."""
    th = 2.0 * np.pi * np.arange(n_theta) / n_theta
    s = np.linspace(0.0, radius if face != "side" else height, n_radial)
    S, TH = np.meshgrid(s, th, indexing="ij")
    if face == "side":
        u, v = TH.ravel(), S.ravel()
    else:
        u, v = S.ravel(), TH.ravel()
    r, t, z = _to_rtz(face, u, v, radius, height)
    return FacePoints(face, u, v, r, t, z, None, (n_radial, n_theta))


def quadrature(face, radius, height, n_radial=64, n_theta=128):
    """Gauss-Legendre in r (or z) times the trapezoidal rule in theta; weights are dA [m^2]."""
    x, w = special.roots_legendre(n_radial)
    span = radius if face != "side" else height
    s = 0.5 * span * (x + 1.0)
    ws = 0.5 * span * w
    th = 2.0 * np.pi * np.arange(n_theta) / n_theta
    S, TH = np.meshgrid(s, th, indexing="ij")
    W = np.repeat(ws[:, None], n_theta, axis=1) * (2.0 * np.pi / n_theta)
    if face == "side":
        u, v, W = TH.ravel(), S.ravel(), (W * radius).ravel()
    else:
        u, v, W = S.ravel(), TH.ravel(), (W * S).ravel()
    r, t, z = _to_rtz(face, u, v, radius, height)
    return FacePoints(face, u, v, r, t, z, W, (n_radial, n_theta))
