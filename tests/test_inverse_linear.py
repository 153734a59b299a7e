"""LinearGaussianProblem against reference libraries and brute-force definitions."""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.stats import multivariate_normal
from sklearn.linear_model import Ridge

from heatsight.inverse.errors import InverseError
from heatsight.inverse.linear_gaussian import LinearGaussianProblem


def toy(n, K, seed, full_noise=False):
    """Sensors at (x, depth z); column k = cos(k pi x) exp(-k pi z) (decaying modes)."""
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.05, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    p = 1.0 + (np.pi * k) ** 2
    sig = rng.uniform(0.3, 0.8, n)
    if full_noise:   # independent offsets tau = 0.4 K and a common offset 0.3 K marginalized
        S = np.diag(sig**2 + 0.4**2) + 0.3**2 * np.ones((n, n))
    else:
        S = sig**2
    c0 = rng.normal(size=K) * 0.5
    t0 = 20.0 + rng.normal(size=n)
    d = t0 + G @ (c0 + rng.normal(size=K) / np.sqrt(0.05 * p)) + sig * rng.normal(size=n)
    return G, d, t0, S, p, c0


CASES = [(16, 8, False), (16, 8, True), (10, 24, False), (10, 24, True)]


def explicit(G, d, t0, S, p, c0, alpha):
    """Brute-force posterior with explicit matrices."""
    Sm = S if S.ndim == 2 else np.diag(S)
    Si = np.linalg.inv(Sm)
    prec = G.T @ Si @ G + alpha * np.diag(p)
    C = np.linalg.inv(prec)
    c = C @ (G.T @ Si @ (d - t0) + alpha * p * c0)
    H = G @ C @ G.T @ Si
    return Sm, C, c, H


@pytest.mark.parametrize("n,K,full", CASES)
def test_map_matches_sklearn_ridge(n, K, full):
    G, d, t0, S, p, c0 = toy(n, K, 1, full)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    Sm = S if full else np.diag(S)
    L = np.linalg.cholesky(Sm)
    X = np.linalg.solve(L, G) / np.sqrt(p)
    y = np.linalg.solve(L, d - t0 - G @ c0)
    for alpha in (1e-3, 0.05, 3.0):
        # scikit-learn Ridge (reference library) minimizes ||y - X w||^2 + alpha ||w||^2, no intercept
        w = Ridge(alpha=alpha, fit_intercept=False, solver="svd").fit(X, y).coef_
        np.testing.assert_allclose(prob.coefficients(alpha), c0 + w / np.sqrt(p), rtol=1e-9, atol=1e-11)


@pytest.mark.parametrize("n,K,full", CASES)
def test_posterior_hat_and_chi2_vs_explicit_matrices(n, K, full):
    G, d, t0, S, p, c0 = toy(n, K, 2, full)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    alpha = 0.07
    Sm, C, c, H = explicit(G, d, t0, S, p, c0, alpha)
    # Gaussian conjugate posterior C = (G^T S^-1 G + alpha P)^-1 (textbook closed form)
    np.testing.assert_allclose(prob.posterior_covariance(alpha), C, rtol=1e-8, atol=1e-12)
    np.testing.assert_allclose(prob.posterior_sd(alpha), np.sqrt(np.diag(C)), rtol=1e-8)
    np.testing.assert_allclose(prob.coefficients(alpha), c, rtol=1e-8, atol=1e-10)
    np.testing.assert_allclose(prob.hat_diagonal(alpha), np.diag(H), rtol=1e-8, atol=1e-12)
    assert prob.effective_parameters(alpha) == pytest.approx(np.trace(H), rel=1e-10)
    e = d - t0 - G @ c
    np.testing.assert_allclose(prob.residuals(alpha), e, rtol=1e-8, atol=1e-10)
    assert prob.chi2(alpha) == pytest.approx(e @ np.linalg.solve(Sm, e), rel=1e-9)
    assert prob.seminorm(alpha) == pytest.approx(np.sqrt(np.sum(p * (c - c0) ** 2)), rel=1e-9)
    B = np.random.default_rng(0).normal(size=(5, K))
    mean, sd = prob.predict(B, alpha, offset=1.5)
    np.testing.assert_allclose(mean, 1.5 + B @ c, rtol=1e-9)
    np.testing.assert_allclose(sd, np.sqrt(np.diag(B @ C @ B.T)), rtol=1e-8)


