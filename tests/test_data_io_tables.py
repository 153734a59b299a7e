"""CSV readers: layout, snapshot and log readings, query points."""

import math

import numpy as np
import pytest

from heatsight.data_io.errors import InputError
from heatsight.data_io.tables import read_layout, read_log, read_points, read_readings, read_snapshot
from heatsight.data_io import thermocouples as tc
from heatsight.forward.geometry import Cylinder

CYL = Cylinder(radius=0.15, height=0.04, conductivity=16.0)

LAYOUT = """sensor,r [mm],theta [deg],z [mm],sigma [K],type,class
TC1,0,0,10,,K,1
TC2,50,90,10,0.2,K,
TC3,100,180,5,,,
"""


def write(tmp_path, name, text):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


@pytest.fixture
def layout(tmp_path):
    return read_layout(write(tmp_path, "layout.csv", LAYOUT), CYL)


def test_layout_in_si(layout):
    fr = layout.frame
    assert list(fr.index) == ["TC1", "TC2", "TC3"]
    np.testing.assert_allclose(fr["r"], [0.0, 0.05, 0.1])
    np.testing.assert_allclose(fr["theta"], [0.0, math.pi / 2, math.pi])
    np.testing.assert_allclose(fr["z"], [0.01, 0.01, 0.005])
    assert fr.at["TC2", "sigma"] == 0.2 and math.isnan(fr.at["TC1", "sigma"])
    assert list(fr["type"]) == ["K", "K", ""]
    assert list(fr["class"]) == ["1", tc.DEFAULT_CLASS, ""]
    assert any("TC2" in w and "assumed" in w for w in layout.warnings)


def test_layout_default_units_m_and_deg(tmp_path):
    t = read_layout(write(tmp_path, "l.csv", "sensor,r,theta,z\nA,0.1,45,0.02\n"), CYL)
    assert t.frame.at["A", "r"] == 0.1
    assert t.frame.at["A", "theta"] == pytest.approx(math.pi / 4)


def test_layout_sigma_as_fahrenheit_difference(tmp_path):
    t = read_layout(write(tmp_path, "l.csv", "sensor,r,theta,z,sigma [degF]\nA,0.1,0,0.02,0.9\n"), CYL)
    assert t.frame.at["A", "sigma"] == pytest.approx(0.5)   # 0.9 degF difference = 0.5 K (definition)


def test_snapshot(tmp_path, layout):
    p = write(tmp_path, "r.csv", "sensor,temperature [degF],sigma [K]\nTC1,212,\nTC2,32,\nTC3,122,0.3\n")
    t = read_snapshot(p, layout)
    fr = t.frame
    np.testing.assert_allclose(fr["temperature"], [373.15, 273.15, 323.15])  # Fahrenheit definition
    # sigma: readings' own, else layout's, else the default
    np.testing.assert_allclose(fr["sigma"], [tc.DEFAULT_SIGMA_K, 0.2, 0.3])
    # type K class 1 at 100 degC: 1.5 degC (IEC 60584-1, from memory) / sqrt(3) (GUM §4.3.7)
    assert fr.at["TC1", "offset_sd"] == pytest.approx(1.5 / math.sqrt(3))
    assert fr.at["TC3", "offset_sd"] == 0.0
    assert t.kind == "snapshot"


def test_snapshot_nan_dropped_with_warning(tmp_path, layout):
    p = write(tmp_path, "r.csv", "sensor,temperature\nTC1,80\nTC2,NaN\nTC3,inf\n")
    t = read_snapshot(p, layout)
    assert list(t.frame.index) == ["TC1"]
    assert any("TC2" in w and "TC3" in w and "dropped" in w for w in t.warnings)


def test_snapshot_missing_sensor_warns(tmp_path, layout):
    t = read_snapshot(write(tmp_path, "r.csv", "sensor,temperature\nTC1,80\nTC3,70\n"), layout)
    assert any("TC2" in w for w in t.warnings)


