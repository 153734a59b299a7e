"""inverse.trend without files: the reference window of a settling record, waiting and
fallbacks, the no-steady message, the Bonferroni flag limit and the flag records, and the
model a reference window fixes (changes exactly zero at the reference)."""

import numpy as np
import pytest
from scipy.stats import norm

from heatsight.inverse import steady
from heatsight.inverse import trend
from heatsight.inverse.bands import Z95
from test_trend_batch import platen

WINDOW = 600.0
DT = 10.0


def settling_record(hours=4.0, tau=1800.0, amplitude=8.0, n=3, noise=0.0, seed=0):
    """Sensors approaching 400 K as amplitude exp(-t / tau) (a first-order warm-up)."""
    t = np.arange(0.0, hours * 3600.0, DT)
    rng = np.random.default_rng(seed)
    x = 400.0 - amplitude * np.exp(-t / tau)[:, None] * np.linspace(1.0, 0.5, n)[None, :]
    return t, x + rng.normal(0.0, noise, x.shape)


def test_bands_factor_is_the_normal_quantile():
    assert Z95 == pytest.approx(norm.ppf(0.975), rel=1e-15)       # scipy.stats.norm (reference library)
    lo, hi = trend.band95(np.array([10.0]), np.array([2.0]))
    assert hi[0] - lo[0] == pytest.approx(2 * 1.959963984540054 * 2.0, rel=1e-12)  # 97.5 % quantile (from memory)


def test_reference_is_the_first_settled_window():
    t, x = settling_record()
    stats, mask = steady.detect(t, x, WINDOW, drift_limit=0.5)
    i, notes = trend.choose_reference(stats, 0.5, final=True)
    # independent drift per window: |slope| x W of numpy.polyfit's least-squares line (reference library)
    drift = []
    for k in range(stats.size):
        sel = (t >= k * WINDOW) & (t < (k + 1) * WINDOW)
        drift.append(max(abs(np.polyfit(t[sel], x[sel, j], 1)[0]) * WINDOW for j in range(x.shape[1])))
    drift = np.array(drift)
    expected = int(np.flatnonzero(drift <= trend.REFERENCE_DRIFT_FRACTION * 0.5)[0])
    assert i == expected and notes == []
    assert mask[expected - 1] and drift[expected - 1] > 0.125      # steady before it, but still settling


def test_reference_waits_while_streaming_then_settles_for_less():
    t, x = settling_record(hours=1.0, amplitude=12.0)   # steady windows exist, none settled yet
    stats, mask = steady.detect(t, x, WINDOW, drift_limit=2.0)
    assert mask.any() and not (stats.max_drift()[mask] <= 0.5).any()
    assert trend.choose_reference(stats, 2.0, final=False, pending_rows=10) == (None, [])
    i, notes = trend.choose_reference(stats, 2.0, final=False, pending_rows=trend.MAX_PENDING_ROWS)
    assert i == int(np.flatnonzero(mask)[0]) and "may still be settling" in notes[0]
    i2, notes2 = trend.choose_reference(stats, 2.0, final=True)
    assert i2 == i and "in the log" in notes2[0]


def test_no_steady_window_names_the_steadiest_and_a_drift_that_accepts_it():
    t, x = settling_record(hours=1.0, amplitude=50.0)
    stats, mask = steady.detect(t, x, WINDOW, drift_limit=0.5)
    assert not mask.any()
    i, notes = trend.choose_reference(stats, 0.5, final=True, names=["A", "B", "C"])  # streaming fallback
    assert i == int(np.argmin(stats.max_drift())) and "steadiest window" in notes[0]
    err = trend.no_steady_window(stats, 0.5, WINDOW, ["A", "B", "C"])
    suggested = float(str(err).split("--drift ")[1].split(",")[0])
    assert suggested >= stats.max_drift().min() and "at sensor A" in str(err)
    assert trend.choose_reference(steady.WindowStats.empty(3, WINDOW), 0.5, final=False) == (None, [])
    with pytest.raises(trend.TrendError, match="the log has 0 rows; a trend needs at least 3 in one window"):
        trend.choose_reference(steady.WindowStats.empty(3, WINDOW), 0.5, final=True)


