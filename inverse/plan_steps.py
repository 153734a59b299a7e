"""The unseen stretches' steps (stretch.py) as part of the planner's state.

The fit marginalizes the steps s ~ N(0, diag v) [face unit^2] into the readings' noise, so
its covariance C of the face coefficients c already carries them; but a new sensor over the
stretch settles the steps themselves, which a state of c alone cannot show.  The planner
therefore carries x = (c, s).  At the kept readings d = X c + G_s s + e, e ~ N(0, N), with
N = S - G_s diag(v) G_s^T [K^2] (the fit's noise without the steps' signal; the left-out
modes' share stays in it).  Given c the steps are Gaussian,

    s | c, d ~ N(V_s G_s^T N^-1 (d - X c), V_s),   V_s = (diag(1/v) + G_s^T N^-1 G_s)^-1,

so with c | d ~ N(m, C) the joint covariance is

    Cov(x) = [[C, C B^T], [B C, V_s + B C B^T]],   B = -V_s G_s^T N^-1 X.

A figure f . c + f_s . s + (left-out modes) becomes the row [f - h X, f_s - h G_s] on x, with
the left-out modes' share h = N^-1 G_t V f_t given the residual of both and their remaining
variance held fixed (marginal_sets.MarginalSets.shares with_steps=False).
"""

from __future__ import annotations

import numpy as np


def joint_covariance(C, X, Gs, v, N) -> np.ndarray:
    """Cov(c, s) ((K + J), (K + J)) from the covariance C (K, K) of c with the steps
    marginalized, the kept columns' fields X (n, K), the steps' fields Gs (n, J) [K per face
    unit] and prior variances v (J,) [face unit^2], and the noise N (n, n) [K^2] without them."""
    NiGs = np.linalg.solve(N, Gs)                                   # N^-1 G_s (n, J)
    Vs = np.linalg.inv(np.diag(1.0 / v) + Gs.T @ NiGs)
    Vs = 0.5 * (Vs + Vs.T)
    B = -Vs @ (NiGs.T @ X)                                          # (J, K)
    CB = C @ B.T
    out = np.block([[C, CB], [CB.T, Vs + B @ CB]])
    return 0.5 * (out + out.T)


def noise_without_steps(marginal) -> np.ndarray:
    """N (n, n) [K^2]: the kept readings' noise covariance without the steps' signal."""
    Gs = marginal.step_fields
    return marginal.S - (Gs * marginal.steps.v) @ Gs.T


def figure_rows(marginal, zones, N):
    """{name: (row on x (K + J,), variance held fixed)} of the total power, the face mean and
    each zone mean: [f - h X, f_s - h G_s] without f (added by the caller: the model's own
    rows), i.e. (-h X, f_s - h G_s), and the left-out modes' remaining variance."""
    names, _, step_rows = marginal.rows(zones)
    shares = marginal.shares(zones, with_steps=False, noise_covariance=N)
    Gs = marginal.step_fields
    out = {}
    for i, name in enumerate(names):
        h, variance = shares[name]
        out[name] = (np.concatenate([-h @ marginal.X, step_rows[i] - h @ Gs]), variance)
    return out
