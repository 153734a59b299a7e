"""A doubtful sensor weighed rather than decided (inverse.contamination, inverse.sensor_doubt)."""

import math

import numpy as np
import pytest
from scipy.stats import norm

import scenario_cases as sc
import scenario_metrics as sm
from heatsight import inverse
from test_inverse_diagnostics import layout, readings
from heatsight.inverse.contamination import EPSILON, OUTLIER_SD, fault_probability
from heatsight.inverse.diagnostics import averaged_loo
from heatsight.inverse.linear_gaussian import LinearGaussianProblem
from heatsight.inverse.sensor_doubt import DOUBT, doubtful, weigh_doubtful
from heatsight.inverse.strength_average import answers_mixture


def _bayes(resid, var, weights):
    """P(broken | r) by Bayes' rule on scipy.stats densities (the reference)."""
    broken = sum(w * norm.pdf(r, 0, math.sqrt(v + OUTLIER_SD ** 2)) for r, v, w in zip(resid, var, weights))
    healthy = sum(w * norm.pdf(r, 0, math.sqrt(v)) for r, v, w in zip(resid, var, weights))
    return EPSILON * broken / (EPSILON * broken + (1 - EPSILON) * healthy)


def test_fault_probability_is_bayes_rule_on_the_contamination_model():
    r, v = np.array([0.1, 3.0, 4.9, 30.0]), np.array([0.25, 1.0, 1.84, 4.0])
    ref = [_bayes([x], [s], [1.0]) for x, s in zip(r, v)]
    assert fault_probability(r, v) == pytest.approx(ref, rel=1e-10)
    # far beyond the predictive sd a fault is all but certain; inside it, less likely than a priori
    p = fault_probability(r, v)
    assert p[0] < EPSILON < p[2] and p[3] > 0.999


def test_fault_probability_of_a_predictive_mixture():
    # two components per reading (the screening's average over the prior's strength)
    resid = np.array([[3.0, -0.5], [2.2, -0.4]])
    var = np.array([[1.0, 0.3], [2.5, 0.2]])
    w = np.array([[0.7, 0.4], [0.3, 0.6]])
    ref = [_bayes(resid[:, i], var[:, i], w[:, i]) for i in range(2)]
    assert fault_probability(resid, var, w) == pytest.approx(ref, rel=1e-10)


def test_screening_check_weighs_an_offset_below_and_above_its_limit():
    n = 20
    rng, G, p = layout(n, 10, 5)             # the screening tests' synthetic layout and prior draws
    d = readings(rng, G, p, 0.5)
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    sc0 = averaged_loo(prob)
    w, pred, sd = sc0.components
    brute = [_bayes(d[i] - pred[:, i], sd[:, i] ** 2, w[:, i]) for i in range(n)]
    assert sc0.fault_probability(d) == pytest.approx(brute, rel=1e-8)
    # the same reading moved by 0, 2.5 and 6 of its predictive sds: doubt grows with the offset
    i = int(np.argmin(np.abs(sc0.z)))
    probs = []
    for shift in (0.0, 2.5, 6.0):
        dd = d.copy()
        dd[i] += shift * sc0.sd[i]
        s = averaged_loo(LinearGaussianProblem(G, dd, 20.0, np.full(n, 0.25), p))
        probs.append(float(s.fault_probability(dd)[i]))
    assert probs[0] < EPSILON and probs[0] < probs[1] < probs[2] and probs[2] > 0.9


def test_answers_mixture_moments_and_band():
    a = (np.array([1.0, 5.0]), np.array([0.5, 1.0]), np.array([0.02, 3.04]), np.array([1.98, 6.96]))
    b = (np.array([3.0, 5.5]), np.array([0.4, 2.0]), np.array([2.216, 1.58]), np.array([3.784, 9.42]))
    # weight 1 keeps an answer, band and all
    for got, want in zip(answers_mixture(np.array([1.0, 0.0]), [a, b]), a):
        assert got == pytest.approx(want, rel=1e-9)
    w = np.array([0.7, 0.3])
    mean, sd, lo, hi = answers_mixture(w, [a, b])
    assert mean == pytest.approx(0.7 * a[0] + 0.3 * b[0], rel=1e-12)
    second = 0.7 * (a[1] ** 2 + a[0] ** 2) + 0.3 * (b[1] ** 2 + b[0] ** 2)
    assert sd == pytest.approx(np.sqrt(second - mean ** 2), rel=1e-12)        # law of total variance
    # the band's ends are the mixture's 2.5 % and 97.5 % points (scipy.stats reference), each
    # answer's Gaussian centred on its band with the sd its width implies
    for q, x in ((0.025, lo), (0.975, hi)):
        cdf = sum(wi * norm.cdf(x, 0.5 * (ans[2] + ans[3]), (ans[3] - ans[2]) / (2 * 1.959963984540054))
                  for wi, ans in zip(w, (a, b)))
        assert cdf == pytest.approx(q, abs=1e-7)


