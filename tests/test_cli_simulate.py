"""`heatsight simulate` and `heatsight check` on good input."""

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io.cli import SIMULATE_COLUMNS, main

SLAB = """\
[part]
radius = "150 mm"
height = "40 mm"
conductivity = "16 W/(m*K)"
[faces.bottom]
condition = "temperature"
value = "212 degF"
[faces.top]
condition = "temperature"
value = "20 degC"
[faces.side]
condition = "insulated"
"""
POINTS = "r [mm],theta [deg],z [mm]\n0,0,10\n75,90,20\n140,400,30\n"


def slab(tmp_path, text=SLAB, points=POINTS):
    (tmp_path / "case.toml").write_text(text)
    (tmp_path / "points.csv").write_text(points)
    return tmp_path / "case.toml", tmp_path / "points.csv"


def test_simulate_slab_matches_linear_profile(tmp_path, capsys):
    case, pts = slab(tmp_path)
    out = tmp_path / "field.csv"
    assert main(["simulate", str(case), "--at", str(pts), "--out", str(out), "--tolerance", "1e-6"]) == 0
    fr = pd.read_csv(out)
    assert list(fr.columns) == SIMULATE_COLUMNS
    np.testing.assert_allclose(fr["r_mm"], [0.0, 75.0, 140.0])       # issue 10: outputs in mm like inputs
    np.testing.assert_allclose(fr["theta_deg"], [0.0, 90.0, 400.0])
    np.testing.assert_allclose(fr["z_mm"], [10.0, 20.0, 30.0])
    # insulated side, fixed end temperatures: the 1-D slab solution T = T0 + (T1 - T0) z / L,
    # q_z = -k (T1 - T0) / L (textbook closed form, Fourier's law); 212 degF = 100 degC (definition)
    np.testing.assert_allclose(fr["temperature_degC"], 100.0 - 80.0 * fr["z_mm"] / 40.0, atol=1e-6)
    np.testing.assert_allclose(fr["qz_W_m2"], 16.0 * 80.0 / 0.04, rtol=1e-6)
    np.testing.assert_allclose(fr["qr_W_m2"], 0.0, atol=1e-6)
    np.testing.assert_allclose(fr["qtheta_W_m2"], 0.0, atol=1e-6)
    assert capsys.readouterr().out == ""
    assert sorted(f.name for f in tmp_path.iterdir()) == ["case.toml", "field.csv", "points.csv"]


