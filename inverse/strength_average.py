"""Posterior averaged over the smoothing strength alpha instead of plugging in one value.

With a prior flat in log alpha on a log grid (alpha is a scale parameter), the weights are
w_i ∝ p(d | alpha_i), and the posterior of c is the mixture sum_i w_i N(c_i, C_i):

    mean  m = sum_i w_i c_i
    cov     = sum_i w_i (C_i + c_i c_i^T) - m m^T        (law of total covariance)

`band` gives the exact equal-tailed quantiles of the mixture (heavier-tailed than a
Gaussian with the same sd); `predict` its mean and sd. A plug-in alpha (one value
from the evidence) ignores the scatter of alpha-hat, which is a factor of a few when
only a handful of modes are well determined, and its bands then cover less than nominal.
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr, ndtri

SQRT_2PI = float(np.sqrt(2.0 * np.pi))
#: a mixture quantile is taken once a Newton step is below this share of the largest component
#: sd: Newton's error after such a step is ~its square.  Asking every step to reach 1e-12 instead
#: sent points whose F carries round-off of that size into bisection: 16 iterations per point
#: on the demo's face map (324 components x 2,952 points) against 3.5, the quantiles 1e-12 apart
NEWTON_STOP = 1e-7

from .bands import z_factor
from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem
from .strength import default_alphas


def mixture_band(weights, means, sds, level: float = 0.95):
    """Equal-tailed `level` band (lower, upper) of the Gaussian mixture sum_i w_i N(mean_i, sd_i^2).

    weights (m,), or (m, q) when each quantity has its own, means and sds (m, q): solves F(x) = sum_i w_i Phi((x - mean_i) / sd_i) =
    (1 -+ level) / 2 for each of the q quantities by Newton steps on F (F' = the mixture
    density) started at the moment-matched Gaussian quantile and kept inside a bisection
    bracket, until a Newton step is below NEWTON_STOP of the largest component sd taken where
    F is within NEWTON_STOP of its target (the error after it is of the order of that step
    squared; the second condition keeps a short step beside a very narrow component, where
    the density is huge and F still far off, from ending it), or any step below 1e-12 of it.
    Returns two arrays (q,).
    """
    if not 0 < level < 1:
        raise InverseError("level must lie between 0 and 1")
    w = np.asarray(weights, dtype=float)
    mi = np.asarray(means, dtype=float)
    si = np.maximum(np.asarray(sds, dtype=float), 1e-300)  # a pinned point (sd 0) keeps its mean
    shared = w.ndim == 1

    def total(x, cols=slice(None)):
        """sum_i w_i x_i per quantity (the columns `cols` of x)."""
        return w @ x if shared else np.einsum("mq,mq->q", w[:, cols], x)

    mean = total(mi)
    sd = np.sqrt(total(si**2 + (mi - mean) ** 2))
    scale = np.maximum(np.max(si, axis=0), 1e-300)

    def quantile(prob):
        lo = np.min(mi - 12 * si, axis=0)
        hi = np.max(mi + 12 * si, axis=0)
        x = np.clip(mean + ndtri(prob) * sd, lo, hi)
        act = np.arange(x.size)                      # quantities not yet converged
        for _ in range(100):
            m_, s_ = mi[:, act], si[:, act]
            with np.errstate(over="ignore"):          # a pinned component (sd ~ 0): exp(-inf) = 0
                u = (x[act][None, :] - m_) / s_
                F = total(ndtr(u), act) - prob
                dens = total(np.exp(-0.5 * u**2) / s_, act) / SQRT_2PI
            lo[act] = np.where(F < 0, x[act], lo[act])
            hi[act] = np.where(F < 0, hi[act], x[act])
            with np.errstate(divide="ignore", invalid="ignore"):
                newton = x[act] - F / dens
            ok = np.isfinite(newton) & (newton > lo[act]) & (newton < hi[act])
            x_new = np.where(ok, newton, 0.5 * (lo[act] + hi[act]))
            step = np.abs(x_new - x[act])
            newton_done = ok & (step <= NEWTON_STOP * scale[act]) & (np.abs(F) <= NEWTON_STOP)
            done = newton_done | (step <= 1e-12 * scale[act] + 1e-14 * np.abs(x[act]))
            x[act] = x_new
            act = act[~done]
            if act.size == 0:
                break
        return x

    lower, upper = quantile(0.5 * (1 - level)), quantile(0.5 * (1 + level))
    # a pinned point (every component's sd ~ 0, means equal to round-off) may come out with
    # the two limits crossed by ~1e-13: the lower quantile never exceeds the upper one
    return np.minimum(lower, upper), np.maximum(lower, upper)


def mixture_moments(weights, means, sds):
    """Mean and sd (q,) of the Gaussian mixture (weights (m,), means and sds (m, q)):
    sum_i w_i m_i and sqrt(sum_i w_i (sd_i^2 + (m_i - mean)^2)) (law of total variance)."""
    mean = weights @ means
    return mean, np.sqrt(weights @ (sds ** 2 + (means - mean) ** 2))


def mixture_summary(weights, means, sds, level: float = 0.95, scalar: bool = False, extra_variance=None):
    """Mean, sd and the equal-tailed `level` band (lower, upper) of the Gaussian mixture
    (weights (m,), means and sds (m, q)): arrays (q,), or floats when `scalar` (q = 1).
    extra_variance (q,): an independent Gaussian term added to every component."""
    if extra_variance is not None:
        sds = np.sqrt(sds ** 2 + np.asarray(extra_variance, float))
    mean, sd = mixture_moments(weights, means, sds)
    lower, upper = mixture_band(weights, means, sds, level)
    if scalar:
        return float(mean[0]), float(sd[0]), float(lower[0]), float(upper[0])
    return mean, sd, lower, upper


def answers_mixture(weights, answers, level: float = 0.95):
    """Mean, sd, lower, upper (q,) of a mixture of answers given as their own (mean, sd,
    lower, upper) (q,) each, weights (m,): the mean and sd by the mixture's moments
    (mixture_moments); the band from the mixture of
    Gaussians centred on each answer's band with the sd its width implies, (upper - lower) /
    (2 z(level)), so that an answer of weight 1 keeps its own band."""
    w = np.asarray(weights, float)
    m, s, lo, hi = (np.array([np.asarray(a[i], float) for a in answers]) for i in range(4))
    mean, sd = mixture_moments(w, m, s)
    lower, upper = mixture_band(w, 0.5 * (lo + hi), (hi - lo) / (2.0 * z_factor(level)), level)
    return mean, sd, lower, upper


class StrengthAverage:
    """Evidence-weighted mixture over alphas (default `default_alphas(problem)`)."""

    def __init__(self, problem: LinearGaussianProblem, alphas=None):
        grid = default_alphas(problem) if alphas is None else np.sort(np.asarray(alphas, dtype=float).ravel())
        if grid.size < 2 or np.any(grid <= 0) or not np.all(np.isfinite(grid)):
            raise InverseError("alphas must hold at least 2 positive finite values")
        lg = np.log(grid)
        if grid.size > 2 and not np.allclose(np.diff(lg), lg[1] - lg[0], rtol=1e-6):
            raise InverseError("alphas must be log-spaced (the prior is flat in log alpha)")
        self.problem = problem
        le = problem.log_evidence(grid)
        w = np.exp(le - le.max())
        self.weights = w / w.sum()
        keep = self.weights > 1e-10 * self.weights.max()
        self.alphas, self.log_evidence = grid, le
        self._a, self._w = grid[keep], self.weights[keep] / self.weights[keep].sum()
        self.warnings: tuple[str, ...] = ()
        if max(self.weights[0], self.weights[-1]) > 1e-3:
            self.warnings = ("the evidence-weighted alpha reaches the edge of the grid "
                             f"[{grid[0]:.3g}, {grid[-1]:.3g}]; widen alphas",)

    def alpha_mixture(self) -> tuple[np.ndarray, np.ndarray]:
        """(alphas, weights) of the mixture (negligible weights dropped, renormalized)."""
        return self._a, self._w

    def alpha_quantiles(self, q=(0.05, 0.5, 0.95)) -> np.ndarray:
        """Quantiles of alpha under its posterior weights (on the grid)."""
        cdf = np.cumsum(self.weights)
        return np.exp(np.interp(np.asarray(q), cdf, np.log(self.alphas)))

    def coefficients(self) -> np.ndarray:
        """Mixture mean of c, (K,)."""
        return self._w @ self.problem.coefficients(self._a)

    def posterior_covariance(self) -> np.ndarray:
        """Mixture covariance of c, (K, K)."""
        W, _, S = self.problem.weighted_moments(self._a, self._w)
        return 0.5 * (S + S.T) / W

    def posterior_sd(self) -> np.ndarray:
        """sqrt of the mixture covariance's diagonal (a round-off negative taken as zero, as in
        hyperprior.LearnedPrior.posterior_sd)."""
        return np.sqrt(np.maximum(np.diag(self.posterior_covariance()), 0.0))

    def predict(self, B, offset=None):
        """Mixture mean and sd of offset + B c; shapes (q,) (or scalars for B of shape (K,))."""
        mean_i, sd_i = self.problem.predict(B, self._a, offset)
        mean = self._w @ mean_i
        var = self._w @ (sd_i**2 + (mean_i - mean) ** 2)
        return mean, np.sqrt(var)

    def prior_sd(self, B) -> np.ndarray:
        """sd of B c under the prior averaged over alpha: sqrt(sum_i w_i diag(B (alpha_i P)^-1 B^T))."""
        B = np.atleast_2d(np.asarray(B, dtype=float))
        pv = (B**2) @ (1.0 / self.problem.prior_diag)
        return np.sqrt(pv * float(self._w @ (1.0 / self._a)))

    def band(self, B, level: float = 0.95, offset=None, extra_variance=None):
        """Mean, sd and the equal-tailed `level` band (lower, upper) of offset + B c
        (+ an independent term of variance extra_variance).

        lower/upper solve sum_i w_i Phi((x - mean_i) / sd_i) = (1 -+ level) / 2 (bisection).
        """
        if not 0 < level < 1:
            raise InverseError("level must lie between 0 and 1")
        mean, sd = self.predict(B, offset)
        mean_i, sd_i = self.problem.predict(B, self._a, offset)
        m = self._a.size
        sd_i = sd_i.reshape(m, -1)
        if extra_variance is not None:
            sd_i = np.sqrt(sd_i ** 2 + np.asarray(extra_variance, float))
            sd = np.sqrt(sd ** 2 + np.asarray(extra_variance, float))
        lower, upper = mixture_band(self._w, mean_i.reshape(m, -1), sd_i, level)
        if np.ndim(mean) == 0:
            lower, upper = lower[0], upper[0]
        return mean, sd, lower, upper
