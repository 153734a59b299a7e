"""Files as plants export them (issue 10): each format read to the same numbers as a plain
UTF-8 comma CSV, and each refusal one line naming the file and the line.

The reference in every case is the same table written as a plain CSV and read by the same
reader; unit facts are definitions of the scales (212 degF = 100 degC, 0 degC = 273.15 K).
"""

import io
import sys

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io import InputError
from heatsight.data_io.cli import main
from heatsight.data_io.logs import LogReader, read_whole_log
from heatsight.data_io.log_header import open_log
from heatsight.data_io.tables import read_layout, read_log, read_points, read_readings, read_snapshot
from heatsight.forward import Cylinder

CYL = Cylinder(0.15, 0.04, 16.0)
LAYOUT = "sensor,r [mm],theta [deg],z [mm]\nTC1,0,0,10\nTC2,50,90,10\nTC3,100,180,5\n"
SNAPSHOT = "sensor,temperature [degC]\nTC1,108.24\nTC2,99.5\nTC3,40.125\n"
LOG = ("time,TC1,TC2,TC3\n2024-05-01T08:00:00+02:00,108.24,99.5,40.125\n"
       "2024-05-01T08:00:10+02:00,108.5,99.25,40.0\n2024-05-01T08:00:20+02:00,108.75,99.0,39.875\n")


def write(folder, name, data):
    p = folder / name
    (p.write_bytes if isinstance(data, bytes) else p.write_text)(data)
    return p


@pytest.fixture
def layout(tmp_path):
    return read_layout(write(tmp_path, "layout.csv", LAYOUT), CYL)


def european(text):
    """The same table as a European logger writes it: ';' between fields, ',' for decimals."""
    return text.replace(",", ";").replace(".", ",").replace("2024-05-01T08:00:00+02:00", "2024-05-01T08:00:00+02:00")


def _snapshot_k(table):
    return table.frame["temperature"].to_numpy()


# ---------------------------------------------------------------------------- formats read


def test_semicolon_and_decimal_comma_snapshot(tmp_path, layout):
    plain = read_snapshot(write(tmp_path, "plain.csv", SNAPSHOT), layout)
    eu = read_snapshot(write(tmp_path, "eu.csv", european(SNAPSHOT)), layout)
    np.testing.assert_array_equal(_snapshot_k(eu), _snapshot_k(plain))
    assert _snapshot_k(eu)[0] == pytest.approx(108.24 + 273.15)        # 0 degC = 273.15 K (definition)


def test_semicolon_and_decimal_comma_log(tmp_path, layout):
    plain = read_log(write(tmp_path, "plain.csv", LOG), layout).frame
    eu_text = LOG.replace(",", ";").replace(".", ",")
    eu = read_log(write(tmp_path, "eu.csv", eu_text), layout).frame
    np.testing.assert_array_equal(eu.to_numpy(), plain.to_numpy())
    np.testing.assert_array_equal(eu.index.to_numpy(), plain.index.to_numpy())


def test_tab_separated_layout(tmp_path):
    tab = read_layout(write(tmp_path, "l.tsv", LAYOUT.replace(",", "\t")), CYL).frame
    plain = read_layout(write(tmp_path, "l.csv", LAYOUT), CYL).frame
    pd.testing.assert_frame_equal(tab, plain)


def test_cp1252_with_degree_sign(tmp_path):
    text = "sensor,temperature [°C]\nTC1°,80\nTC2,81\n"
    p = write(tmp_path, "r.csv", text.encode("cp1252"))
    lay = read_layout(write(tmp_path, "l.csv", "sensor,r,theta,z\nTC1°,0,0,0.01\nTC2,0.05,90,0.01\n"
                            .encode("cp1252")), CYL)
    t = read_snapshot(p, lay)
    assert list(t.frame.index) == ["TC1°", "TC2"]
    np.testing.assert_allclose(_snapshot_k(t), [353.15, 354.15])       # 0 degC = 273.15 K (definition)


