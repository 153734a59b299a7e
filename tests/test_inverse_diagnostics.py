"""Sensor health table and outlier screening."""

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

from heatsight.inverse.diagnostics import COLUMNS, averaged_loo, default_threshold, screen_outliers, sensor_table
from heatsight.inverse.strength import choose_strength
from heatsight.inverse.linear_gaussian import LinearGaussianProblem

ALPHA_TRUE = 0.01


def layout(n, K, seed):
    rng = np.random.default_rng(seed)
    x, z = rng.uniform(0, 1, n), rng.uniform(0.05, 0.5, n)
    k = np.arange(K)
    G = np.cos(np.pi * k * x[:, None]) * np.exp(-np.pi * k * z[:, None])
    return rng, G, 1.0 + (np.pi * k) ** 2


def readings(rng, G, p, sigma):
    c = rng.normal(size=G.shape[1]) / np.sqrt(ALPHA_TRUE * p)   # truth from the prior
    return 20.0 + G @ c + sigma * rng.normal(size=G.shape[0])


def test_threshold_values():
    assert default_threshold(20) == pytest.approx(3.2905, abs=1e-4)    # z at 0.9995, standard normal table (from memory)
    assert default_threshold(20, 0.05) == pytest.approx(3.0233, abs=1e-4)  # z at 0.99875, standard normal table (from memory)
    assert default_threshold(64) > default_threshold(16)


# seed 31: the faulty sensor sits near the face; with it in, the evidence picks an alpha
# ~4000x smaller, the fit bends to it and its own LOO error at that alpha is only 2.7 sd
@pytest.mark.parametrize("seed,bad,sigma", [(31, 7, 0.5), (32, 0, 0.5), (33, 13, 1.0)])
def test_outlier_is_set_aside_and_named(seed, bad, sigma):
    n = 20
    rng, G, p = layout(n, 10, seed)
    d = readings(rng, G, p, sigma)
    d[bad] += 8.0                                                  # +8 K: a faulty thermocouple
    names = [f"TC{i:02d}" for i in range(n)]
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, sigma**2), p)
    out = screen_outliers(prob, names=names)
    assert [s.sensor for s in out.set_aside] == [names[bad]]
    assert out.set_aside[0].index == bad and out.set_aside[0].score > out.set_aside[0].threshold
    assert "Bonferroni" in out.set_aside[0].reason
    assert not out.kept[bad] and out.kept.sum() == n - 1 and out.problem.n == n - 1
    row = out.table.iloc[bad]
    assert row["sensor"] == names[bad] and row["flag"] == "set aside"
    assert row["standardized_loo"] > 4 and abs(row["measured"] - row["loo_predicted"] - 8.0) < 4 * row["loo_sd"]
    assert list(out.table.columns) == list(COLUMNS[:-1]) + ["score", "fault_probability", "flag"] and (out.table["flag"] == "ok").sum() == n - 1


@pytest.mark.parametrize("n,K", [(16, 8), (32, 12), (64, 30)])
def test_healthy_sensors_rarely_set_aside(n, K):
    rng, G, p = layout(n, K, 40 + n)
    prob = LinearGaussianProblem(G, np.zeros(n), 20.0, np.full(n, 0.25), p)
    R = 300
    with threadpool_limits(limits=1, user_api="blas"):   # many tiny products: avoid BLAS thread hand-off
        clean = sum(not screen_outliers(prob.with_data(readings(rng, G, p, 0.5))).set_aside for _ in range(R))
    # requirement: none set aside in >= 95 % of healthy replicates (Bonferroni bound gives >= 98 %)
    assert clean / R >= 0.95


def test_sensor_table_matches_problem():
    n = 12
    rng, G, p = layout(n, 6, 50)
    d = readings(rng, G, p, 0.5)
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    t = sensor_table(prob, 0.02)
    np.testing.assert_allclose(t["residual"], d - prob.fitted(0.02))
    np.testing.assert_allclose(t["standardized"], (d - prob.fitted(0.02)) / 0.5)
    np.testing.assert_allclose(t["measured"] - t["loo_predicted"], prob.loo_residuals(0.02))
    np.testing.assert_allclose(t["standardized_loo"], (t["measured"] - t["loo_predicted"]) / t["loo_sd"])
    assert list(t["sensor"]) == [f"s{i}" for i in range(n)]
    tight = sensor_table(prob, 0.02, threshold=0.0)
    assert (tight["flag"] == "suspect").all()


