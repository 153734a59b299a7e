"""Evidence of a model on all readings when it set some aside (inverse.model_choice)."""

import math

import numpy as np
import pytest
from scipy.stats import norm

from heatsight.inverse.contamination import EPSILON, OUTLIER_SD, set_aside_log_likelihood
from heatsight.inverse.model_choice import log_evidence_on_all, model_weights


def test_set_aside_term_is_the_contamination_mixture():
    r, v = np.array([0.3, -7.0]), np.array([0.04, 0.09])
    ref = sum(math.log(EPSILON * norm.pdf(x, 0, math.sqrt(s + OUTLIER_SD ** 2))      # scipy.stats reference
                       + (1 - EPSILON) * norm.pdf(x, 0, math.sqrt(s))) for x, s in zip(r, v))
    assert set_aside_log_likelihood(r, v) == pytest.approx(ref, rel=1e-12)


def test_all_kept_adds_only_the_healthy_prior():
    n = 6
    X = np.ones((n, 2))
    out = log_evidence_on_all(-3.5, np.ones(n, bool), X, np.zeros(n), np.zeros(n), np.ones(n), np.zeros(2), np.eye(2))
    assert out == pytest.approx(-3.5 + n * math.log1p(-EPSILON), rel=1e-14)


def test_a_reading_the_model_cannot_predict_costs_the_outlier_density():
    # set aside and 8 predictive sd off its prediction: the broken branch carries it, so the
    # model pays about log(eps N(r; 0, v + tau^2)), far below a reading it predicts
    X, c, C, var = np.ones((1, 1)), np.zeros(1), np.zeros((1, 1)), np.array([0.01])
    far = log_evidence_on_all(0.0, np.zeros(1, bool), X, np.zeros(1), np.array([0.8]), var, c, C)
    near = log_evidence_on_all(0.0, np.zeros(1, bool), X, np.zeros(1), np.array([0.0]), var, c, C)
    outlier = math.log(EPSILON) + norm.logpdf(0.8, 0, math.sqrt(0.01 + OUTLIER_SD ** 2))  # scipy.stats reference
    assert far == pytest.approx(outlier, abs=1e-6)
    assert near - far > 5.0


def test_weights_sum_to_one_and_follow_the_evidence():
    w = model_weights({"smooth": -10.0, "zones": -10.0 + math.log(3.0)})
    assert w["zones"] == pytest.approx(0.75) and sum(w.values()) == pytest.approx(1.0)


def test_averaged_models_match_the_mixture_moments_of_draws():
    """Moment-matched average of the smooth model (embedded with zone levels 0) and the zone
    model against the moments of seeded draws from the two-component mixture (numpy)."""
    from heatsight.inverse.model_choice import averaged_models
    rng = np.random.default_rng(4)
    K, J, p = 3, 2, 0.3
    A = rng.standard_normal((K, K))
    B = rng.standard_normal((K + J, K + J))
    c_s, C_s = rng.standard_normal(K), A @ A.T
    c_z, C_z = rng.standard_normal(K + J), B @ B.T
    m, C = averaged_models(c_s, C_s, c_z, C_z, p)
    n = 400_000
    pick = rng.uniform(size=n) < p
    draws = np.zeros((n, K + J))
    draws[~pick, :K] = rng.multivariate_normal(c_s, C_s, int((~pick).sum()))
    draws[pick] = rng.multivariate_normal(c_z, C_z, int(pick.sum()))
    np.testing.assert_allclose(m, draws.mean(axis=0), atol=0.02)
    np.testing.assert_allclose(C, np.cov(draws.T), atol=0.05 * np.abs(C).max())


def test_embedded_mixture_of_zone_models_with_different_edges_matches_draws():
    """Three components on different subsets of one coefficient vector (the smooth model and
    two zone models with their own zone columns) against seeded draws (numpy): the law of
    total covariance."""
    from heatsight.inverse.model_choice import embedded_mixture
    rng = np.random.default_rng(11)
    K, J = 3, 2
    idx = [np.arange(K), np.r_[0:K, K:K + J], np.r_[0:K, K + J:K + 2 * J]]
    p = np.array([0.2, 0.5, 0.3])
    comps = []
    for index, w in zip(idx, p):
        A = rng.standard_normal((index.size, index.size))
        comps.append((index, rng.standard_normal(index.size), A @ A.T + 0.1 * np.eye(index.size), w))
    m, C = embedded_mixture(comps, K + 2 * J)
    n = 400_000
    which = rng.choice(3, size=n, p=p)
    draws = np.zeros((n, K + 2 * J))
    for i, (index, c, Ci, _) in enumerate(comps):
        sel = which == i
        draws[np.ix_(sel, index)] = rng.multivariate_normal(c, Ci, int(sel.sum()))
    np.testing.assert_allclose(m, draws.mean(axis=0), atol=0.02)
    np.testing.assert_allclose(C, np.cov(draws.T), atol=0.03 * np.abs(C).max())


