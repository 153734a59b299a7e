"""Linear Gaussian model of the readings, solved for any smoothing strength from one SVD.

Model: d = t0 + G c + e, e ~ N(0, S); prior c ~ N(c0, (alpha P)^-1), P = diag(p) > 0.
Whitened, prior-scaled system (S = L L^T):

    A = L^-1 G P^-1/2,   y = L^-1 (d - t0 - G c0),   u = P^1/2 (c - c0),
    MAP u = argmin ||A u - y||^2 + alpha ||u||^2     (Tikhonov),
    A = U diag(s) V^T    (full SVD, computed once; s padded with zeros where needed).

With beta = U^T y, f_j = s_j^2 / (s_j^2 + alpha) (filter factors) and g_j = 1 - f_j =
alpha / (s_j^2 + alpha), every quantity below is a cheap sum over j, so that all
methods take a scalar alpha or a 1-D array of alphas (then results gain a leading axis).
Units: d, t0, residuals in K; S in K^2; c in the unit of the unknown face's data.
"""

from __future__ import annotations

import copy
from functools import cache, cached_property

import numpy as np

from .errors import InverseError
from .noise import Whitener

LOG_2PI = float(np.log(2.0 * np.pi))
#: _projected splits off the prior directions whose sd exceeds this many times the median's
FLAT_RATIO = 100.0
#: _projected projects a row directly when the rest of its non-flat part is below this share
#: of that part's norm (measured on the demo fit's face map: within 3e-11 of an extended-precision
#: projection, 0.05 % of the rows projected directly)
CANCEL_GUARD = 1e-4


def _as_alphas(alpha):
    """1-D array of strengths and whether the input was a scalar."""
    a = np.asarray(alpha, dtype=float)
    if a.ndim > 1:
        raise InverseError("alpha must be a number or a 1-D array of numbers")
    if a.size == 0 or not (a.min() > 0.0 and a.max() < np.inf):      # NaN fails both
        raise InverseError("smoothing strength alpha must be positive and finite")
    return np.atleast_1d(a), a.ndim == 0


def _prior_diagonal(prior_diag, K):
    """The prior precision diagonal as K positive finite floats."""
    p = np.asarray(prior_diag, dtype=float)
    if p.shape != (K,) or not np.all(np.isfinite(p)) or np.any(p <= 0):
        raise InverseError(f"prior_diag must be {K} positive finite values")
    return p


def _alphas_and_weights(alphas, weights):
    """Strengths (m,) (_as_alphas) and one weight for each, as floats."""
    a, _ = _as_alphas(alphas)
    w = np.asarray(weights, dtype=float)
    if w.shape != a.shape:
        raise InverseError("one weight per alpha")
    return a, w


@cache
def _cached_names(cls):
    """Names of cls's cached_property values (along its MRO): what a new prior invalidates."""
    return tuple(name for c in cls.__mro__ for name, attr in vars(c).items()
                 if isinstance(attr, cached_property))


def _out(x, scalar):
    return x[0] if scalar else x


def prior_scaled_svd(Gw, p_isqrt, full=False):
    """SVD (U, s, V^T) of A = Gw P^-1/2 (Gw = L^-1 G (n, K), p_isqrt = P^-1/2 (K,)); thin unless
    `full` (U whole). One rule, so that evidence_spectrum's decomposition is the problem's."""
    return np.linalg.svd(Gw * p_isqrt[None, :], full_matrices=full)


def evidence_spectrum(Gw, y, prior_diag, keep=False):
    """(s^2 (n,), beta (n,)) of A = Gw P^-1/2 = U diag(s) V^T (Gw = L^-1 G,
    y = L^-1 (d - t0 - G c0), beta = U^T y, s = 0 beyond the rank): all the evidence needs,
    from the thin SVD (no V beyond the rank: ~4x cheaper than LinearGaussianProblem's full
    one for 20 readings x 130 modes) when one design is tried with many priors. (The
    eigenpairs of A A^T would be cheaper still but lose the small s^2 next to a nearly flat
    prior direction: 0.3 nats of the evidence near its peak in tests/test_inverse_hyperprior.py.)
    keep=True also returns the SVD (U, s, V^T) for LinearGaussianProblem(svd=...) (n <= K)."""
    U, s, Vt = prior_scaled_svd(Gw, 1.0 / np.sqrt(np.asarray(prior_diag, dtype=float)))
    s2 = np.zeros(Gw.shape[0])
    s2[: s.size] = s ** 2
    beta = np.zeros(s2.size)
    beta[: s.size] = U.T @ y
    if s.size < s2.size:          # more readings than modes: the rest of y is residual (s = 0)
        beta[s.size] = np.sqrt(max(float(y @ y - beta @ beta), 0.0))
    return (s2, beta, (U, s, Vt)) if keep else (s2, beta)


