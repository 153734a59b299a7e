"""Sensor noise model: covariance S of the readings and whitening by its Cholesky factor.

S = L L^T (L lower triangular); whitened quantities are L^-1 x, so that whitened noise
has identity covariance. S is given either as a vector of variances sigma_i^2 [K^2]
(independent sensors) or as a full symmetric positive definite (n, n) matrix [K^2].
"""

from __future__ import annotations

import numpy as np
from scipy.linalg import cholesky, solve_triangular

from .errors import InverseError


def noise_covariance(sigma, offset_sd=None, common_offset_sd=None, repeats: int = 1):
    """Effective covariance of readings once sensor offsets are marginalized [K^2].

    d = T + b + e with e_i ~ N(0, sigma_i^2) fresh at every reading, a fixed offset
    b_i ~ N(0, tau_i^2) per sensor (offset_sd) and a common offset b_c ~ N(0, tau_c^2)
    shared by all sensors (common_offset_sd). For `repeats` = R snapshots stacked
    time-major (row t*n + i), the offsets are the same at every time:

        S = I_R (x) diag(sigma^2) + 1_R 1_R^T (x) (diag(tau^2) + tau_c^2 1 1^T)

    Returns the vector of variances when S is diagonal (R = 1, no common offset),
    otherwise the full (R n, R n) matrix.
    """
    sigma = np.atleast_1d(np.asarray(sigma, dtype=float))
    if sigma.ndim != 1 or not np.all(np.isfinite(sigma)) or np.any(sigma <= 0):
        raise InverseError("sensor noise sd sigma must be positive finite values in K")
    n = sigma.size
    tau = np.zeros(n) if offset_sd is None else np.broadcast_to(
        np.asarray(offset_sd, dtype=float), (n,)).copy()
    if np.any(tau < 0) or not np.all(np.isfinite(tau)):
        raise InverseError("offset_sd must be non-negative finite values in K")
    tau_c = 0.0 if common_offset_sd is None else float(common_offset_sd)
    if not (np.isfinite(tau_c) and tau_c >= 0):
        raise InverseError("common_offset_sd must be a non-negative finite value in K")
    repeats = int(repeats)
    if repeats < 1:
        raise InverseError("repeats must be at least 1")
    if repeats == 1 and tau_c == 0.0:
        return sigma**2 + tau**2
    shared = np.diag(tau**2) + tau_c**2 * np.ones((n, n))
    return np.kron(np.eye(repeats), np.diag(sigma**2)) + np.kron(np.ones((repeats, repeats)), shared)


class Whitener:
    """Whitening by the Cholesky factor of the noise covariance S = L L^T."""

    def __init__(self, noise, n: int | None = None, shared_variance=None):
        """shared_variance (n,) [K^2]: the part of each S_ii that columns marginalized into the
        noise share across the readings (the unseen stretches' steps, stretch.py), left out
        of `own_sd`."""
        s = np.asarray(noise, dtype=float)
        if s.ndim == 0:
            if n is None:
                raise InverseError("a scalar noise variance needs the number of readings")
            s = np.full(n, float(s))
        if s.ndim == 1:
            if not np.all(np.isfinite(s)) or np.any(s <= 0):
                raise InverseError("noise variances sigma_i^2 must be positive and finite (K^2)")
            self.diagonal = True
            self._sd = np.sqrt(s)
            self.chol = None
        elif s.ndim == 2 and s.shape[0] == s.shape[1]:
            if not np.all(np.isfinite(s)):
                raise InverseError("noise covariance contains non-finite entries")
            if not np.allclose(s, s.T, rtol=1e-10, atol=1e-14 * np.abs(s).max()):
                raise InverseError("noise covariance must be symmetric")
            try:
                self.chol = cholesky(0.5 * (s + s.T), lower=True)
            except np.linalg.LinAlgError:
                raise InverseError("noise covariance is not positive definite") from None
            self.diagonal = False
            self._sd = np.sqrt(np.diag(s))
        else:
            raise InverseError("noise must be a vector of variances (n,) or a covariance matrix (n, n)")
        if n is not None and self._sd.size != n:
            raise InverseError(f"noise describes {self._sd.size} readings, expected {n}")
        self.n = self._sd.size
        self._shared = (np.zeros(self.n) if shared_variance is None
                        else np.broadcast_to(np.asarray(shared_variance, float), (self.n,)).copy())

    @property
    def sd(self) -> np.ndarray:
        """Marginal noise sd of each reading, sqrt(S_ii) [K]."""
        return self._sd

    @property
    def shared_variance(self) -> np.ndarray:
        """(n,) [K^2]: the part of each S_ii that marginalized columns share across the readings."""
        return self._shared

    @property
    def own_sd(self) -> np.ndarray:
        """Each reading's own sd [K]: sqrt(S_ii) less the columns the readings share
        (shared_variance), the scale of a reading's residual and of a new sensor's noise."""
        return np.sqrt(np.maximum(self._sd ** 2 - self._shared, 0.0))

    @property
    def variance(self) -> np.ndarray:
        """S as it was given: variances sigma_i^2 (n,) when diagonal, else (n, n) [K^2]."""
        return self._sd ** 2 if self.diagonal else self.covariance

    @property
    def covariance(self) -> np.ndarray:
        """S as a full (n, n) matrix [K^2]."""
        if self.diagonal:
            return np.diag(self._sd**2)
        return self.chol @ self.chol.T

    @property
    def logdet(self) -> float:
        """log det S."""
        d = self._sd if self.diagonal else np.diag(self.chol)
        return float(2.0 * np.sum(np.log(d)))

    def whiten(self, x) -> np.ndarray:
        """L^-1 x for x of shape (n,) or (n, m)."""
        x = np.asarray(x, dtype=float)
        if self.diagonal:
            return x / (self._sd if x.ndim == 1 else self._sd[:, None])
        return solve_triangular(self.chol, x, lower=True)

    def whiten_transpose(self, x) -> np.ndarray:
        """L^-T x for x of shape (n,) or (n, m); S^-1 x = L^-T L^-1 x."""
        x = np.asarray(x, dtype=float)
        if self.diagonal:
            return x / (self._sd if x.ndim == 1 else self._sd[:, None])
        return solve_triangular(self.chol, x, lower=True, trans="T")

    def colour(self, x) -> np.ndarray:
        """L x for x of shape (n,) or (n, m) (inverse of whiten)."""
        x = np.asarray(x, dtype=float)
        if self.diagonal:
            return x * (self._sd if x.ndim == 1 else self._sd[:, None])
        return self.chol @ x

    def subset(self, index) -> "Whitener":
        """Noise model of the readings `index` (a Gaussian's marginal: the sub-block of S)."""
        index = np.asarray(index)
        if self.diagonal:
            return Whitener(self._sd[index] ** 2, shared_variance=self._shared[index])
        return Whitener(self.covariance[np.ix_(index, index)], shared_variance=self._shared[index])
