"""Extra model columns with a Gaussian prior, integrated out exactly.

    d = t0 + G c + X z + e,   e ~ N(0, S),   z ~ N(mu, diag(s^2)) independent of c.

Marginal in c (`marginal`): d - X mu ~ N(t0 + G c, S + X diag(s^2) X^T), so screening,
strength, evidence and the learned prior of c work on an ordinary LinearGaussianProblem.
Given c (`conditional`): z | c, d ~ N(a - K c, D^-1) with
    D = X^T S^-1 X + diag(1 / s^2),   a = D^-1 (X^T S^-1 (d - t0) + mu / s^2)
      = mu + D^-1 X^T S^-1 (d - t0 - X mu),
(D^-1 formed as s (I + s X^T S^-1 X s)^-1 s, so that a column with s = 0 is held at its mu),
    K = D^-1 X^T S^-1 G,
the same for every prior of c; so for c ~ (m, C) (`joint`):
    E z = a - K m,   Cov(z, c) = -K C,   Cov z = D^-1 + K C K^T.
Units: z in its own unit, X in K per unit of z.  Used by the zone model (z = the zone
levels) and by calibration under the learned prior (z = the calibrated parameters' step
from the point where the model is linearized).
"""

from __future__ import annotations

import numpy as np

from .linear_gaussian import LinearGaussianProblem
from .noise import Whitener


class MarginalColumns:
    """The columns X (n, q) with prior N(mu, diag(s^2)) beside the problem `base` (its G, d,
    t0 and noise; the prior of c: `prior_diag`, `c0`, by default the base problem's)."""

    def __init__(self, base, X, mu, s, prior_diag=None, c0=None):
        self.base = base
        self.X = np.asarray(X, float).reshape(base.n, -1)
        self.mu, self.s = np.asarray(mu, float), np.asarray(s, float)
        added = (self.X * self.s ** 2) @ self.X.T
        # the columns integrated out are shared by the readings, like what the base noise
        # already shares (Whitener.own_sd leaves both out)
        noise = Whitener(base.noise.covariance + added,
                         shared_variance=base.noise.shared_variance + np.diag(added))
        self.marginal = LinearGaussianProblem(base.G, base.d - self.X @ self.mu, base.t0, noise,
                                              base.prior_diag if prior_diag is None else prior_diag,
                                              base.c0 if c0 is None else c0)

    def conditional(self, idx):
        """(a, K, D^-1) of z | c on the readings idx (module docstring)."""
        sub = self.base.subset(idx)
        Wx, Wg = sub.noise.whiten(self.X[idx]), sub.noise.whiten(sub.G)
        yw = sub.noise.whiten(sub.d - sub.t0)
        # D^-1 = s M^-1 s, M = I + s X_w^T X_w s (s = diag(s)): finite for a column held at its
        # prior mean (s = 0, mu = 0: a zone without a level of its own), whose z is then 0
        s = self.s
        Minv = np.linalg.inv(np.eye(s.size) + s[:, None] * (Wx.T @ Wx) * s[None, :])
        Dinv = s[:, None] * Minv * s[None, :]
        Dinv = 0.5 * (Dinv + Dinv.T)
        a = self.mu + Dinv @ (Wx.T @ (yw - Wx @ self.mu))
        return a, Dinv @ (Wx.T @ Wg), Dinv

    def joint(self, c, C, idx):
        """(mean (K + q,), covariance) of (c, z) on the readings idx, c ~ (c, C) from the
        marginal problem."""
        a, Kmap, Dinv = self.conditional(idx)
        KC = Kmap @ C
        mean = np.concatenate([c, a - Kmap @ c])
        cov = np.block([[C, -KC.T], [-KC, Dinv + KC @ Kmap.T]])
        return mean, 0.5 * (cov + cov.T)
