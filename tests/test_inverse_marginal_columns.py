"""Extra columns with a Gaussian prior integrated out (inverse/marginal_columns.py).

Reference: the joint Gaussian posterior of (c, z) solved directly with numpy (normal
equations of the stacked model, textbook linear-Gaussian closed form), and the evidence of
the stacked model, log N(d; t0 + G c0 + X mu, S + G (alpha P)^-1 G^T + X diag(s^2) X^T),
by scipy.stats.multivariate_normal (reference library).
"""

import numpy as np
import pytest
from scipy.stats import multivariate_normal

from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.marginal_columns import MarginalColumns


@pytest.fixture(scope="module")
def stacked():
    rng = np.random.default_rng(3)
    n, K, q = 14, 9, 3
    G, X = rng.normal(size=(n, K)), rng.normal(size=(n, q)) * 5.0
    A = rng.normal(size=(n, n)) * 0.1
    S = A @ A.T + np.diag(rng.uniform(0.05, 0.2, n))
    d, t0 = rng.normal(size=n) * 3.0, rng.normal(size=n)
    P, c0 = rng.uniform(0.5, 3.0, K), rng.normal(size=K) * 0.3
    mu, s = rng.normal(size=q), rng.uniform(0.5, 2.0, q)
    base = LinearGaussianProblem(G, d, t0, S, P, c0)
    return base, X, mu, s


@pytest.mark.parametrize("alpha", [0.1, 2.0])
def test_joint_from_marginal_equals_the_stacked_posterior(stacked, alpha):
    base, X, mu, s = stacked
    cols = MarginalColumns(base, X, mu, s)
    idx = np.arange(base.n)
    mean, cov = cols.joint(cols.marginal.coefficients(alpha), cols.marginal.posterior_covariance(alpha), idx)
    # direct: x = (c, z), prior N((c0, mu), diag(1 / (alpha P), s^2)), d = t0 + [G X] x + e
    H = np.hstack([base.G, X])
    Si = np.linalg.inv(base.noise.covariance)
    prec = np.concatenate([alpha * base.prior_diag, 1.0 / s ** 2])
    A = H.T @ Si @ H + np.diag(prec)
    cov_direct = np.linalg.inv(A)
    mean_direct = cov_direct @ (H.T @ Si @ (base.d - base.t0) + prec * np.concatenate([base.c0, mu]))
    assert mean == pytest.approx(mean_direct, rel=1e-9, abs=1e-10)
    assert cov == pytest.approx(cov_direct, rel=1e-8, abs=1e-11)


def test_marginal_evidence_equals_the_stacked_model(stacked):
    base, X, mu, s = stacked
    cols = MarginalColumns(base, X, mu, s)
    alpha = 0.7
    Sd = base.noise.covariance + base.G @ np.diag(1.0 / (alpha * base.prior_diag)) @ base.G.T + X @ np.diag(s ** 2) @ X.T
    ref = multivariate_normal(base.t0 + base.G @ base.c0 + X @ mu, Sd).logpdf(base.d)
    assert float(cols.marginal.log_evidence(alpha)) == pytest.approx(ref, rel=1e-10)


def test_conditional_on_a_subset_uses_those_readings_alone(stacked):
    base, X, mu, s = stacked
    idx = np.arange(0, base.n, 2)
    a, K, Dinv = MarginalColumns(base, X, mu, s).conditional(idx)
    sub = MarginalColumns(base.subset(idx), X[idx], mu, s).conditional(np.arange(idx.size))
    for x, y in zip((a, K, Dinv), sub):
        assert x == pytest.approx(y, rel=1e-12, abs=1e-14)