def test_simulate_to_stdout(tmp_path, capsys):
    case, pts = slab(tmp_path)
    assert main(["simulate", str(case), "--at", str(pts), "--tolerance", "1e-6"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0] == ",".join(SIMULATE_COLUMNS)
    assert len(lines) == 4


def test_simulate_profile_face(tmp_path):
    # the bottom temperature as a uniform profile in degF gives the same slab
    text = SLAB.replace('value = "212 degF"', 'profile = "bottom.csv"')
    case, pts = slab(tmp_path, text)
    (tmp_path / "bottom.csv").write_text("r [mm],theta [deg],value [degF]\n0,0,212\n150,0,212\n150,90,212\n")
    out = tmp_path / "field.csv"
    assert main(["simulate", str(case), "--at", str(pts), "--out", str(out), "--tolerance", "1e-6"]) == 0
    fr = pd.read_csv(out)
    np.testing.assert_allclose(fr["temperature_degC"], 100.0 - 80.0 * fr["z_mm"] / 40.0, atol=1e-5)


def test_simulate_without_conductivity_leaves_flux_empty(tmp_path, capsys):
    case, pts = slab(tmp_path, SLAB.replace('conductivity = "16 W/(m*K)"\n', ""))
    assert main(["simulate", str(case), "--at", str(pts), "--tolerance", "1e-6"]) == 0
    captured = capsys.readouterr()
    assert "heat-flux columns are left empty" in captured.err
    lines = captured.out.splitlines()
    assert lines[1].endswith(",,,")


CHECK_CASE = """\
[part]
radius = "150 mm"
height = "40 mm"
conductivity = "16 W/(m*K)"
[faces.bottom]
condition = "unknown-flux"
[faces.top]
condition = "convection"
h = "12 W/(m^2*K)"
ambient = "25 degC"
[faces.side]
condition = "temperature"
value = "25 degC"
[sensors]
layout = "layout.csv"
readings = "readings.csv"
[[zones]]
name = "inner"
r = ["0 mm", "50 mm"]
"""


def test_check_explains_case(tmp_path, capsys):
    (tmp_path / "case.toml").write_text(CHECK_CASE)
    (tmp_path / "layout.csv").write_text("sensor,r [mm],theta [deg],z [mm],type\nA,20,30,20,K\nB,60,30,20,K\n"
                                         "C,120,30,20,K\nD,90,30,20,K\n")
    (tmp_path / "readings.csv").write_text("sensor,temperature\nA,80\nB,NaN\nC,60\nD,70\n")
    assert main(["check", str(tmp_path / "case.toml")]) == 0
    captured = capsys.readouterr()
    out = captured.out
    assert "radius 150 mm (0.15 m)" in out
    assert "bottom (z = 0): unknown-flux" in out
    assert "h = 12 W/(m^2*K), ambient = 25 degC (298.15 K)" in out
    assert "sensors: 4 in" in out
    assert "snapshot of 3 sensors" in out
    assert "lie at one angle (theta = 30 deg)" in out
    assert "zone inner: bottom face" in out
    assert "ready for: fit (unknown face: bottom)" in out
    assert "assumed IEC 60584-1 class 2" in captured.err
    assert "B; dropped" in captured.err


def test_check_known_case(tmp_path, capsys):
    case, _ = slab(tmp_path)
    assert main(["check", str(case)]) == 0
    assert "ready for: simulate" in capsys.readouterr().out


@pytest.mark.parametrize("argv", [["--help"], ["simulate", "--help"], ["check", "--help"]])
def test_help_has_example(argv, capsys):
    assert main(argv) == 0
    out = capsys.readouterr().out
    assert "example" in out and "heatsight" in out


def test_console_script_exit_codes(tmp_path):
    """The real process: exit status 2 and one line on stderr, no traceback."""
    case, pts = slab(tmp_path, SLAB.replace('"150 mm"', '"150"'))
    proc = subprocess.run([sys.executable, "-m", "heatsight", "simulate", str(case), "--at", str(pts)],
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 2
    assert proc.stdout == ""
    assert proc.stderr.count("\n") == 1 and proc.stderr.startswith("heatsight: error: ")
    assert "Traceback" not in proc.stderr


def test_internal_error_exit_1(tmp_path, capsys, monkeypatch):
    import heatsight.data_io.cli as cli

    def broken(*a, **k):
        raise ZeroDivisionError("oops")

    monkeypatch.setattr(cli, "simulate_frame", broken)
    case, pts = slab(tmp_path)
    assert main(["simulate", str(case), "--at", str(pts)]) == 1
    err = capsys.readouterr().err
    assert err.startswith("heatsight: internal error: ZeroDivisionError") and "Traceback" not in err


def test_truncation_warning_says_when_a_smaller_tolerance_cannot_help(tmp_path, capsys):
    """A bottom face at 100 degC beside a side and top at 0 degC (the classic finite-cylinder
    problem: the data jump where the bottom meets the side), a point 0.01 mm above the bottom:
    the series stops at its cap of terms and the warning said "lower --tolerance", which gave
    the same numbers at 1e-3 and 1e-12.  It now says a smaller tolerance changes nothing."""
    text = SLAB.replace('value = "212 degF"', 'value = "100 degC"').replace('value = "20 degC"', 'value = "0 degC"')
    text = text.replace('condition = "insulated"', 'condition = "temperature"\nvalue = "0 degC"')
    case, pts = slab(tmp_path, text, "r [mm],theta [deg],z [mm]\n0,0,0.01\n0,0,10\n")
    assert main(["simulate", str(case), "--at", str(pts), "--tolerance", "1e-12"]) == 0
    err = capsys.readouterr().err
    assert "truncation error reaches" in err and "changes nothing" in err and "lower --tolerance" not in err


def test_simulate_does_not_replace_an_existing_file_without_overwrite(tmp_path, capsys):
    """`simulate --out FILE` replaced any existing file silently (a copy of a layout, say);
    fit, plan and trend refuse a non-empty folder without --overwrite, and so does simulate
    an existing file now, leaving it unchanged."""
    case, pts = slab(tmp_path)
    other = tmp_path / "other_layout.csv"
    other.write_text("sensor,r [mm],theta [deg],z [mm]\nTC1,0,0,5\n")
    before = other.read_bytes()
    assert main(["simulate", str(case), "--at", str(pts), "--out", str(other)]) == 2
    assert "exists; give --overwrite" in capsys.readouterr().err and other.read_bytes() == before
    assert main(["simulate", str(case), "--at", str(pts), "--out", str(other), "--overwrite"]) == 0
    assert pd.read_csv(other).columns.tolist() == SIMULATE_COLUMNS
