"""The bundled tube demo against its finite-element truth (scikit-fem through
demo_data/generate_tube_demo.py, the solution its readings were drawn from).

No thermocouple lies within 120 mm of either end of the 600 mm bore; the liquid enters at
the bottom end at 190 degC, so the bore there runs 12-18 K under what the four stations'
profile extrapolates.  The fit lets an unseen edge stretch of an unknown temperature bend
away by ramps (inverse/stretch.py); before them the bands held the flat extrapolation and
covered none of the inlet stretch (outlet stretch 0.11).
"""

import numpy as np
import pytest

from heatsight.data_io.case import load_case
from heatsight.data_io.fit_steps import fit_case
from heatsight.demo_data import generate_tube_demo as gen


@pytest.fixture(scope="module")
def demo():
    sols, _, _, _ = gen.solve()
    case = load_case(gen.OUT / "tube.toml", purpose="fit")
    res, _ = fit_case(case, case.sensors.readings)
    return sols, res


def test_demo_readings_are_the_fem_solution(demo):
    # the bundled readings are the FEM's values at the sensors plus the seeded scatter and
    # TC13's offset, written to 1 mK
    sols, res = demo
    layout = gen.sensors()
    names = [s[0] for s in layout]
    r, th, z = (np.array([s[i] for s in layout], float) for i in (1, 2, 3))
    T = gen.field(sols, r * 1e-3, np.radians(th), z * 1e-3)
    T = T + np.random.default_rng(gen.SEED).normal(0.0, gen.SIGMA, T.size)
    T[names.index(gen.BAD_SENSOR)] += gen.BAD_OFFSET
    rd = res.readings
    np.testing.assert_allclose(rd.temperature, T[[names.index(n) for n in rd.names]], atol=6e-4)


def test_bands_cover_the_unseen_ends(demo):
    sols, res = demo
    g = res.grid
    theta, z = g["theta_rad"].to_numpy(), g["z_m"].to_numpy()
    truth = np.array([gen.bore_field(sols, np.array([t]), np.array([zz]))[0, 0] for t, zz in zip(theta, z)])
    inside = (truth >= g["lower"].to_numpy()) & (truth <= g["upper"].to_numpy())
    inlet, outlet = z <= 0.060, z >= 0.540
    # measured 0.60 (z <= 60 mm; 0.75 below 60 mm) and 0.85 (0.00 and 0.11 without the ramps)
    assert inside[inlet].mean() >= 0.5
    assert inside[outlet].mean() >= 0.5
    assert res.summary["unseen_stretch_steps_m"] == pytest.approx([0.09, 0.06, 0.03, 0.51, 0.54, 0.57])


def test_trend_reference_row_is_the_fit_and_holds_the_truth(tmp_path):
    """A two-hour log of the demo's readings with 0.05 K of seeded scatter per logged row
    (invented scatter; the readings are the FEM's): the trend's absolute figures carry what
    the reference fit holds beyond the trend's single prior (BatchSolver.
    with_fit_uncertainty), so the reference row's sds are the fit's and the heat into the
    liquid lies within 2 sd of the FEM's (1.3 sd; before, +-0.12 W put it 18 sd off)."""
    import json
    import shutil

    import pandas as pd

    from heatsight.data_io.trend_command import run_trend

    for name in ("tube.toml", "layout.csv", "readings.csv", "side_heaters.csv"):
        shutil.copy(gen.OUT / name, tmp_path / name)
    case = tmp_path / "tube.toml"
    case.write_text(case.read_text().replace('strength = "auto"', 'strength = "auto"\nmodel = "smooth"'))
    readings = pd.read_csv(tmp_path / "readings.csv")
    t = np.arange(0.0, 7200.0, 10.0)
    rng = np.random.default_rng(0)
    log = {"time [s]": t}
    for sensor, value in zip(readings["sensor"], readings.iloc[:, 1]):
        log[f"{sensor} [degC]"] = value + rng.normal(0.0, 0.05, t.size)
    pd.DataFrame(log).to_csv(tmp_path / "log.csv", index=False, float_format="%.4f")
    summary, out = run_trend(case, log=tmp_path / "log.csv", out=tmp_path / "out", progress=False)
    rows = pd.read_csv(out / "trend.csv")
    ref = summary["reference_fit"]
    assert rows["total_power_sd_W"].iloc[0] == pytest.approx(ref["total_power_sd_W"], rel=1e-6)
    zone = "lower heater"
    assert rows[f"{zone}_sd_K"].iloc[0] == pytest.approx(next(z["sd"] for z in ref["zones"] if z["name"] == zone),
                                                        rel=1e-6)
    assert rows["nonuniformity_sd_K"].iloc[0] == pytest.approx(ref["nonuniformity_sd"], rel=1e-6)
    truth = json.loads((gen.OUT / "truth.json").read_text())["total_power_W"]
    assert abs(rows["total_power_W"].iloc[0] - truth) < 2 * rows["total_power_sd_W"].iloc[0]
    # changes carry none of it (offsets, the left-out modes): a few hundredths of a kelvin here
    assert rows[f"{zone}_change_sd_K"].max() < 0.05