def log_evidence_from_spectrum(s2, beta, alphas, logdet_noise):
    """log p(d | alpha) = -1/2 [n log 2 pi + log det S + sum_j log(1 + s_j^2 / alpha)
    + sum_j alpha beta_j^2 / (s_j^2 + alpha)] over the n data-space directions (s = 0 beyond
    the rank); alphas (m,) -> (m,), or stacked: s2, beta (c, n) and alphas (c, m) -> (c, m)."""
    s2, beta = np.asarray(s2, dtype=float)[..., None, :], np.asarray(beta, dtype=float)[..., None, :]
    a = np.asarray(alphas, dtype=float)[..., :, None]
    logdet = logdet_noise + np.sum(np.log1p(s2 / a), axis=-1)
    quad = np.sum(a / (s2 + a) * beta ** 2, axis=-1)
    return -0.5 * (s2.shape[-1] * LOG_2PI + logdet + quad)


class LinearGaussianProblem:
    """Readings d (n,), design G (n, K), known field t0 (n,), noise covariance S,
    prior precision diagonal P (K,), prior mean c0 (K,, default 0).

    `noise`: variances sigma_i^2 (n,) [K^2], a full SPD (n, n) covariance, or a Whitener.
    """

    def __init__(self, G, d, t0, noise, prior_diag, c0=None, whitened_design=None, svd=None):
        G = np.asarray(G, dtype=float)
        if G.ndim != 2:
            raise InverseError("design matrix G must be 2-D (readings x coefficients)")
        n, K = G.shape
        if n == 0 or K == 0:
            raise InverseError("design matrix G is empty")
        d = np.asarray(d, dtype=float)
        if d.shape != (n,):
            raise InverseError(f"readings d must have shape ({n},), got {d.shape}")
        t0 = np.broadcast_to(np.asarray(t0, dtype=float), (n,)).copy()
        p = _prior_diagonal(prior_diag, K)
        c0 = np.zeros(K) if c0 is None else np.asarray(c0, dtype=float)
        if c0.shape != (K,):
            raise InverseError(f"prior mean c0 must have shape ({K},)")
        for name, arr in (("G", G), ("d", d), ("t0", t0), ("c0", c0)):
            if not np.all(np.isfinite(arr)):
                raise InverseError(f"{name} contains non-finite values")
        self.noise = noise if isinstance(noise, Whitener) else Whitener(noise, n)
        if self.noise.n != n:
            raise InverseError(f"noise describes {self.noise.n} readings, expected {n}")
        self.G, self.d, self.t0, self.c0 = G, d, t0, c0
        self.n, self.K = n, K
        # L^-1 G, reused by with_prior (many priors, one design)
        self._Gw = self.noise.whiten(G) if whitened_design is None else whitened_design
        self._set_prior(p, svd)
        self._set_data(d)

    # ------------------------------------------------------------------ set-up helpers
    def _set_prior(self, p, svd):
        """The prior precision diagonal p (K,) and the SVD of A = L^-1 G P^-1/2 (or `svd`, its
        thin SVD already computed: evidence_spectrum(keep=True), n <= K)."""
        n, K = self.n, self.K
        self.prior_diag = p
        p_isqrt = 1.0 / np.sqrt(p)
        # U whole (n, n: the data-space directions beyond the rank carry the residual), V only
        # for the r = min(n, K) singular pairs: the K - r directions the data cannot see enter
        # through the projector I - V_r V_r^T (_null_projector), not a K x K rotation
        U, s, Vt = prior_scaled_svd(self._Gw, p_isqrt, n > K) if svd is None or n > K else svd
        self._U, self._s = U, s
        self._r = s.size
        self._Z = p_isqrt[:, None] * Vt.T          # (K, r), column j: direction in c of singular pair j
        self._Vt_r, self._p_isqrt = Vt, p_isqrt
        self._s2_n = np.zeros(n)
        self._s2_n[: self._r] = s**2
        for name in _cached_names(type(self)):       # cached values of another prior go
            self.__dict__.pop(name, None)

    def _set_data(self, d):
        self.d = d
        self.y = self.noise.whiten(d - self.t0 - self.G @ self.c0)
        self._beta = self._U.T @ self.y              # (n,)

    def with_data(self, d) -> "LinearGaussianProblem":
        """Same model, new readings d (n,), reusing the SVD (for simulation studies)."""
        d = np.asarray(d, dtype=float)
        if d.shape != (self.n,) or not np.all(np.isfinite(d)):
            raise InverseError(f"readings d must be {self.n} finite values")
        new = copy.copy(self)
        new._set_data(d)
        return new

    @property
    def whitened_design(self) -> np.ndarray:
        """L^-1 G (n, K), computed once and shared by with_prior."""
        return self._Gw

    def with_prior(self, prior_diag, svd=None) -> "LinearGaussianProblem":
        """Same readings, noise and prior mean, another prior precision diagonal P (K,) (new SVD,
        or `svd`, the thin SVD of L^-1 G P^-1/2 already computed)."""
        p = _prior_diagonal(prior_diag, self.K)
        new = copy.copy(self)                       # readings, noise, y = L^-1 (d - t0 - G c0) kept
        new._set_prior(p, svd)
        new._beta = new._U.T @ new.y
        return new

    def subset(self, keep) -> "LinearGaussianProblem":
        """Problem restricted to readings `keep` (index array or boolean mask).

        The noise of the kept readings is the sub-block of S (marginal of a Gaussian).
        """
        idx = np.arange(self.n)[np.asarray(keep)]
        if idx.size == 0:
            raise InverseError("no readings left")
        return LinearGaussianProblem(self.G[idx], self.d[idx], self.t0[idx],
                                     self.noise.subset(idx), self.prior_diag, self.c0)

    @property
    def singular_values(self) -> np.ndarray:
        """Singular values s of A = L^-1 G P^-1/2, descending, length min(n, K)."""
        return self._s

    @cached_property
    def _M(self):
        """L^-T U (n, n): S^-1 = M M^T."""
        return self.noise.whiten_transpose(self._U)

    @cached_property
    def _QM(self):
        """(L U) * (L^-T U) elementwise: hat_ii = sum_j (QM)_ij f_j."""
        if self.noise.diagonal:
            return self._U**2
        return self.noise.colour(self._U) * self._M

    def _filters_n(self, a):
        """(f, g) of shape (m, n) for the data-space directions (s = 0 beyond rank)."""
        s2 = self._s2_n[None, :]
        den = s2 + a[:, None]
        return s2 / den, a[:, None] / den

    # ------------------------------------------------------------------ estimates
    def coefficients(self, alpha):
        """MAP coefficients c = c0 + P^-1/2 V diag(s / (s^2 + alpha)) U^T y, shape (K,) or (m, K)."""
        a, scalar = _as_alphas(alpha)
        r = self._r
        w = self._gain_r(a)                                                 # (m, r)
        c = self.c0[None, :] + (w * self._beta[None, :r]) @ self._Z[:, :r].T
        return _out(c, scalar)

    def fitted(self, alpha):
        """Fitted readings t0 + G c [K], shape (n,) or (m, n)."""
        a, scalar = _as_alphas(alpha)
        c = np.atleast_2d(self.coefficients(a))
        return _out(self.t0[None, :] + c @ self.G.T, scalar)

    def residuals(self, alpha):
        """Residuals d - t0 - G c [K], shape (n,) or (m, n)."""
        a, scalar = _as_alphas(alpha)
        return _out(self.d[None, :] - np.atleast_2d(self.fitted(a)), scalar)

    def standardized_residuals(self, alpha):
        """Residuals in units of each reading's own noise sd: (d_i - fitted_i) / own_sd_i
        (sqrt(S_ii) less what marginalized columns share, noise.Whitener.own_sd)."""
        a, scalar = _as_alphas(alpha)
        return _out(np.atleast_2d(self.residuals(a)) / self.noise.own_sd[None, :], scalar)

    def whitened_residuals(self, alpha):
        """L^-1 (d - t0 - G c) = U diag(g) U^T y, shape (n,) or (m, n)."""
        a, scalar = _as_alphas(alpha)
        _, g = self._filters_n(a)
        return _out((g * self._beta[None, :]) @ self._U.T, scalar)

    def chi2(self, alpha):
        """chi2 = (d - t0 - G c)^T S^-1 (d - t0 - G c) = sum_j g_j^2 beta_j^2."""
        a, scalar = _as_alphas(alpha)
        _, g = self._filters_n(a)
        return _out(np.sum((g * self._beta[None, :]) ** 2, axis=1), scalar)

    def residual_norm(self, alpha):
        """L-curve abscissa: ||L^-1 (d - t0 - G c)|| = sqrt(chi2)."""
        return np.sqrt(self.chi2(alpha))

    def seminorm(self, alpha):
        """L-curve ordinate: ||P^1/2 (c - c0)|| = sqrt(sum_j (s_j beta_j / (s_j^2 + alpha))^2)."""
        a, scalar = _as_alphas(alpha)
        r = self._r
        w = self._gain_r(a)
        return _out(np.sqrt(np.sum((w * self._beta[None, :r]) ** 2, axis=1)), scalar)

    def effective_parameters(self, alpha):
        """Trace of the influence matrix: sum_j s_j^2 / (s_j^2 + alpha)."""
        a, scalar = _as_alphas(alpha)
        f, _ = self._filters_n(a)
        return _out(f.sum(axis=1), scalar)

    def hat_diagonal(self, alpha):
        """Diagonal of the influence matrix H = d(fitted)/d(d) = G C G^T S^-1 = L U diag(f) U^T L^-1."""
        a, scalar = _as_alphas(alpha)
        f, _ = self._filters_n(a)
        return _out(f @ self._QM.T, scalar)

    # ------------------------------------------------------------------ uncertainty
    def _var_r(self, a):
        """1 / (s_j^2 + alpha) for the r singular directions, (m, r)."""
        return 1.0 / (self._s[None, :] ** 2 + a[:, None])

    def _gain_r(self, a):
        """s_j / (s_j^2 + alpha) for the r singular directions, (m, r): c - c0 = Z diag(gain) beta."""
        return self._s[None, :] / (self._s[None, :] ** 2 + a[:, None])

    @cached_property
    def _unseen(self):
        """u_k = (I - V_r V_r^T)_kk (K,): the share of coordinate k, in the prior's metric, that
        the data do not see. 1 - sum_j V_kj^2 where that keeps its digits (u >= 1e-3: relative
        error below 1e-12), else the squared norm of the projector's row k (it is idempotent):
        1 - sum_j V_kj^2 loses its digits where the data pin coordinate k, and 1/p_k can make
        that error large."""
        V = self._Vt_r.T
        u = 1.0 - np.einsum("kj,kj->k", V, V)
        near = np.flatnonzero(u < 1e-3)
        if near.size:
            rows = -(V[near] @ self._Vt_r)
            rows[np.arange(near.size), near] += 1.0
            u[near] = np.einsum("ik,ik->i", rows, rows)
        return u

    @cached_property
    def _null_projector(self):
        """P^-1/2 (I - V_r V_r^T) P^-1/2 (K, K), or None when r = K: the directions of c the data
        do not see, which keep the prior's variance 1/alpha in the P-metric (diagonal: _unseen)."""
        if self._r >= self.K:
            return None
        proj = np.eye(self.K) - self._Vt_r.T @ self._Vt_r
        np.fill_diagonal(proj, self._unseen)
        return self._p_isqrt[:, None] * proj * self._p_isqrt[None, :]

    @cached_property
    def _unseen_variance(self):
        """diag(_null_projector) = u_k / p_k (K,), without forming the K x K projector; None
        when r = K."""
        return None if self._r >= self.K else self._p_isqrt ** 2 * self._unseen

    def posterior_covariance(self, alpha):
        """C = (G^T S^-1 G + alpha P)^-1
             = P^-1/2 [V_r diag(1 / (s^2 + alpha)) V_r^T + (I - V_r V_r^T) / alpha] P^-1/2.

        Directions of c the data do not see (s = 0, e.g. K > n) keep the prior
        variance 1/alpha in the P-metric. Shape (K, K) or (m, K, K).
        """
        a, scalar = _as_alphas(alpha)
        C = np.einsum("kj,mj,lj->mkl", self._Z, self._var_r(a), self._Z)
        if self._null_projector is not None:
            C += (1.0 / a)[:, None, None] * self._null_projector[None]
        return _out(C, scalar)

    def weighted_moments(self, alphas, weights):
        """The mixture sum_i w_i N(c_i, C(alpha_i)) over alphas (m,) as (W, d, S): its weight
        W = sum_i w_i, mean offset d = cbar - c0 = Z fbar (K,) and scatter about its own mean
        S = sum_i w_i [C(alpha_i) + (c_i - cbar)(c_i - cbar)^T]
          = Z [diag(sum_i w_i / (s^2 + alpha_i)) + (F - fbar)^T W (F - fbar)] Z^T
            + t P^-1/2 (I - V_r V_r^T) P^-1/2   (K, K),
        F_ij = beta_j s_j / (s_j^2 + alpha_i), fbar = F^T w / W, t = sum_i w_i / alpha_i: in the
        r singular directions, the deviations taken before they are squared (no moment about
        c0 minus a squared mean, which cancels when the mean lies many sds from c0), the
        unseen directions' diagonal from _unseen. The mixture's covariance is S / W."""
        a, w = _alphas_and_weights(alphas, weights)
        W = float(w.sum())
        if not W > 0:
            raise InverseError("the weights must sum to a positive number")
        r = self._r
        F = self._gain_r(a) * self._beta[None, :r]                                  # (m, r)
        fbar = (w @ F) / W
        dev = F - fbar
        core = (dev.T * w) @ dev
        core[np.diag_indices(r)] += w @ self._var_r(a)
        ZC = self._Z @ core
        if r >= self.K:
            return W, self._Z @ fbar, ZC @ self._Z.T
        t = float(w @ (1.0 / a))
        S = (ZC - t * self._Z) @ self._Z.T
        np.fill_diagonal(S, np.einsum("kj,kj->k", ZC, self._Z) + t * self._unseen_variance)
        return W, self._Z @ fbar, S

    def posterior_sd(self, alpha):
        """sqrt(diag C), shape (K,) or (m, K)."""
        a, scalar = _as_alphas(alpha)
        var = self._var_r(a) @ (self._Z ** 2).T
        if self._unseen_variance is not None:
            var = var + (1.0 / a)[:, None] * self._unseen_variance[None, :]
        return _out(np.sqrt(var), scalar)

    @cached_property
    def _projection_parts(self):
        """What _projected needs of this prior: (f: the flat columns, whose prior sd p_k^-1/2
        exceeds FLAT_RATIO x the median (a nearly flat nominal level, the longest modes);
        [Z_o | Z_c] (K, r + f) with Z_o = P_o^-1/2 V_r and Z_c = P_o^-1/2 W^T; Z_f = P_f^-1/2 V_f
        (f, r); W W^T (f, f); p_o^-1 (K,)), P_o the prior with the flat columns' sd set to 0,
        W = P_f^-1/2 (E_f^T - V_f V_r^T) (f, K) the flat columns' part the data do not see
        (V_f: their rows of V_r, E_f: their unit vectors)."""
        p, Vt = self._p_isqrt, self._Vt_r
        flat = np.flatnonzero(p > FLAT_RATIO * np.median(p))
        p_o = p.copy()
        p_o[flat] = 0.0
        W = -(Vt[:, flat].T @ Vt)
        W[np.arange(flat.size), flat] += 1.0
        W *= p[flat][:, None]
        Zoc = np.hstack([p_o[:, None] * Vt.T, p_o[:, None] * W.T])
        return flat, Zoc, p[flat][:, None] * Vt[:, flat].T, W @ W.T, p_o ** 2

    def _projected(self, B, B2=None):
        """(X V_r (q, r), ||X - X V_r V_r^T||^2 (q,) or None when r = K) for X = B P^-1/2: the
        map's part along the r singular directions and the squared norm of the rest, which
        the data do not see.  B2: B * B, when the caller has it (shared by many priors).

        Without forming X: with the flat columns f split off (_projection_parts),
        X = X_o + B_f P_f^-1/2 E_f^T, rest = X_o (I - V V^T) + B_f W and W V = 0, so
        ||rest||^2 = (||X_o||^2 - ||X_o V||^2) + 2 B_f . (X_o W^T) + B_f (W W^T) . B_f,
        ||X_o||^2 = B^2 p_o^-1: one product B [Z_o | Z_c] per prior instead of two and the
        elementwise passes over (q, K).  The flat columns, which a nearly flat prior level makes
        huge where the data pin them, never enter a difference of large numbers; a row whose
        first term keeps less than CANCEL_GUARD of ||X_o||^2 is projected directly (the guard
        looks at that term alone: the other two are products, not differences)."""
        if self._s.size == self.K:
            return B @ self._Z, None
        flat, Zoc, Zf, WW, p2o = self._projection_parts
        r = self._r
        Y = B @ Zoc
        XoV, C = Y[:, :r], Y[:, r:]
        Bf = B[:, flat]
        XV = XoV + Bf @ Zf
        total = (B * B if B2 is None else B2) @ p2o
        own = total - np.einsum("qr,qr->q", XoV, XoV)
        rest = own + 2.0 * np.einsum("qf,qf->q", Bf, C) + np.einsum("qf,qf->q", Bf @ WW, Bf)
        near = np.flatnonzero(own < CANCEL_GUARD * total)
        if near.size:
            X = B[near] * self._p_isqrt[None, :]
            direct = X - (X @ self._Vt_r.T) @ self._Vt_r
            rest[near] = np.einsum("qk,qk->q", direct, direct)
        return XV, np.maximum(rest, 0.0)

    def _predict_variance(self, B, a):
        """diag(B C(alpha) B^T) for alphas a (m,), (m, q), without the K x K rotation:
        var = sum_{j<r} (X V_r)_j^2 / (s_j^2 + alpha) + ||X - X V_r V_r^T||^2 / alpha
        (_projected; the second term: directions the data do not see keep the prior's 1/alpha)."""
        XV, rest = self._projected(B)
        var = (XV ** 2) @ (1.0 / (self._s[:, None] ** 2 + a[None, :]))   # (q, m)
        if rest is not None:
            var = var + rest[:, None] / a[None, :]
        return var.T

    def predict_merged(self, B, alphas, weights, group, offset=None, B2=None):
        """predict() for the mixture sum_i w_i N(mean_i, sd_i^2) over alphas (m,), with runs of
        `group` neighbouring alphas merged into one component each by their moments: weight
        W = sum w_i, mean offset + B cbar (cbar = sum w_i c_i / W) and variance
        sum w_i [sd_i^2 + (B (c_i - cbar))^2] / W, where B (c_i - cbar) = (X V_r) diag(beta)
        (f_i - fbar), f_i = s / (s^2 + alpha_i): the moments of predict's components, without
        their (m, q) means formed in the coefficients' K dimensions (2.2x faster for a face
        map). B2: B * B when the caller has it (_projected). Shapes (g,), (g, q), (g, q),
        g = ceil(m / group)."""
        a, w = _alphas_and_weights(alphas, weights)
        B = np.atleast_2d(np.asarray(B, dtype=float))
        if B.shape[1] != self.K:
            raise InverseError(f"linear map B must have {self.K} columns")
        starts = np.arange(0, a.size, max(int(group), 1))
        run = np.repeat(np.arange(starts.size), np.diff(np.append(starts, a.size)))
        W = np.add.reduceat(w, starts)
        share = np.divide(w, W[run], out=np.zeros_like(w), where=W[run] > 0)     # within each run
        r = self._r
        f = self._gain_r(a)                                    # (m, r)
        fbar = np.add.reduceat(share[:, None] * f, starts, axis=0)
        mean = (self.c0[None, :] + (fbar * self._beta[None, :r]) @ self._Z.T) @ B.T
        if offset is not None:
            mean = mean + np.asarray(offset, dtype=float)
        XV, rest = self._projected(B, B2)
        var = np.add.reduceat(share[:, None] * self._var_r(a), starts, axis=0) @ (XV ** 2).T
        if rest is not None:
            var += np.add.reduceat(share / a, starts)[:, None] * rest[None, :]
        spread = XV @ ((f - fbar[run]) * self._beta[None, :r]).T          # B (c_i - cbar), (q, m)
        var += np.add.reduceat(spread ** 2 * share[None, :], starts, axis=1).T
        return W, mean, np.sqrt(var)

    def predict(self, B, alpha, offset=None):
        """Posterior mean and sd of q = offset + B c for a fixed linear map B (q, K) or (K,).

        mean = offset + B c_MAP, sd = sqrt(diag(B C B^T)). Shapes (q,) or (m, q).
        """
        a, scalar = _as_alphas(alpha)
        B = np.asarray(B, dtype=float)
        vec = B.ndim == 1
        B = np.atleast_2d(B)
        if B.shape[1] != self.K:
            raise InverseError(f"linear map B must have {self.K} columns")
        c = np.atleast_2d(self.coefficients(a))
        mean = c @ B.T
        if offset is not None:
            mean = mean + np.asarray(offset, dtype=float)
        sd = np.sqrt(self._predict_variance(B, a))
        if vec:
            mean, sd = mean[:, 0], sd[:, 0]
        return _out(mean, scalar), _out(sd, scalar)

    # ------------------------------------------------------------------ leave-one-out
    def _loo_parts(self, a):
        """(S_pred^-1 r, diag S_pred^-1) with S_pred = S + G (alpha P)^-1 G^T, r = d - t0 - G c0.

        S_pred^-1 = L^-T U diag(g) U^T L^-1 = M diag(g) M^T.
        """
        _, g = self._filters_n(a)
        return (g * self._beta[None, :]) @ self._M.T, g @ (self._M**2).T

    def loo_residuals(self, alpha):
        """Leave-one-out errors d_i - E[d_i | all other readings], no refits.

        Under the Gaussian model E[d_i | d_-i] is exact and
        d_i - E[d_i | d_-i] = (S_pred^-1 r)_i / (S_pred^-1)_ii. For independent noise this
        is the hat-matrix formula (d_i - fitted_i) / (1 - H_ii), i.e. the residual of a
        refit (same alpha) with reading i deleted.
        """
        a, scalar = _as_alphas(alpha)
        q, dg = self._loo_parts(a)
        return _out(q / dg, scalar)

    def loo_predicted(self, alpha):
        """E[d_i | all other readings] [K]."""
        a, scalar = _as_alphas(alpha)
        return _out(self.d[None, :] - np.atleast_2d(self.loo_residuals(a)), scalar)

    def loo_sd(self, alpha):
        """Predictive sd of d_i given the other readings: 1 / sqrt((S_pred^-1)_ii) [K]."""
        a, scalar = _as_alphas(alpha)
        _, dg = self._loo_parts(a)
        return _out(1.0 / np.sqrt(dg), scalar)

    def standardized_loo(self, alpha):
        """LOO error / its predictive sd = (S_pred^-1 r)_i / sqrt((S_pred^-1)_ii); N(0, 1) under the model."""
        a, scalar = _as_alphas(alpha)
        q, dg = self._loo_parts(a)
        return _out(q / np.sqrt(dg), scalar)

    def log_evidence_without(self, alpha):
        """log p(d_-i | alpha) for every reading i, shape (n,) or (m, n).

        Chain rule p(d) = p(d_-i) p(d_i | d_-i): log p(d) - log N(loo_residual_i; 0, loo_sd_i^2).
        """
        return self.loo_summary(alpha)[2]

    def loo_summary(self, alpha):
        """(loo_residuals, loo_sd, log_evidence_without) in one pass, each (n,) or (m, n)."""
        a, scalar = _as_alphas(alpha)
        q, dg = self._loo_parts(a)
        e = q / dg
        log_cond = -0.5 * (LOG_2PI - np.log(dg) + e**2 * dg)
        lw = self.log_evidence(a)[:, None] - log_cond
        return _out(e, scalar), _out(1.0 / np.sqrt(dg), scalar), _out(lw, scalar)

    def predictive_covariance(self, alpha) -> np.ndarray:
        """S_pred = S + G (alpha P)^-1 G^T: covariance of d under the prior [K^2] (scalar alpha)."""
        a, _ = _as_alphas(alpha)
        if a.size != 1:
            raise InverseError("predictive_covariance takes one alpha")
        Gs = self.G / np.sqrt(a[0] * self.prior_diag)[None, :]
        return self.noise.covariance + Gs @ Gs.T

    def held_out_prediction(self, alpha, held_out):
        """E and sd of readings `held_out` given all the others (Gaussian conditioning on S_pred).

        Used for readings set aside from a fit: mean_h = m_h + S_hk S_kk^-1 (d_k - m_k),
        var_h = diag(S_hh - S_hk S_kk^-1 S_kh), m = t0 + G c0. Returns (mean, sd), each (len(held_out),).
        """
        h = np.arange(self.n)[np.asarray(held_out)]
        k = np.setdiff1d(np.arange(self.n), h)
        if k.size == 0:
            raise InverseError("nothing left to predict from")
        Sp = self.predictive_covariance(alpha)
        m = self.t0 + self.G @ self.c0
        Skk = Sp[np.ix_(k, k)]
        Shk = Sp[np.ix_(h, k)]
        sol = np.linalg.solve(Skk, np.column_stack([self.d[k] - m[k], Shk.T]))
        mean = m[h] + Shk @ sol[:, 0]
        var = np.diag(Sp[np.ix_(h, h)]) - np.sum(Shk * sol[:, 1:].T, axis=1)
        return mean, np.sqrt(np.maximum(var, 0.0))

    # ------------------------------------------------------------------ strength criteria
    def log_evidence(self, alpha):
        """log p(d | alpha): d ~ N(t0 + G c0, S + G (alpha P)^-1 G^T).

        = -1/2 [n log 2 pi + log det S + sum_j log(1 + s_j^2/alpha) + sum_j g_j beta_j^2].
        """
        a, scalar = _as_alphas(alpha)
        return _out(log_evidence_from_spectrum(self._s2_n, self._beta, a, self.noise.logdet), scalar)

    def column_gains(self, X, alpha):
        """(Q (m, q, q) [unit^-2], b (m, q) [unit^-1]) of extra columns X (n, q) [K per unit of
        their coefficients] at strengths alpha (m,):
        Q = X_w^T C^-1 X_w, b = X_w^T C^-1 y, C = I + A A^T / alpha the whitened prior-predictive
        covariance of the readings (X_w = L^-1 X, y = L^-1 (d - t0 - G c0)).  With a prior
        z ~ N(0, diag(s^2)) on the columns' coefficients (matrix determinant lemma, Woodbury):
        log p(d | alpha, z integrated out) = log_evidence(alpha) - 1/2 log det(I + s Q s)
        + 1/2 (s b)^T (I + s Q s)^-1 (s b)."""
        a, _ = _as_alphas(alpha)
        Xu = self._U.T @ self.noise.whiten(np.asarray(X, float).reshape(self.n, -1))     # (n, q)
        g = self._filters_n(a)[1]                          # alpha / (s^2 + alpha), (m, n): C^-1's eigenvalues
        return np.einsum("ni,mn,nj->mij", Xu, g, Xu), (g * self._beta[None, :]) @ Xu

    def gcv(self, alpha):
        """Generalized cross-validation V = n ||(I - H) y||^2 / (trace(I - H))^2 (whitened, H = hat)."""
        a, scalar = _as_alphas(alpha)
        f, g = self._filters_n(a)
        chi2 = np.sum((g * self._beta[None, :]) ** 2, axis=1)
        return _out(self.n * chi2 / np.sum(g, axis=1) ** 2, scalar)

    def discrepancy(self, alpha, target=None):
        """Discrepancy function chi2(alpha) - target, target = n by default (Morozov).

        chi2 rises monotonically from the least-squares residual (alpha -> 0) to ||y||^2
        (alpha -> inf). Pure whitened noise has E||e||^2 = n; note that at the prior's
        true alpha E chi2 = n - effective_parameters, so the classical target n leans
        towards over-smoothing.
        """
        t = float(self.n) if target is None else float(target)
        return self.chi2(alpha) - t

    @property
    def chi2_limits(self) -> tuple[float, float]:
        """(chi2 as alpha -> 0, chi2 as alpha -> inf) = (least-squares residual, ||y||^2)."""
        return float(np.sum(self._beta[self._r:] ** 2)), float(np.sum(self._beta**2))

    def lcurve_curvature(self, alpha):
        """Signed curvature of the L-curve (rho, eta) = (log residual norm, log seminorm).

        With t = log alpha, R = chi2, E = seminorm^2, g = alpha/(s^2+alpha), f = 1 - g,
        w = s/(s^2+alpha):  R' = 2 sum g^2 f beta^2,  R'' = 2 sum g^2 f (2 - 3 g) beta^2,
        E' = -2 sum w^2 g beta^2,  E'' = -2 sum w^2 g (1 - 3 g) beta^2;
        rho = log(R)/2, rho' = R'/(2R), rho'' = (R'' R - R'^2)/(2 R^2) (eta alike);
        kappa = (rho' eta'' - rho'' eta') / (rho'^2 + eta'^2)^(3/2); the corner is its maximum.
        """
        a, scalar = _as_alphas(alpha)
        r = self._r
        s2 = self._s[None, :] ** 2
        den = s2 + a[:, None]
        g, f = a[:, None] / den, s2 / den
        w2 = s2 / den**2
        b2 = self._beta[None, :r] ** 2
        R = np.sum((g**2) * b2, axis=1) + np.sum(self._beta[r:] ** 2)
        R1 = 2 * np.sum(g**2 * f * b2, axis=1)
        R2 = 2 * np.sum(g**2 * f * (2 - 3 * g) * b2, axis=1)
        E = np.sum(w2 * b2, axis=1)
        E1 = -2 * np.sum(w2 * g * b2, axis=1)
        E2 = -2 * np.sum(w2 * g * (1 - 3 * g) * b2, axis=1)
        rho1, rho2 = R1 / (2 * R), (R2 * R - R1**2) / (2 * R**2)
        eta1, eta2 = E1 / (2 * E), (E2 * E - E1**2) / (2 * E**2)
        kappa = (rho1 * eta2 - rho2 * eta1) / (rho1**2 + eta1**2) ** 1.5
        return _out(kappa, scalar)