def test_unseen_directions_keep_prior_variance():
    n, K = 6, 15
    G, d, t0, S, p, c0 = toy(n, K, 3)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    alpha = 0.3
    A = (G / np.sqrt(S)[:, None]) / np.sqrt(p)
    null = np.linalg.svd(A)[2][n:]                       # orthonormal basis of null(A), K - n rows
    C = prob.posterior_covariance(alpha)
    Pm = np.diag(np.sqrt(p))
    # G v = 0 in C = (G^T S^-1 G + alpha P)^-1 leaves v^T P^1/2 C P^1/2 v = 1/alpha (the prior variance)
    np.testing.assert_allclose(null @ Pm @ C @ Pm @ null.T, np.eye(K - n) / alpha, rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("n,K", [(16, 8), (10, 24)])
def test_loo_equals_brute_force_refits(n, K):
    G, d, t0, S, p, c0 = toy(n, K, 4)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    alpha = 0.05
    pred = np.empty(n)
    for i in range(n):   # definition of leave-one-out: refit without reading i, same alpha
        k = np.delete(np.arange(n), i)
        _, _, c, _ = explicit(G[k], d[k], t0[k], S[k], p, c0, alpha)
        pred[i] = t0[i] + G[i] @ c
    np.testing.assert_allclose(prob.loo_predicted(alpha), pred, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(prob.loo_residuals(alpha), d - pred, rtol=1e-8, atol=1e-9)
    # classical hat-matrix shortcut e_i / (1 - H_ii) (Allen's PRESS identity, from memory)
    h = prob.hat_diagonal(alpha)
    np.testing.assert_allclose(prob.residuals(alpha) / (1 - h), d - pred, rtol=1e-8, atol=1e-9)


def test_loo_full_noise_equals_gaussian_conditioning():
    n, K = 14, 9
    G, d, t0, S, p, c0 = toy(n, K, 5, full_noise=True)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    alpha = 0.05
    Sp = S + G @ np.diag(1 / (alpha * p)) @ G.T
    m = t0 + G @ c0
    mean, sd = np.empty(n), np.empty(n)
    for i in range(n):   # conditional of a multivariate normal (textbook closed form)
        k = np.delete(np.arange(n), i)
        wgt = np.linalg.solve(Sp[np.ix_(k, k)], Sp[k, i])
        mean[i] = m[i] + wgt @ (d[k] - m[k])
        sd[i] = np.sqrt(Sp[i, i] - wgt @ Sp[k, i])
    np.testing.assert_allclose(prob.loo_predicted(alpha), mean, rtol=1e-9)
    np.testing.assert_allclose(prob.loo_sd(alpha), sd, rtol=1e-8)
    np.testing.assert_allclose(prob.standardized_loo(alpha), (d - mean) / sd, rtol=1e-7, atol=1e-9)
    hm1, hs1 = prob.held_out_prediction(alpha, [7])
    np.testing.assert_allclose([hm1[0], hs1[0]], [mean[7], sd[7]], rtol=1e-9)
    h, k = np.array([2, 7]), np.delete(np.arange(n), [2, 7])
    W = np.linalg.solve(Sp[np.ix_(k, k)], Sp[np.ix_(k, h)])
    hm, hs = prob.held_out_prediction(alpha, h)
    np.testing.assert_allclose(hm, m[h] + W.T @ (d[k] - m[k]), rtol=1e-9)
    np.testing.assert_allclose(hs, np.sqrt(np.diag(Sp[np.ix_(h, h)] - Sp[np.ix_(h, k)] @ W)), rtol=1e-8)


@pytest.mark.parametrize("n,K,full", CASES)
def test_log_evidence_vs_scipy_multivariate_normal(n, K, full):
    G, d, t0, S, p, c0 = toy(n, K, 6, full)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    Sm = S if full else np.diag(S)
    alphas = np.geomspace(1e-4, 1e2, 7)
    # d ~ N(t0 + G c0, S + G (alpha P)^-1 G^T): scipy.stats.multivariate_normal (reference library)
    ref = [multivariate_normal(t0 + G @ c0, Sm + G @ np.diag(1 / (a * p)) @ G.T).logpdf(d) for a in alphas]
    np.testing.assert_allclose(prob.log_evidence(alphas), ref, rtol=1e-9)


@pytest.mark.parametrize("n,K,full", CASES)
def test_gcv_vs_definition(n, K, full):
    G, d, t0, S, p, c0 = toy(n, K, 7, full)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    Sm = S if full else np.diag(S)
    L = np.linalg.cholesky(Sm)
    A = np.linalg.solve(L, G) / np.sqrt(p)
    y = np.linalg.solve(L, d - t0 - G @ c0)
    for alpha in (1e-3, 0.1, 10.0):
        Hw = A @ np.linalg.inv(A.T @ A + alpha * np.eye(K)) @ A.T
        IH = np.eye(n) - Hw
        # Golub, Heath & Wahba 1979: V = (1/n)||(I - A(l)) y||^2 / [(1/n) tr(I - A(l))]^2
        V = (np.sum((IH @ y) ** 2) / n) / (np.trace(IH) / n) ** 2
        assert prob.gcv(alpha) == pytest.approx(V, rel=1e-9)


def test_vectorized_alphas_match_scalar_calls():
    G, d, t0, S, p, c0 = toy(12, 20, 8, True)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    alphas = np.array([1e-3, 0.2, 5.0])
    B = np.ones((2, 20))
    for name in ("coefficients", "fitted", "residuals", "chi2", "seminorm", "effective_parameters",
                 "hat_diagonal", "loo_residuals", "standardized_loo", "log_evidence", "gcv",
                 "posterior_covariance", "posterior_sd", "lcurve_curvature", "whitened_residuals"):
        f = getattr(prob, name)
        vec = f(alphas)
        for i, a in enumerate(alphas):
            np.testing.assert_allclose(vec[i], f(a), rtol=1e-12, atol=1e-14, err_msg=name)
    m, s = prob.predict(B, alphas)
    assert m.shape == s.shape == (3, 2)


def test_with_data_and_subset_agree_with_fresh_problems():
    G, d, t0, S, p, c0 = toy(12, 7, 9, True)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    d2 = d + 1.0
    fresh = LinearGaussianProblem(G, d2, t0, S, p, c0)
    np.testing.assert_allclose(prob.with_data(d2).coefficients(0.1), fresh.coefficients(0.1), rtol=1e-12)
    keep = np.arange(12) != 4
    sub = prob.subset(keep)
    ref = LinearGaussianProblem(G[keep], d[keep], t0[keep], S[np.ix_(keep, keep)], p, c0)
    np.testing.assert_allclose(sub.log_evidence(0.1), ref.log_evidence(0.1), rtol=1e-12)


def test_bad_inputs_raise_clear_errors():
    G, d, t0, S, p, c0 = toy(8, 4, 10)
    with pytest.raises(InverseError, match="positive"):
        LinearGaussianProblem(G, d, t0, S, -p, c0)
    with pytest.raises(InverseError, match="shape"):
        LinearGaussianProblem(G, d[:-1], t0, S, p, c0)
    with pytest.raises(InverseError, match="positive definite"):
        LinearGaussianProblem(G, d, t0, -np.eye(8), p, c0)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    with pytest.raises(InverseError, match="alpha"):
        prob.coefficients(0.0)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 10_000), n=st.integers(3, 12), K=st.integers(1, 15))
