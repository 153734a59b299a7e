"""Figures of a fit (data_io.plots): end-face and side-wall results from real small fits."""

import dataclasses
import math
import struct
from types import SimpleNamespace

import numpy as np
import pytest
from matplotlib.figure import Figure
from matplotlib.projections.polar import PolarAxes

from heatsight import inverse
from heatsight.data_io import plots
from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature, UnknownFlux,
                     UnknownTemperature)

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
N = 16


@pytest.fixture(scope="module")
def end_result():
    """Bottom-face heat flux of a plate, 16 sensors; sensor 3 reads 8 K high (set aside);
    one name holds '$' signs, which matplotlib would otherwise read as mathematics."""
    a, L, k = 0.15, 0.04, 16.0
    cyl = Cylinder(a, L, k)
    truth = CylinderModel(cyl, {"bottom": Flux(lambda r, th: 20000 * (1 + 0.2 * (r / a) * np.cos(th))),
                                "top": Convection(40.0, 298.15), "side": Insulated()})
    rng = np.random.default_rng(0)
    r = rng.uniform(0, 0.9 * a, N)
    th = rng.uniform(0, 2 * np.pi, N)
    z = rng.choice([0.005, 0.01, 0.02], N)
    T = truth.temperature(r, th, z) + rng.normal(0, 0.2, N)
    T[3] += 8.0
    names = [f"TC{i}" for i in range(N)]
    names[5] = "TC$x$5"
    rd = inverse.SensorReadings(names, r, th, z, T, np.full(N, 0.2), np.zeros(N), np.zeros(N))
    case = SimpleNamespace(cylinder=cyl, faces={"bottom": UnknownFlux(), "top": Convection(40.0, 298.15),
                                                "side": Insulated()}, zones=[])
    # fixed prior: test_profiles_end_face relies on the estimate's maximum sitting on the
    # theta = 0 rim; the learned prior's lies one grid step (5 deg) away, 3.5e-5 higher
    return inverse.fit(case, rd, prior="fixed")


@pytest.fixture(scope="module")
def side_result():
    """Side-wall temperature of a tall part whose ends are held at 400 K."""
    a, L, k = 0.05, 0.2, 16.0
    cyl = Cylinder(a, L, k)
    wall = Temperature(lambda th, z: 400.0 + 30.0 * np.sin(np.pi * z / L) * (1 + 0.3 * np.cos(th)))
    truth = CylinderModel(cyl, {"bottom": Temperature(400.0), "top": Temperature(400.0), "side": wall})
    rng = np.random.default_rng(1)
    r = rng.uniform(0.3 * a, 0.85 * a, N)
    th = rng.uniform(0, 2 * np.pi, N)
    z = rng.uniform(0.02, 0.18, N)
    T = truth.temperature(r, th, z) + rng.normal(0, 0.2, N)
    rd = inverse.SensorReadings([f"S{i}" for i in range(N)], r, th, z, T, np.full(N, 0.2), np.zeros(N),
                                np.zeros(N))
    case = SimpleNamespace(cylinder=cyl, faces={"bottom": Temperature(400.0), "top": Temperature(400.0),
                                                "side": UnknownTemperature()}, zones=[])
    return inverse.fit(case, rd)


def _sensor_lines(ax):
    return {ln.get_gid(): ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("sensors:")}


def _colourbar_label(fig):
    labels = [ax.get_ylabel() for ax in fig.axes if ax.get_label() == "<colorbar>"]
    assert len(labels) == 1
    return labels[0]


def test_display_units(end_result, side_result):
    d = plots.display_for(end_result)
    assert (d.unit, d.diff_unit, d.symbol) == ("kW/m^2", "kW/m^2", "kW/m²")
    assert d.value(20000.0) == pytest.approx(20.0)
    t = plots.display_for(side_result)
    assert (t.unit, t.diff_unit, t.symbol, t.diff_symbol) == ("degC", "K", "°C", "K")
    # Celsius scale definition (BIPM SI Brochure): t/degC = T/K - 273.15
    assert t.value(400.0) == pytest.approx(126.85, abs=1e-9)
    assert t.diff(2.5) == pytest.approx(2.5)


def test_face_map_end_face(end_result):
    fig = plots.face_map(end_result)
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    assert isinstance(ax, PolarAxes)
    assert "kW/m²" in _colourbar_label(fig)
    assert "[°]" in ax.get_xlabel() and "[mm]" in ax.get_ylabel()
    lines = _sensor_lines(ax)
    assert sum(len(ln.get_xdata()) for ln in lines.values()) == N
    assert len(lines["sensors:set aside"].get_xdata()) == 1 == len(end_result.summary["set_aside"])
    i = end_result.summary["set_aside"][0]
    row = end_result.sensors.set_index("sensor").loc[i]
    # polar data: (theta [rad], r [mm]) of the set-aside sensor projected on the face
    assert lines["sensors:set aside"].get_xdata()[0] == pytest.approx(row["theta_rad"] % (2 * math.pi))
    assert lines["sensors:set aside"].get_ydata()[0] == pytest.approx(row["r_m"] * 1e3)
    names = [t.get_text() for t in ax.texts]
    assert len(names) == N and "TC3" in names
    mesh = ax.collections[0]
    values = np.asarray(mesh.get_array())
    assert values.max() == pytest.approx(end_result.summary["max"] / 1e3)
    assert mesh.get_clim() == pytest.approx((end_result.summary["min"] / 1e3, end_result.summary["max"] / 1e3))