def test_screening_table_shows_the_prediction_its_score_judges():
    """The kept sensors' prediction from the others and its sd in the screening's table are
    the alpha-averaged predictive mixture's mean and sd (averaged_loo), the check behind the
    score, not one alpha's (the report shows them beside the score); the score is that
    mixture's probability-integral transform, so for a sensor within the mixture's bulk it is
    close to (reading - mean) / sd."""
    n = 20
    rng, G, p = layout(n, 10, 31)
    d = readings(rng, G, p, 0.5)
    d[7] += 8.0
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    out = screen_outliers(prob)
    idx = np.flatnonzero(out.kept)
    check = averaged_loo(out.problem)
    t = out.table.iloc[idx]
    np.testing.assert_allclose(t["loo_predicted"], check.predicted, rtol=1e-12)
    np.testing.assert_allclose(t["loo_sd"], check.sd, rtol=1e-12)
    np.testing.assert_allclose(t["standardized_loo"], (t["measured"] - t["loo_predicted"]) / t["loo_sd"])
    np.testing.assert_allclose(t["score"], check.z, rtol=1e-12)
    bulk = np.abs(check.z) < 2.0
    assert np.max(np.abs(t["standardized_loo"].to_numpy()[bulk] - check.z[bulk])) < 0.3
    # the set-aside sensor keeps its held-out prediction from the final fit
    assert out.table.iloc[7]["flag"] == "set aside"


def test_cap_on_set_aside_sensors_warns():
    n = 16
    rng, G, p = layout(n, 8, 60)
    d = readings(rng, G, p, 0.5)
    d[[2, 9, 11]] += [10.0, -12.0, 9.0]
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    full = screen_outliers(prob)
    assert sorted(s.index for s in full.set_aside) == [2, 9, 11]
    capped = screen_outliers(prob, max_set_aside=1)
    assert len(capped.set_aside) == 1
    assert "is kept: 1 already are, the most this screening sets aside of 16 sensors" in capped.warnings[-1]
    # three sensors, one far off: setting it aside would leave two
    few = screen_outliers(prob.subset(np.array([0, 1, 2])), threshold=0.5)
    assert not few.set_aside and "would leave fewer than 3 sensors in the fit" in few.warnings[-1]
    assert (capped.table["flag"] == "suspect").sum() >= 1


def test_averaged_loo_ingredients():
    n = 12
    rng, G, p = layout(n, 6, 70)
    d = readings(rng, G, p, 0.5)
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    a = np.array([0.003, 0.05])
    lw = prob.log_evidence_without(a)
    for i in (0, 5):   # brute force: evidence of the problem with reading i deleted
        np.testing.assert_allclose(lw[:, i], prob.subset(np.arange(n) != i).log_evidence(a), rtol=1e-10)
    one = averaged_loo(prob, np.geomspace(0.05, 0.05 * (1 + 1e-9), 3))
    np.testing.assert_allclose(one.z, prob.standardized_loo(0.05), rtol=1e-6, atol=1e-9)
    np.testing.assert_allclose(one.predicted, prob.loo_predicted(0.05), rtol=1e-9)


def test_fixed_strength_screening_uses_that_alpha():
    n = 20
    rng, G, p = layout(n, 10, 32)
    d = readings(rng, G, p, 0.5)
    d[0] += 8.0
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    out = screen_outliers(prob, strength=0.01)
    assert [s.index for s in out.set_aside] == [0]
    assert out.strength.method == "fixed" and out.strength.alpha == 0.01
    assert out.set_aside[0].score == pytest.approx(prob.standardized_loo(0.01)[0])
    ev = screen_outliers(prob)
    assert ev.strength.alpha == pytest.approx(choose_strength(prob.subset(np.arange(n) != 0)).alpha)


