"""Left-out modes marginalized into the noise (inverse.truncation).

The tail covariance is checked against its definition computed another way: the
prior-predictive covariance of the readings under an enlarged basis minus that under the
fit's basis, at one set of hyperparameters (the eigenfunctions of the two bases agree, so
the difference is exactly the left-out modes' share).  The physics behind the decay check is
the textbook one: a face mode of wavenumber kappa decays as exp(-kappa z) into the part.
"""

import numpy as np
import pytest

import heatsight.forward as fw
from heatsight.inverse import SensorReadings
from heatsight.inverse.design import Design
from heatsight.inverse.hyperprior import matern_precision
from heatsight.inverse.truncation import TAIL_DECAY, enlarged_size, left_out, nearest_distance, tail_covariance

A, L, K = 0.08, 0.03, 20.0


class OneComponent:
    """A stand-in for LearnedPrior with a single (l, s, alpha) component."""

    def __init__(self, length, order, alpha):
        self.h = [((length, order, 1.0, order), np.array([alpha]), np.array([1.0]))]

    def hyperparameters(self):
        return self.h


def design_and_readings(depths):
    cyl = fw.Cylinder(A, L, K)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(50.0, 300.0), "side": fw.Insulated()}
    design = Design(cyl, faces, 1e-8, 2, 4)
    n = len(depths)
    r = np.linspace(0.01, 0.06, n)
    th = np.linspace(0.3, 5.0, n)
    rd = SensorReadings([f"s{i}" for i in range(n)], r, th, np.asarray(depths, float), np.full(n, 300.0),
                        np.full(n, 0.1), np.zeros(n), np.zeros(n))
    return design, rd


def wall_design_and_readings(depths):
    """An unknown wall between a temperature base and a convective top (its axial modes carry
    net heat; on an end face beside an insulated rim only the uniform mode does), sensors at
    `depths` [m] from the wall."""
    cyl = fw.Cylinder(A, L, K)
    faces = {"side": fw.UnknownTemperature(), "bottom": fw.Temperature(300.0), "top": fw.Convection(50.0, 300.0)}
    design = Design(cyl, faces, 1e-8, 2, 4)
    n = len(depths)
    r, th = A - np.asarray(depths, float), np.linspace(0.3, 5.0, n)
    z = np.linspace(0.004, 0.026, n)
    rd = SensorReadings([f"s{i}" for i in range(n)], r, th, z, np.full(n, 300.0), np.full(n, 0.1),
                        np.zeros(n), np.zeros(n))
    return design, rd


def test_tail_equals_difference_of_prior_predictive_covariances():
    design, rd = design_and_readings([0.004, 0.006, 0.01, 0.015])
    length, order, alpha = 0.01, 1.5, 2e-7
    S = tail_covariance(design, rd, OneComponent(length, order, alpha))
    big = design.model.basis(*enlarged_size(design, nearest_distance(design, rd.r, rd.z), TAIL_DECAY))
    ne = big.n_eigen
    Gb = big.fields(rd.r, rd.theta, rd.z)[0][:, :ne]
    Pb = matern_precision(big, length, order)[:ne]
    keep = ~left_out(design, big)
    full = (Gb / (alpha * Pb)) @ Gb.T
    kept = (Gb[:, keep] / (alpha * Pb[keep])) @ Gb[:, keep].T
    np.testing.assert_allclose(S, full - kept, rtol=1e-9, atol=1e-12 * np.abs(full).max())
    # the kept modes of the enlarged basis are the fit's own columns (same fields at the sensors)
    G = design.basis.fields(rd.r, rd.theta, rd.z)[0][:, :design.basis.n_eigen]
    assert keep.sum() == G.shape[1]
    assert np.all(np.linalg.eigvalsh(S) >= -1e-12 * np.abs(S).max())


def test_tail_fades_with_depth():
    # every left-out mode decays into the part (exp(-kappa z) away from the far face), so at one
    # (r, theta) the tail's variance falls as the sensor moves away from the face
    design, rd = design_and_readings([0.002, 0.005, 0.01, 0.02])
    rd.r[:], rd.theta[:] = 0.05, 1.0
    v = np.diag(tail_covariance(design, rd, OneComponent(0.005, 1.0, 1e-7)))
    assert v[0] > 0 and np.all(np.diff(v) < 0)
    assert v[-1] < 0.5 * v[0]


def test_enlarged_size_grows_as_the_sensor_nears_the_face():
    design, _ = design_and_readings([0.01])
    near, far = enlarged_size(design, 0.002, TAIL_DECAY), enlarged_size(design, 0.02, TAIL_DECAY)
    assert near[0] >= far[0] and near[1] > far[1]
    assert far[1] >= design.terms and far[0] >= design.harmonics