def test_face_map_shared_scale(end_result):
    fig = plots.face_map(end_result, vmin=10.0, vmax=30.0)
    assert fig.axes[0].collections[0].get_clim() == (10.0, 30.0)


def test_face_map_side_wall(side_result):
    fig = plots.face_map(side_result)
    ax = fig.axes[0]
    assert not isinstance(ax, PolarAxes)
    assert "[°]" in ax.get_xlabel() and "[mm]" in ax.get_ylabel()
    assert "°C" in _colourbar_label(fig)
    assert ax.get_xlim() == (0.0, 360.0)
    assert ax.get_ylim() == pytest.approx((0.0, 200.0))
    lines = _sensor_lines(ax)
    assert list(lines) == ["sensors:ok"]
    ln = lines["sensors:ok"]
    sens = side_result.sensors
    assert np.allclose(ln.get_xdata(), np.degrees(np.mod(sens["theta_rad"], 2 * math.pi)))
    assert np.allclose(ln.get_ydata(), sens["z_m"] * 1e3)
    # the rim rows (z = 0 and z = L) sit on the 400 K ends: 126.85 degC
    # (Celsius scale definition, BIPM SI Brochure: t/degC = T/K - 273.15)
    assert np.asarray(ax.collections[0].get_array()).min() == pytest.approx(126.85, abs=1e-6)


def test_band_width_map(end_result, side_result):
    for res, unit in ((end_result, "kW/m²"), (side_result, "K")):
        fig = plots.band_width_map(res)
        label = _colourbar_label(fig)
        assert "95 %" in label and f"[{unit}]" in label
        assert "95 %" in fig.axes[0].get_title()
        vals = np.asarray(fig.axes[0].collections[0].get_array())
        scale = 1e-3 if res is end_result else 1.0
        width = (res.grid["upper"] - res.grid["lower"]).to_numpy() * scale
        assert vals.max() == pytest.approx(width.max())
        assert vals.min() >= 0.0
        assert fig.axes[0].collections[0].get_cmap().name == plots.BAND_CMAP != plots.ESTIMATE_CMAP


def test_profiles_end_face(end_result):
    fig = plots.profiles(end_result)
    ax = fig.axes[0]
    lines = [ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("profile:")]
    assert len(lines) == 4
    assert ax.get_xlabel() == "radius r [mm]" and "[kW/m²]" in ax.get_ylabel()
    # all angles meet at the centre of the face
    starts = [ln.get_ydata()[0] for ln in lines]
    assert np.ptp(starts) < 1e-9
    assert lines[0].get_xdata()[-1] == pytest.approx(150.0)
    assert len(ax.collections) == 4  # one shaded band per line
    # the theta = 0 line meets the face maximum at the rim (grid max at r = a, theta = 0)
    assert lines[0].get_ydata()[-1] == pytest.approx(end_result.summary["max"] / 1e3, rel=1e-6)


def test_profiles_side_wall(side_result):
    fig = plots.profiles(side_result, angles_deg=(0, 120, 240))
    ax = fig.axes[0]
    lines = [ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("profile:")]
    assert len(lines) == 3
    assert ax.get_xlabel() == "height z [mm]" and "[°C]" in ax.get_ylabel()
    for ln in lines:  # pinned to the 400 K ends: 126.85 degC (Celsius scale definition, BIPM)
        assert ln.get_ydata()[0] == pytest.approx(126.85, abs=1e-6)
        assert ln.get_ydata()[-1] == pytest.approx(126.85, abs=1e-6)


def test_profiles_without_model_use_grid(end_result):
    """A result without its model (design None) draws the display-grid columns instead."""
    bare = dataclasses.replace(end_result, design=None)
    with_model = plots.profiles(end_result).axes[0]
    from_grid = plots.profiles(bare).axes[0]
    for a, b in zip(*[[ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("profile:")]
                      for ax in (with_model, from_grid)]):
        assert len(b.get_xdata()) == end_result.grid_shape[0]
        # the fine line has 161 points on [0, a], the grid 41: every 4th point coincides
        assert np.allclose(a.get_xdata()[::4], b.get_xdata())
        assert np.allclose(a.get_ydata()[::4], b.get_ydata(), rtol=1e-9)