def test_monotone_in_alpha(seed, n, K):
    """chi2 rises and effective parameters fall as alpha grows (filter factors s^2/(s^2+alpha))."""
    G, d, t0, S, p, c0 = toy(n, K, seed)
    prob = LinearGaussianProblem(G, d, t0, S, p, c0)
    a = np.geomspace(1e-6, 1e4, 40)
    chi2, eff, sn = prob.chi2(a), prob.effective_parameters(a), prob.seminorm(a)
    assert np.all(np.diff(chi2) >= -1e-9 * chi2[-1])
    assert np.all(np.diff(eff) <= 1e-12)
    assert np.all(np.diff(sn) <= 1e-9 * sn[0] + 1e-300)
    assert np.all((eff >= 0) & (eff <= min(n, K) + 1e-9))
    assert np.all((prob.hat_diagonal(a) > -1e-12) & (prob.hat_diagonal(a) < 1 + 1e-12))


def test_covariance_where_the_data_pin_a_coordinate_under_a_nearly_flat_prior():
    """More modes than readings, one coordinate pinned hard by a reading and nearly free in
    the prior (as the nominal level under calibration): the posterior sd and covariance against
    the dense inverse of the normal equations (numpy.linalg.inv).  Regression: the null-space
    projector's diagonal as 1 - sum_j V_kj^2 was 9 % off for that coordinate."""
    rng = np.random.default_rng(0)
    n, K = 8, 30
    G = rng.standard_normal((n, K)) * np.geomspace(1.0, 1e-3, K)
    G[:, 0] = 0.0
    G[0, 0] = 1e3
    P = (1.0 + np.arange(K)) ** 4.0
    P[0] = 1e-12
    pb = LinearGaussianProblem(G, rng.standard_normal(n), 0.0, np.full(n, 0.01), P)
    for a in (1e-3, 1.0):
        exact = np.linalg.inv(G.T @ G / 0.01 + a * np.diag(P))
        np.testing.assert_allclose(pb.posterior_sd(a), np.sqrt(np.diag(exact)), rtol=1e-10)
        np.testing.assert_allclose(pb.posterior_covariance(a), exact, rtol=0,
                                   atol=1e-10 * np.abs(exact).max())
        W, _, S = pb.weighted_moments(np.array([a]), np.array([1.0]))
        np.testing.assert_allclose(S / W, exact, rtol=0, atol=1e-10 * np.abs(exact).max())
        np.testing.assert_allclose(np.sqrt(np.diag(S / W)), np.sqrt(np.diag(exact)), rtol=1e-8)