@pytest.mark.parametrize("bom", [b"\xef\xbb\xbf", b""])
def test_utf8_with_and_without_bom(tmp_path, layout, bom):
    t = read_snapshot(write(tmp_path, "r.csv", bom + SNAPSHOT.encode("utf-8")), layout)
    assert t.frame.shape[0] == 3


def test_utf16_with_bom(tmp_path, layout):
    t = read_snapshot(write(tmp_path, "r.csv", SNAPSHOT.encode("utf-16")), layout)
    np.testing.assert_allclose(_snapshot_k(t), np.array([108.24, 99.5, 40.125]) + 273.15)


@pytest.mark.parametrize("unit, value, kelvin", [
    ("C", "100", 373.15),          # 0 degC = 273.15 K (definition)
    ("F", "212", 373.15),          # 212 degF = 100 degC (definition of the Fahrenheit scale)
    ("°C", "100", 373.15),
    ("deg C", "100", 373.15),
])
def test_trade_temperature_units(tmp_path, layout, unit, value, kelvin):
    t = read_snapshot(write(tmp_path, "r.csv", f"sensor,temperature [{unit}]\nTC1,{value}\n"), layout)
    assert _snapshot_k(t)[0] == pytest.approx(kelvin)


def test_trade_units_in_log_headers(tmp_path, layout):
    frame = read_log(write(tmp_path, "log.csv", "time [s],TC1 [F],TC2 [C]\n0,212,100\n10,212,100\n"),
                     layout).frame
    np.testing.assert_allclose(frame.to_numpy(), 373.15)                 # 212 degF = 100 degC (definition)


def test_xlsx_layout_readings_and_log(tmp_path, layout):
    pytest.importorskip("openpyxl", reason="openpyxl (the excel extra) is not installed")
    pd.read_csv(io.StringIO(LAYOUT)).to_excel(tmp_path / "layout.xlsx", index=False)
    pd.read_csv(io.StringIO(SNAPSHOT)).to_excel(tmp_path / "readings.xlsx", index=False)
    pd.read_csv(io.StringIO(LOG)).to_excel(tmp_path / "log.xlsx", index=False)
    lay = read_layout(tmp_path / "layout.xlsx", CYL)
    pd.testing.assert_frame_equal(lay.frame, layout.frame)
    snap = read_readings(tmp_path / "readings.xlsx", lay)
    np.testing.assert_allclose(_snapshot_k(snap), np.array([108.24, 99.5, 40.125]) + 273.15)
    log = read_log(tmp_path / "log.xlsx", lay).frame
    ref = read_log(write(tmp_path, "log.csv", LOG), layout).frame
    np.testing.assert_allclose(log.to_numpy(), ref.to_numpy())
    np.testing.assert_allclose(log.index.to_numpy(), ref.index.to_numpy())


def test_parquet_log_keeps_its_offset(tmp_path, layout):
    pytest.importorskip("pyarrow", reason="pyarrow (the parquet extra) is not installed")
    frame = pd.read_csv(io.StringIO(LOG))
    frame["time"] = pd.to_datetime(frame["time"])                        # tz-aware, +02:00
    frame.to_parquet(tmp_path / "log.parquet", index=False)
    cols = open_log(tmp_path / "log.parquet", layout)
    reader = LogReader(cols, layout)
    chunks = list(reader)
    np.testing.assert_allclose(np.concatenate([c.times for c in chunks]), [0.0, 10.0, 20.0])
    assert reader.iso([0.0])[0] == "2024-05-01T08:00:00+02:00"


def test_missing_extra_is_named(tmp_path, layout, monkeypatch):
    pytest.importorskip("openpyxl", reason="openpyxl (the excel extra) is not installed")
    pd.read_csv(io.StringIO(SNAPSHOT)).to_excel(tmp_path / "readings.xlsx", index=False)
    monkeypatch.setitem(sys.modules, "openpyxl", None)                  # as if not installed
    with pytest.raises(InputError, match=r"pip install 'heatsight\[excel\]'"):
        read_snapshot(tmp_path / "readings.xlsx", layout)


