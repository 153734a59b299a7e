"""choose_strength against brute-force grids of the published criteria."""

import numpy as np
import pytest
from scipy.stats import multivariate_normal

from heatsight.inverse.errors import InverseError, StrengthError
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.strength import choose_strength, default_alphas


def toy(n=18, K=10, seed=0, alpha_true=0.01, sigma=0.5):
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.05, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    p = 1.0 + (np.pi * k) ** 2
    t0 = np.full(n, 20.0)
    c = rng.normal(size=K) / np.sqrt(alpha_true * p)
    d = t0 + G @ c + sigma * rng.normal(size=n)
    return G, d, t0, np.full(n, sigma**2), p


def explicit_parts(G, d, t0, S, p, alpha):
    A, y = G / np.sqrt(S)[:, None] / np.sqrt(p), (d - t0) / np.sqrt(S)
    H = A @ np.linalg.solve(A.T @ A + alpha * np.eye(A.shape[1]), A.T)
    u = np.linalg.solve(A.T @ A + alpha * np.eye(A.shape[1]), A.T @ y)
    return H, y, u


@pytest.mark.parametrize("seed,K", [(0, 10), (1, 30)])
def test_evidence_optimum_matches_brute_force_grid(seed, K):
    G, d, t0, S, p = toy(K=K, seed=seed)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    choice = choose_strength(prob, "evidence")
    grid = np.geomspace(choice.alpha / 30, choice.alpha * 30, 241)
    # log marginal likelihood by scipy.stats.multivariate_normal (reference library)
    ref = np.array([multivariate_normal(t0, np.diag(S) + G @ np.diag(1 / (a * p)) @ G.T).logpdf(d)
                    for a in grid])
    best = grid[np.argmax(ref)]
    assert 0 < np.argmax(ref) < grid.size - 1
    assert choice.alpha == pytest.approx(best, rel=0.03)          # within one grid step (~2.9 %)
    assert prob.log_evidence(choice.alpha) >= ref.max() - 1e-9
    assert choice.method == "evidence" and choice.criterion == "log_evidence" and not choice.warnings
    assert choice.alphas.shape == choice.values.shape == (200,)


def test_gcv_optimum_matches_brute_force_grid():
    G, d, t0, S, p = toy(seed=2)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    choice = choose_strength(prob, "gcv")
    grid = np.geomspace(choice.alpha / 30, choice.alpha * 30, 241)
    n = d.size
    ref = []
    for a in grid:   # Golub, Heath & Wahba 1979: V = (1/n)||(I - A)y||^2 / [(1/n) tr(I - A)]^2
        H, y, _ = explicit_parts(G, d, t0, S, p, a)
        ref.append((np.sum((y - H @ y) ** 2) / n) / (np.trace(np.eye(n) - H) / n) ** 2)
    ref = np.array(ref)
    assert 0 < np.argmin(ref) < grid.size - 1
    assert choice.alpha == pytest.approx(grid[np.argmin(ref)], rel=0.03)
    assert prob.gcv(choice.alpha) <= ref.min() * (1 + 1e-9)


def test_lcurve_curvature_matches_numerical_differentiation_and_corner():
    G, d, t0, S, p = toy(seed=3)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    t = np.linspace(np.log(1e-5), np.log(1e2), 2001)
    rho, eta = [], []
    for a in np.exp(t):
        H, y, u = explicit_parts(G, d, t0, S, p, a)
        rho.append(np.log(np.linalg.norm(y - H @ y)))
        eta.append(np.log(np.linalg.norm(u)))
    r1, e1 = np.gradient(rho, t), np.gradient(eta, t)
    r2, e2 = np.gradient(r1, t), np.gradient(e1, t)
    # curvature of a plane parametric curve (textbook calculus): (x'y'' - y'x'') / (x'^2 + y'^2)^(3/2)
    kappa = (r1 * e2 - e1 * r2) / (r1**2 + e1**2) ** 1.5
    inner = slice(5, -5)
    np.testing.assert_allclose(prob.lcurve_curvature(np.exp(t))[inner], kappa[inner], rtol=2e-3,
                               atol=2e-3 * np.abs(kappa).max())
    choice = choose_strength(prob, "lcurve")
    # the corner is the point of maximum curvature (Hansen & O'Leary 1993, from memory)
    assert kappa.max() > 0
    assert np.log(choice.alpha) == pytest.approx(t[np.argmax(kappa)], abs=0.02)