@pytest.mark.parametrize("n,K,group,pinned", [(10, 24, 3, False), (10, 24, 3, True), (16, 8, 3, False),
                                              (10, 24, 1, False), (10, 24, 9, False)])
def test_merged_prediction_equals_the_moments_of_explicit_posteriors(n, K, group, pinned):
    """predict_merged against the moments of the merged runs (weight sum w_i, mean
    sum w_i m_i / W, variance sum w_i (sd_i^2 + (m_i - m)^2) / W, law of total variance),
    each component's mean and sd from the dense posterior (numpy.linalg.inv); more modes than
    readings and fewer, single-alpha runs and one run of all; with a coordinate pinned by a
    reading and nearly free in the prior, where the part of B the data do not see must not
    come from a difference of large numbers."""
    G, d, t0, S, p, c0 = toy(n, K, 3)
    if pinned:
        G[:, 0], G[0, 0], p[0] = 0.0, 1e3, 1e-12
    pb = LinearGaussianProblem(G, d, t0, S, p, c0)
    rng = np.random.default_rng(4)
    B = rng.standard_normal((50, K)) / np.sqrt(p if not pinned else np.append(1.0, p[1:]))[None, :]
    alphas, w = np.geomspace(1e-2, 1e2, 7), rng.uniform(0.2, 1.0, 7)
    offset = rng.standard_normal(50)
    W, mean, sd = pb.predict_merged(B, alphas, w, group, offset)
    runs = [slice(i, min(i + group, 7)) for i in range(0, 7, group)]
    assert W.shape == (len(runs),) and mean.shape == sd.shape == (len(runs), 50)
    for g, run in enumerate(runs):
        ms, vs = [], []
        for a in alphas[run]:
            _, C, c, _ = explicit(G, d, t0, S, p, c0, a)
            ms.append(offset + B @ c)
            vs.append(np.einsum("qk,kl,ql->q", B, C, B))
        wi = w[run] / w[run].sum()
        m = wi @ np.array(ms)
        v = wi @ (np.array(vs) + (np.array(ms) - m) ** 2)
        assert W[g] == pytest.approx(w[run].sum())
        np.testing.assert_allclose(mean[g], m, rtol=0, atol=1e-9 * np.abs(m).max())
        np.testing.assert_allclose(sd[g], np.sqrt(v), rtol=1e-7)


def test_merged_prediction_keeps_a_run_of_zero_weight_to_itself():
    """A run whose weights are all zero gets weight 0 and finite numbers; the other runs are
    those of the same alphas without it."""
    G, d, t0, S, p, c0 = toy(10, 24, 3)
    pb = LinearGaussianProblem(G, d, t0, S, p, c0)
    B = np.random.default_rng(1).standard_normal((20, 24)) / np.sqrt(p)[None, :]
    alphas, w = np.geomspace(1e-2, 1e2, 6), np.array([0.3, 0.2, 0.0, 0.0, 0.4, 0.1])
    W, mean, sd = pb.predict_merged(B, alphas, w, 2)
    assert W[1] == 0.0 and np.all(np.isfinite(mean)) and np.all(np.isfinite(sd))
    keep = np.r_[0:2, 4:6]
    W2, mean2, sd2 = pb.predict_merged(B, alphas[keep], w[keep], 2)
    np.testing.assert_allclose(W[[0, 2]], W2)
    np.testing.assert_allclose(mean[[0, 2]], mean2, rtol=1e-13)
    np.testing.assert_allclose(sd[[0, 2]], sd2, rtol=1e-13)


@pytest.mark.parametrize("n,K,case", [(10, 24, "plain"), (10, 24, "pinned"), (16, 8, "plain"), (16, 8, "pinned"),
                                      (16, 8, "far from the prior mean")])