@pytest.mark.parametrize("tz, first", [
    (None, "2024-05-01T08:00:00+02:00"),            # the log's own offset
    ("UTC", "2024-05-01T06:00:00+00:00"),
    ("Europe/London", "2024-05-01T07:00:00+01:00"),  # British Summer Time in May (from memory)
])
def test_times_keep_their_offset(tmp_path, layout, tz, first):
    from heatsight.data_io.arguments import time_zone

    cols = open_log(write(tmp_path, "log.csv", LOG), layout)
    reader = LogReader(cols, layout, tz=None if tz is None else time_zone(tz))
    list(reader)
    assert reader.iso([0.0])[0] == first


def test_naive_times_stay_naive(tmp_path, layout):
    cols = open_log(write(tmp_path, "log.csv", LOG.replace("+02:00", "")), layout)
    reader = LogReader(cols, layout)
    list(reader)
    assert reader.iso([10.0])[0] == "2024-05-01T08:00:10"


def test_trend_report_shows_local_times(tmp_path, monkeypatch, capsys):
    from test_trend_cli import make_folder, make_log

    folder = make_folder(tmp_path)
    make_log(folder, hours=0.5, seed=3, iso=True)
    log = pd.read_csv(folder / "log.csv")
    log["time"] = log["time"] + "+02:00"              # a shift logged at 06:00-08:00 local time
    log.to_csv(folder / "log.csv", index=False)
    monkeypatch.chdir(folder)
    assert main(["trend", "platen.toml", "--log", "log.csv", "--every", "30", "--out", "res"]) == 0
    rows = pd.read_csv(folder / "res" / "trend.csv")
    assert rows["start_iso"][0] == "2025-03-01T06:00:00+02:00"
    html = (folder / "res" / "report.html").read_text()
    assert "2025-03-01T06:00:00+02:00" in html          # the reference window in local time
    assert "T04:00:00" not in html                      # not the UTC time


# ---------------------------------------------------------------------------- refusals


@pytest.mark.parametrize("data, fragment", [
    (b"sensor,temperature\nTC1,8\x000\n", "line 2: holds a NUL byte"),
    ("sensor,temperature\nTC1\x1b[31m,80\n".encode(), "line 2, column 1: holds the control character '\\x1b'"),
    (b"sensor,temperature\nTC1,80,5\n", "malformed CSV: line 2 has 3 fields but the header (line 1) has 2"),
    (b"\nsensor,temperature\n", "no data rows"),
    (b"\n\n", "the file is empty"),
])
def test_refusals_name_the_line(tmp_path, layout, data, fragment):
    with pytest.raises(InputError) as err:
        read_snapshot(write(tmp_path, "r.csv", data), layout)
    assert fragment in str(err.value) and "\n" not in str(err.value)


def test_blank_first_line_is_read(tmp_path, layout):
    t = read_snapshot(write(tmp_path, "r.csv", "\n" + SNAPSHOT), layout)
    assert t.frame.shape[0] == 3


def test_points_in_semicolons(tmp_path):
    p = read_points(write(tmp_path, "p.csv", "r [mm];theta [deg];z [mm]\n0;0;0,01\n75;90;20\n"), CYL).frame
    np.testing.assert_allclose(p["r"], [0.0, 0.075])
    np.testing.assert_allclose(p["z"], [1e-5, 0.02])


def test_whole_log_of_a_device_is_refused(layout):
    with pytest.raises(InputError, match="not a regular file"):
        read_whole_log("/dev/zero", layout)


def test_a_log_changing_encoding_after_the_first_mebibyte(tmp_path, layout):
    """The first MiB decides the encoding; a later byte that is not UTF-8 is refused naming its
    line (header line 1, then 80 000 rows, then the bad one)."""
    rows = ["time,TC1,TC2,TC3"] + [f"{i},80,81,40" for i in range(80_000)]
    data = ("\n".join(rows) + "\n").encode("utf-8") + "80000,80°,81,40\n".encode("cp1252")
    with pytest.raises(InputError, match="line 80002: is not UTF-8 text"):
        read_log(write(tmp_path, "log.csv", data), layout)