@pytest.mark.parametrize("text, fragment", [
    ("sensor,temperature\nTC1,80\nTC1,81\n", "line 3, column 'sensor': sensor 'TC1' appears twice"),
    ("sensor,temperature\nTC1,hot\n", "line 2, column 'temperature': 'hot' is not a number"),
    ("sensor,temperature\nTC1,80 degC\n", "put the unit in the header"),
    ("sensor,temperature\nTC9,80\n", "sensor 'TC9' is not in the layout"),
    ("sensor,temperature\nTC,80\n", "did you mean 'TC"),
    ("sensor,temperature\nTC1,80\ntc2,81\n", "sensor 'tc2' is not in the layout"),    # letter case only
    ("sensor,temperature\nTC1,80\ntc2,81\n", "did you mean 'TC2', which has no reading"),
    ("sensor,temperature\nTC1,2000\n", "likely an open circuit"),
    ("sensor,temperature [K]\nTC3,-5\n", "absolute zero"),
    ("sensor,temp\nTC1,80\n", "unknown column 'temp'"),
    ("sensor,temperature\nTC1,NaN\nTC2,nan\nTC3,\n", "no valid reading"),
    ("sensor,temperature\nTC1,80,3\n", "malformed CSV"),
    ("", "the file is empty"),
    ("sensor,temperature\n", "no data rows"),
    ("sensor,temperature,sigma\nTC1,80,-1\n", "sigma must be positive"),
    ("sensor,temperature,sigma [K]\nTC1,80,1e-9\n", "line 2, column 'sigma [K]': sigma 1e-09 K is below 0.0001 K"),
])
def test_snapshot_refuses(tmp_path, layout, text, fragment):
    p = write(tmp_path, "readings.csv", text)
    with pytest.raises(InputError) as err:
        read_snapshot(p, layout)
    msg = str(err.value)
    assert fragment in msg and str(p) in msg and "\n" not in msg


@pytest.mark.parametrize("text, fragment", [
    ("sensor,r,theta,z\nA,0.1,0,0.02\nA,0.1,0,0.03\n", "line 3, column 'sensor': sensor 'A' appears twice"),
    ("sensor,r,theta,z\nA,,0,0.02\n", "line 2, column 'r': missing value"),
    ("sensor,r,theta,z\nA,x,0,0.02\n", "'x' is not a number"),
    ("sensor,r,theta\nA,0.1,0\n", "needs the column z"),
    ("sensor,r,thetta,z\nA,0.1,0,0.02\n", "did you mean 'theta'?"),
    ("sensor,r,theta,z\nA,100,0,20\n", "the values would fit if they were mm: write 'r [mm]'"),
    ("sensor,r [mm],theta,z\nA,100,0,20\n", "line 2, column 'z': sensor at z = 20 (m) lies outside"),
    ("sensor,r,theta,z\nA,-0.1,0,0.02\n", "outside the part"),
    ("sensor,r [W],theta,z\nA,0.1,0,0.02\n", "is a power; expected a length"),
    ("sensor,r,theta,z,type\nA,0.1,0,0.02,X\n", "unknown thermocouple type 'X'"),
    ("sensor,r,theta,z,type,class\nA,0.1,0,0.02,J,3\n", "no tolerance is defined for type J"),
    ("sensor,r,theta,z,class\nA,0.1,0,0.02,1\n", "without a thermocouple type"),
    ("sensor,r,theta,z,sigma\nA,0.1,0,0.02,0\n", "sigma must be positive"),
    ("sensor,r,theta,z,sigma [mK]\nA,0.1,0,0.02,0.01\n", "column 'sigma [mK]': sigma 1e-05 K is below 0.0001 K"),
    ("sensor,r,r,z\nA,0.1,0,0.02\n", "appears twice"),
    ("sensor,r,theta,z\n,0.1,0,0.02\n", "missing sensor"),
])
def test_layout_refuses(tmp_path, text, fragment):
    p = write(tmp_path, "layout.csv", text)
    with pytest.raises(InputError) as err:
        read_layout(p, CYL)
    msg = str(err.value)
    assert fragment in msg and str(p) in msg and "\n" not in msg