def test_caught_offset_is_the_smallest_offset_the_check_flags():
    """At one alpha: a reading sitting at its prediction from the others is flagged once a
    fixed offset exceeds caught_offset = threshold x loo_sd, and not below it (the prediction
    from the others does not depend on the reading itself). The loo_sd against the
    conditional sd of a Gaussian, 1 / sqrt((Sigma^-1)_ii) with Sigma = S + G (alpha P)^-1 G^T
    (the leave-one-out predictive variance, e.g. Rasmussen & Williams, Gaussian Processes for
    Machine Learning, sec. 5.4.2, from memory; computed here with numpy)."""
    n, alpha = 20, 0.05
    rng, G, p = layout(n, 10, 5)
    d = readings(rng, G, p, 0.5)
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    Sigma = 0.25 * np.eye(n) + G @ np.diag(1.0 / (alpha * p)) @ G.T
    t = default_threshold(n)
    table = sensor_table(prob, alpha)
    assert np.allclose(table["caught_offset"], t / np.sqrt(np.diag(np.linalg.inv(Sigma))), rtol=1e-9)
    for i in (0, 7, 13):
        at_prediction = d.copy()
        at_prediction[i] = table["loo_predicted"][i]
        for factor, flag in ((1.01, "suspect"), (0.99, "ok"), (-1.01, "suspect")):
            shifted = at_prediction.copy()
            shifted[i] += factor * table["caught_offset"][i]
            assert sensor_table(prob.with_data(shifted), alpha)["flag"][i] == flag


def test_sensors_the_others_cannot_check_are_named_once():
    import pandas as pd

    from heatsight.inverse.diagnostics import UNCHECKED_OFFSET_K, unchecked_warnings

    table = pd.DataFrame({"sensor": ["A", "B", "C", "D"], "caught_offset": [2.0, 14.0, 31.0, 50.0],
                          "flag": ["ok", "ok", "suspect", "set aside"]})
    (w,) = unchecked_warnings(table)
    assert w.startswith("2 of 3 sensors (B, C) are checked by the others only for large faults") and "14-31 K" in w
    assert unchecked_warnings(table.assign(caught_offset=[UNCHECKED_OFFSET_K] * 4)) == []
    (w,) = unchecked_warnings(table.assign(caught_offset=[12.0] * 4))
    assert w.startswith("Every sensor is checked by the others only for large faults") and "beyond 12 K" in w
    (w,) = unchecked_warnings(table.assign(caught_offset=[2.0, 2.0, 152.4, 50.0]))
    assert w.startswith("Sensor C is checked") and "beyond 152 K" in w and "near it " in w
    (w,) = unchecked_warnings(table.assign(caught_offset=[2.0, 2.0, 4.86e150, 50.0]))   # a sigma of 1e9 K
    assert "beyond 4.9e+150 K" in w and len(w) < 400


def test_caught_offset_of_the_averaged_check_is_where_the_score_crosses_the_threshold():
    """The screening's check is averaged over alpha (heavier tails than one Gaussian): the
    caught offset is half the distance between the two readings whose score is -t and +t,
    found here by scipy's brentq on the score itself; a set-aside sensor has none."""
    from scipy.optimize import brentq

    n = 20
    rng, G, p = layout(n, 10, 31)
    d = readings(rng, G, p, 0.5)
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    t = default_threshold(n)
    sc = averaged_loo(prob)
    caught = sc.caught_offset(t)
    for i in (0, 13):
        def score(x):
            e = d.copy()
            e[i] = x
            return averaged_loo(prob.with_data(e)).z[i]
        m, wide = sc.predicted[i], 50 * sc.sd[i]
        hi = brentq(lambda x: score(x) - t, m, m + wide, xtol=1e-10)
        lo = brentq(lambda x: score(x) + t, m - wide, m, xtol=1e-10)
        assert caught[i] == pytest.approx(0.5 * (hi - lo), rel=1e-6)
        assert caught[i] > t * sc.sd[i] * 0.99            # the mixture's tails: not below t sd
    bad = d.copy()
    bad[7] += 8.0
    out = screen_outliers(prob.with_data(bad))
    assert out.table["flag"][7] == "set aside" and np.isnan(out.table["caught_offset"][7])
    kept = out.problem
    np.testing.assert_allclose(out.table["caught_offset"].drop(index=7).to_numpy(),
                               averaged_loo(kept).caught_offset(default_threshold(kept.n)), rtol=1e-12)

