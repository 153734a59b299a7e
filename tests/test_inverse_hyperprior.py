"""Learned prior (inverse.hyperprior): evidence over (alpha, l, s, rho) against brute force.

The readings here only feed the evidence identities (any d would do); they come from a
smooth closed-form temperature field plus seeded noise, not from the fit's basis.
"""

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import multivariate_normal

import heatsight.forward as fw
from heatsight.inverse import hyperprior
from heatsight.inverse.hyperprior import LearnedPrior, learn_prior, matern_precision
from heatsight.inverse.linear_gaussian import LinearGaussianProblem, evidence_spectrum, log_evidence_from_spectrum

A, L, K = 0.08, 0.03, 20.0
SIGMA = 0.2


def make(sigma=SIGMA, n=14, seed=3, amplitude=5.0, nominal_factor=1e-4, terms=4):
    cyl = fw.Cylinder(A, L, K)
    faces = {"bottom": fw.UnknownTemperature(), "top": fw.Convection(50.0, 300.0), "side": fw.Insulated()}
    model = fw.CylinderModel(cyl, faces, tolerance=1e-8)
    basis = model.basis(2, terms)
    rng = np.random.default_rng(seed)
    r = A * np.sqrt(rng.uniform(0, 0.9, n))
    th = rng.uniform(0, 2 * np.pi, n)
    z = rng.uniform(0.003, 0.02, n)
    G, _ = basis.fields(r, th, z)
    t0 = model.evaluate(r, th, z).temperature
    d = t0 + 350.0 + amplitude * (r / A) * np.cos(th) * np.exp(-z / L) + sigma * rng.standard_normal(n)
    nominal = np.zeros(basis.size, dtype=bool)
    nominal[np.flatnonzero((basis.m == 0) & ~basis.is_sin & (basis.n_index == 0))[0]] = True
    c0 = np.where(nominal, 300.0, 0.0)
    prob = LinearGaussianProblem(G, d, t0, np.full(n, sigma**2), matern_precision(basis, A, 1.0), c0)
    return basis, prob, nominal


def test_log_evidence_matches_multivariate_normal_density():
    # nominal factor 1: a nearly flat direction would make the dense reference lose digits
    basis, prob, nominal = make()
    lp = learn_prior(prob, basis, nominal, 1.0)
    n_ls = lp.lengths.size * len(lp.orders)
    n_rho = n_ls * len(lp.dimensions)
    # (l, s, rho, s0) points whose predictive covariance scipy can factor, at rho = 1/4 (both
    # profile dimensions), 1/2 and 2
    for j in (0, 7, 12, n_ls + 7, n_rho + 7, 3 * n_rho + 12):
        pb = lp.problem_for(j)
        l, s, rho, s0 = lp.combos[j]
        P = matern_precision(basis, l, s, rho, s0)
        np.testing.assert_allclose(pb.prior_diag, P, rtol=1e-12)
        for z in (-2.0, 0.0, 1.0):
            alpha = float(lp.alphas_for(j, z))
            cov = np.diag(np.full(prob.n, SIGMA**2)) + (prob.G / (alpha * P)) @ prob.G.T
            ref = multivariate_normal(prob.t0 + prob.G @ prob.c0, cov).logpdf(prob.d)  # scipy.stats reference
            assert pb.log_evidence(alpha) == pytest.approx(ref, rel=1e-9, abs=1e-8)