def test_points_and_profiles_hold_what_the_map_holds(demo):
    """predict (points.csv, the API) and face_profile (profiles.png, the long tube's curve)
    give the face map's answer at the map's points, ramps over the unseen stretches and
    left-out modes included; before, predict at the inlet end gave +-5 K bands (95 %) against
    the map's +-30 K and missed the FEM's inlet temperature (here: inside the band)."""
    sols, res = demo
    g = res.grid
    pick = np.flatnonzero((g["z_m"].to_numpy() <= 0.06) & (np.arange(len(g)) % 7 == 0))
    r, th, z = (g[c].to_numpy()[pick] for c in ("r_m", "theta_rad", "z_m"))
    est, sd = g["estimate"].to_numpy()[pick], g["std"].to_numpy()[pick]
    m, s, _, _ = res.face_profile(th, z)
    np.testing.assert_allclose(m, est, atol=1e-9)
    np.testing.assert_allclose(s, sd, atol=1e-9)
    # the field at the bore from the series: the ramps' fields are projected on an enlarged
    # basis, exact only away from the face (measured 0.08 K and 0.28 K of sd ~4-15 K)
    m2, s2, lo2, hi2 = res.predict(r, th, z)
    assert np.max(np.abs(m2 - est)) < 0.5 and np.max(np.abs(s2 / sd - 1.0)) < 0.1
    truth = np.array([gen.bore_field(sols, np.array([t]), np.array([zz]))[0, 0] for t, zz in zip(th, z)])
    assert np.mean((truth >= lo2) & (truth <= hi2)) >= 0.5


def test_a_point_in_the_bore_is_refused_naming_the_bore(demo):
    from heatsight.data_io.api import Fit
    from heatsight.data_io.errors import InputError

    _, res = demo
    case = load_case(gen.OUT / "tube.toml", purpose="fit")
    fit = Fit(res, case, case.sensors.readings)
    with pytest.raises(InputError, match=r"lies outside the part \(inner radius 50 mm, radius 80 mm"):
        fit.predict([30.0, 0.0, 100.0])



def test_each_sensors_fitted_value_is_the_answers_prediction_there(demo):
    # the sensor table's `fitted` is what predict (and points.csv) give at the sensor: with
    # the left-out modes' and the unseen stretches' part given the kept readings (it held
    # the stretches' part alone, 0.07-0.48 K above predict on this demo)
    _, res = demo
    table, rd = res.sensors, res.readings
    idx = [list(rd.names).index(n) for n in table["sensor"]]
    mean, *_ = res.predict(rd.r[idx], rd.theta[idx], rd.z[idx])
    np.testing.assert_allclose(table["fitted"].to_numpy(float), mean, rtol=0, atol=1e-9)