@pytest.mark.parametrize("alpha", [0.1, 2.0])
def test_a_column_held_at_its_prior_mean_is_the_model_without_it(stacked, alpha):
    """s_j = 0 (a zone without a level of its own, inverse.zones): z_j = mu_j with no variance
    and no covariance, and (c, the other z) as in the model with column j's part X_j mu_j
    taken off the readings and the column left out (the direct stacked posterior above)."""
    base, X, mu, s = stacked
    s0 = s.copy()
    s0[1] = 0.0
    cols = MarginalColumns(base, X, mu, s0)
    idx = np.arange(base.n)
    mean, cov = cols.joint(cols.marginal.coefficients(alpha), cols.marginal.posterior_covariance(alpha), idx)
    K = base.K
    assert mean[K + 1] == pytest.approx(mu[1], rel=1e-14) and np.all(cov[K + 1] == 0.0) and np.all(cov[:, K + 1] == 0.0)
    keep = np.array([0, 2])
    H = np.hstack([base.G, X[:, keep]])
    Si = np.linalg.inv(base.noise.covariance)
    prec = np.concatenate([alpha * base.prior_diag, 1.0 / s[keep] ** 2])
    cov_direct = np.linalg.inv(H.T @ Si @ H + np.diag(prec))
    mean_direct = cov_direct @ (H.T @ Si @ (base.d - base.t0 - X[:, 1] * mu[1])
                                + prec * np.concatenate([base.c0, mu[keep]]))
    rest = np.concatenate([np.arange(K), K + keep])
    assert mean[rest] == pytest.approx(mean_direct, rel=1e-9, abs=1e-10)
    assert cov[np.ix_(rest, rest)] == pytest.approx(cov_direct, rel=1e-8, abs=1e-11)


def test_column_gains_give_the_evidence_of_every_set_of_columns(stacked):
    """LinearGaussianProblem.column_gains with zones.added_levels_log_evidence (determinant
    lemma): log p(d | alpha, z_S ~ N(0, diag(s_S^2))) for every non-empty set S of the columns,
    against the stacked model's Gaussian by scipy.stats.multivariate_normal (reference
    library)."""
    from heatsight.inverse.zones import added_levels_log_evidence, level_sets

    base, X, _, s = stacked
    alphas = np.array([0.1, 0.7, 2.0])
    Q, b = base.column_gains(X, alphas)
    sets = level_sets(X.shape[1])
    assert sets.shape == (7, 3)
    # blocks of one set at a time give the same numbers as all at once
    got = base.log_evidence(alphas)[:, None] + added_levels_log_evidence(Q, b, s, sets)
    assert got == pytest.approx(base.log_evidence(alphas)[:, None]
                                + added_levels_log_evidence(Q, b, s, sets, block=1), rel=1e-13)
    for i, a in enumerate(alphas):
        for j, S in enumerate(sets):
            v = np.where(S, s, 0.0) ** 2
            Sd = base.noise.covariance + (base.G / (a * base.prior_diag)) @ base.G.T + (X * v) @ X.T
            ref = multivariate_normal(base.t0 + base.G @ base.c0, Sd).logpdf(base.d)
            assert got[i, j] == pytest.approx(ref, rel=1e-10)


def test_integrated_columns_are_shared_noise():
    """The columns integrated out (and what the base noise already shares, noise.Whitener's
    shared_variance) are left out of each reading's own sd: own_sd^2 = S_ii - shared_i."""
    from heatsight.inverse.noise import Whitener

    rng = np.random.default_rng(4)
    n, K = 7, 3
    G, X = rng.normal(size=(n, K)), rng.normal(size=(n, 2))
    shared = np.full(n, 0.5)
    noise = Whitener(np.diag(np.full(n, 0.01)) + np.outer(np.ones(n), np.ones(n)) * 0.5, shared_variance=shared)
    base = LinearGaussianProblem(G, rng.normal(size=n), np.zeros(n), noise, np.ones(K))
    mc = MarginalColumns(base, X, np.zeros(2), np.array([2.0, 3.0]))
    np.testing.assert_allclose(mc.marginal.noise.own_sd, np.full(n, 0.1), rtol=1e-12)
    np.testing.assert_allclose(mc.marginal.noise.sd ** 2, 0.51 + X ** 2 @ np.array([4.0, 9.0]), rtol=1e-12)
    np.testing.assert_allclose(base.subset([1, 3]).noise.own_sd, [0.1, 0.1], rtol=1e-12)
