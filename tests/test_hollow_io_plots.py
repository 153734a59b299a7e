"""Figures of hollow parts: an end-face map shows the bore; the estimate spans r from the
inner radius; a long part's wall is drawn as a theta curve with its band.

Readings come from textbook closed forms (no fit basis involved):
- an annular plate heated uniformly from below (q), insulated on both walls, convection on
  top (h, T_inf): 1-D conduction in z, T(z) = T_inf + q/h + q (L - z)/k (plane wall with
  convection, Incropera & DeWitt ch. 3; from memory); power in = q pi (b^2 - a^2);
- a long tube with the bore at T_i and the outside at T_o: T(r) = T_i + (T_o - T_i)
  ln(r/a)/ln(b/a) (cylindrical wall, same source; from memory).
"""

import math

import numpy as np
import pytest

import heatsight
from heatsight.data_io import plots
from heatsight.data_io.case import load_case

A, B, L, K = 0.020, 0.060, 0.030, 16.0
Q, H, T_INF = 5000.0, 200.0, 25.0

ANNULAR_PLATE = """\
[part]
radius = "60 mm"
inner_radius = "20 mm"
height = "30 mm"
conductivity = "16 W/(m*K)"
[faces.bottom]
condition = "unknown-flux"
[faces.top]
condition = "convection"
h = "200 W/(m^2*K)"
ambient = "25 degC"
[faces.side]
condition = "insulated"
[faces.bore]
condition = "insulated"
[sensors]
layout = "layout.csv"
readings = "readings.csv"
[fit]
harmonics = 2
terms = 4
"""
LONG_TUBE = """\
[part]
radius = "60 mm"
inner_radius = "40 mm"
height = "long"
conductivity = "16 W/(m*K)"
[faces.bore]
condition = "unknown-temperature"
[faces.side]
condition = "temperature"
value = "50 degC"
[sensors]
layout = "layout.csv"
readings = "readings.csv"
[[zones]]
name = "east"
theta = ["-30 deg", "30 deg"]
"""


def _fit(tmp_path, case, sensors, temperature):
    layout = ["sensor,r [mm],theta [deg],z [mm]"]
    readings = ["sensor,temperature [degC]"]
    for i, (r, t, z) in enumerate(sensors, 1):
        layout.append(f"S{i},{r * 1e3:g},{t:g},{z * 1e3:g}")
        readings.append(f"S{i},{temperature(r, z):.6f}")
    (tmp_path / "layout.csv").write_text("\n".join(layout) + "\n")
    (tmp_path / "readings.csv").write_text("\n".join(readings) + "\n")
    (tmp_path / "case.toml").write_text(case)
    return heatsight.fit(str(tmp_path / "case.toml")).raw


@pytest.fixture(scope="module")
def annular(tmp_path_factory):
    sensors = [(r, t, 0.010) for t in range(0, 360, 60) for r in (0.025, 0.040, 0.055)]
    plate = lambda r, z: T_INF + Q / H + Q * (L - z) / K     # noqa: E731  (closed form, module docstring)
    return _fit(tmp_path_factory.mktemp("annular"), ANNULAR_PLATE, sensors, plate)


def test_annular_plate_power_and_grid(annular):
    power, sd = annular.summary["total_power_W"], annular.summary["total_power_sd_W"]
    expected = Q * math.pi * (B ** 2 - A ** 2)                   # uniform flux over the annulus
    assert abs(power - expected) <= max(1.96 * sd, 1e-3 * expected), (power, sd, expected)
    r = np.asarray(annular.grid["r_m"], float)
    assert r.min() == pytest.approx(A) and r.max() == pytest.approx(B)


def test_end_face_map_shows_the_bore(annular):
    fig = plots.face_map(annular)
    ax = fig.axes[0]
    bore = [ln for ln in ax.get_lines() if ln.get_gid() == "bore"]
    assert len(bore) == 1 and np.allclose(bore[0].get_ydata(), A * 1e3)
    assert any(t.get_text() == "bore" for t in ax.texts)
    prof = plots.profiles(annular)
    assert prof.axes[0].get_xlim() == pytest.approx((A * 1e3, B * 1e3))   # out from the bore


def test_long_wall_is_a_theta_curve(tmp_path):
    a, b, ti, to = 0.040, 0.060, 180.0, 50.0
    sensors = [(r, t, 0.0) for t in range(0, 360, 45) for r in (0.045, 0.055)]
    tube = lambda r, z: ti + (to - ti) * math.log(r / a) / math.log(b / a)   # noqa: E731 (closed form)
    result = _fit(tmp_path, LONG_TUBE, sensors, tube)
    fig = plots.face_map(result, zones=load_case(tmp_path / "case.toml").zones)
    ax = fig.axes[0]
    assert any(p.get_gid() == "zone:east" for p in ax.patches)
    assert ax.name == "rectilinear" and ax.get_xlim() == (0.0, 360.0)
    curve = next(ln for ln in ax.get_lines() if ln.get_gid() == "profile:theta")
    assert np.allclose(curve.get_ydata(), ti, atol=1.0)        # the uniform bore, within 1 K
    rug = [ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("sensors:")]
    assert sum(len(ln.get_xdata()) for ln in rug) == len(sensors)
    assert "long part" in ax.get_title()
    band = plots.band_width_map(result).axes[0]
    width = next(ln for ln in band.get_lines() if ln.get_gid() == "band:theta").get_ydata()
    assert np.all(width > 0)