def test_sensor_health(end_result):
    fig = plots.sensor_health(end_result)
    ax1, ax2 = fig.axes[:2]
    assert "[K]" in ax1.get_ylabel()
    bars = [p for p in ax2.patches if str(p.get_gid()).startswith("score")]
    assert len(bars) == N
    t = inverse.default_threshold(end_result.summary["n_sensors_used"])
    levels = sorted(ln.get_ydata()[0] for ln in ax2.get_lines() if ln.get_gid() == "threshold")
    assert levels == pytest.approx([-t, t])
    # the set-aside sensor's bar is hatched and its tick label coloured
    hatched = [p for p in bars if p.get_hatch()]
    assert len(hatched) == 1
    labels = {lab.get_text(): lab for lab in ax2.get_xticklabels()}
    assert labels["TC3"].get_color() == plots.FLAG_COLOUR["set aside"]
    assert labels["TC0"].get_color() != plots.FLAG_COLOUR["set aside"]
    assert "TC$x$5" in labels  # shown literally, not as mathematics


def test_strength_curve(end_result):
    fig = plots.strength_curve(end_result)
    ax1, ax2 = fig.axes[:2]
    assert ax1.get_xscale() == "log"
    assert "α" in ax1.get_xlabel() and "W/m²" in ax1.get_xlabel()
    assert "marginal likelihood" in ax1.get_ylabel()
    chosen = [ln for ln in ax1.get_lines() if ln.get_gid() == "chosen"]
    assert len(chosen) == 1
    assert chosen[0].get_xdata()[0] == pytest.approx(end_result.summary["strength"])
    assert ax2.get_xscale() == ax2.get_yscale() == "log"
    assert "[kW/m²]" in ax2.get_ylabel()


@pytest.mark.parametrize("criterion, words", [("gcv", "cross-validation"), ("chi2", "chi-square"),
                                             ("curvature", "L-curve")])
def test_strength_curve_other_criteria(end_result, criterion, words):
    curve = end_result.strength_curve.rename(columns={"log_evidence": criterion})
    curve[criterion] = np.abs(curve[criterion]) + 1.0
    summary = dict(end_result.summary, strength_method=criterion, strength_averaged=False)
    res = dataclasses.replace(end_result, strength_curve=curve, summary=summary)
    ax = plots.strength_curve(res).axes[0]
    assert words in ax.get_ylabel()
    assert "averaged" not in ax.get_title() and criterion in ax.get_title()
    readings_line = [ln for ln in ax.get_lines() if "number of readings" in str(ln.get_label())]
    assert len(readings_line) == (1 if criterion == "chi2" else 0)


def _png_size(data):
    assert data[:8] == PNG_SIGNATURE
    return struct.unpack(">II", data[16:24])


def test_save_figures_writes_pngs(end_result, tmp_path):
    paths = plots.save_figures(end_result, tmp_path)
    assert list(paths) == list(plots.FIGURE_NAMES)
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted(f"{n}.png" for n in plots.FIGURE_NAMES)
    for name, path in paths.items():
        data = path.read_bytes()
        w, h = _png_size(data)
        assert len(data) > 5000
        fig = plots.all_figures(end_result, [name])[name] if name == "profiles" else None
        if fig is not None:  # pixel size = inches x 110 dpi
            assert (w, h) == (round(fig.get_figwidth() * plots.DPI), round(fig.get_figheight() * plots.DPI))


def test_save_figures_rejects_unknown_name(end_result, tmp_path):
    with pytest.raises(ValueError, match="unknown figure"):
        plots.save_figures(end_result, tmp_path, names=("face_map", "nonsense"))
    assert list(tmp_path.iterdir()) == []


def test_side_figures_render(side_result):
    figs = plots.all_figures(side_result, ("sensors", "strength"))
    for fig in figs.values():
        assert _png_size(plots.figure_png(fig, dpi=50))[0] > 100


def test_face_called_uniform_only_when_every_zone_holds_the_face_mean(end_result):
    """A face whose points' bands all hold the face mean is still not 'uniform within its
    bands' when a declared zone's 95 % interval excludes that mean (a fouled zone 30 % off,
    found by a review: the map and the report said 'uniform' beside that zone's figure)."""
    g = end_result.grid.copy()
    m = float(end_result.summary["mean"])
    spread = float(np.nanmax(np.abs(np.asarray(g["estimate"], float) - m)))
    g["lower"], g["upper"] = g["estimate"] - 2 * spread - 1.0, g["estimate"] + 2 * spread + 1.0
    base = dataclasses.replace(end_result, grid=g, summary={**end_result.summary, "zones": []})
    assert plots.map_scale(base).uniform
    held = {"name": "inner", "mean": m, "lower": m - 10.0, "upper": m + 10.0}
    assert plots.map_scale(dataclasses.replace(base, summary={**base.summary, "zones": [held]})).uniform
    off = {"name": "outer", "mean": m - 0.3 * abs(m), "lower": m - 0.4 * abs(m), "upper": m - 0.2 * abs(m)}
    assert not plots.map_scale(dataclasses.replace(base, summary={**base.summary, "zones": [held, off]})).uniform
