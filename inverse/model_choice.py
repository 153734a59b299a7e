"""Smooth model or heater-zone model: the evidence of each on all the readings.

Each model screens the sensors itself (a sensor that one model cannot explain may be
healthy under the other), so the two marginal likelihoods cover different readings. To
compare them on the same data, every reading enters: the kept ones through the model's
evidence, each set-aside one through a contamination model (a reading is broken with
probability EPSILON and then scattered by OUTLIER_SD about the model's prediction):

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
from scipy.special import logsumexp

#: prior probability that a reading is broken: the screening's family-wise level (diagnostics.FAMILY_LEVEL)
EPSILON = 0.02
#: posterior probability below which a model is left out of the average (a numerical cut:
#: its share of any mean or variance is then below 0.1 %)
MIXED_MODELS = 1e-3
#: spread of a broken reading about the prediction [K] (a failed junction or a wrong channel:
#: several kelvin to tens of kelvin; common practice, no source)
OUTLIER_SD = 10.0


def _log_normal(x, var):
    return -0.5 * (np.log(2.0 * math.pi * var) + x ** 2 / var)


def set_aside_log_likelihood(resid, var) -> float:
    """sum_i log[eps N(r_i; 0, v_i + tau^2) + (1 - eps) N(r_i; 0, v_i)] over set-aside readings."""
    resid, var = np.asarray(resid, float), np.asarray(var, float)
    if resid.size == 0:
        return 0.0
    both = np.stack([math.log(EPSILON) + _log_normal(resid, var + OUTLIER_SD ** 2),
                     math.log1p(-EPSILON) + _log_normal(resid, var)])
    return float(logsumexp(both, axis=0).sum())


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


def averaged_models(c_smooth, C_smooth, c_zones, C_zones, p_zones):
    """Moment-matched average of the two models' posteriors in the zone model's coefficients
    (the smooth one embedded with zone levels 0 and no variance):
    m = (1 - p) m_s + p m_z,  C = (1 - p) C_s + p C_z + p (1 - p) (m_z - m_s)(m_z - m_s)^T."""
    J = c_zones.size - c_smooth.size
    m_s = np.concatenate([c_smooth, np.zeros(J)])
    C_s = np.zeros_like(C_zones)
    C_s[:c_smooth.size, :c_smooth.size] = C_smooth
    p = float(p_zones)
    d = c_zones - m_s
    return (1.0 - p) * m_s + p * c_zones, (1.0 - p) * C_s + p * C_zones + p * (1.0 - p) * np.outer(d, d)