def test_the_doubtful_are_passed_sensors_beyond_the_cut():
    import pandas as pd

    t = pd.DataFrame({"sensor": list("ABCDE"), "fault_probability": [0.2, 0.9, DOUBT / 2, 0.3, 0.01],
                      "flag": ["ok", "set aside", "ok", "ok", "ok"]})
    assert doubtful(t) == [(3, 0.3), (0, 0.2)]     # B is out; the most doubtful first
    t.loc[[0, 3], "fault_probability"] = DOUBT / 3
    assert doubtful(t) == []
    assert doubtful(t.drop(columns="fault_probability")) == []
    # the screening blamed the model (a sensor kept but suspect): the contamination model,
    # which assumes the model right, weighs nothing
    blamed = t.assign(fault_probability=[0.2, 0.9, 0.01, 0.01, 0.6], flag=["ok", "set aside", "ok", "ok", "suspect"])
    assert doubtful(blamed) == []
    # weighing never leaves fewer than three sensors in a fit
    three = pd.DataFrame({"sensor": list("ABC"), "fault_probability": [0.4, 0.01, 0.01], "flag": ["ok"] * 3})
    assert doubtful(three) == []
    assert doubtful(pd.concat([three, three.iloc[:1].assign(sensor="D", fault_probability=0.01)])) == [(0, 0.4)]


@pytest.fixture(scope="module")
def tube_seed1():
    """The tube bore scenario (finite-element readings), seed 1: TC07 reads 6 K high and its
    score (3.1) stays below the screening's limit."""
    scn = sc.make("tube_bore_temperature", seed=1, scale=0.5)
    return scn, inverse.fit(scn.case, scn.readings, **scn.fit_kwargs)


def test_a_fault_below_the_limit_is_weighed_and_the_zone_beside_it_holds(tube_seed1):
    scn, res = tube_seed1
    doubt = res.summary["sensor_doubt"]
    broken, p = res.doubt
    # the weight comes from the fit without TC07 (its prediction of TC07 from the others
    # alone, the prior learned without it), not from the screening's, whose prior TC07 made
    # rougher (and its own prediction wider)
    held = broken.sensors.set_index("sensor").loc["TC07"]
    want = fault_probability(np.array([held["measured"] - held["loo_predicted"]]), np.array([held["loo_sd"] ** 2]))
    assert doubt["sensor"] == "TC07" and doubt["fault_probability"] == pytest.approx(float(want[0])) == p
    assert 0.5 < p < 0.8
    assert "TC07" not in res.summary["set_aside"]
    assert any("weighs a fault of TC07" in w for w in res.warnings)
    score = sm.score(scn, res)
    # before the weighing the zone beside TC07 was 4.6 sd off (confidently wrong)
    assert abs(score.zone_z["bore 90-180 deg"]) < 2.0
    assert all(abs(z) < 2.0 for z in score.zone_z.values()) and abs(score.power_z) < 2.0
    assert score.coverage >= 0.9
    # face_profile (and so every figure drawn from it) gives the map's mixture, to the learned
    # prior's merging of neighbouring amplitudes (which depends on how many points are asked)
    g = res.grid.iloc[::97]
    u, v = sc.sf.face_coords("bore", g["r_m"].to_numpy(), g["theta_rad"].to_numpy(), g["z_m"].to_numpy())
    mean, sd, lo, hi = res.face_profile(u, v)
    tol = 0.01 * float(np.median(g["upper"] - g["lower"]))
    for got, col in ((mean, "estimate"), (lo, "lower"), (hi, "upper")):
        assert got == pytest.approx(g[col].to_numpy(), abs=tol)
    # and is not the fit without TC07 alone
    other = res.doubt[0]
    assert np.max(np.abs(res.grid["upper"] - res.grid["lower"] - (other.grid["upper"] - other.grid["lower"]))) > tol
    # the sensor table is the fit's own, with the fault probability of every kept sensor
    row = res.sensors.set_index("sensor").loc["TC07"]
    assert row["fault_probability"] == pytest.approx(doubt["fault_probability"])