def test_amplitude_integral_matches_quad():
    basis, prob, nominal = make()
    lp = learn_prior(prob, basis, nominal, 1e-4)
    total = 0.0
    for j in range(len(lp.combos)):
        pb = lp.problem_for(j)

        def dens(z):
            # evidence x N(z; 0, 1): the amplitude hyperprior in z = log-amplitude / LOG_AMPLITUDE_SD
            return math.exp(pb.log_evidence(float(lp.alphas_for(j, z))) - lp.log_marginal
                            - 0.5 * z * z + lp.combo_log_prior[j]) / math.sqrt(2 * math.pi)

        # scipy.integrate reference; beyond |z| = 40 the N(0, 1) hyperprior is below 1e-300
        val, err = integrate.quad(dens, -40.0, 40.0, limit=400, points=(-5.0, 0.0, 5.0))
        grid = np.exp(lp.log_weights[j] - lp.log_marginal) * hyperprior.STEP / math.sqrt(2 * math.pi)
        # abs: quad's own accuracy on (l, s) points carrying ~1e-9 of the weight
        assert grid.sum() == pytest.approx(val, rel=1e-6, abs=1e-7)
        total += val
    # marginal likelihood over (sigma_f, l, s, rho, s0) with the hyperprior's mass on the (l, s, rho, s0) points
    assert np.exp(lp.combo_log_prior).sum() == pytest.approx(1.0, rel=1e-12)
    assert total == pytest.approx(1.0, rel=1e-6)


def test_answer_independent_of_where_the_amplitude_grid_starts(monkeypatch):
    basis, prob, nominal = make(sigma=3.0, amplitude=0.5)   # readings hardly see the face
    ref = learn_prior(prob, basis, nominal, 1e-4)
    monkeypatch.setattr(hyperprior, "HALF_WIDTH", 1.0)
    narrow = learn_prior(prob, basis, nominal, 1e-4)
    assert narrow.z[0] < -1 and narrow.z[-1] >= 1                 # grown ...
    assert max(narrow.weights[:, 0].sum(), narrow.weights[:, -1].sum()) < 1e-8   # ... until the edges are negligible
    np.testing.assert_allclose(narrow.coefficients(), ref.coefficients(), rtol=1e-6, atol=1e-6)
    np.testing.assert_allclose(narrow.posterior_sd(), ref.posterior_sd(), rtol=1e-4)


def test_uninformative_readings_keep_wide_bands_and_say_so():
    basis, prob, nominal = make(sigma=50.0, amplitude=0.0)
    lp = LearnedPrior(prob, basis, nominal, 1e-4)
    zm, zsd = lp.amplitude_posterior()
    # the amplitude posterior keeps most of the spread of its N(0, 1) hyperprior (the data say
    # only "not larger than the noise"); no pile-up at the largest alpha: edges carry nothing
    assert zsd > 0.55 and zm > -3.0     # 0.60 = sd of a half-normal (one-sided bound)
    assert max(lp.weights[:, 0].sum(), lp.weights[:, -1].sum()) < 1e-8
    assert lp.description()["hyperprior_dominated"]
    # the difference between two points at one radius (the nominal, axisymmetric direction
    # cancels) keeps most of its prior sd
    Bp = basis.face_values(np.array([0.5 * A, 0.5 * A]), np.array([0.3, 2.5]))
    B = Bp[:1] - Bp[1:]
    assert lp.predict(B)[1][0] > 0.5 * lp.prior_sd(B)[0]


def test_mixture_moments_match_components():
    basis, prob, nominal = make()
    lp = learn_prior(prob, basis, nominal, 1e-4)
    B = basis.face_values(np.array([0.0, 0.5 * A, 0.9 * A]), np.array([0.0, 1.0, 2.0]))
    mean, sd = lp.predict(B)
    c, C = lp.coefficients(), lp.posterior_covariance()
    np.testing.assert_allclose(mean, B @ c, rtol=1e-10)
    np.testing.assert_allclose(sd, np.sqrt(np.einsum("qk,kl,ql->q", B, C, B)), rtol=1e-6)
    _, _, lo, hi = lp.band(B)
    assert np.all(lo < mean) and np.all(hi > mean)
    w = sum(wt.sum() for _, _, wt in lp._parts)
    assert w == pytest.approx(1.0)