def test_discrepancy_hits_chi2_equal_n():
    G, d, t0, S, p = toy(seed=4, K=30)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    choice = choose_strength(prob, "discrepancy")
    H, y, _ = explicit_parts(G, d, t0, S, p, choice.alpha)
    # Morozov's discrepancy principle (from memory): ||S^-1/2 (d - fit)||^2 = n
    assert np.sum((y - H @ y) ** 2) == pytest.approx(d.size, rel=1e-8)
    assert choice.target == d.size
    chi_half = choose_strength(prob, "discrepancy", target=0.5 * d.size).alpha
    assert chi_half < choice.alpha


def test_discrepancy_impossible_cases_say_why():
    G, d, t0, S, p = toy(seed=5, K=4)
    with pytest.raises(StrengthError, match="cannot fit the readings"):
        choose_strength(LinearGaussianProblem(G, d, t0, S * 1e-4, p), "discrepancy")
    flat = t0 + 0.01 * np.random.default_rng(0).normal(size=d.size)
    with pytest.raises(StrengthError, match="nothing beyond the nominal"):
        choose_strength(LinearGaussianProblem(G, flat, t0, S, p), "discrepancy")


def test_fixed_auto_unknown_and_grid_edge():
    G, d, t0, S, p = toy(seed=6)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    fixed = choose_strength(prob, 0.25)
    assert fixed.alpha == 0.25 and fixed.method == "fixed"
    assert choose_strength(prob, "auto").alpha == choose_strength(prob, "evidence").alpha
    with pytest.raises(InverseError, match="unknown strength method"):
        choose_strength(prob, "bayes")
    with pytest.raises(InverseError, match="positive"):
        choose_strength(prob, -1.0)
    grid = default_alphas(prob)       # a fixed strength beyond the range where it shapes the answer is said
    low, high = choose_strength(prob, grid[0] * 1e-3), choose_strength(prob, grid[-1] * 1e3)
    assert "the answer is not regularized" in low.warnings[0] and "the prior's mean" in high.warnings[0]
    assert choose_strength(prob, float(np.sqrt(grid[0] * grid[-1]))).warnings == ()
    best = choose_strength(prob, "evidence").alpha
    edge = choose_strength(prob, "evidence", alphas=np.geomspace(best * 1e3, best * 1e5, 20))
    assert edge.alpha == pytest.approx(best * 1e3) and "smallest alpha" in edge.warnings[0]


def test_default_grid_spans_singular_values():
    G, d, t0, S, p = toy(seed=7)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    s = prob.singular_values
    a = default_alphas(prob)
    assert a.size == 200 and a[0] < s[s > 1e-6 * s[0]].min() ** 2 and a[-1] > s[0] ** 2


def test_lcurve_grid_leaves_out_a_nearly_free_direction():
    from heatsight.inverse.strength import FREE_GAP, lcurve_alphas
    G, d, t0, S, p = toy(K=10, seed=2)
    p = p.copy()
    p[0] *= 1e-6                      # nearly flat prior on one direction (as the fit's nominal level)
    prob = LinearGaussianProblem(G, d, t0, S, p)
    s = prob.singular_values
    assert s[0] > FREE_GAP * s[1]
    grid = lcurve_alphas(prob)
    assert grid[-1] == pytest.approx(s[1] ** 2 * 1e2, rel=1e-9)      # ends at the second direction
    assert default_alphas(prob)[-1] == pytest.approx(s[0] ** 2 * 1e2, rel=1e-9)


def test_lcurve_without_corner_uses_the_evidence_and_says_so():
    # more unknowns than readings and evenly conditioned columns: the seminorm stays bounded
    # as alpha -> 0 and all directions switch off together, so the curve is a '7' with no
    # convex corner (curvature < 0 everywhere on the grid)
    rng = np.random.default_rng(0)
    n, K = 12, 40
    G = rng.normal(size=(n, K))
    d = 20.0 + G @ rng.normal(size=K) + 0.1 * rng.normal(size=n)
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 1e-2), np.ones(K))
    assert prob.lcurve_curvature(default_alphas(prob)).max() < 0
    choice = choose_strength(prob, "lcurve")
    assert choice.method == "evidence" and "no corner" in choice.warnings[-1]
    assert choice.alpha == pytest.approx(choose_strength(prob, "evidence").alpha)
    # a problem with a corner keeps the L-curve rule
    G, d, t0, S, p = toy(K=10, seed=2)
    assert choose_strength(LinearGaussianProblem(G, d, t0, S, p), "lcurve").method == "lcurve"
