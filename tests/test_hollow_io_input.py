"""Hollow parts at the data_io edge: the case file's inner_radius, height = "long" and
[faces.bore], wall profiles, sensors and zones.  Mistaken and ill-posed set-ups give one
line naming the key (or file and row), exit 2, nothing written; good ones round-trip."""

import math
import os

import numpy as np
import pytest

from heatsight.data_io.case import load_case
from heatsight.data_io.cli import main

TUBE = """\
[part]
radius = "60 mm"
inner_radius = "40 mm"
height = "300 mm"
conductivity = "16 W/(m*K)"
[faces.bore]
condition = "temperature"
value = "200 degC"
[faces.side]
condition = "convection"
h = "20 W/(m^2*K)"
ambient = "25 degC"
[faces.top]
condition = "insulated"
[faces.bottom]
condition = "insulated"
[sensors]
layout = "layout.csv"
"""
LONG = """\
[part]
radius = "60 mm"
inner_radius = "40 mm"
height = "long"
conductivity = "16 W/(m*K)"
[faces.bore]
condition = "temperature"
value = "200 degC"
[faces.side]
condition = "temperature"
value = "50 degC"
"""
SOLID = """\
[part]
radius = "60 mm"
height = "300 mm"
conductivity = "16 W/(m*K)"
[faces.bottom]
condition = "temperature"
value = "20 degC"
[faces.top]
condition = "insulated"
[faces.side]
condition = "insulated"
"""
LAYOUT = "sensor,r [mm],theta [deg],z [mm]\nT1,45,0,100\nT2,55,90,150\nT3,50,200,200\n"
POINTS = "r [mm],theta [deg],z [mm]\n45,0,100\n"


def sub(old, new, text):
    assert old in text, old
    return text.replace(old, new)


UNKNOWN_BORE = sub('condition = "temperature"\nvalue = "200 degC"', 'condition = "unknown-temperature"', TUBE)
SIM = ["simulate", "case.toml", "--at", "points.csv", "--out", "out.csv"]
CHECK = ["check", "case.toml"]

# name -> (case text, extra files, argv, expected fragment of the one-line message)
CASES = {
    "bore on a solid part": (SOLID + '[faces.bore]\ncondition = "insulated"\n', {}, SIM,
                             "faces.bore: the part is solid (part.inner_radius is absent or 0), so it has no bore"),
    "bore on a zero inner radius": (sub('inner_radius = "40 mm"', 'inner_radius = "0 mm"', TUBE), {}, SIM,
                                    "faces.bore: the part is solid (part.inner_radius is absent or 0)"),
    "sensor beyond the outer wall": (UNKNOWN_BORE, {"layout.csv": LAYOUT.replace("T2,55", "T2,65")}, CHECK,
                                     "(inner radius 40 mm <= r <= radius 60 mm)"),
    "inner radius = radius": (sub('inner_radius = "40 mm"', 'inner_radius = "60 mm"', TUBE), {}, SIM,
                              "part.inner_radius: the inner radius '60 mm' must be below the radius '60 mm'"),
    "inner radius > radius": (sub('inner_radius = "40 mm"', 'inner_radius = "7 cm"', TUBE), {}, SIM,
                              "part.inner_radius: the inner radius '7 cm' must be below"),
    "negative inner radius": (sub('inner_radius = "40 mm"', 'inner_radius = "-4 mm"', TUBE), {}, SIM,
                              "part.inner_radius: the inner radius must be 0 (solid) or a positive length"),
    "long without inner radius": (sub('height = "300 mm"', 'height = "long"', SOLID), {}, SIM,
                                  "part.height: height = \"long\" is for a hollow part"),
    "hollow and semi-infinite": (sub('height = "300 mm"', 'height = "infinite"', TUBE), {}, SIM,
                                 "part.height: a hollow part has no semi-infinite form"),
    "top face on a long part": (LONG + '[faces.top]\ncondition = "insulated"\n', {}, SIM,
                                "faces.top: a long part (height = \"long\") has no end faces"),
    "bottom face on a long part": (LONG + '[faces.bottom]\ncondition = "insulated"\n', {}, SIM,
                                   "faces.bottom: a long part (height = \"long\") has no end faces"),
    "bore missing on a hollow part": (sub('[faces.bore]\ncondition = "temperature"\nvalue = "200 degC"\n', "", TUBE),
                                      {}, SIM, "faces.bore: missing [faces.bore] table"),
    "sensor inside the bore": (UNKNOWN_BORE, {"layout.csv": LAYOUT.replace("T2,55", "T2,30")}, CHECK,
                               "layout.csv: line 3, column 'r [mm]': sensor at r = 30 (mm) lies inside the bore"),
    "point inside the bore": (TUBE, {"points.csv": POINTS.replace("45,0", "39.9,0")}, SIM,
                              "point at r = 39.9 (mm) lies inside the bore"),
    "zone r-window inside the bore": (
        sub('[faces.bottom]\ncondition = "insulated"', '[faces.bottom]\ncondition = "unknown-flux"', TUBE)
        + '[[zones]]\nname = "core"\nr = ["0 mm", "50 mm"]\n', {}, CHECK,
        "zones[1].r: the range reaches into the bore"),
    "zone with z on a long part": (
        sub('condition = "temperature"\nvalue = "200 degC"', 'condition = "unknown-temperature"', LONG)
        + '[sensors]\nlayout = "layout.csv"\n[[zones]]\nname = "low"\nz = ["0 mm", "50 mm"]\n', {}, CHECK,
        "zones[1].z: a long part (height = \"long\") does not vary along z"),
    "zone nominal in W on a long part": (
        sub('condition = "temperature"\nvalue = "200 degC"', 'condition = "unknown-temperature"', LONG)
        + '[sensors]\nlayout = "layout.csv"\n[[zones]]\nname = "hot side"\ntheta = ["0 deg", "90 deg"]\n'
        'nominal = "400 W"\n', {}, CHECK, "zones[1].nominal"),
    "zone with r on the bore": (UNKNOWN_BORE + '[[zones]]\nname = "x"\nr = ["40 mm", "50 mm"]\n', {}, CHECK,
                                "zones[1].r: a zone on the bore face (a wall) takes theta and z, not r"),
    "long-part profile with a z column": (
        sub('value = "200 degC"', 'profile = "bore.csv"', LONG),
        {"bore.csv": "theta [deg],z [mm],value [degC]\n0,0,200\n120,0,210\n240,0,190\n"}, SIM,
        "bore.csv: a long part (height = \"long\") does not vary along z: a profile on its bore takes the "
        "columns theta, value"),
    "end-face profile inside the bore": (
        sub('[faces.bottom]\ncondition = "insulated"', '[faces.bottom]\ncondition = "temperature"\n'
            'profile = "bottom.csv"', TUBE),
        {"bottom.csv": "r [mm],theta [deg],value [degC]\n20,0,30\n50,90,31\n60,180,32\n"}, SIM,
        "bottom.csv: line 2, column 'r [mm]': profile point at r = 20 (mm) lies inside the bore"),
    "bore profile above the top": (
        sub('value = "200 degC"', 'profile = "bore.csv"', TUBE),
        {"bore.csv": "theta [deg],z [mm],value [degC]\n0,0,200\n120,150,210\n240,400,190\n"}, SIM,
        "bore.csv: line 4, column 'z [mm]': profile point at z = 400 (mm) lies outside the part"),
}


