"""Steady windows (inverse.steady) on synthetic logs with known first-order transients.

A first-order sensor after a heater step reads T(t) = T0 + A (1 - exp(-t / tau)): its rate
A / tau exp(-t / tau) is known, so the windows that must and must not count as steady are
known in advance.  The least-squares slope of a monotone convex curve over a window lies
between its rates at the window's ends, which gives exact bounds (margins cover the noise).
"""

import numpy as np
import pytest

from heatsight.inverse import steady
from heatsight.inverse.errors import InverseError

W, D = 600.0, 0.5                    # the defaults: 10 min windows, 0.5 K of drift


def _record(seed=0, dt=10.0, hours=6.0, noise=0.05):
    """Four sensors, heater steps at t = 0 and t = 3 h (amplitudes and time constants per sensor)."""
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, hours * 3600.0, dt)
    amp1 = np.array([40.0, 30.0, 20.0, 35.0])
    amp2 = np.array([-15.0, -10.0, -12.0, -8.0])
    tau = np.array([900.0, 1200.0, 600.0, 1500.0])
    step2 = 3 * 3600.0
    T = 300.0 + amp1 * (1 - np.exp(-t[:, None] / tau))
    late = t >= step2
    T[late] += amp2 * (1 - np.exp(-(t[late, None] - step2) / tau))
    rate = amp1 / tau * np.exp(-t[:, None] / tau)
    rate[late] += amp2 / tau * np.exp(-(t[late, None] - step2) / tau)
    return t, T + rng.normal(0.0, noise, T.shape), np.abs(rate), step2


def test_detects_the_known_steady_intervals():
    t, X, rate, step2 = _record()
    stats, mask = steady.detect(t, X, W, D)
    assert stats.size == 36 and stats.complete.all()
    for k in range(stats.size):
        inside = (t >= k * W) & (t < (k + 1) * W)
        r = rate[inside]
        crosses_step = k * W < step2 < (k + 1) * W
        if crosses_step or np.any(r.min(axis=0) * W > 1.25 * D):
            assert not mask[k], f"window {k} drifts but was called steady"
        elif np.all(r.max(axis=0) * W < 0.8 * D):
            assert mask[k], f"window {k} is steady but was not detected"
    # the late part of each half is found steady, the heating transients are not
    assert mask[10:18].all() and mask[28:].all()
    assert not mask[:3].any() and not mask[18:20].any()


def test_drift_matches_the_slope_of_a_ramp():
    t = np.arange(0.0, 3600.0, 5.0)
    X = np.column_stack([300 + 0.001 * t, 310 - 0.0005 * t, np.full(t.size, 305.0)])
    stats, mask = steady.detect(t, X, W, D)
    np.testing.assert_allclose(stats.drift, np.tile([0.6, 0.3, 0.0], (6, 1)), atol=1e-9)
    assert not mask.any()                                   # the first sensor drifts 0.6 K > 0.5 K
    assert steady.detect(t, X, W, 0.7)[1].all()
    np.testing.assert_allclose(stats.mean[:, 2], 305.0)
    np.testing.assert_allclose(stats.mean[0, 0], 300 + 0.001 * np.mean(t[t < W]))


def test_scatter_autocorrelation_and_sigma_of_the_mean():
    """AR(1) noise e_i = rho e_{i-1} + z_i: the window means scatter by about the predicted
    sigma (without a floor), n_eff = n (1 - rho) / (1 + rho) (AR(1) variance of a mean, from
    memory of the textbook large-n formula)."""
    rng = np.random.default_rng(1)
    n_win, per, rho, s = 400, 120, 0.6, 0.2
    z = rng.normal(0.0, s * np.sqrt(1 - rho ** 2), (n_win * per, 1))
    e = np.empty_like(z)
    e[0] = rng.normal(0.0, s)
    for i in range(1, e.shape[0]):
        e[i] = rho * e[i - 1] + z[i]
    t = np.arange(e.shape[0]) * (W / per)
    stats, mask = steady.detect(t, 350.0 + e, W, D)
    assert mask.all()
    assert np.median(stats.scatter) == pytest.approx(s, rel=0.05)
    assert np.median(stats.rho) == pytest.approx(rho, abs=0.05)
    assert np.median(stats.n_eff) == pytest.approx(per * (1 - rho) / (1 + rho), rel=0.15)
    predicted = np.sqrt(np.mean(stats.sigma(floor=0.0) ** 2))
    # the AR(1) mean of 120 samples varies a little more than the large-n formula says
    assert np.std(stats.mean[:, 0]) == pytest.approx(predicted, rel=0.2)
    np.testing.assert_allclose(stats.sigma(0.05) ** 2, stats.sigma(0.0) ** 2 + 0.05 ** 2)


def test_missing_readings_and_gaps():
    t = np.arange(0.0, 3 * W, 10.0)
    X = np.full((t.size, 3), 320.0) + np.random.default_rng(2).normal(0, 0.01, (t.size, 3))
    X[:40, 1] = np.nan                      # sensor 1 has 20 of the first window's 60 samples
    X[(t > W + 100) & (t < 2 * W), :] = np.nan   # a logger gap: the second window spans only 100 s
    keep = np.isfinite(X).any(axis=1)
    stats, mask = steady.detect(t[keep], X[keep], W, D, origin=0.0)
    assert stats.size == 3
    assert not stats.valid[0, 1] and stats.valid[0, [0, 2]].all()
    assert mask[0]                          # steady on the sensors that count
    assert not stats.complete[1] and not mask[1]
    assert mask[2]
    assert np.isnan(stats.sigma()[0, 1])


def test_window_index_and_errors():
    np.testing.assert_array_equal(steady.window_index([0, 599.9, 600, 1250], 0.0, 600.0), [0, 0, 1, 2])
    with pytest.raises(InverseError):
        steady.window_index([0.0], 0.0, 0.0)
    stats, _ = steady.detect(np.arange(10.0), np.ones((10, 1)), 5.0, 0.1)
    with pytest.raises(InverseError, match="drift threshold"):
        stats.steady(-1.0)
    with pytest.raises(InverseError, match="must not decrease"):
        steady.summarize(np.arange(3.0), np.ones((3, 1)), np.array([1, 0, 0]), 1.0)