def test_zone_names_on_the_long_curve_do_not_overlap():
    """Zone names sit at the top of their theta windows; a name that would overlap another
    goes to a row below (quadrants with a narrower zone inside one, as engineers declare a
    fouled side or a weld inside a quadrant)."""
    import types
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from heatsight.data_io import wall_curve
    from heatsight.inverse import Zone
    assert wall_curve._label_rows([(0, 10), (5, 15), (20, 30), (8, 12), (11, 19)]) == [0, 1, 0, 2, 0]
    fig, ax = wall_curve._axes("zones")
    zones = [Zone(name, "bore", (math.radians(a), math.radians(b))) for name, a, b in
             [("bore 0-90 deg", 0, 90), ("fouled side", 30, 75), ("inlet weld", 40, 50), ("east", 80, 100),
              ("bore 270-360 deg", 270, 360)]]
    wall_curve._zone_spans(ax, types.SimpleNamespace(face="bore"), zones)
    renderer = FigureCanvasAgg(fig).get_renderer()
    fig.draw(renderer)
    boxes = [t.get_window_extent(renderer) for t in ax.texts if str(t.get_gid()).startswith("zone label:")]
    assert len(boxes) == len(zones)
    assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])


def test_a_long_parts_plan_is_drawn_as_its_cross_section(tmp_path):
    """A long part has no height to map: the plan's band figure shows the sd now and after the
    picks against theta, and its layout places holes by angle and radius through the wall (both
    were empty before: a map of one line of z)."""
    from heatsight.data_io.plan_command import compute_plan
    from heatsight.data_io.plan_outputs import band_maps, layout_figure

    a, b, ti, to = 0.040, 0.060, 180.0, 50.0
    sensors = [(r, t, 0.0) for t in range(0, 360, 45) for r in (0.045, 0.055)]
    tube = lambda r, z: ti + (to - ti) * math.log(r / a) / math.log(b / a)   # noqa: E731 (closed form)
    _fit(tmp_path, LONG_TUBE, sensors, tube)
    run = compute_plan(load_case(tmp_path / "case.toml"), 2)
    ax = band_maps(run).axes[0]
    now, after = (ln.get_ydata() for ln in ax.get_lines()[:2])
    assert len(now) == len(after) > 10 and np.all(after <= now + 1e-9) and np.any(after < now)
    lay = layout_figure(run).axes[0]
    assert lay.get_ylim() == pytest.approx((40.0, 60.0))
    marks = [ln for ln in lay.get_lines() if ln.get_label() == "existing sensor"][0]
    assert np.allclose(sorted(set(np.round(marks.get_ydata(), 6))), [45.0, 55.0])
    # the plan proposes holes in a wall that may hold fluid under pressure: its warnings, its
    # report and its summary say so (they did not), and its powers are per metre
    from heatsight.data_io.plan_outputs import output_files
    from heatsight.data_io.report_text import HOLLOW_CAUTION
    assert HOLLOW_CAUTION in run.warnings
    files, summary = output_files(run)
    assert HOLLOW_CAUTION in summary["cautions"] and "pressure" in dict(files)["plan.html"]
    assert {t["unit"] for t in summary["targets"] if t["name"] == "total_power"} == {"W/m"}


def test_a_long_parts_files_name_powers_per_metre(tmp_path):
    """Every power of a long part is per metre: plan.csv's column and a zone's nominal rating in
    summary.json say so (they said _W)."""
    from heatsight.data_io.csv_columns import unit_token
    from heatsight.data_io.plan_command import compute_plan
    from heatsight.data_io.plan_outputs import picks_frame

    assert unit_token("W/m") == "W_per_m" and unit_token("W/m^2") == "W_m2"
    a, b, ti, to = 0.040, 0.060, 180.0, 50.0
    sensors = [(r, t, 0.0) for t in range(0, 360, 45) for r in (0.045, 0.055)]
    tube = lambda r, z: ti + (to - ti) * math.log(r / a) / math.log(b / a)   # noqa: E731 (closed form)
    _fit(tmp_path, LONG_TUBE, sensors, tube)
    frame = picks_frame(compute_plan(load_case(tmp_path / "case.toml"), 1, targets=["power"]))
    assert "sd_total_power_W_per_m" in frame.columns


def test_bore_map_is_drawn_as_seen_from_the_axis():
    """Seen from the axis, the angle around a bore grows to the left (theta counter-clockwise
    seen from above; an observer inside facing the wall has +theta on the left); the side,
    seen from outside, grows to the right.  The bore's map draws it so (a review found it
    mirrored under its 'seen from the axis' title)."""
    from types import SimpleNamespace

    from heatsight import inverse
    from heatsight.forward import Convection, Cylinder, CylinderModel, Insulated, Temperature, UnknownTemperature

    cyl = Cylinder(0.08, 0.2, 45.0, inner_radius=0.06)
    known = {"bottom": Insulated(), "top": Insulated(), "side": Convection(15.0, 293.15)}
    truth = CylinderModel(cyl, {**known, "bore": Temperature(lambda th, z: 400.0 + 10.0 * np.cos(th))})
    th = np.repeat(np.radians(np.arange(0, 360, 45)), 2)
    z = np.tile([0.06, 0.14], 8)
    r = np.full(th.size, 0.07)
    rd = inverse.SensorReadings([f"W{i}" for i in range(th.size)], r, th, z, truth.temperature(r, th, z),
                                np.full(th.size, 0.1), np.zeros(th.size), np.zeros(th.size))
    res = inverse.fit(SimpleNamespace(cylinder=cyl, faces={**known, "bore": UnknownTemperature()}, zones=[]), rd,
                      prior="fixed", grid=(7, 16))
    ax = plots.face_map(res).axes[0]
    assert "seen from the axis" in ax.get_title() and ax.get_xlim() == (360.0, 0.0)
