"""lmfit solver: equals the closed form when linear; recovers a nonlinear parameter; robust losses."""

import lmfit
import numpy as np
import pytest
from scipy.optimize import minimize
from threadpoolctl import threadpool_limits

from heatsight.inverse.errors import InverseError
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.lmfit_solver import fit_linear_lmfit, fit_lmfit


def toy(n, K, seed, full_noise=False):
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.05, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    p = 1.0 + (np.pi * k) ** 2
    sig = rng.uniform(0.3, 0.8, n)
    S = np.diag(sig**2 + 0.16) + 0.09 * np.ones((n, n)) if full_noise else sig**2
    c0 = rng.normal(size=K) * 0.5
    t0 = 20.0 + rng.normal(size=n)
    c = c0 + rng.normal(size=K) / np.sqrt(0.05 * p)
    d = t0 + G @ c + sig * rng.normal(size=n)
    return G, d, t0, S, p, c0, c


@pytest.mark.parametrize("n,K,full", [(16, 8, False), (16, 8, True), (10, 24, False), (10, 24, True)])
def test_lmfit_equals_closed_form(n, K, full):
    G, d, t0, S, p, c0, _ = toy(n, K, 11, full)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    for alpha in (1e-3, 0.05, 5.0):
        fit = fit_linear_lmfit(G, d, t0, S, p, alpha, c0)
        c = prob.coefficients(alpha)
        assert fit.result.success
        assert np.abs(fit.coefficients - c).max() <= 1e-10 * np.abs(c).max()
        C = prob.posterior_covariance(alpha)
        assert np.abs(fit.covariance - C).max() <= 1e-10 * np.abs(C).max()
        assert fit.chi2 == pytest.approx(prob.chi2(alpha), rel=1e-9)
        assert fit.names[0] == "c_0" and len(fit.names) == K


# nonlinear toy: sensors along x in [0, 1]; t0(h) = 20 exp(-h x) K, G = sin(k pi x), k = 1..3
X = np.linspace(0.0, 1.0, 30)
GB = np.column_stack([np.sin(k * np.pi * X) for k in (1, 2, 3)])
C_TRUE, H_TRUE, SIG = np.array([2.0, -1.0, 0.5]), 4.0, 0.2


def design(values):
    return GB, 20.0 * np.exp(-values["h"] * X)


def nonlinear_params(h0=1.5, vary=True):
    pars = lmfit.Parameters()
    pars.add("h", value=h0, min=0.1, max=20.0, vary=vary)
    return pars


def test_nonlinear_parameter_recovered_within_two_sd():
    rng = np.random.default_rng(12)
    d = GB @ C_TRUE + 20.0 * np.exp(-H_TRUE * X) + SIG * rng.normal(size=X.size)
    fit = fit_lmfit(design, nonlinear_params(), d, np.full(X.size, SIG**2), np.ones(3), 1e-3)
    sd = fit.sd
    assert abs(fit.values["h"] - H_TRUE) < 2 * sd["h"]
    assert np.all(np.abs(fit.coefficients - C_TRUE) < 2 * np.sqrt(np.diag(fit.coefficient_covariance)))
    assert fit.names == ("c_0", "c_1", "c_2", "h")
    # finite-difference column vs the analytic derivative dt0/dh = -20 x exp(-h x) (calculus)
    h = fit.values["h"]
    J = np.vstack([np.column_stack([GB, -20.0 * X * np.exp(-h * X)]) / SIG,
                   np.hstack([np.sqrt(1e-3) * np.eye(3), np.zeros((3, 1))])])
    np.testing.assert_allclose(fit.covariance, np.linalg.inv(J.T @ J), rtol=1e-6)


def test_nonlinear_sd_is_honest_over_replicates():
    rng = np.random.default_rng(13)
    inside, R = 0, 80
    with threadpool_limits(limits=1, user_api="blas"):   # many tiny products: avoid BLAS thread hand-off
        for _ in range(R):
            d = GB @ C_TRUE + 20.0 * np.exp(-H_TRUE * X) + SIG * rng.normal(size=X.size)
            fit = fit_lmfit(design, nonlinear_params(), d, np.full(X.size, SIG**2), np.ones(3), 1e-3,
                            priors={"h": (3.0, 5.0)})
            inside += abs(fit.values["h"] - H_TRUE) < 1.959964 * fit.sd["h"]   # normal 97.5 % quantile (scipy.stats.norm)
    assert 0.87 <= inside / R <= 1.0          # nominal 0.95; binomial sd 0.024 over 80 replicates


