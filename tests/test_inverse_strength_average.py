"""StrengthAverage: evidence-weighted mixture over alpha against brute-force sums."""

import numpy as np
import pytest
from scipy.stats import multivariate_normal, norm

from heatsight.inverse.errors import InverseError
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.strength_average import StrengthAverage


def toy(n=14, K=9, seed=0):
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.05, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    p = 1.0 + (np.pi * k) ** 2
    d = 20.0 + G @ (rng.normal(size=K) / np.sqrt(0.01 * p)) + 0.5 * rng.normal(size=n)
    return G, d, np.full(n, 20.0), np.full(n, 0.25), p


def test_mixture_moments_match_brute_force():
    G, d, t0, S, p = toy()
    prob = LinearGaussianProblem(G, d, t0, S, p)
    grid = np.geomspace(1e-4, 10.0, 31)
    av = StrengthAverage(prob, grid)
    # weights from scipy.stats.multivariate_normal marginal likelihoods (reference library)
    le = np.array([multivariate_normal(t0, np.diag(S) + G @ np.diag(1 / (a * p)) @ G.T).logpdf(d) for a in grid])
    w = np.exp(le - le.max())
    w /= w.sum()
    np.testing.assert_allclose(av.weights, w, rtol=1e-8, atol=1e-15)
    Cs, ms = [], []
    for a in grid:   # explicit Gaussian posterior at each alpha
        C = np.linalg.inv(G.T @ (G / S[:, None]) + a * np.diag(p))
        Cs.append(C)
        ms.append(C @ (G.T @ ((d - t0) / S)))
    Cs, ms = np.array(Cs), np.array(ms)
    m = w @ ms
    # law of total covariance (textbook identity)
    cov = np.einsum("i,ikl->kl", w, Cs) + np.einsum("i,ik,il->kl", w, ms - m, ms - m)
    np.testing.assert_allclose(av.coefficients(), m, rtol=1e-7, atol=1e-9)
    np.testing.assert_allclose(av.posterior_covariance(), cov, rtol=1e-6, atol=1e-10 * np.abs(cov).max())
    B = np.random.default_rng(1).normal(size=(4, 9))
    mean, sd = av.predict(B)
    np.testing.assert_allclose(sd, np.sqrt(np.diag(B @ cov @ B.T)), rtol=1e-6)
    np.testing.assert_allclose(mean, B @ m, rtol=1e-7)


def test_band_is_the_mixture_quantile():
    G, d, t0, S, p = toy(seed=2)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    av = StrengthAverage(prob)
    B = np.random.default_rng(3).normal(size=(5, 9))
    mean, sd, lo, hi = av.band(B, 0.9, offset=2.0)
    mi, si = prob.predict(B, av.alphas, offset=2.0)
    cdf = lambda x: av.weights @ norm.cdf((x - mi) / si)       # mixture CDF (definition), scipy.stats.norm
    np.testing.assert_allclose(cdf(lo), 0.05, atol=1e-9)
    np.testing.assert_allclose(cdf(hi), 0.95, atol=1e-9)
    assert np.all(lo < mean) and np.all(mean < hi)
    m1, s1, l1, h1 = av.band(B[0], 0.9, offset=2.0)
    assert np.ndim(l1) == 0 and l1 == pytest.approx(lo[0])


def test_narrow_grid_reduces_to_plug_in():
    G, d, t0, S, p = toy(seed=4)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    av = StrengthAverage(prob, np.geomspace(0.1, 0.1 * (1 + 1e-9), 3))
    np.testing.assert_allclose(av.coefficients(), prob.coefficients(0.1), rtol=1e-8)
    np.testing.assert_allclose(av.posterior_sd(), prob.posterior_sd(0.1), rtol=1e-8)
    with pytest.raises(InverseError, match="log-spaced"):
        StrengthAverage(prob, [0.1, 0.2, 1.0])
    edge = StrengthAverage(prob, np.geomspace(1e3, 1e5, 10))
    assert edge.warnings and "edge" in edge.warnings[0]


def test_band_beside_a_very_narrow_component():
    """A light component with a round-off sd sitting where Newton starts (a near-pinned
    quantity in a model mixture): the limits still put the mixture's CDF (scipy.stats.norm) at
    2.5 % and 97.5 %.  Regression: a short Newton step beside it (huge density, F far off) once
    ended the search at F = 0.90."""
    from scipy.special import ndtri
    from scipy.stats import norm
    from heatsight.inverse.strength_average import mixture_band
    w = np.array([0.9, 0.099, 0.001])
    m = np.array([[0.0], [5.0], [0.0]])
    s = np.array([[1.0], [0.5], [1e-11]])
    mean = w @ m
    m[2, 0] = (mean + ndtri(0.975) * np.sqrt(w @ (s ** 2 + (m - mean) ** 2)))[0]
    lo, hi = mixture_band(w, m, s)
    for limit, p in ((lo, 0.025), (hi, 0.975)):
        assert w @ norm.cdf((limit[0] - m[:, 0]) / s[:, 0]) == pytest.approx(p, abs=1e-9)