def test_line_numbers_count_blank_lines(tmp_path):
    p = write(tmp_path, "l.csv", "sensor,r,theta,z\n\nA,0.1,0,0.02\n\nB,bad,0,0.02\n")
    with pytest.raises(InputError, match="line 5, column 'r'"):
        read_layout(p, CYL)


def test_missing_and_non_utf8_files(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        read_layout(tmp_path / "nope.csv", CYL)
    p = tmp_path / "latin.csv"
    p.write_bytes("sensor,r,theta,z\nTC\xb0,0.1,0,0.02\n".encode("latin-1"))
    # issue 10: Latin-1 / Windows-1252 text is read (it used to be refused as not UTF-8)
    assert list(read_layout(p, CYL).frame.index) == ["TC\xb0"]


def test_bom_is_accepted(tmp_path):
    p = tmp_path / "l.csv"
    p.write_bytes("\ufeffsensor,r,theta,z\nA,0.1,0,0.02\n".encode("utf-8"))
    assert list(read_layout(p, CYL).frame.index) == ["A"]


def test_log_with_timestamps(tmp_path, layout):
    p = write(tmp_path, "log.csv", "time,TC1,TC2 [degF]\n2024-05-01T08:00:00,80,212\n"
                                   "2024-05-01T08:00:30,81,NaN\n2024-05-01T08:01:00,82,210\n")
    t = read_log(p, layout)
    np.testing.assert_allclose(t.frame.index, [0.0, 30.0, 60.0])
    assert t.frame.index.name == "time_s"
    assert t.frame.at[0.0, "TC2"] == pytest.approx(373.15)    # definition of the Fahrenheit scale
    assert math.isnan(t.frame.at[30.0, "TC2"])
    assert any("TC2" in w for w in t.warnings)
    assert read_readings(p, layout).kind == "log"


def test_log_with_minutes(tmp_path, layout):
    t = read_log(write(tmp_path, "log.csv", "time [min],TC1\n0,80\n1.5,81\n"), layout)
    np.testing.assert_allclose(t.frame.index, [0.0, 90.0])


@pytest.mark.parametrize("text, fragment", [
    ("time,TC1\n0,80\n0,81\n", "times must increase"),
    ("time,TC1\n0,80\nlater,81\n", "neither a number of seconds nor an ISO 8601 timestamp"),
    ("time,TC9\n0,80\n", "sensor 'TC9' is not in the layout"),
    ("TC1,TC2\n80,81\n", "a log starts with a time column"),
    ("time,TC1\n0,3000\n", "likely an open circuit"),
    ("time,TC1,TC1\n0,80,80\n", "appears twice"),
])
def test_log_refuses(tmp_path, layout, text, fragment):
    with pytest.raises(InputError, match=fragment):
        read_log(write(tmp_path, "log.csv", text), layout)


def test_points(tmp_path):
    t = read_points(write(tmp_path, "p.csv", "r [mm],theta [deg],z [mm]\n0,0,20\n150,360,40\n"), CYL)
    np.testing.assert_allclose(t.frame["r"], [0.0, 0.15])
    np.testing.assert_allclose(t.frame["theta"], [0.0, 2 * math.pi])
    np.testing.assert_allclose(t.frame["z"], [0.02, 0.04])


def test_points_outside_semi_infinite(tmp_path):
    cyl = Cylinder(radius=0.15, height=math.inf)
    t = read_points(write(tmp_path, "p.csv", "r,theta,z\n0.1,0,5\n"), cyl)
    assert t.frame.at[0, "z"] == 5.0
    with pytest.raises(InputError, match="z >= 0"):
        read_points(write(tmp_path, "q.csv", "r,theta,z\n0.1,0,-1\n"), cyl)
