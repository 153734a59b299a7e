"""Fuzzing every reader through the functions the command line uses (issue 10): layout,
snapshot, log, profile, query points and the case file.  Whatever the bytes, a reader either
raises the project's InputError or returns finite values (a log keeps NaN only for a missing
reading, which its warnings name); never another exception.

Inputs are built from the pieces plant files are made of and the ways they go wrong
(separators, decimal commas, encodings, blank and ragged lines, control characters, overflow
codes, huge and tiny numbers, units).
"""

import numpy as np
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from heatsight.data_io.case import load_case
from heatsight.data_io.errors import InputError
from heatsight.data_io.limits import check_case
from heatsight.data_io.profiles import load_profile
from heatsight.data_io.tables import read_layout, read_log, read_points, read_readings
from heatsight.forward import Cylinder

CYL = Cylinder(0.15, 0.04, 16.0)
SETTINGS = settings(max_examples=150, deadline=None, derandomize=True,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

NUMBERS = ["0", "1", "10", "25", "-5", "80.5", "80,5", "1e308", "-1e308", "1e-320", "9.9E+37", "nan", "NaN",
           "inf", "-inf", "", " ", "N/A", "x", "1 mm", "0x10", "1_000", "٣", "150", "0.1", "1e3", '"5"']
IDS = ["TC1", "TC2", "TC3", "tc1", "", "=cmd", "TC\x1b[2J", "TC°", "température", "TC1 ", '"TC,1"', "a" * 300]
UNITS = ["", " [mm]", " [m]", " [deg]", " [rad]", " [degC]", " [C]", " [F]", " [K]", " [psi]", " [", " []",
         " [mm]]", " [kW/m^2]", " [s]", " [min]"]
TIMES = ["0", "10", "20", "5", "", "2024-05-01T08:00:00", "2024-05-01T08:00:10+02:00", "2024-05-01 08:00:20Z",
         "later", "1e20", "-1"]
SEPARATORS = [",", ";", "\t", "|"]
ENDINGS = ["\n", "\r\n", "\r"]
ENCODINGS = ["utf-8", "utf-8-sig", "cp1252", "latin-1", "utf-16"]


def _cell(pool):
    return st.sampled_from(pool)


@st.composite
def table(draw, columns, cells, rows=(0, 6)):
    """Bytes of a table: a header from `columns` (with units) and rows of `cells`."""
    sep = draw(st.sampled_from(SEPARATORS))
    end = draw(st.sampled_from(ENDINGS))
    header = draw(st.lists(st.tuples(st.sampled_from(columns), st.sampled_from(UNITS)), min_size=0, max_size=6))
    names = [c + u for c, u in header]
    lines = [sep.join(names)]
    width = max(len(names), 1)
    for _ in range(draw(st.integers(*rows))):
        n = draw(st.sampled_from([width, width, width, width - 1, width + 1, 0]))
        lines.append(sep.join(draw(_cell(cells)) for _ in range(max(n, 0))))
    if draw(st.booleans()):
        lines.insert(0, "")
    text = end.join(lines) + draw(st.sampled_from(["", end, end + end]))
    if draw(st.integers(0, 9)) == 0:
        text = text.replace("1", "\x00", 1)
    try:
        return text.encode(draw(st.sampled_from(ENCODINGS)))
    except UnicodeEncodeError:
        return text.encode("utf-8")


def _finite(frame, columns):
    for c in columns:
        assert np.all(np.isfinite(frame[c].to_numpy(float))), c


@pytest.fixture(scope="module")
def layout(tmp_path_factory):
    p = tmp_path_factory.mktemp("lay") / "layout.csv"
    p.write_text("sensor,r [mm],theta [deg],z [mm]\nTC1,0,0,10\nTC2,50,90,10\nTC3,100,180,5\n")
    return read_layout(p, CYL)


@SETTINGS
@given(data=table(["sensor", "r", "theta", "z", "sigma", "type", "class", "note", "x"], NUMBERS + IDS + ["K", "1"]))
def test_layout_reader(tmp_path, data):
    p = tmp_path / "layout.csv"
    p.write_bytes(data)
    try:
        t = read_layout(p, CYL)
    except InputError:
        event("refused")
        return
    event("read")
    _finite(t.frame, ["r", "theta", "z", "position_tolerance"])
    sig = t.frame["sigma"].to_numpy(float)
    assert np.all(np.isnan(sig) | (sig > 0))


@SETTINGS
@given(data=table(["sensor", "temperature", "sigma", "time", "TC1", "TC2"], NUMBERS + IDS))
def test_readings_reader(tmp_path, layout, data):
    p = tmp_path / "readings.csv"
    p.write_bytes(data)
    try:
        t = read_readings(p, layout)
    except InputError:
        event("refused")
        return
    event("read")
    if t.kind == "snapshot":
        _finite(t.frame, ["temperature", "sigma", "r", "theta", "z"])
        assert np.all(t.frame["temperature"] > 0)
    else:
        assert np.all(np.isfinite(t.frame.index.to_numpy(float)))
        v = t.frame.to_numpy(float)
        assert np.all(np.isnan(v) | ((v > 0) & np.isfinite(v)))
        assert not np.isnan(v).any() or t.warnings          # every missing reading is reported


@SETTINGS
@given(data=table(["time", "TC1", "TC2", "TC3", "water"], TIMES + NUMBERS, rows=(0, 8)))
def test_log_reader(tmp_path, layout, data):
    p = tmp_path / "log.csv"
    p.write_bytes(data)
    try:
        t = read_log(p, layout)
    except InputError:
        event("refused")
        return
    event("read")
    times = t.frame.index.to_numpy(float)
    assert np.all(np.isfinite(times)) and np.all(np.diff(times) > 0)
    v = t.frame.to_numpy(float)
    assert np.all(np.isnan(v) | ((v > 0) & np.isfinite(v)))
    assert not np.isnan(v).any() or t.warnings


@SETTINGS
@given(data=table(["r", "theta", "z", "value"], NUMBERS), face=st.sampled_from(["bottom", "side"]),
       quantity=st.sampled_from(["temperature", "heat_flux"]))
def test_profile_reader(tmp_path, data, face, quantity):
    p = tmp_path / "profile.csv"
    p.write_bytes(data)
    try:
        prof = load_profile(p, face, quantity, CYL)
    except InputError:
        event("refused")
        return
    event("read")
    u = np.array([0.0, 0.05, 0.1]) if face == "bottom" else np.array([0.0, 1.0, 2.0])
    v = np.array([0.0, 1.0, 3.0]) if face == "bottom" else np.array([0.0, 0.01, 0.04])
    out = np.asarray(prof(u, v), float)
    assert np.all(np.isfinite(out))
    if quantity == "temperature":
        assert np.all(out > 0)


@SETTINGS
@given(data=table(["r", "theta", "z", "q"], NUMBERS))
def test_points_reader(tmp_path, data):
    p = tmp_path / "points.csv"
    p.write_bytes(data)
    try:
        t = read_points(p, CYL)
    except InputError:
        event("refused")
        return
    event("read")
    _finite(t.frame, ["r", "theta", "z"])


VALUES = ['"150 mm"', '"40 mm"', '"infinite"', '"16 W/(m*K)"', '"25 degC"', '"25 C"', '"-300 degC"', '"1e400 mm"',
          '"5 kW/m^2"', '"12 W/(m^2*K)"', "150", '""', '"nan mm"', "true", "[1, 2]", '"\x1b[2J"', "5000", "100000",
          "0", "-1", '"mean"', '"layout.csv"', '"/dev/zero"', '"auto"', '"auto:gcv"']
KEYS = {"part": ["radius", "height", "conductivity", "inner_radius", "radus"],
        "faces.bottom": ["condition", "value", "profile", "h", "ambient"],
        "faces.top": ["condition", "value", "h", "ambient"],
        "faces.side": ["condition", "value"],
        "sensors": ["layout", "readings"],
        "fit": ["strength", "terms", "harmonics", "smoothing"]}
CONDITIONS = ['"temperature"', '"flux"', '"insulated"', '"convection"', '"unknown-flux"', '"unknown-temperature"',
              '"convective"']


@st.composite
def case_text(draw):
    lines = []
    for table_name, keys in KEYS.items():
        if draw(st.integers(0, 5)) == 0:
            continue
        lines.append(f"[{table_name}]")
        for key in draw(st.lists(st.sampled_from(keys), unique=True, max_size=len(keys))):
            pool = CONDITIONS if key == "condition" else VALUES
            lines.append(f"{key} = {draw(st.sampled_from(pool))}")
    if draw(st.booleans()):
        lines += ["[[zones]]", f"name = {draw(st.sampled_from(VALUES))}", 'r = ["0 mm", "50 mm"]']
    if draw(st.integers(0, 9)) == 0:
        lines.append("[part")
    return "\n".join(lines) + "\n"


@SETTINGS
@given(text=case_text())
def test_case_reader(tmp_path, text):
    (tmp_path / "layout.csv").write_text("sensor,r [mm],theta [deg],z [mm]\nTC1,0,0,10\nTC2,50,90,10\n")
    p = tmp_path / "case.toml"
    p.write_text(text, encoding="utf-8")
    try:
        case = load_case(p)
        check_case(case)
    except InputError:
        event("refused")
        return
    event("read")
    c = case.cylinder
    assert np.isfinite(c.radius) and c.radius > 0
    assert c.height > 0 and not np.isnan(c.height)