def test_healthy_readings_are_not_weighed():
    scn = sc.make("tube_bore_temperature", seed=0, scale=0.5)      # TC07 set aside, the rest healthy
    res = inverse.fit(scn.case, scn.readings, **scn.fit_kwargs)
    assert "sensor_doubt" not in res.summary and res.doubt is None
    kept = res.sensors[res.sensors["flag"] != "set aside"]
    assert kept["fault_probability"].max() < DOUBT


def test_the_weighed_sensor_reaches_summary_json_sensors_csv_and_the_report(tube_seed1):
    from heatsight.data_io.csv_columns import sensor_columns
    from heatsight.data_io.fit_outputs import summary_dict
    from heatsight.data_io.report import render_report

    _, res = tube_seed1
    out = summary_dict(res)
    assert out["sensor_doubt"]["sensor"] == "TC07"
    rec = {r["sensor"]: r for r in out["sensors"]}
    assert rec["TC07"]["fault_probability"] == pytest.approx(out["sensor_doubt"]["fault_probability"])
    assert "fault_probability" in sensor_columns(res.sensors).columns
    html = render_report(res, case_text=[], figures={}, title="t")
    assert "fault probability" in html and "weighs a fault of TC07" in html


def test_a_robust_loss_or_a_failed_refit_keeps_the_fit(tube_seed1):
    from dataclasses import replace

    _, res = tube_seed1
    one = res.doubt[0]                          # a FitResult whose sensors pass; make TC03 doubtful
    table = one.sensors.copy()
    table.loc[table["sensor"] == "TC03", "fault_probability"] = 0.3
    fake = replace(one, sensors=table, summary=dict(one.summary), warnings=list(one.warnings))

    def refit(j):
        raise inverse.InverseError("no level fixed")
    assert weigh_doubtful(fake, refit, loss="soft_l1") is fake       # a robust loss already down-weights it
    out = weigh_doubtful(fake, refit)
    assert out.doubt is None and "sensor_doubt" not in out.summary
    assert any("TC03 may be broken" in w and "the answer keeps it" in w for w in out.warnings)
    assert out.summary["warnings"][-1] == out.warnings[-1]


def test_the_verdict_names_the_weighed_sensor(tube_seed1):
    from heatsight.data_io.verdict import sensor_sentences

    _, res = tube_seed1
    text = " ".join(sensor_sentences(res))
    assert "TC07 may be broken" in text and "agree with each other" not in text


def test_a_plan_from_a_weighed_fit_says_what_it_starts_from(tube_seed1):
    from heatsight.inverse.plan import state_from_fit

    _, res = tube_seed1
    state = state_from_fit(res, ["mean"])
    assert "the fit that keeps TC07" in state.source and "the plan's do not" in state.source


def test_the_console_names_the_weighed_sensor(tube_seed1):
    from heatsight.data_io.fit_outputs import summary_lines

    _, res = tube_seed1
    text = "\n".join(summary_lines(res))
    assert "weighed as possibly broken: TC07 (probability 0.6" in text


def test_a_protected_reading_is_never_set_aside():
    n = 20
    rng, G, p = layout(n, 10, 31)
    d = readings(rng, G, p, 0.5)
    d[7] += 8.0                                                     # +8 K: a faulty thermocouple
    prob = LinearGaussianProblem(G, d, 20.0, np.full(n, 0.25), p)
    from heatsight.inverse.diagnostics import screen_outliers

    assert [s.index for s in screen_outliers(prob).set_aside] == [7]
    kept = screen_outliers(prob, protect=[7])
    # kept and flagged; the screening stops there rather than set others aside in its place
    assert kept.set_aside == [] and kept.kept[7] and kept.table["flag"].iat[7] == "suspect"
    assert any("kept as asked" in w for w in kept.warnings)
    # a spared reading (one another model explains) is kept and flagged too, quietly (the
    # caller says why), and passed over: a fault among the readings not spared (as the fit
    # spares every reading the smooth model finds unremarkable) is still set aside
    d2 = d.copy()
    d2[3] += 4.0
    prob2 = LinearGaussianProblem(G, d2, 20.0, np.full(n, 0.25), p)
    assert sorted(s.index for s in screen_outliers(prob2).set_aside) == [3, 7]
    spared = screen_outliers(prob2, spare=[i for i in range(n) if i != 3])
    assert [s.index for s in spared.set_aside] == [3]
    assert spared.kept[7] and spared.table["flag"].iat[7] == "suspect"
    assert not any("kept as asked" in w for w in spared.warnings)