def test_flag_limit_is_bonferroni_and_rows_before_the_reference_are_not_flagged():
    flags = trend.ChangeFlags(["a", "b"], rows=51, family_level=0.02)
    assert flags.comparisons == 100
    assert flags.threshold == pytest.approx(norm.isf(0.02 / 200), rel=1e-12)  # scipy.stats.norm (reference library)
    start = np.array([0.0, 600.0, 1200.0, 1800.0])
    change = np.array([[9.0, 0.0], [0.0, 0.1], [9.0, -9.0], [9.0, 0.0]])
    sd = np.ones_like(change)
    flag = flags.update(start, start + 590.0, change, sd, reference_start=600.0)
    np.testing.assert_array_equal(flag, [[False, False], [False, False], [True, True], [True, False]])
    a, b = flags.zones["a"], flags.zones["b"]
    assert (a.flagged_rows, a.first_flagged_start_s, a.first_flagged_end_s) == (2, 1200.0, 1790.0)
    assert (b.flagged_rows, b.change_at_first_flag, b.largest_change_in_sd) == (1, -9.0, 9.0)
    assert [f.zone for f in flags.flagged()] == ["a", "b"]
    nothing = trend.ChangeFlags(["a"], rows=5)
    nothing.update(start, start, np.zeros((4, 1)), np.ones((4, 1)), 0.0)
    assert nothing.flagged() == []


def test_model_of_a_reference_window():
    from heatsight import inverse

    case, lay, t_nom, t_off, _ = platen()
    n = len(lay)
    rng = np.random.default_rng(3)
    t = np.arange(0.0, 4 * WINDOW, DT)
    lam = np.where(t >= 2 * WINDOW, 0.4, 0.0)
    x = t_nom[None, :] + lam[:, None] * (t_off - t_nom)[None, :] + rng.normal(0.0, 0.05, (t.size, n))
    stats, mask = steady.detect(t, x, WINDOW, drift_limit=0.5)
    sensors = trend.SensorSet(list(lay.index), lay["r"].to_numpy(), lay["theta"].to_numpy(), lay["z"].to_numpy(),
                              np.full(n, 0.5), np.zeros(n))
    # logs are inverted with the smooth model: the caller asks for it, as data_io's trend does
    model = trend.TrendModel.build(lambda rd, strength, **kw: inverse.fit(case, rd, strength=strength, model="smooth",
                                                                          **kw), stats, 0, sensors,
                                   lambda level: (np.full(n, 0.3), []), floor=0.05, zones=case.zones)
    assert model.ref_window == (0.0, WINDOW - DT) and model.used.all()
    assert model.strength_rule.endswith("of the reference window") and model.change_rule.startswith("each row")
    assert model.zone_names == [z.name for z in case.zones]
    means = np.where(stats.valid, stats.mean, np.nan)
    rv = stats.sigma(0.05) ** 2
    change, sd = model.changes_of(means, rv, reference_mask=np.arange(stats.size) == 0)
    assert np.all(change[0] == 0.0) and np.all(sd[0] == 0.0)
    weak = model.zone_names.index("outer 60-180")
    assert abs(change[1, weak]) < 4 * sd[1, weak]                  # nothing changed yet
    assert change[3, weak] < -10 * sd[3, weak]                     # the weakened sector
    assert change[3, weak] == min(change[3])
    with pytest.raises(trend.TrendError, match="only 0 sensor"):
        empty = steady.detect(t, np.full_like(x, np.nan), WINDOW)[0]
        trend.TrendModel.build(None, empty, 0, sensors, lambda level: (np.zeros(n), []), floor=0.05)


def test_the_joint_strength_fit_runs_on_a_token_grid():
    """With the strength from all steady windows the reference window is fitted twice: as
    `fit` would (the case's rule; the answer shown, on the display grid, 41 x 72 points by
    default), then at the joint strength for the trend's solver, whose map nobody sees (on
    trend.PROBE_GRID)."""
    from heatsight import inverse

    case, lay, t_nom, _, _ = platen()
    n = len(lay)
    rng = np.random.default_rng(4)
    t = np.arange(0.0, 3 * WINDOW, DT)
    x = t_nom[None, :] + rng.normal(0.0, 0.05, (t.size, n))
    stats, mask = steady.detect(t, x, WINDOW, drift_limit=0.5)
    sensors = trend.SensorSet(list(lay.index), lay["r"].to_numpy(), lay["theta"].to_numpy(), lay["z"].to_numpy(),
                              np.full(n, 0.5), np.zeros(n))
    calls = []

    def fit(rd, strength, **kw):
        calls.append((strength, kw))
        return inverse.fit(case, rd, strength=strength, model="smooth", **kw)

    model = trend.TrendModel.build(fit, stats, 0, sensors, lambda level: (np.full(n, 0.3), []), floor=0.05,
                                   zones=case.zones, steady=np.flatnonzero(mask))
    assert [kw for _, kw in calls] == [{}, {"grid": trend.PROBE_GRID}]
    assert calls[0][0] is None and calls[1][0] is not None
    assert len(model.result.grid) == 41 * 72 and model.strength_rule.startswith("joint evidence")
