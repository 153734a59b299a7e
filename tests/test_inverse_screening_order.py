"""Screening order and model-first screening.

Readings of the fit-level tests come from the scikit-fem platen of tests/test_fit_sensors.py
(independent of the fitted series); the screen_outliers tests use a small synthetic model.
"""

import numpy as np
import pytest
from scipy.stats import norm
from threadpoolctl import threadpool_limits

from heatsight import inverse
from heatsight.inverse.diagnostics import model_suspect, screen_outliers
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.robust import MAD_TO_SD, gross_faults, nominal_level, robust_level
from test_fit_sensors import NAMES, case, clean, fem, readings  # noqa: F401  (fixtures)
from test_inverse_diagnostics import layout
from test_inverse_diagnostics import readings as synthetic_readings


def test_mad_constant():
    assert MAD_TO_SD == pytest.approx(1.0 / norm.ppf(0.75), rel=1e-4)  # scipy.stats.norm reference


def test_robust_level_ignores_a_wild_reading():
    rng = np.random.default_rng(0)
    g = rng.uniform(0.5, 1.5, 15)
    r = 40.0 * g + 0.2 * rng.standard_normal(15)
    var = np.full(15, 0.04)
    clean_level = nominal_level(r, g, var)
    r[4] = 9.9e37
    assert robust_level(r, g, var) == pytest.approx(clean_level, abs=0.2)
    faults = gross_faults(r, g, var, [f"s{i}" for i in range(15)])
    assert [f.index for f in faults] == [4] and "gross fault" in faults[0].reason
    keep = np.ones(15, dtype=bool)
    keep[4] = False
    assert nominal_level(r, g, var, keep) == pytest.approx(clean_level, abs=0.2)
    # a full covariance gives the same GLS level as its diagonal when it is diagonal
    assert nominal_level(r, g, np.diag(var), keep) == pytest.approx(nominal_level(r, g, var, keep), rel=1e-12)


def test_a_group_far_out_is_a_feature_unless_no_thermocouple_reads_it():
    """Six of eighteen readings 20 K above the rest with 0.1 K sigma (a heated sector of a thin
    wall: 200 sds) were set aside as gross faults; several that far out together go to the
    leave-one-out screening unless their temperatures are impossible (robust.PLAUSIBLE_K)."""
    g = np.ones(18)
    r = np.r_[np.full(6, 20.0), np.zeros(12)] + 0.1 * np.random.default_rng(1).standard_normal(18)
    var = np.full(18, 0.01)
    names = [f"T{i:02d}" for i in range(18)]
    T = 423.15 + r
    assert gross_faults(r, g, var, names, T) == []
    assert len(gross_faults(r, g, var, names)) == 6          # without temperatures: as before
    r2, T2 = r.copy(), T.copy()
    r2[:3] = T2[:3] = 9.9e37                                   # three overflow codes: still out
    assert sorted(f.index for f in gross_faults(r2, g, var, names, T2)) == [0, 1, 2]
    r3, T3 = r.copy(), T.copy()
    r3[7] += 500.0
    T3[7] += 500.0                                             # one wild reading alone: out
    assert 7 in [f.index for f in gross_faults(r3, g, var, names, T3)]
    quiet = 0.1 * np.random.default_rng(2).standard_normal(18)
    for stuck in (1645.0, 298.15):       # three channels at a logger's full scale, or open at the room
        r4, T4 = quiet.copy(), 423.15 + quiet
        T4[6:9] = stuck
        r4[6:9] = stuck - 423.15
        assert sorted(f.index for f in gross_faults(r4, g, var, names, T4)) == [6, 7, 8], stuck
    r5, T5 = r.copy(), T.copy()
    T5[:6] += 1200.0                      # a group 1200 K above the rest: no feature of a part
    r5[:6] += 1200.0
    assert len(gross_faults(r5, g, var, names, T5)) == 6


@pytest.mark.parametrize("bad", [9.9e37, 1e9, 999999.0])
def test_extreme_reading_does_not_move_the_answer(clean, bad):  # noqa: F811
    with threadpool_limits(1):
        ref = inverse.fit(case(), readings(*clean, seed=11), grid=(3, 4))
        rd = readings(*clean, seed=11)
        rd.temperature[5] = bad
        res = inverse.fit(case(), rd, grid=(3, 4))
    assert res.summary["set_aside"] == [NAMES[5]]          # the broken channel and no healthy one
    s, s0 = res.summary, ref.summary
    assert abs(s["total_power_W"] - s0["total_power_W"]) <= s0["total_power_sd_W"]
    assert s["total_power_sd_W"] <= 2.0 * s0["total_power_sd_W"]


def test_several_faults_together_suspect_the_model():
    n = 16
    rng, G, p = layout(n, 8, 60)
    d = synthetic_readings(rng, G, p, 0.5)
    d[[2, 9, 11]] += [10.0, -12.0, 9.0]
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    out = screen_outliers(prob, model_first=True)
    assert out.set_aside == [] and out.kept.all()
    assert len(set(np.flatnonzero(out.table["flag"] == "suspect")) & {2, 9, 11}) >= 2  # one may be masked
    assert any("model" in w and "likelier culprit" in w for w in out.warnings)


