"""Face profiles from CSV: interpolation and validation."""

import math

import numpy as np
import pytest

from heatsight.data_io.errors import InputError
from heatsight.data_io.profiles import load_profile
from heatsight.forward.geometry import Cylinder

CYL = Cylinder(radius=0.15, height=0.04, conductivity=16.0)


def write(tmp_path, text, name="profile.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def end_face_table(fn, unit="degC"):
    rows = [f"r [mm],theta [deg],value [{unit}]"]
    for r in (0.0, 50.0, 100.0, 150.0):
        for th in range(0, 360, 30):
            x, y = r * math.cos(math.radians(th)), r * math.sin(math.radians(th))
            rows.append(f"{r},{th},{fn(x, y)!r}")
            if r == 0.0:
                break
    return "\n".join(rows) + "\n"


def test_end_face_reproduces_linear_field(tmp_path):
    # piecewise-linear interpolation over triangles is exact for a field linear in x, y; the
    # table without its last row is no full polar grid, so it is triangulated
    text = end_face_table(lambda x, y: 100.0 + 0.2 * x - 0.1 * y)
    p = write(tmp_path, "".join(text.splitlines(keepends=True)[:-1]))
    f = load_profile(p, "bottom", "temperature", CYL)
    r = np.array([0.0, 0.03, 0.07, 0.12])
    th = np.array([0.3, 1.0, 2.5, 4.0])
    x, y = 1e3 * r * np.cos(th), 1e3 * r * np.sin(th)
    np.testing.assert_allclose(f(r, th), 273.15 + 100.0 + 0.2 * x - 0.1 * y, rtol=1e-12)
    assert f(r.reshape(2, 2), th.reshape(2, 2)).shape == (2, 2)


def test_end_face_polar_grid_is_interpolated_in_r_and_theta(tmp_path):
    """A table of rings x rays is read as what it is: bilinear in (r, theta), periodic in
    theta.  An axisymmetric flux 10 (1.3 - 0.6 (r/a)^2) kW/m^2 on 10-degree rays was
    triangulated in x, y and came out 0.5 % low midway between the rays; it now stays
    axisymmetric, and its power matches the closed form pi a^2 q0 (the integral of the
    parabola over the disc) to the rings' linear interpolation in r."""
    a = 150.0
    rows = ["r [mm],theta [deg],value [W/m^2]"]
    for r in np.arange(0.0, a + 0.01, 2.5):
        for th in ([0.0] if r == 0 else range(0, 360, 10)):
            rows.append(f"{float(r)},{th},{float(10000.0 * (1.3 - 0.6 * (r / a) ** 2))!r}")
    f = load_profile(write(tmp_path, "\n".join(rows) + "\n"), "bottom", "heat_flux", CYL)
    assert "polar grid" in f.description
    th = np.radians([0.0, 2.5, 5.0, 7.5, 10.0, 355.0])
    np.testing.assert_allclose(f(np.full(th.size, 0.09), th), 10000.0 * (1.3 - 0.6 * 0.36), rtol=1e-12)
    # power over the face by a fine midpoint rule in r (axisymmetric: 2 pi r dr)
    edges = np.linspace(0.0, a / 1e3, 3001)
    mid = 0.5 * (edges[1:] + edges[:-1])
    power = float(np.sum(f(mid, np.full(mid.size, 0.3)) * 2 * math.pi * mid * np.diff(edges)))
    assert power == pytest.approx(math.pi * (a / 1e3) ** 2 * 10000.0, rel=2e-4)
    # a full grid of a field linear in x: exact on the rays and rings, linear in theta between rays
    g = write(tmp_path, end_face_table(lambda x, y: 100.0 + 0.2 * x), "tilt.csv")
    t = load_profile(g, "bottom", "temperature", CYL)
    assert "polar grid" in t.description
    np.testing.assert_allclose(t(np.array([0.1, 0.1]), np.radians([0.0, 30.0])),
                               273.15 + 100.0 + 0.2 * 100.0 * np.cos(np.radians([0.0, 30.0])), rtol=1e-12)
    mid_ray = 0.5 * (math.cos(0.0) + math.cos(math.radians(30)))
    assert t(np.array([0.1]), np.radians([15.0]))[0] == pytest.approx(273.15 + 100.0 + 20.0 * mid_ray, rel=1e-12)


def test_end_face_nearest_outside_hull(tmp_path):
    p = write(tmp_path, "r [mm],theta [deg],value [degC]\n0,0,10\n50,0,20\n50,90,30\n50,180,40\n")
    f = load_profile(p, "top", "temperature", CYL)
    # the rim at theta = 180 deg lies outside the hull: nearest point (50 mm, 180 deg) gives 40 degC
    assert f(np.array([0.15]), np.array([math.pi])) == pytest.approx(273.15 + 40.0)


def test_end_face_axisymmetric_when_one_angle(tmp_path):
    p = write(tmp_path, "r [mm],theta [deg],value [kW/m^2]\n0,0,5\n75,0,4\n150,0,2\n")
    f = load_profile(p, "bottom", "heat_flux", CYL)
    assert "axisymmetric" in f.description
    np.testing.assert_allclose(f(np.array([0.0375, 0.0375, 0.15]), np.array([0.0, 2.0, 4.0])),
                               [4500.0, 4500.0, 2000.0])


def test_side_is_periodic_in_theta(tmp_path):
    rows = ["theta [deg],z [mm],value [degC]"]
    for th in range(10, 360, 20):          # 10, 30, ..., 350 deg: nothing at 0 deg
        for z in (0.0, 40.0):
            rows.append(f"{th},{z},{th}")
    f = load_profile(write(tmp_path, "\n".join(rows) + "\n"), "side", "temperature", CYL)
    # at theta = 0 the interpolation runs between 350 deg (value 350) and 370 = 10 deg (value 10)
    assert f(np.array([0.0]), np.array([0.02])) == pytest.approx(273.15 + 180.0)
    assert f(np.array([2 * math.pi]), np.array([0.02])) == pytest.approx(273.15 + 180.0)
    assert f(np.array([math.radians(20.0)]), np.array([0.01])) == pytest.approx(273.15 + 20.0)


def test_side_single_ring_and_single_line(tmp_path):
    ring = write(tmp_path, "theta [deg],z [mm],value\n0,20,10\n120,20,20\n240,20,30\n", "ring.csv")
    f = load_profile(ring, "side", "temperature", CYL)
    assert f(np.array([math.radians(300.0)]), np.array([0.0])) == pytest.approx(273.15 + 20.0)
    line = write(tmp_path, "theta [deg],z [mm],value\n0,0,10\n0,20,20\n0,40,40\n", "line.csv")
    g = load_profile(line, "side", "temperature", CYL)
    assert g(np.array([3.0]), np.array([0.03])) == pytest.approx(273.15 + 30.0)


def test_degf_values(tmp_path):
    p = write(tmp_path, "r,theta,value [degF]\n0,0,212\n0.1,0,32\n0.15,0,32\n")
    f = load_profile(p, "bottom", "temperature", CYL)
    assert f(np.array([0.0]), np.array([0.0])) == pytest.approx(373.15)   # Fahrenheit definition


@pytest.mark.parametrize("face, text, fragment", [
    ("bottom", "x,y,value\n0,0,1\n1,0,2\n0,1,3\n", "unknown column 'x'"),
    ("bottom", "theta,z,value\n0,0,1\n1,0,2\n0,1,3\n", "unknown column 'z'"),
    ("side", "r,theta,value\n0,0,1\n", "unknown column 'r'"),
    ("bottom", "r,theta,value\n0,0,1\n0.1,0,2\n", "at least 3 distinct points"),
    ("bottom", "r,theta,value\n0,0,1\n0,90,1\n0.1,0,2\n", "at least 3 distinct points"),
    ("bottom", "r,theta,value\n0,0,1\n0.1,0,2\n0.2,0,3\n", "line 4, column 'r': profile point at r = 0.2"),
    ("bottom", "r,theta,value\n0,0,1\n100,0,2\n150,90,3\n", "would fit if they were mm"),
    ("side", "theta,z,value\n0,0,1\n90,0.05,2\n180,0,3\n", "line 3, column 'z'"),
    ("bottom", "r,theta,value\n0,0,1\n0.1,0,warm\n0.1,90,3\n", "line 3, column 'value': 'warm' is not a number"),
    ("bottom", "r,theta,value\n0,0,1\n0.1,0,\n0.1,90,3\n", "missing value"),
    ("bottom", "r,theta,value\n0,0,1\n0.1,0,2\n0.1,360,3\n", "same as the one on line 3"),
    ("bottom", "r,theta,value\n0.1,0,1\n0.05,180,2\n0.1,180,3\n", "on one line"),
    ("bottom", "r,theta,value [W/m^2]\n0,0,1\n0.1,0,2\n0.1,90,3\n", "is a heat flux; expected a temperature"),
    ("bottom", "r,theta,value [K]\n0,0,-1\n0.1,0,2\n0.1,90,3\n", "absolute zero"),
])
def test_profile_refuses(tmp_path, face, text, fragment):
    p = write(tmp_path, text)
    with pytest.raises(InputError) as err:
        load_profile(p, face, "temperature", CYL)
    msg = str(err.value)
    assert fragment in msg and str(p) in msg and "\n" not in msg


def test_a_profile_that_stops_short_of_the_face_says_where(tmp_path):
    # interpolation does not extrapolate: beyond the last point the nearest value holds, and
    # the profile's description (shown by check) says where the points stop
    cyl = Cylinder(0.08, 0.6, 45.0, inner_radius=0.05)
    p = tmp_path / "side.csv"
    p.write_text("theta [deg],z [mm],value [W/m^2]\n0,0,0\n0,78,0\n0,82,11000\n0,258,11000\n0,262,0\n")
    prof = load_profile(p, "side", "heat_flux", cyl)
    assert "cover z = 0-262 mm of the face's 0-600 mm" in prof.description
    assert prof(np.array([0.0]), np.array([0.5]))[0] == 0.0        # the nearest point's value
    p.write_text("theta [deg],z [mm],value [W/m^2]\n0,0,0\n0,300,10\n0,600,0\n")
    assert "cover" not in load_profile(p, "side", "heat_flux", cyl).description
