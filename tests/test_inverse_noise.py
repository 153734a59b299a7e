"""Noise model: marginalized sensor offsets equal explicit offset unknowns with a Gaussian prior."""

import numpy as np
import pytest

from heatsight.inverse.errors import InverseError
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.noise import Whitener, noise_covariance


def setup(n=9, K=5, seed=0):
    rng = np.random.default_rng(seed)
    G = rng.normal(size=(n, K)) * np.exp(-0.5 * np.arange(K))
    p = 1.0 + np.arange(K) ** 2
    sig = rng.uniform(0.2, 0.6, n)
    d = 25.0 + rng.normal(size=n) * 2
    return G, p, sig, d


@pytest.mark.parametrize("tau_c", [None, 0.7])
def test_marginalized_offsets_equal_augmented_model(tau_c):
    """Integrating out b ~ N(0, tau^2) is the same Gaussian model as estimating b with that prior
    (marginal of a joint Gaussian, textbook closed form)."""
    G, p, sig, d = setup()
    n, K = G.shape
    tau, alpha = 0.5, 0.2
    S = noise_covariance(sig, offset_sd=tau, common_offset_sd=tau_c)
    marg = LinearGaussianProblem(G, d, 20.0, S, p)
    cols, pri = [G, np.eye(n)], [p, np.full(n, 1 / (alpha * tau**2))]
    if tau_c is not None:
        cols.append(np.ones((n, 1)))
        pri.append([1 / (alpha * tau_c**2)])
    aug = LinearGaussianProblem(np.hstack(cols), d, 20.0, sig**2, np.concatenate(pri))
    np.testing.assert_allclose(marg.coefficients(alpha), aug.coefficients(alpha)[:K], rtol=1e-10)
    np.testing.assert_allclose(marg.posterior_covariance(alpha), aug.posterior_covariance(alpha)[:K, :K],
                               rtol=1e-9, atol=1e-14)
    assert marg.log_evidence(alpha) == pytest.approx(aug.log_evidence(alpha), rel=1e-11)


def test_repeated_snapshots_share_offsets():
    G, p, sig, d1 = setup(n=6, K=3, seed=1)
    n, K = G.shape
    R, tau, alpha = 3, 0.4, 0.5
    d = np.concatenate([d1 + 0.1 * t for t in range(R)])
    S = noise_covariance(sig, offset_sd=tau, repeats=R)
    assert S.shape == (R * n, R * n)
    marg = LinearGaussianProblem(np.tile(G, (R, 1)), d, 0.0, S, p)
    aug = LinearGaussianProblem(np.hstack([np.tile(G, (R, 1)), np.tile(np.eye(n), (R, 1))]), d, 0.0,
                                np.tile(sig**2, R), np.concatenate([p, np.full(n, 1 / (alpha * tau**2))]))
    np.testing.assert_allclose(marg.coefficients(alpha), aug.coefficients(alpha)[:K], rtol=1e-10)
    assert marg.log_evidence(alpha) == pytest.approx(aug.log_evidence(alpha), rel=1e-11)


def test_diagonal_case_returns_variances_and_whitener_inverts():
    sig = np.array([0.5, 1.0, 2.0])
    np.testing.assert_allclose(noise_covariance(sig, offset_sd=[0.0, 1.0, 0.0]), [0.25, 2.0, 4.0])
    S = noise_covariance(sig, common_offset_sd=0.3)
    w = Whitener(S)
    x = np.array([1.0, -2.0, 0.5])
    np.testing.assert_allclose(w.whiten_transpose(w.whiten(x)), np.linalg.solve(S, x), rtol=1e-12)
    np.testing.assert_allclose(w.colour(w.whiten(x)), x, rtol=1e-12)
    assert w.logdet == pytest.approx(np.linalg.slogdet(S)[1], rel=1e-12)
    with pytest.raises(InverseError, match="positive"):
        noise_covariance([0.5, -1.0])
    with pytest.raises(InverseError, match="symmetric"):
        Whitener(np.array([[1.0, 0.5], [0.0, 1.0]]))