def test_single_fault_still_set_aside_when_model_first():
    n = 16
    rng, G, p = layout(n, 8, 60)
    d = synthetic_readings(rng, G, p, 0.5)
    d[9] += 12.0
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    out = screen_outliers(prob, model_first=True)
    assert [s.index for s in out.set_aside] == [9]


def test_model_suspect_rule():
    assert not model_suspect(1, 4)           # one broken sensor is a sensor fault
    assert not model_suspect(2, 20)          # 10 %: two faults
    assert model_suspect(2, 10) and model_suspect(3, 40)


def test_fit_keeps_sensors_that_fail_together(clean):  # noqa: F811
    # three channels on one connector block read 8 K high (a shared cause, e.g. its cold junction)
    rd = readings(*clean, seed=7)
    rd.temperature[[3, 8, 12]] += 8.0
    with threadpool_limits(1):
        res = inverse.fit(case(), rd, grid=(3, 4))
    assert res.summary["set_aside"] == [] and res.summary["n_sensors_used"] == len(NAMES)
    assert any("likelier culprit" in w for w in res.warnings)


def test_three_sensors_that_agree_do_not_make_the_fourth_a_gross_fault(tmp_path):
    """A long steel tube (bore 50 mm, outside 80 mm, k 45 W/(m K), outside convection 500
    W/(m^2 K) to 25 degC), bore at 150 + 20 cos(theta) degC, three thermocouples at r = 70 mm,
    0 / 120 / 240 deg.  Two of them read alike, which made the robust scale of the gross-fault
    pass the noise alone: the first sensor, 22 K above them, was set aside as a "gross fault"
    (218 robust sds), and the answer was a flat bore of 140.8 +- 0.21 degC with the power 84 sd
    off.  It departs by far less than the heating it sits in (robust.SIGNAL_SHARE): it stays.

    Readings from the closed forms (plane r-theta conduction in an annulus, separation of
    variables, from memory): the uniform part T_i - q' ln(r / a_i) / (2 pi k) with q' =
    (T_i - T_inf) / R', R' = ln(a_o / a_i) / (2 pi k) + 1 / (2 pi a_o h) (series resistance of
    the wall and the outside film), and the cos(theta) part (A r + B / r) cos(theta) with A a_i +
    B / a_i = 20 K and -k dT/dr = h T at a_o."""
    import math

    import heatsight

    ai, ao, k, h, tinf, ti, amp = 0.05, 0.08, 45.0, 500.0, 25.0, 150.0, 20.0
    R = math.log(ao / ai) / (2 * math.pi * k) + 1.0 / (2 * math.pi * ao * h)
    q = (ti - tinf) / R
    A, B = np.linalg.solve([[ai, 1.0 / ai], [k + h * ao, -k / ao ** 2 + h / ao]], [amp, 0.0])
    r, theta = 0.07, np.radians([0.0, 120.0, 240.0])
    T = ti - q * math.log(r / ai) / (2 * math.pi * k) + (A * r + B / r) * np.cos(theta)
    T = T + np.array([0.03, -0.05, 0.02])                  # noise of 0.1 K thermocouples
    (tmp_path / "case.toml").write_text(
        '[part]\nradius = "80 mm"\ninner_radius = "50 mm"\nheight = "long"\nconductivity = "45 W/(m*K)"\n'
        '[faces.bore]\ncondition = "unknown-temperature"\n'
        '[faces.side]\ncondition = "convection"\nh = "500 W/(m^2*K)"\nambient = "25 degC"\n'
        '[sensors]\nlayout = "layout.csv"\nreadings = "readings.csv"\n')
    (tmp_path / "layout.csv").write_text("sensor,r [mm],theta [deg],sigma [K]\n"
                                         + "".join(f"TC{i + 1},70,{a},0.1\n" for i, a in enumerate((0, 120, 240))))
    (tmp_path / "readings.csv").write_text("sensor,temperature [degC]\n"
                                           + "".join(f"TC{i + 1},{t:.4f}\n" for i, t in enumerate(T)))
    with threadpool_limits(1):
        res = heatsight.fit(str(tmp_path / "case.toml")).raw
    assert res.summary["set_aside"] == []
    power, sd = res.summary["total_power_W"], res.summary["total_power_sd_W"]
    assert abs(power - q) <= 2 * sd                                            # per metre
    # the bore at 0 deg (170 degC) and 180 deg (130 degC) inside the 95 % bands
    mean, _, lo, hi = res.face_profile(np.radians([0.0, 180.0]), np.zeros(2))
    truth = np.array([ti + amp, ti - amp]) + 273.15
    assert np.all((lo <= truth) & (truth <= hi)), (lo, mean, hi)