def test_fixed_nonlinear_parameter_reduces_to_closed_form():
    d = GB @ C_TRUE + 20.0 * np.exp(-H_TRUE * X) + SIG * np.random.default_rng(14).normal(size=X.size)
    fit = fit_lmfit(design, nonlinear_params(3.7, vary=False), d, np.full(X.size, SIG**2), np.ones(3), 0.1)
    prob = LinearGaussianProblem(*design({"h": 3.7})[:1], d, design({"h": 3.7})[1], np.full(X.size, SIG**2),
                                 np.ones(3))
    np.testing.assert_allclose(fit.coefficients, prob.coefficients(0.1), rtol=1e-10)
    assert fit.values["h"] == 3.7
    lp = fit.linear_problem()
    np.testing.assert_allclose(lp.coefficients(0.1), prob.coefficients(0.1), rtol=1e-12)


def test_prior_on_nonlinear_parameter_pulls_towards_its_mean():
    d = GB @ C_TRUE + 20.0 * np.exp(-H_TRUE * X) + SIG * np.random.default_rng(15).normal(size=X.size)
    free = fit_lmfit(design, nonlinear_params(), d, np.full(X.size, SIG**2), np.ones(3), 1e-3)
    tight = fit_lmfit(design, nonlinear_params(), d, np.full(X.size, SIG**2), np.ones(3), 1e-3,
                      priors={"h": (2.0, 0.01)})
    assert abs(tight.values["h"] - 2.0) < 0.05 < abs(free.values["h"] - 2.0)
    assert tight.sd["h"] < 0.01


@pytest.mark.parametrize("loss,f", [("soft_l1", 2.0), ("huber", 0.6)])
def test_robust_loss_resists_an_outlier_and_acts_on_sensor_rows_only(loss, f):
    """f is chosen so that some prior rows exceed it: a loss acting on them would fail the check."""
    G, clean, t0, S, p, c0, _ = toy(20, 6, 16)
    d = clean.copy()
    d[7] += 8.0
    alpha = 0.05
    ref_clean = fit_linear_lmfit(G, clean, t0, S, p, alpha, c0).coefficients
    gauss = fit_linear_lmfit(G, d, t0, S, p, alpha, c0)
    rob = fit_linear_lmfit(G, d, t0, S, p, alpha, c0, loss=loss, f_scale=f)
    B = np.random.default_rng(1).normal(size=(8, 6))
    shift = lambda c: np.linalg.norm(B @ (c - ref_clean))
    assert shift(rob.coefficients) < 0.5 * shift(gauss.coefficients)
    assert rob.weights[7] < 0.3 and np.median(rob.weights) > 0.8

    def objective(c):  # f^2 sum rho((r/f)^2) on sensors + Gaussian prior; rho as in scipy.optimize.least_squares docs
        z = ((G @ c + t0 - d) / np.sqrt(S) / f) ** 2
        rho = 2 * (np.sqrt(1 + z) - 1) if loss == "soft_l1" else np.where(z <= 1, z, 2 * np.sqrt(z) - 1)
        return f**2 * rho.sum() + alpha * np.sum(p * (c - c0) ** 2)

    ref = minimize(objective, gauss.coefficients, method="BFGS", options={"gtol": 1e-10}).x   # scipy (reference library)
    np.testing.assert_allclose(rob.coefficients, ref, rtol=1e-5, atol=1e-6)


def test_bad_requests_raise():
    G, d, t0, S, p, c0, _ = toy(8, 3, 17)
    with pytest.raises(InverseError, match="loss"):
        fit_linear_lmfit(G, d, t0, S, p, 0.1, loss="cauchy")
    pars = lmfit.Parameters()
    pars.add("h", value=1.0)
    pars.add("g", expr="2*h")
    with pytest.raises(InverseError, match="expression"):
        fit_lmfit(lambda v: (G, t0), pars, d, S, p, 0.1)
    pars = lmfit.Parameters()
    pars.add("c_0", value=1.0)
    with pytest.raises(InverseError, match="clash"):
        fit_lmfit(lambda v: (G, t0), pars, d, S, p, 0.1)
