"""Points on the unknown face: display grids and quadrature rules (SI, radians)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import special

from ..forward.geometry import is_wall


@dataclass
class FacePoints:
    """Face coordinates (u, v) = (r, theta) on end faces or (theta, z) on a wall, the
    corresponding (r, theta, z), and quadrature weights w (dA [m^2]) when a rule.
    lines = (along, around): the grid's lines, r (or z) [m] and theta [rad]; the points are
    along x around, along major (so model columns can evaluate them separably)."""

    face: str
    u: np.ndarray
    v: np.ndarray
    r: np.ndarray
    theta: np.ndarray
    z: np.ndarray
    weights: np.ndarray | None = None
    shape: tuple = ()
    lines: tuple | None = None


def face_on(design, points):
    """(B (Q, K), known (Q,)) of the face quantity at `points`: on their grid lines when the
    model columns evaluate a grid (`face_grid(along, around)`), else point by point; the
    same numbers to round-off."""
    grid = getattr(design, "face_grid", None)
    if grid is not None and points.lines is not None:
        return grid(*points.lines)
    return design.face(points.u, points.v)


#: entries (points x columns) of one block of face values summed by face_sums (32 MB)
FACE_SUM_BLOCK = 2 ** 22


def face_sums(design, points, weights):
    """(weights @ B (q, K), weights @ known (q,)) for the face quantity (B, known) = face_on(
    design, points) and q weight vectors `weights` (q, Q), summed over blocks of grid lines
    (or of points) of about FACE_SUM_BLOCK entries, so that B is never held whole (a tube's
    left-out modes on its quadrature rule: 168 x 192 points x 3136 columns, 0.8 GB)."""
    W = np.atleast_2d(np.asarray(weights, float))
    grid = getattr(design, "face_grid", None)
    if grid is not None and points.lines is not None:
        along, around = points.lines

        def block(i, n):
            return grid(along[i:i + n], around), slice(i * around.size, (i + n) * around.size)
        total, per = along.size, around.size
    else:
        def block(i, n):
            return design.face(points.u[i:i + n], points.v[i:i + n]), slice(i, i + n)
        total, per = np.size(points.u), 1
    (B, k), rows = block(0, 1)
    F, known = W[:, rows] @ B, W[:, rows] @ k
    step = max(1, FACE_SUM_BLOCK // max(per * B.shape[1], 1))
    for i in range(1, total, step):
        (B, k), rows = block(i, step)
        F += W[:, rows] @ B
        known += W[:, rows] @ k
    return F, known


def _to_rtz(face, u, v, cylinder):
    if is_wall(face):
        return np.full(u.shape, cylinder.wall_radius(face)), u, v
    z = 0.0 if face == "bottom" else cylinder.height
    return u, v, np.full(u.shape, z)


def face_interval(face, cylinder):
    """(lo, hi) [m] of a face's non-angular coordinate: r = inner radius..radius on an end
    face, z = 0..L on a wall (0..1 m on a long part, whose figures are per metre)."""
    if is_wall(face):
        return 0.0, cylinder.axial_length
    return cylinder.inner_radius, cylinder.radius


def display_grid(face, cylinder, n_radial=41, n_theta=72):
    """Grid for maps and estimate.csv: end faces r = a_i..a x theta on [0, 2 pi) (n_radial x
    n_theta); walls theta x z = 0..L (n_radial heights x n_theta angles; one height on a
    long part, where nothing varies along z)."""
    th = 2.0 * np.pi * np.arange(n_theta) / n_theta
    lo, hi = face_interval(face, cylinder)
    s = np.linspace(lo, hi, 1 if (cylinder.long and is_wall(face)) else n_radial)
    n_radial = s.size
    S, TH = np.meshgrid(s, th, indexing="ij")
    if is_wall(face):
        u, v = TH.ravel(), S.ravel()
    else:
        u, v = S.ravel(), TH.ravel()
    r, t, z = _to_rtz(face, u, v, cylinder)
    return FacePoints(face, u, v, r, t, z, None, (n_radial, n_theta), (s, th))


def segments(breaks, lo, hi, n_total, order=24):
    """Composite Gauss-Legendre nodes and weights on [lo, hi], split at `breaks` (clipped to
    [lo, hi]) and into pieces of about n_total * length / (hi - lo) nodes, so that a
    piecewise-smooth integrand with kinks or steps at the breaks is integrated accurately."""
    pts = np.unique(np.clip(np.concatenate([[lo, hi], np.asarray(breaks, float)]), lo, hi))
    x, w = special.roots_legendre(order)
    nodes, weights = [], []
    for a, b in zip(pts[:-1], pts[1:]):
        if b - a <= 1e-13 * max(abs(hi - lo), 1e-300):
            continue
        pieces = max(1, int(np.ceil(n_total * (b - a) / (hi - lo) / order)))
        edges = np.linspace(a, b, pieces + 1)
        for e0, e1 in zip(edges[:-1], edges[1:]):
            nodes.append(0.5 * (e1 - e0) * x + 0.5 * (e1 + e0))
            weights.append(0.5 * (e1 - e0) * w)
    return np.concatenate(nodes), np.concatenate(weights)


def quadrature(face, cylinder, n_radial=64, n_theta=128, breaks=None):
    """Gauss-Legendre in r (or z) times the trapezoidal rule in theta; weights are dA [m^2]
    (per metre of length on a long part's walls).
    breaks = (along, around): break points [m] and [rad] of zone edges; a direction with
    breaks uses a composite Gauss rule split there, so that zone indicators integrate exactly."""
    lo, hi = face_interval(face, cylinder)
    span = hi - lo
    along, around = breaks if breaks is not None else ((), ())
    if len(along):
        s, ws = segments(along, lo, hi, n_radial)
    else:
        x, w = special.roots_legendre(n_radial)
        s, ws = lo + 0.5 * span * (x + 1.0), 0.5 * span * w
    if len(around):
        t0 = float(np.min(around))
        wrapped = t0 + np.mod(np.asarray(around, float) - t0, 2.0 * np.pi)
        th, wt = segments(wrapped, t0, t0 + 2.0 * np.pi, n_theta)
    else:
        th = 2.0 * np.pi * np.arange(n_theta) / n_theta
        wt = np.full(n_theta, 2.0 * np.pi / n_theta)
    n_theta = th.size
    S, TH = np.meshgrid(s, th, indexing="ij")
    W = ws[:, None] * wt[None, :]
    if is_wall(face):
        u, v, W = TH.ravel(), S.ravel(), (W * cylinder.wall_radius(face)).ravel()
    else:
        u, v, W = S.ravel(), TH.ravel(), (W * S).ravel()
    r, t, z = _to_rtz(face, u, v, cylinder)
    return FacePoints(face, u, v, r, t, z, W, (s.size, n_theta), (s, th))
