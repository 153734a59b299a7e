"""`heatsight trend` on a hollow part, unchanged: a long steel pipe (plane r-theta problem)
whose bore cools on one side over time (a fouled streak growing).  The readings come from the
forward model of the same case with a known bore profile plus seeded noise: the trend's
bookkeeping on a hollow part is under test, not the series (checked against scikit-fem in
tests/test_forward_hollow_fem.py)."""

import math

import numpy as np
import pandas as pd

import heatsight.forward as fw
from heatsight.data_io.case import load_case
from heatsight.data_io.cli import main

CASE = """[part]
radius = "80 mm"
inner_radius = "50 mm"
height = "long"
conductivity = "45 W/(m*K)"

[faces.bore]
condition = "unknown-temperature"

[faces.side]
condition = "convection"
h = "15 W/(m^2*K)"
ambient = "25 degC"

[sensors]
layout = "layout.csv"

[[zones]]
name = "fouled side"
theta = ["170 deg", "230 deg"]

[[zones]]
name = "clean side"
theta = ["-10 deg", "50 deg"]
"""


def _bore(streak):
    """Bore temperature [K]: 490 K less `streak` K on a 60 deg sector around 200 deg."""
    def f(th, z):
        d = np.abs(np.angle(np.exp(1j * (np.asarray(th, float) - math.radians(200)))))
        return 490.0 - streak * 0.5 * (1 + np.tanh((math.radians(30) - d) / 0.15)) + 0.0 * z
    return f


def test_trend_on_a_long_pipe(tmp_path, monkeypatch):
    (tmp_path / "pipe.toml").write_text(CASE)
    theta = np.arange(0, 360, 30.0)
    r = np.where(np.arange(theta.size) % 2, 60.0, 70.0)
    names = [f"TC{i + 1:02d}" for i in range(theta.size)]
    pd.DataFrame({"sensor": names, "r [mm]": r, "theta [deg]": theta, "sigma [K]": 0.05}).to_csv(
        tmp_path / "layout.csv", index=False)
    case = load_case(tmp_path / "pipe.toml")
    fields = {s: fw.CylinderModel(case.cylinder, dict(case.faces, bore=fw.Temperature(_bore(s))))
              .temperature(r / 1e3, np.radians(theta), np.zeros(r.size)) for s in (0.0, 3.0, 6.0)}
    rng = np.random.default_rng(4)
    times = np.arange(0.0, 1800.0, 30.0)
    rows = [fields[0.0 if t < 600 else (3.0 if t < 1200 else 6.0)] + rng.normal(0, 0.05, r.size)
            for t in times]
    log = pd.DataFrame(np.array(rows) - 273.15, columns=names)
    log.insert(0, "time [s]", times)
    log.to_csv(tmp_path / "log.csv", index=False, float_format="%.4f")
    monkeypatch.chdir(tmp_path)
    assert main(["trend", "pipe.toml", "--log", "log.csv", "--window", "300", "-q"]) == 0
    trend = pd.read_csv(tmp_path / "pipe-trend" / "trend.csv")
    assert "total_power_W_per_m" in trend.columns and len(trend) >= 3   # per metre on a long part
    fouled = [c for c in trend.columns if c.startswith("fouled side_mean")][0]
    clean = [c for c in trend.columns if c.startswith("clean side_mean")][0]
    # the fouled zone cools by several kelvin from the first to the last window, the clean one not
    assert trend[fouled].iloc[-1] < trend[fouled].iloc[0] - 3.0
    assert abs(trend[clean].iloc[-1] - trend[clean].iloc[0]) < 1.0