def snapshot(folder):
    return {p: (p.stat().st_size, p.read_bytes()) for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.mark.parametrize("name", sorted(CASES))
def test_bad_hollow_input(tmp_path, monkeypatch, capsys, name):
    case, extra, argv, fragment = CASES[name]
    content = {"case.toml": case, "layout.csv": LAYOUT, "points.csv": POINTS, **extra}
    for fname, text in content.items():
        (tmp_path / fname).write_text(text, encoding="utf-8")
    before = snapshot(tmp_path)
    monkeypatch.chdir(tmp_path)
    code = main(argv)
    captured = capsys.readouterr()
    assert code == 2, captured.err
    err = captured.err
    assert err.startswith("heatsight: error: ") and err.count("\n") == 1, err
    assert "Traceback" not in err
    assert fragment in err, err
    assert snapshot(tmp_path) == before
    assert not os.path.exists(tmp_path / "out.csv")


def _write(folder, **files):
    for name, text in files.items():
        (folder / name).write_text(text, encoding="utf-8")
    return folder / "case.toml"


def test_hollow_case_round_trip(tmp_path):
    case = load_case(_write(tmp_path, **{"case.toml": UNKNOWN_BORE, "layout.csv": LAYOUT}), purpose="fit")
    cyl = case.cylinder
    assert cyl.inner_radius == pytest.approx(0.040) and cyl.radius == pytest.approx(0.060)
    assert cyl.faces == ("bottom", "top", "side", "bore") and not cyl.long
    assert case.unknown_face == "bore"
    assert case.part_text["inner_radius"] == "40 mm"
    long = load_case(_write(tmp_path, **{"case.toml": LONG}), purpose="simulate")
    assert long.cylinder.long and long.cylinder.faces == ("side", "bore")
    # 0 (or absent) is a solid part, as before
    solid = load_case(_write(tmp_path, **{"case.toml": sub('radius = "60 mm"', 'radius = "60 mm"\ninner_radius = "0 mm"',
                                                          SOLID)}), purpose="simulate")
    assert not solid.cylinder.hollow and solid.cylinder.faces == ("bottom", "top", "side")


def test_bore_profile_reproduces_its_points(tmp_path):
    """A (theta, z, value) table on the bore is interpolated through its own points and is
    periodic in theta; the forward receives f(theta [rad], z [m]) in K."""
    rows = ["theta [deg],z [mm],value [degC]"]
    pts = []
    for t in range(0, 360, 30):
        for z in (0, 150, 300):
            v = 200 + 10 * math.cos(math.radians(t)) + 0.02 * z
            rows.append(f"{t},{z},{v}")
            pts.append((math.radians(t), z / 1e3, v + 273.15))
    case = load_case(_write(tmp_path, **{"case.toml": sub('value = "200 degC"', 'profile = "bore.csv"', TUBE),
                                         "bore.csv": "\n".join(rows) + "\n", "layout.csv": LAYOUT}))
    prof = case.profiles["bore"]
    t, z, v = (np.array(c) for c in zip(*pts))
    assert np.allclose(prof(t, z), v, atol=1e-9)
    assert np.allclose(prof(t + 2 * math.pi, z), v, atol=1e-9)      # periodic in theta
    # between points the interpolant lies between its neighbours (piecewise linear)
    mid = prof(math.radians(15), 0.075)
    corners = [200 + 10 * math.cos(math.radians(a)) + 0.02 * b + 273.15 for a in (0, 30) for b in (0, 150)]
    assert min(corners) - 1e-9 <= mid <= max(corners) + 1e-9


def test_long_part_profile_in_theta_only(tmp_path):
    rows = "theta [deg],value [W/m^2]\n0,1000\n90,2000\n180,3000\n270,2000\n"
    text = sub('condition = "temperature"\nvalue = "200 degC"', 'condition = "flux"\nprofile = "bore.csv"', LONG)
    case = load_case(_write(tmp_path, **{"case.toml": text, "bore.csv": rows}))
    f = case.profiles["bore"]
    th = np.radians([0, 45, 90, 315, 360])
    # periodic linear interpolation in theta; z plays no part
    assert np.allclose(f(th, np.zeros(5)), [1000, 1500, 2000, 1500, 1000])
    assert np.allclose(f(th, np.full(5, 7.0)), f(th, np.zeros(5)))


def test_layout_of_a_long_part_needs_no_z(tmp_path):
    text = sub('condition = "temperature"\nvalue = "200 degC"', 'condition = "unknown-temperature"', LONG) \
        + '[sensors]\nlayout = "layout.csv"\n'
    from heatsight.data_io.tables import read_layout

    case = load_case(_write(tmp_path, **{"case.toml": text,
                                         "layout.csv": "sensor,r [mm],theta [deg]\nA,45,0\nB,55,180\n"}))
    layout = read_layout(case.sensors.layout, case.cylinder)
    assert np.allclose(layout.frame["z"], 0.0) and np.allclose(layout.frame["r"], [0.045, 0.055])


def test_zones_on_the_bore(tmp_path):
    text = UNKNOWN_BORE + ('[[zones]]\nname = "hot"\ntheta = ["-45 deg", "45 deg"]\nz = ["100 mm", "200 mm"]\n'
                           '[[zones]]\nname = "all"\n')
    case = load_case(_write(tmp_path, **{"case.toml": text, "layout.csv": LAYOUT}))
    hot, whole = case.zones
    assert hot.face == "bore" and hot.r is None
    assert hot.z == pytest.approx((0.1, 0.2)) and hot.theta == pytest.approx((-math.pi / 4, math.pi / 4))
    assert whole.z == pytest.approx((0.0, 0.3))
    # an end-face zone of a hollow part spans inner_radius..radius by default
    end = sub('[faces.bottom]\ncondition = "insulated"', '[faces.bottom]\ncondition = "unknown-flux"',
              TUBE) + '[[zones]]\nname = "ring"\n'
    case = load_case(_write(tmp_path, **{"case.toml": end, "layout.csv": LAYOUT}))
    assert case.zones[0].r == pytest.approx((0.04, 0.06))


def test_long_part_zone_nominal_is_per_metre(tmp_path):
    """A long part's powers are per metre of length (its plane problem), so is a zone's
    nominal: "3 kW/m" reads as 3000 W/m (pint)."""
    text = (sub('condition = "temperature"\nvalue = "200 degC"', 'condition = "unknown-temperature"', LONG)
            + '[sensors]\nlayout = "layout.csv"\n[[zones]]\nname = "hot side"\ntheta = ["0 deg", "90 deg"]\n'
            'nominal = "3 kW/m"\n')
    case = load_case(_write(tmp_path, **{"case.toml": text, "layout.csv": LAYOUT}), purpose="fit")
    assert case.zones[0].nominal == pytest.approx(3000.0)
