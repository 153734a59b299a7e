"""Smooth model or heater-zone model: the evidence of each on all the readings.

Each model screens the sensors itself (a sensor that one model cannot explain may be
healthy under the other), so the two marginal likelihoods cover different readings. To
compare them on the same data, every reading enters: the kept ones through the model's
evidence, each set-aside one through the contamination model (contamination.py: a reading
is broken with probability EPSILON and then scattered by OUTLIER_SD about the model's prediction):

    log p(d | M) ~ log p(d_kept | M) + n_kept log(1 - eps)
                   + sum_{i set aside} log[eps N(d_i; m_i, v_i + tau^2) + (1 - eps) N(d_i; m_i, v_i)],

m_i = t0_i + x_i c, v_i = x_i C x_i^T + S_ii: the model's posterior predictive of reading i
[K, K^2] (x_i its row of the model's columns). Setting a sensor aside therefore costs a
model about log(eps N(0; 0, tau^2) / N(0; 0, v)) against explaining it, so a model cannot
win the comparison by discarding the readings it fails on. Equal prior model odds.
"""

from __future__ import annotations

import math

import numpy as np

from .contamination import EPSILON, set_aside_log_likelihood
from .hyperprior import merge_limit
from .strength_average import mixture_summary

#: posterior probability below which a model is left out of the average (a numerical cut:
#: its share of any mean or variance is then below 0.1 %)
MIXED_MODELS = 1e-3


def log_evidence_on_all(log_evidence_kept, kept, X, t0, d, noise_var, c, C) -> float:
    """log p(d | M) over all readings (module doc): log_evidence_kept = log p(d_kept | M);
    kept (n,) bool; X (n, K) the model's columns at every sensor; t0, d (n,) [K]; noise_var
    (n,) [K^2]; c (K,), C (K, K) the model's posterior."""
    kept = np.asarray(kept, bool)
    out = float(log_evidence_kept) + int(kept.sum()) * math.log1p(-EPSILON)
    aside = np.flatnonzero(~kept)
    if aside.size:
        Xa = np.asarray(X, float)[aside]
        resid = np.asarray(d, float)[aside] - np.asarray(t0, float)[aside] - Xa @ c
        var = np.einsum("ik,kl,il->i", Xa, C, Xa) + np.asarray(noise_var, float)[aside]
        out += set_aside_log_likelihood(resid, var)
    return out


def model_weights(log_evidence: dict) -> dict:
    """Posterior model probabilities from log evidences, equal prior odds."""
    names = list(log_evidence)
    le = np.array([log_evidence[n] for n in names], float)
    w = np.exp(le - le.max())
    w /= w.sum()
    return {n: float(x) for n, x in zip(names, w)}


def embedded_mixture(components, size):
    """Moment-matched mixture of posteriors that live on subsets of one coefficient vector
    (each embedded with zeros and no variance elsewhere): components = [(index (k_i,), c_i,
    C_i, p_i)], sum p_i = 1;  m = sum p_i m_i,  C = sum p_i (C_i + m_i m_i^T) - m m^T."""
    mean, second = np.zeros(size), np.zeros((size, size))
    for index, c, C, p in components:
        index = np.asarray(index)
        mean[index] += p * np.asarray(c, float)
        second[np.ix_(index, index)] += p * (np.asarray(C, float) + np.outer(c, c))
    cov = second - np.outer(mean, mean)
    return mean, 0.5 * (cov + cov.T)


def averaged_models(c_smooth, C_smooth, c_zones, C_zones, p_zones):
    """Moment-matched average of the two models' posteriors in the zone model's coefficients
    (the smooth one embedded with zone levels 0 and no variance):
    m = (1 - p) m_s + p m_z,  C = (1 - p) C_s + p C_z + p (1 - p) (m_z - m_s)(m_z - m_s)^T."""
    p = float(p_zones)
    return embedded_mixture([(np.arange(c_smooth.size), c_smooth, C_smooth, 1.0 - p),
                             (np.arange(c_zones.size), c_zones, C_zones, p)], c_zones.size)


