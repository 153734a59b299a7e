"""Seeded Monte Carlo of the face profile with sensor positions perturbed within their
placement tolerance (uniform in +-tol), the strength alpha drawn from its evidence weights
and c from its posterior given both."""

from __future__ import annotations

import math

import numpy as np

from .face_grid import display_grid
from .linear_gaussian import LinearGaussianProblem


def placement_draws(design, rd, kept, P, problem, alphas, draws, seed, grid, progress=None) -> dict:
    """{'samples': (draws, Q) face values on the display grid, 'points': the grid}.
    alphas = (values, weights) of the strength (one value for a fixed strength)."""
    rng = np.random.default_rng(seed)
    sub = rd.subset(kept)
    cyl = design.cylinder
    pts = display_grid(design.face_name, cyl, *grid)
    B, known = design.face(pts.u, pts.v)
    samples = np.empty((draws, pts.u.size))
    tol = sub.position_tolerance
    a, L = cyl.radius, cyl.height
    for j in range(draws):
        r = np.clip(sub.r + rng.uniform(-1, 1, sub.n) * tol, cyl.inner_radius, a)
        th = sub.theta + rng.uniform(-1, 1, sub.n) * tol / np.maximum(sub.r, tol + 1e-12)
        z = sub.z + rng.uniform(-1, 1, sub.n) * tol
        z = np.clip(z, 0.0, L) if math.isfinite(L) else np.maximum(z, 0.0)
        G, t0 = design.sensors(r, th, z)
        pb = LinearGaussianProblem(G, sub.temperature, t0, problem.noise, P, c0=problem.c0)
        alpha = float(rng.choice(alphas[0], p=alphas[1]))
        c = pb.coefficients(alpha)
        C = pb.posterior_covariance(alpha)
        Lc = np.linalg.cholesky(C + 1e-12 * np.trace(C) / C.shape[0] * np.eye(C.shape[0]))
        draw = c + Lc @ rng.standard_normal(c.size)
        samples[j] = known + B @ draw
        if progress is not None:
            progress(j + 1, draws)
    return {"samples": samples, "points": pts}