def _demo_with(tmp_path, sensor, shift):
    import shutil

    import pandas as pd

    from heatsight.data_io.case import load_case
    from heatsight.data_io.fit_steps import fit_case
    from heatsight.data_io.demos import demo_folder

    demo = demo_folder()
    for name in ("platen.toml", "layout.csv"):
        shutil.copy(demo / name, tmp_path / name)
    d = pd.read_csv(demo / "readings.csv")
    col = next(c for c in d.columns if c.startswith("temperature"))
    d.loc[d["sensor"] == sensor, col] += shift
    d.to_csv(tmp_path / "readings.csv", index=False)
    case = load_case(tmp_path / "platen.toml", purpose="fit")
    return fit_case(case, case.sensors.readings)[0]


def test_a_sensor_set_aside_whose_fault_is_unsure_is_weighed_back(tmp_path):
    """The demo platen with TC09 read 1.5 K low: the screening sets it aside, but the fit
    without it predicts it only to +-2.4 K (95 %), so a good reading that far out is not
    unlikely: the answer also weighs the fit that keeps it; 2.5 K low, the fault is sure."""
    res = _demo_with(tmp_path, "TC09", -1.5)
    doubt = res.summary["sensor_doubt"]
    assert "TC09" in res.summary["set_aside"] and doubt["sensor"] == "TC09"
    other, q = res.doubt
    assert "TC09" not in other.summary["set_aside"]                  # the other fit keeps it
    assert q == pytest.approx(1.0 - doubt["fault_probability"]) and 0.0 < q < DOUBT + 0.1
    row = res.sensors.set_index("sensor").loc["TC09"]
    want = fault_probability(np.array([row["measured"] - row["loo_predicted"]]), np.array([row["loo_sd"] ** 2]))
    assert doubt["fault_probability"] == pytest.approx(float(want[0]))
    assert any("also weighs the fit that keeps it" in w for w in res.warnings)
    sure = _demo_with(tmp_path, "TC09", -2.5)
    assert "TC09" in sure.summary["set_aside"] and "sensor_doubt" not in sure.summary


def test_keep_sensors_names_sensors_of_the_layout(tmp_path):
    import shutil

    from heatsight.data_io.case import load_case
    from heatsight.data_io.demos import demo_folder
    from heatsight.data_io.errors import InputError
    from heatsight.data_io.fit_steps import fit_case

    demo = demo_folder()
    for name in ("platen.toml", "layout.csv", "readings.csv"):
        shutil.copy(demo / name, tmp_path / name)
    text = (tmp_path / "platen.toml").read_text()
    (tmp_path / "platen.toml").write_text(text.replace("[fit]\n", '[fit]\nkeep_sensors = ["TC99"]\n'))
    case = load_case(tmp_path / "platen.toml", purpose="fit")
    with pytest.raises(InputError, match="fit.keep_sensors: names TC99, not in the sensor layout"):
        fit_case(case, case.sensors.readings)


def test_keep_sensors_in_the_api_names_usable_sensors(tube_seed1):
    from heatsight.inverse.problem import FitOptions

    assert FitOptions(keep_sensors=["TC07"]).keep_sensors == ("TC07",)
    scn, _ = tube_seed1
    with pytest.raises(inverse.InverseError, match="keep_sensors names TC99"):
        inverse.fit(scn.case, scn.readings, keep_sensors=("TC99",))


def test_a_sensor_known_good_is_not_weighed(tube_seed1):
    """TC07 (6 K high, weighed at 0.65 otherwise) named known good: kept, not weighed, and
    the screening, which finds it the worst reading, stops there with a warning if it is
    beyond the limit."""
    scn, _ = tube_seed1
    res = inverse.fit(scn.case, scn.readings, keep_sensors=("TC07",))
    assert "sensor_doubt" not in res.summary or res.summary["sensor_doubt"]["sensor"] != "TC07"
    assert "TC07" not in res.summary["set_aside"]
