"""The contamination model of one reading: broken with probability EPSILON, and then scattered
by OUTLIER_SD about what the part makes it read; healthy otherwise.  Given a reading's
predictive distribution from the other readings (mean m, variance v [K^2]; a mixture of such
over the prior's strength where the check averages over it), its density is

    p(d_i) = eps N(d_i; m, v + tau^2) + (1 - eps) N(d_i; m, v),

and the posterior probability that it is broken is the first term's share.  Two rules use it:
model_choice.py (a set-aside reading's share of a model's evidence) and the answer's weighing
of a doubtful sensor below the screening's limit (sensor_doubt.py).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import expit, logsumexp

#: prior probability that a reading is broken: the screening's family-wise level (diagnostics.FAMILY_LEVEL)
EPSILON = 0.02
#: spread of a broken reading about the prediction [K] (a failed junction or a wrong channel:
#: several kelvin to tens of kelvin; common practice, no source)
OUTLIER_SD = 10.0


def _log_normal(x, var):
    return -0.5 * (np.log(2.0 * math.pi * var) + x ** 2 / var)


def _log_terms(resid, var, weights=None):
    """(log eps p(r | broken), log (1 - eps) p(r | healthy)), summed over the predictive
    mixture's components (axis 0, weights) when weights are given."""
    resid, var = np.asarray(resid, float), np.asarray(var, float)
    broken = math.log(EPSILON) + _log_normal(resid, var + OUTLIER_SD ** 2)
    healthy = math.log1p(-EPSILON) + _log_normal(resid, var)
    if weights is None:
        return broken, healthy
    lw = np.log(np.maximum(np.asarray(weights, float), 1e-300))
    return logsumexp(lw + broken, axis=0), logsumexp(lw + healthy, axis=0)


def set_aside_log_likelihood(resid, var) -> float:
    """sum_i log[eps N(r_i; 0, v_i + tau^2) + (1 - eps) N(r_i; 0, v_i)] over set-aside readings."""
    if np.size(resid) == 0:
        return 0.0
    broken, healthy = _log_terms(resid, var)
    return float(np.logaddexp(broken, healthy).sum())


def fault_probability(resid, var, weights=None) -> np.ndarray:
    """P(broken | reading) (n,): resid = d - m and var = v (n,) of a Gaussian predictive, or
    (k, n) with weights (k, n) for a mixture of k Gaussians per reading."""
    broken, healthy = _log_terms(resid, var, weights)
    return expit(broken - healthy)