def test_coverage_with_truths_drawn_from_the_family():
    """Pointwise 95 % bands of the learned-prior mixture cover truths drawn from one member of
    the family (l = radius / 2, s = 1: inside the family, not at an end; amplitude 3 K) about
    95 % of the time; readings from the same basis (this checks the statistics, not the physics)."""
    from threadpoolctl import threadpool_limits
    basis, prob, nominal = make(n=16, sigma=0.2)
    l_true, s_true = A / 2, 1.0
    # the truth's nominal level is drawn with the ordinary precision; the fit's prior on it is
    # nearly flat (any truth is then covered at the nominal rate in that direction)
    P = matern_precision(basis, l_true, s_true)
    wk = (1 + l_true ** 2 * basis.surface_eigenvalues()) ** s_true
    sigma_f = 3.0                                      # K, deviation rms over the face
    alpha = np.sum(1 / wk[~nominal]) / sigma_f ** 2
    rng = np.random.default_rng(11)
    u = rng.uniform(0, 0.95 * A, 8)
    v = rng.uniform(0, 2 * np.pi, 8)
    B = basis.face_values(u, v)
    hits = total = 0
    zs = []
    with threadpool_limits(1):
        for _ in range(80):
            c = prob.c0 + rng.standard_normal(basis.size) / np.sqrt(alpha * P)
            d = prob.t0 + prob.G @ c + 0.2 * rng.standard_normal(prob.n)
            lp = learn_prior(prob.with_data(d), basis, nominal, 1e-4)
            _, _, lo, hi = lp.band(B)
            zs.append(lp.amplitude_posterior()[0])
            hits += int(np.sum((B @ c >= lo) & (B @ c <= hi)))
            total += B.shape[0]
    coverage = hits / total
    print(f"\nlearned-prior coverage with truths from the family: {coverage:.3f} ({total} points); "
          f"amplitude posterior mean z {np.mean(zs):.2f}")
    # nominal 0.95 (definition of the band); [0.88, 0.99] allows for the Monte Carlo error of
    # 640 correlated indicators (common practice, no source)
    assert 0.88 <= coverage <= 0.99


def test_axisymmetric_ratio_scales_only_the_axisymmetric_modes():
    basis, _, _ = make()
    l, s = 0.5 * A, 1.5
    ratio = matern_precision(basis, l, s, 4.0) / matern_precision(basis, l, s)
    np.testing.assert_allclose(ratio, np.where(basis.m == 0, 1 / 16.0, 1.0), rtol=1e-14)


@pytest.mark.parametrize("rho_true, side", [(8.0, "high"), (0.5, "low")])
def test_axisymmetric_ratio_learned_from_the_readings(rho_true, side):
    """Truths drawn from the family with an axisymmetric part 8x (or 1/2x) a stationary
    field's: the evidence moves the ratio's weight towards that side of rho = 1 (which side
    the data prefer is the point; 40 sensors, 6 draws each)."""
    basis, prob, nominal = make(n=40, sigma=0.05)
    l_true, s_true = A / 2, 1.0
    P = matern_precision(basis, l_true, s_true, rho_true)
    wk = hyperprior.matern_weights(basis, l_true, s_true, rho_true)
    alpha = np.sum(1 / wk[~nominal]) / 3.0 ** 2          # 3 K rms deviation over the face
    rng = np.random.default_rng(5)
    ratios = np.array(hyperprior.AXISYMMETRIC_RATIOS)
    prior = np.exp(-0.5 * ((np.log2(ratios) - hyperprior.RATIO_LOG2_CENTRE) / hyperprior.RATIO_LOG2_SD) ** 2)
    on_side = ratios > 1.0 if side == "high" else ratios < 1.0
    prior_mass = prior[on_side].sum() / prior.sum()
    mass = []
    for _ in range(6):
        c = prob.c0 + rng.standard_normal(basis.size) / np.sqrt(alpha * P)
        d = prob.t0 + prob.G @ c + 0.05 * rng.standard_normal(prob.n)
        weights = learn_prior(prob.with_data(d), basis, nominal, 1e-4).description()["axisymmetric_ratio_weights"]
        mass.append(sum(w for x, w in weights.items() if on_side[list(weights).index(x)]))
    m = float(np.median(mass))
    # the readings multiply the odds of that side at least 4-fold (a Bayes factor above 4:
    # "substantial", common practice, no source)
    assert (m / (1 - m)) / (prior_mass / (1 - prior_mass)) > 4.0, (mass, prior_mass)