def test_weighted_moments_equal_the_mixture_of_explicit_posteriors(n, K, case):
    """weighted_moments (W, d, S) against W = sum w_i, d = sum_i w_i (c_i - c0) / W and the
    law of total variance S / W = sum_i w_i [C_i + (c_i - cbar)(c_i - cbar)^T] / W, from dense
    inverses (numpy.linalg.inv); with a coordinate pinned by a reading and nearly free in the
    prior (where the unseen share 1 - sum_j V_kj^2 loses its digits), and with a level 1e6
    above the prior mean c0 = 0 under weak priors, ~7e6 posterior sds (a moment about c0
    minus the squared mean loses the variances there, eps (7e6)^2: 2 % measured; with more
    modes than readings such weak priors leave the dense reference itself ill-conditioned)."""
    G, d, t0, S, p, c0 = toy(n, K, 5)
    alphas = np.geomspace(1e-2, 1e2, 5)
    if case == "pinned":
        G[:, 0], G[0, 0], p[0] = 0.0, 1e3, 1e-12
    if case == "far from the prior mean":
        c0, d, alphas = np.zeros(K), d + G[:, 0] * 1e6, np.geomspace(1e-8, 1e-6, 5)
    pb = LinearGaussianProblem(G, d, t0, S, p, c0)
    w = np.array([0.1, 0.3, 0.25, 0.2, 0.15]) * 2.0
    cs, Cs = zip(*[explicit(G, d, t0, S, p, c0, a)[1:3][::-1] for a in alphas])
    cs, Cs = np.array(cs), np.array(Cs)
    W, offset, scatter = pb.weighted_moments(alphas, w)
    wn = w / w.sum()
    assert W == pytest.approx(w.sum())
    np.testing.assert_allclose(offset, wn @ (cs - c0), rtol=1e-9, atol=1e-9 * np.abs(wn @ (cs - c0)).max())
    mean = wn @ cs
    cov = np.einsum("i,ikl->kl", wn, Cs) + ((cs - mean).T * wn) @ (cs - mean)
    np.testing.assert_allclose(scatter / W, cov, rtol=0, atol=1e-8 * np.abs(cov).max())
    np.testing.assert_allclose(np.diag(scatter / W), np.diag(cov), rtol=1e-7)


@pytest.mark.parametrize("n,K,pinned,flat,seen", [(10, 24, False, True, False), (10, 24, True, True, False),
                                                  (6, 40, True, True, False), (16, 8, False, True, False),
                                                  (10, 24, False, False, False), (10, 24, True, True, True)])
def test_projection_without_forming_the_scaled_map_matches_extended_precision(n, K, pinned, flat, seen):
    """_projected (X V_r and the unseen rest ||X (I - V_r V_r^T)||^2 of X = B P^-1/2, from one
    product per prior with the flat columns split off) against the direct projection in numpy's
    extended precision (longdouble), with and without B^2 given; a nearly flat pinned
    coordinate (prior precision 1e-12) and a few long-scale columns make several flat ones
    (`flat`; none otherwise); `seen`: rows almost wholly in the directions the data see, whose
    rest the difference of norms would lose (CANCEL_GUARD projects them directly)."""
    from heatsight.inverse.linear_gaussian import CANCEL_GUARD

    G, d, t0, S, p, c0 = toy(n, K, 5)
    if flat:
        p[1:4] = 1e-6                           # long-scale modes: sd 1000x the others'
    if pinned:
        G[:, 0], G[0, 0], p[0] = 0.0, 1e3, 1e-12
    pb = LinearGaussianProblem(G, d, t0, S, p, c0)
    rng = np.random.default_rng(6)
    B = rng.standard_normal((200, K))
    if seen:
        B = (rng.standard_normal((200, pb._r)) @ pb._Vt_r + 1e-7 * B) * np.sqrt(p)[None, :]
        fl, Zoc, _, _, p2o = pb._projection_parts
        XoV = (B @ Zoc)[:, :pb._r]
        total = (B * B) @ p2o
        assert np.any(total - np.einsum("qr,qr->q", XoV, XoV) < CANCEL_GUARD * total)   # the guard's rows
    if not flat and not pinned:
        assert pb._projection_parts[0].size == 0
    X = B.astype(np.longdouble) / np.sqrt(p.astype(np.longdouble))[None, :]
    Vt = pb._Vt_r.astype(np.longdouble)
    XV = X @ Vt.T
    rest = X - XV @ Vt
    for B2 in (None, B * B):
        got_v, got_r = pb._projected(B, B2)
        np.testing.assert_allclose(got_v, np.asarray(XV, float), rtol=0, atol=1e-13 * float(np.abs(XV).max()))
        if n >= K:
            assert got_r is None
        else:
            np.testing.assert_allclose(got_r, np.asarray(np.einsum("qk,qk->q", rest, rest), float), rtol=1e-9)
