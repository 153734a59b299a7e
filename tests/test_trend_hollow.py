"""`heatsight trend` on a hollow part, unchanged: the bundled tube demo's case with a log whose
bore cools on one side over time (fouling growing).  The readings come from the forward model
of the same case with a known bore profile plus seeded noise: the trend's bookkeeping on a
hollow part is under test, not the series (checked against scikit-fem elsewhere)."""

import math
import shutil
from pathlib import Path

import numpy as np
import pandas as pd

import heatsight.forward as fw
from heatsight.data_io.case import load_case
from heatsight.data_io.cli import main

TUBE = Path(__file__).resolve().parent.parent / "demo_data" / "tube"


def _bore(level, streak):
    """Bore temperature [K]: `level` less `streak` K on a 60 deg sector around 200 deg."""
    def f(th, z):
        d = np.abs(np.angle(np.exp(1j * (np.asarray(th, float) - math.radians(200)))))
        return level - streak * 0.5 * (1 + np.tanh((math.radians(30) - d) / 0.15)) + 0.0 * z
    return f


def test_trend_on_the_tube_demo(tmp_path, monkeypatch):
    for name in ("tube.toml", "layout.csv", "readings.csv", "side_heaters.csv"):
        shutil.copy(TUBE / name, tmp_path / name)
    case = load_case(tmp_path / "tube.toml")
    lay = pd.read_csv(tmp_path / "layout.csv")
    r, th, z = lay["r [mm]"] / 1e3, np.radians(lay["theta [deg]"]), lay["z [mm]"] / 1e3
    rng = np.random.default_rng(4)
    rows, times = [], np.arange(0.0, 4 * 3600.0, 60.0)
    fields = {}
    for streak in (0.0, 6.0):   # a clean bore, then a cooler fouled streak
        faces = dict(case.faces, bore=fw.Temperature(_bore(490.0, streak)))
        fields[streak] = fw.CylinderModel(case.cylinder, faces).temperature(r, th, z)
    for t in times:
        s = min(max((t - 3600.0) / 7200.0, 0.0), 1.0)   # streak grows from hour 1 to hour 3
        temp = (1 - s) * fields[0.0] + s * fields[6.0] + rng.normal(0, 0.05, r.size)
        rows.append(temp - 273.15)
    log = pd.DataFrame(rows, columns=list(lay["sensor"]))
    log.insert(0, "time [s]", times)
    log.to_csv(tmp_path / "log.csv", index=False, float_format="%.4f")
    monkeypatch.chdir(tmp_path)
    assert main(["trend", "tube.toml", "--log", "log.csv", "-q"]) == 0
    trend = pd.read_csv(tmp_path / "tube-trend" / "trend.csv")
    assert "total_power_W" in trend.columns and len(trend) >= 2
    # the fouled zone's mean falls by several kelvin between the first and the last window
    col = [c for c in trend.columns if c.startswith("fouled side 160-240_mean")][0]
    assert trend[col].iloc[-1] < trend[col].iloc[0] - 2.0