def test_evidence_from_the_spectrum_equals_the_full_svd_at_every_point():
    # the learned prior weighs every (l, s, rho, s0) point from a thin SVD without V and
    # builds the full SVD only where the posterior has weight: the two must agree everywhere
    basis, prob, nominal = make()
    lp = learn_prior(prob, basis, nominal, 1e-4)
    for j in range(0, len(lp.combos), 5):
        z = lp.z[:: max(1, lp.z.size // 7)]
        alphas = lp.alphas_for(j, z)
        s2, beta = lp._S2[j], lp._Beta[j]
        fast = log_evidence_from_spectrum(s2, beta, alphas, prob.noise.logdet)
        np.testing.assert_allclose(fast, lp.problem_for(j).log_evidence(alphas), rtol=1e-9, atol=1e-8)


def test_evidence_spectrum_with_more_readings_than_modes():
    # n > K: the readings' part outside the design's span enters as one residual direction
    rng = np.random.default_rng(3)
    G, d = rng.standard_normal((12, 5)), rng.standard_normal(12)
    P = rng.uniform(0.5, 2.0, 5)
    pb = LinearGaussianProblem(G, d, 0.0, np.full(12, 0.3), P)
    s2, beta = evidence_spectrum(pb.noise.whiten(G), pb.y, P)
    alphas = np.geomspace(1e-3, 1e3, 7)
    np.testing.assert_allclose(log_evidence_from_spectrum(s2, beta, alphas, pb.noise.logdet),
                               pb.log_evidence(alphas), rtol=1e-12)


def test_merged_band_limits_stay_within_a_few_per_cent_of_the_sd():
    # pointwise bands over many points merge neighbouring amplitudes (BAND_COMPONENTS); the
    # exact mixture quantiles of all components are the reference
    basis, prob, nominal = make()
    lp = learn_prior(prob, basis, nominal, 1e-4)
    rng = np.random.default_rng(5)
    B = rng.standard_normal((200, prob.K)) * np.sqrt(1.0 / matern_precision(basis, A, 1.0))[None, :]
    _, sd, lo, hi = lp.band(B)
    w, mi, si = lp.band_components(B, None)
    assert w.size > hyperprior.BAND_COMPONENTS          # merging did happen
    from heatsight.inverse.strength_average import mixture_band
    lo_ref, hi_ref = mixture_band(w, mi, si)
    assert np.max(np.abs(lo - lo_ref) / sd) < 0.03
    assert np.max(np.abs(hi - hi_ref) / sd) < 0.03


# ------------------------------------------------------------------ the axisymmetric profile's dimension
def test_profile_dimension_sets_only_the_axisymmetric_exponent():
    # Whittle-Matern exponent nu + d/2 (the SPDE link between smoothness and the precision's
    # power, Lindgren, Rue & Lindstrom 2011, from memory): the axisymmetric modes of a profile
    # of its own (d0 = 1) have exponent nu + 1/2, the face's other modes nu + 1
    basis, prob, nominal = make()
    l, nu = 0.4 * A, 1.0
    s = hyperprior.matern_exponent(basis, nu)
    s0 = hyperprior.profile_order(basis, s, 1)
    assert s == pytest.approx(nu + 1.0) and s0 == pytest.approx(nu + 0.5)
    ev = basis.surface_eigenvalues()
    expect = np.where(hyperprior.axisymmetric_modes(basis), (1 + l**2 * ev) ** (nu + 0.5), (1 + l**2 * ev) ** (nu + 1))
    np.testing.assert_allclose(hyperprior.matern_weights(basis, l, s, 1.0, s0), expect, rtol=1e-13)
    np.testing.assert_allclose(hyperprior.matern_weights(basis, l, s, 1.0, s), (1 + l**2 * ev) ** s, rtol=1e-13)
    lp = learn_prior(prob, basis, nominal, 1e-4)
    assert lp.dimensions == hyperprior.PROFILE_DIMENSIONS
    assert set(lp.description()["axisymmetric_dimension_weights"]) == {"1", "2"}


def test_profile_dimension_is_averaged_with_equal_prior_odds():
    # p(d) of the family averaged over d0 in {1, 2} with prior 1/2 each equals the mean of the
    # two single-dimension families' p(d) (law of total probability), and the reported weights
    # are their posterior odds
    basis, prob, nominal = make(n=40, sigma=0.05, terms=10)
    both = learn_prior(prob, basis, nominal, 1e-4)
    one, two = (LearnedPrior(prob, basis, nominal, 1e-4, dimensions=(d,)) for d in (1, 2))
    expect = np.logaddexp(one.log_marginal, two.log_marginal) - math.log(2.0)
    # (each amplitude grid ends where its edges carry < 1e-9 of the peak: agreement to ~1e-9)
    assert both.log_marginal == pytest.approx(expect, abs=1e-7)
    w1 = both.description()["axisymmetric_dimension_weights"]["1"]
    assert w1 == pytest.approx(1.0 / (1.0 + math.exp(two.log_marginal - one.log_marginal)), abs=1e-7)


def _normalized_variances(basis, nominal, length, order, rho, axis_order):
    """rho_k^2 / w_k over the free modes, normalized: the family's prior variances at amplitude 1
    for one hyperparameter point (its own ratio rho and axisymmetric exponent s0)."""
    v = 1.0 / hyperprior.matern_weights(basis, length, order, rho, axis_order)[~nominal]
    return v / v.sum()


def test_longest_length_scale_is_the_smooth_limit_only_where_the_family_has_converged():
    # a point with s0 = s: rho_k^2 (1 + l^2 ev)^-s over its sum tends to rho_k^2 ev^-s over its
    # sum as l -> infinity, every term within (1 + 1 / SMOOTH_LIMIT)^s once l^2 ev_min >=
    # SMOOTH_LIMIT (hyperprior's note); with s0 = s - 1/2 (d0 = 1) the axisymmetric share keeps
    # growing with l, so such points are never at the limit
    basis, prob, nominal = make()
    lp = LearnedPrior(prob, basis, nominal, 1e-4)
    short = LearnedPrior(prob, basis, nominal, 1e-4, lengths=np.geomspace(0.05 * A, 0.6 * A, 5))
    assert lp.reaches_smooth_limit and not short.reaches_smooth_limit
    top = lp.lengths[-1]
    seen = set()
    for j, (length, s, rho, s0) in enumerate(lp.combos):
        if length != top:
            continue
        far = _normalized_variances(basis, nominal, 1e3 * top, s, rho, s0)
        dev = np.max(np.abs(_normalized_variances(basis, nominal, top, s, rho, s0) / far - 1))
        bound = (1.0 + 1.0 / hyperprior.SMOOTH_LIMIT) ** s - 1.0
        assert lp._at_limit[j] == math.isclose(s, s0)
        seen.add(bool(lp._at_limit[j]))
        if lp._at_limit[j]:
            assert dev <= bound
            # the short range's top is not there yet: the rule is not vacuous
            assert np.max(np.abs(_normalized_variances(basis, nominal, short.lengths[-1], s, rho, s0) / far - 1)) \
                > 10 * bound
        else:
            assert dev > 10 * bound
    assert seen == {True, False}


def test_weight_at_the_longest_length_warns_only_short_of_the_smooth_limit():
    basis, prob, nominal = make()
    for lengths, profile, warns in ((None, 2, False), (None, 1, True),
                                    (np.geomspace(0.05 * A, 0.6 * A, 5), 2, True)):
        lp = LearnedPrior(prob, basis, nominal, 1e-4, lengths=lengths)
        w = np.zeros_like(lp.weights).reshape(len(lp.ratios), len(lp.dimensions), -1, lp.lengths.size, lp.z.size)
        w[:, lp.dimensions.index(profile), :, -1, :] = 1.0       # every weight at the longest length
        lp.weights = (w / w.sum()).reshape(lp.weights.shape)
        text = " ".join(lp.warnings)
        assert ("longest" in text) == warns
        desc = lp.description()
        assert desc["smooth_limit_weight"] == pytest.approx(0.0 if warns else 1.0)
        if lengths is not None:   # the range the fit used, in mm
            assert f"{0.05 * A * 1e3:.3g}-{0.6 * A * 1e3:.3g} mm" in text


def test_learn_prior_widens_the_length_range_while_its_long_end_is_pressed(monkeypatch):
    """Two points of the grid's log step per widening, checked anew after each: pressed for k
    builds, then not, gives exactly k widenings; weight at the smooth limit alone does not
    widen; always pressed stops where the next top would pass MAX_LENGTH x D."""
    basis, prob, nominal = make()
    plain = hyperprior.learn_prior(prob, basis, nominal, 1e-4)
    D = hyperprior.face_size(basis)
    step = plain.lengths[-1] / plain.lengths[-2]
    for k in (0, 1, 2):
        builds = []

        def long_end(self, k=k, builds=builds):
            builds.append(self.lengths.size)
            return (1.0, 0.0) if len(builds) <= k else (0.0, 1.0)     # (short of the limit, at it)
        monkeypatch.setattr(LearnedPrior, "_long_end", long_end)
        lp = hyperprior.learn_prior(prob, basis, nominal, 1e-4)
        assert lp.lengths.size == plain.lengths.size + 2 * k
        assert (lp.widened_from is None) == (k == 0)
        if k:
            assert lp.widened_from == plain.length_range
            np.testing.assert_allclose(np.diff(np.log(lp.lengths)), math.log(step), rtol=1e-12)
            np.testing.assert_allclose(lp.lengths[:plain.lengths.size], plain.lengths, rtol=1e-12)
    monkeypatch.setattr(LearnedPrior, "_long_end", lambda self: (1.0, 0.0))
    wide = hyperprior.learn_prior(prob, basis, nominal, 1e-4)
    assert wide.lengths[-1] <= hyperprior.MAX_LENGTH * D < wide.lengths[-1] * step ** 2
    assert wide.description()["length_scale_hyperprior_m"][1] == pytest.approx(wide.lengths.max())
    assert wide.description()["length_scale_range_widened_from_m"] == pytest.approx(list(plain.length_range))
    # a prior given `like` takes its grid and its widening as they are
    same = hyperprior.learn_prior(prob, basis, nominal, 1e-4, like=wide)
    np.testing.assert_array_equal(same.lengths, wide.lengths)
    assert same.widened_from == wide.widened_from


def test_platen_pressing_the_longest_length_gets_a_wider_range():
    """The platen scenario (finite-element readings; its weight on d0 = 1 points at the longest
    length scale): the range is widened and the fit no longer warns about its long end."""
    import scenario_cases
    from heatsight import inverse

    scn = scenario_cases.make("platen_flux", seed=0, scale=0.5)
    res = inverse.fit(scn.case, scn.readings, **scn.fit_kwargs)
    prior = res.summary["prior"]
    D = 0.15
    assert prior["length_scale_range_widened_from_m"] == pytest.approx([D / 20, 4 * D])
    assert prior["length_scale_hyperprior_m"][1] > 4 * D
    assert not any("longest" in w for w in res.warnings)