def test_tail_power_equals_the_enlarged_models_posterior():
    """The total power of a temperature face with the left-out modes' share (the fit's route,
    marginal_sets.MarginalSets.shares: p . c + h . (d - G c) plus its variance, c from the
    fit's basis with the tail in the noise) against the exact Gaussian posterior of the power
    under the enlarged basis (the textbook conditional of a jointly Gaussian model), at one
    set of hyperparameters."""
    from heatsight.inverse.marginal_sets import MarginalSets
    from heatsight.inverse.truncation import left_out_columns
    design, rd = wall_design_and_readings([0.003, 0.004, 0.006, 0.008, 0.01, 0.015])
    n, r, th, z = rd.n, rd.r, rd.theta, rd.z
    length, order, alpha = 0.01, 1.0, 1e-3
    prior = OneComponent(length, order, alpha)
    big = design.model.basis(*enlarged_size(design, nearest_distance(design, rd.r, rd.z), TAIL_DECAY))
    ne = big.n_eigen
    Gb = big.fields(r, th, z)[0][:, :ne]
    Pb = alpha * matern_precision(big, length, order)[:ne]
    pb = big.powers()[:ne]
    keep = ~left_out(design, big)
    S0 = np.diag(np.full(n, 0.1 ** 2))
    y = np.random.default_rng(2).normal(0.0, 2.0, n)              # any residual will do
    # exact: posterior of pb . c_big given y, prior N(0, diag(1 / Pb)), noise S0
    Cb = np.linalg.inv(Gb.T @ np.linalg.solve(S0, Gb) + np.diag(Pb))
    mb = Cb @ Gb.T @ np.linalg.solve(S0, y)
    exact_mean, exact_var = pb @ mb, pb @ Cb @ pb
    # the fit's route: kept columns, the tail in the noise, then the tail's share of the power
    G, P, p = Gb[:, keep], Pb[keep], pb[keep]
    S = S0 + tail_covariance(design, rd, prior)
    C = np.linalg.inv(G.T @ np.linalg.solve(S, G) + np.diag(P))
    m = C @ G.T @ np.linalg.solve(S, y)
    h, extra = MarginalSets(left_out_columns(design, rd), prior, None, rd, S, G).shares()["total_power"]
    f = p - G.T @ h
    # the tail's share matters here: without it the power is off by 2 % and its variance by more
    assert abs(p @ m - exact_mean) > 1e-2 * abs(exact_mean)
    assert abs(p @ C @ p - exact_var) > 1e-2 * exact_var
    # round-off: the prior variance is ~1e5 times the readings' (both routes invert it)
    assert f @ m + h @ y == pytest.approx(exact_mean, rel=1e-8, abs=1e-8 * np.sqrt(exact_var))
    assert f @ C @ f + extra == pytest.approx(exact_var, rel=1e-8)


def test_tail_power_is_zero_on_a_flux_face():
    design, rd = design_and_readings([0.004, 0.006, 0.01, 0.015])
    from heatsight.inverse.marginal_sets import MarginalSets
    from heatsight.inverse.truncation import left_out_columns
    sets = MarginalSets(left_out_columns(design, rd), OneComponent(0.01, 1.5, 2e-7), None, rd, np.eye(rd.n),
                        np.zeros((rd.n, 0)))
    h, extra = sets.shares()["total_power"]
    # a non-uniform flux mode carries no net heat: round-off only (W per K of residual, W^2)
    assert np.abs(h).max() < 1e-10 and extra < 1e-20


def test_zone_tails_equal_the_enlarged_models_posterior():
    """A zone mean and the face mean with the left-out modes' share (functional_tails: f . c +
    h . (d - G c) plus its variance) against the exact Gaussian posterior of the same averages
    under the enlarged basis (the conditional of a jointly Gaussian model), at one set of
    hyperparameters; the averages' weights from the fit's own quadrature rule."""
    from heatsight.inverse import Zone
    from heatsight.inverse.functionals import functional_matrix
    from heatsight.inverse.truncation import LeftOutColumns, _tail_variances, functional_tails, left_out_columns
    design, rd = wall_design_and_readings([0.002, 0.003, 0.004, 0.006, 0.01, 0.015])
    n, r, th, z = rd.n, rd.r, rd.theta, rd.z
    length, order, alpha = 0.01, 2.0, 1e-3
    prior = OneComponent(length, order, alpha)
    zones = [Zone("band", "side", (0.5, 2.5), z=(0.01, 0.02))]
    big = design.model.basis(*enlarged_size(design, nearest_distance(design, rd.r, rd.z), TAIL_DECAY))
    ne = big.n_eigen
    out = left_out(design, big)
    every = np.ones(ne, dtype=bool)
    names, Fb, _ = functional_matrix(LeftOutColumns(design, big, every), zones)
    Gb = big.fields(r, th, z)[0][:, :ne]
    Pb = alpha * matern_precision(big, length, order)[:ne]
    S0 = np.diag(np.full(n, 0.1 ** 2))
    y = np.random.default_rng(4).normal(0.0, 2.0, n)
    Cb = np.linalg.inv(Gb.T @ np.linalg.solve(S0, Gb) + np.diag(Pb))
    mb = Cb @ Gb.T @ np.linalg.solve(S0, y)
    keep = ~out
    G, P = Gb[:, keep], Pb[keep]
    S = S0 + (Gb[:, out] / Pb[out]) @ Gb[:, out].T          # the same left-out modes in the noise
    np.testing.assert_allclose(_tail_variances(big, out, prior), 1.0 / Pb[out], rtol=1e-12)
    C = np.linalg.inv(G.T @ np.linalg.solve(S, G) + np.diag(P))
    m = C @ G.T @ np.linalg.solve(S, y)
    left = left_out_columns(design, rd)
    assert np.array_equal(left.mask, out)
    tail_names, F_t, _ = functional_matrix(left, zones)
    assert tail_names == names
    means = [names.index("mean"), names.index("band")]
    rows = dict(zip(["mean", "band"], functional_tails(left, F_t[means], rd, prior, S)))
    for name in rows:
        fb = Fb[names.index(name)]
        h, extra = rows[name]
        f = fb[keep] - G.T @ h
        exact_mean, exact_var = fb @ mb, fb @ Cb @ fb
        if name == "band":      # the zone's own share: without it its variance is 1.9 % short
            assert abs(fb[keep] @ C @ fb[keep] - exact_var) > 1e-2 * exact_var
        assert f @ m + h @ y == pytest.approx(exact_mean, rel=1e-8, abs=1e-8 * np.sqrt(exact_var))
        assert f @ C @ f + extra == pytest.approx(exact_var, rel=1e-7)
        assert extra > 0