class ModelMixture:
    """The posterior averaged over models, for bands: Gaussian components [(index (k_i,),
    c_i, C_i, p_i)] on subsets of the size-long coefficient vector (the zone models, one per
    edge width, and a Gaussian smooth model), and optionally a learned prior's own mixture
    (hyperprior.LearnedPrior.band_components) on the first learned.problem.K coefficients
    with weight p_learned.  `band` gives the mixture's exact equal-tailed quantiles
    (strength_average.mixture_band), so that a model with a small weight widens the tails
    rather than the moment-matched Gaussian reshaping the leading model's band."""

    def __init__(self, components, size, learned=None, p_learned=0.0):
        self.components, self.size = list(components), int(size)
        self.learned, self.p_learned = learned, float(p_learned)

    def _parts(self, B, offset, limit):
        B = np.atleast_2d(np.asarray(B, float))
        offset = np.zeros(B.shape[0]) if offset is None else np.asarray(offset, float)
        ws, ms, ss = [], [], []
        if self.learned is not None and self.p_learned > 0:
            w, mi, si = self.learned.band_components(B[:, :self.learned.problem.K], offset, limit)
            ws.append(self.p_learned * w)
            ms.append(mi)
            ss.append(si)
        for index, c, C, p in self.components:
            Bi = B[:, index]
            ws.append(np.array([p]))
            ms.append((offset + Bi @ c)[None, :])
            ss.append(np.sqrt(np.maximum(np.einsum("qk,kl,ql->q", Bi, C, Bi), 0.0))[None, :])
        return np.concatenate(ws), np.vstack(ms), np.vstack(ss)

    def band(self, B, level: float = 0.95, offset=None, extra_variance=None):
        """Mean, sd and the equal-tailed `level` band (lower, upper) of offset + B c (+ an
        independent term of variance extra_variance)."""
        w, mi, si = self._parts(B, offset, merge_limit(B))
        return mixture_summary(w, mi, si, level, scalar=np.ndim(B) == 1, extra_variance=extra_variance)

    def samples(self, n, seed=0) -> np.ndarray:
        """n draws (n, size) of the coefficient vector from the mixture: a component by its
        weight, then its Gaussian, zero outside its index (the learned prior's part as its
        moment-matched Gaussian on its own coefficients).  Figures that are not linear in c
        (the face's min, max and their difference) need these: the moment-matched Gaussian
        of models on different columns draws every model's columns at once (the demo with
        model = "zones": the face's min +- 25,000 W/m^2 at a level of 7,000)."""
        rng = np.random.default_rng(seed)
        parts = [(np.asarray(index), np.asarray(c, float), np.asarray(C, float), p)
                 for index, c, C, p in self.components]
        if self.learned is not None and self.p_learned > 0:
            K = self.learned.problem.K
            parts.append((np.arange(K), self.learned.coefficients(), self.learned.posterior_covariance(),
                          self.p_learned))
        weights = np.array([p for *_, p in parts], float)
        counts = rng.multinomial(n, weights / weights.sum())
        out = np.zeros((n, self.size))
        rows = np.repeat(np.arange(len(parts)), counts)
        for i, (index, c, C, _) in enumerate(parts):
            at = np.flatnonzero(rows == i)
            if at.size:
                out[np.ix_(at, index)] = gaussian_draws(c, C, at.size, rng)
        return out[rng.permutation(n)]


def gaussian_draws(mean, cov, n, rng) -> np.ndarray:
    """n draws (n, k) of N(mean, cov) through the symmetric square root V sqrt(w) V^T
    (eigenvalues below zero from round-off taken as zero); rng a numpy Generator or a seed.
    That root is unique, so the draws follow cov continuously: V sqrt(w) alone turns with the
    eigenvectors of nearly equal eigenvalues (a 1e-10 change of the tube demo's covariance
    moved its max_sd by 2 %)."""
    rng = np.random.default_rng(rng)
    w, V = np.linalg.eigh(0.5 * (cov + cov.T))
    L = (V * np.sqrt(np.maximum(w, 0.0))) @ V.T
    return mean[None, :] + rng.standard_normal((n, mean.size)) @ L.T