def test_model_mixture_band_is_the_quantile_of_the_mixture():
    """ModelMixture's 95 % limits against the empirical quantiles of seeded draws (numpy) of a
    Gaussian smooth model (weight 0.1) and a zone model on more columns (weight 0.9)."""
    from heatsight.inverse.model_choice import ModelMixture
    rng = np.random.default_rng(12)
    K, J = 2, 1
    c_s, C_s = np.array([1.0, -1.0]), np.diag([0.2, 0.3])
    c_z, C_z = np.array([0.5, 0.0, 2.0]), np.diag([0.1, 0.1, 0.05])
    mix = ModelMixture([(np.arange(K), c_s, C_s, 0.1), (np.arange(K + J), c_z, C_z, 0.9)], K + J)
    B = np.array([[1.0, 0.0, 1.0], [0.0, 1.0, 0.0]])
    mean, sd, lo, hi = mix.band(B, offset=np.array([0.5, 0.0]))
    n = 1_000_000
    pick = rng.uniform(size=n) < 0.1
    x = np.zeros((n, K + J))
    x[pick, :K] = rng.multivariate_normal(c_s, C_s, int(pick.sum()))
    x[~pick] = rng.multivariate_normal(c_z, C_z, int((~pick).sum()))
    q = x @ B.T + np.array([0.5, 0.0])
    np.testing.assert_allclose(mean, q.mean(axis=0), atol=0.01)
    np.testing.assert_allclose(sd, q.std(axis=0), atol=0.01)
    np.testing.assert_allclose(lo, np.quantile(q, 0.025, axis=0), atol=0.02)
    np.testing.assert_allclose(hi, np.quantile(q, 0.975, axis=0), atol=0.02)


def test_model_mixture_samples_draw_one_model_at_a_time():
    """ModelMixture.samples: the moments of its draws equal the embedded mixture's (law of
    total covariance, closed form), each draw comes from one component (the other
    components' own columns stay zero), and the largest of a figure that is not linear in c
    follows the mixture, not the moment-matched Gaussian (which draws every model's columns
    at once and widens it)."""
    from heatsight.inverse.model_choice import ModelMixture, embedded_mixture, gaussian_draws
    rng = np.random.default_rng(21)
    K, J = 2, 2
    idx = [np.r_[0:K, K:K + J], np.r_[0:K, K + J:K + 2 * J]]
    comps = []
    for index, w in zip(idx, (0.5, 0.5)):
        c = np.r_[1.0, 0.0, 5.0, 5.0]
        comps.append((index, c, 0.01 * np.eye(index.size), w))
    mix = ModelMixture(comps, K + 2 * J)
    x = mix.samples(200_000, seed=3)
    m, C = embedded_mixture(comps, K + 2 * J)
    np.testing.assert_allclose(x.mean(axis=0), m, atol=0.01)
    np.testing.assert_allclose(np.cov(x.T), C, atol=0.02)
    both = (np.abs(x[:, K:K + J]).sum(axis=1) > 0) & (np.abs(x[:, K + J:]).sum(axis=1) > 0)
    assert not both.any()
    # the larger of two points' values, each point carried by one model's zone column: 5 in
    # every draw from the mixture (one model at a time), far beyond it in draws of the
    # moment-matched Gaussian (each column ~ N(2.5, 2.5^2), anticorrelated)
    B = np.array([[0.0, 0.0, 1.0, 0.0, 0.0, 0.0], [0.0, 0.0, 0.0, 0.0, 1.0, 0.0]])
    assert np.max(x @ B.T, axis=1).max() < 6.0
    assert np.max(gaussian_draws(m, C, 20_000, rng) @ B.T, axis=1).max() > 8.0


def test_gaussian_draws_follow_the_covariance_continuously():
    """Draws with one seed move little when the covariance does, even where eigenvalues are
    nearly equal (there V sqrt(w) alone turns with the eigenvectors): by about the square
    root of the change (1e-5 for 1e-10) beside a zero eigenvalue, where sqrt is steep; their
    sample covariance matches (numpy.cov, 20,000 draws, 5 % on the variances)."""
    from heatsight.inverse.model_choice import gaussian_draws
    rng = np.random.default_rng(2)
    Q = np.linalg.qr(rng.standard_normal((6, 6)))[0]
    cov = (Q * np.array([4.0, 1.0, 1.0, 1.0, 0.25, 0.0])) @ Q.T        # a triple eigenvalue, a null one
    bump = 1e-10 * rng.standard_normal((6, 6))
    a = gaussian_draws(np.zeros(6), cov, 50, 7)
    b = gaussian_draws(np.zeros(6), cov + bump + bump.T, 50, 7)
    assert np.max(np.abs(a - b)) < 1e-4
    big = gaussian_draws(np.ones(6), cov, 20000, 3)
    np.testing.assert_allclose(np.cov(big.T), cov, rtol=0, atol=0.05 * 4.0)
    np.testing.assert_allclose(big.mean(axis=0), 1.0, atol=0.05)
