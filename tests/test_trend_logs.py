"""Chunked log reading (data_io.logs): the same answers as the whole-file reader, checks that
hold across chunk boundaries, warnings for what is kept, and the fast CSV writer."""

import io
import math

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io.errors import InputError
from heatsight.data_io.fast_csv import csv_rows, number_cells, text_cells
from heatsight.data_io.logs import LogReader, count_rows, open_log
from heatsight.inverse.steady import WindowAccumulator
from heatsight.data_io.tables import read_layout, read_log
from heatsight.forward import Cylinder
from heatsight.inverse import steady

CYL = Cylinder(radius=0.15, height=0.04, conductivity=16.0)
LAYOUT = "sensor,r [mm],theta [deg],z [mm],type,class\nTC1,0,0,10,K,1\nTC2,50,90,10,K,2\nTC3,100,180,5,,\n"


@pytest.fixture
def layout(tmp_path):
    p = tmp_path / "layout.csv"
    p.write_text(LAYOUT)
    return read_layout(p, CYL)


def write(tmp_path, text, name="log.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def read_all(path, layout, chunk_rows=3):
    cols = open_log(path, layout)
    reader = LogReader(cols, layout, chunk_rows)
    chunks = list(reader)
    times = np.concatenate([c.times for c in chunks])
    values = np.vstack([c.values for c in chunks])
    return cols, reader, times, values


LOG = ("time,TC1,TC2 [degF],TC3\n"
       "2024-05-01T08:00:00,80,212,40\n"
       "2024-05-01T08:00:30,81,NaN,40.5\n"
       "\n"
       "2024-05-01T08:01:00,82,210,\n"
       "2024-05-01T08:01:30,82.5,211, 41\n"
       "2024-05-01T08:02:00,83,n/a,41.2\n")


@pytest.mark.parametrize("chunk_rows", [1, 2, 3, 1000])
def test_chunks_equal_the_whole_file_reader(tmp_path, layout, chunk_rows):
    p = write(tmp_path, LOG)
    whole = read_log(p, layout).frame
    cols, reader, t, x = read_all(p, layout, chunk_rows)
    np.testing.assert_allclose(t, whole.index.to_numpy())
    np.testing.assert_allclose(x, whole[cols.sensors].to_numpy(), equal_nan=True)
    assert x[0, 1] == pytest.approx(373.15)             # definition of the Fahrenheit scale
    assert reader.timestamps and reader.rows == 5
    assert list(reader.iso([0.0, 90.0])) == ["2024-05-01T08:00:00", "2024-05-01T08:01:30"]
    assert any("TC2" in w and "2 empty" in w for w in reader.warnings())


def test_offsets_in_timestamps_keep_the_first_offset(tmp_path, layout):
    p = write(tmp_path, "time,TC1\n2024-10-27T02:30:00+02:00,80\n2024-10-27T02:10:00+01:00,81\n")
    _, reader, t, _ = read_all(p, layout)
    np.testing.assert_allclose(t, [0.0, 2400.0])          # 00:30Z then 01:10Z
    # issue 10: times are shown in the log's own (first row's) offset, no longer in UTC
    assert list(reader.iso([0.0, 2400.0])) == ["2024-10-27T02:30:00+02:00", "2024-10-27T03:10:00+02:00"]


def test_numeric_times_with_a_unit(tmp_path, layout):
    p = write(tmp_path, "time [min],TC1,TC2\n0,80,81\n0.5,80,81\n1,80,81\n")
    _, reader, t, _ = read_all(p, layout)
    np.testing.assert_allclose(t, [0.0, 30.0, 60.0])
    assert reader.timestamps is False


@pytest.mark.parametrize("text, fragment", [
    ("time,TC1\n0,80\n10,80\n20,80\n15,80\n", "line 5, column 'time': time goes back (earlier than line 4)"),
    ("time,TC1\n0,80\n10,80\n20,80\n20,80\n", "line 5, column 'time': duplicated time: the same as line 4"),
    ("time,TC1\n0,80\n10,80\n20,80\n30,hot\n", "line 5, column 'TC1': 'hot' is not a number"),
    ("time,TC1\n0,80\n10,80\n20,80\n,80\n", "line 5, column 'time': missing time"),
    ("time,TC1\n0,80\n10,80\nlater,80\n", "line 4, column 'time': 'later' is not a number of seconds"),
    ("time,TC1\n0,80\n10,80,5\n", "malformed CSV"),
    # a row shorter than the header is refused, not read as missing cells (issue 10, audit 2)
    ("time,TC1,TC2\n0,80,81\n10,80,81\n20,80,81\n30,80\n", "line 5 has 2 fields but the header has 3"),
    ("time,TC1,TC2\r\n0,80,81\r\n\r\n10,80,\r\n20,80\r\n", "line 5 has 2 fields but the header has 3"),
    ('time,TC1,TC2\n0,"80",81\n10,"8,0"\n', "line 3 has 2 fields but the header has 3"),
    ("time;TC1;TC2\n0;80,5;81\n10;80,5;\n20;80,5\n", "line 4 has 2 fields but the header has 3"),
    ("time,TC1,TC2\n0,80,81\n10,80,81\n20\n", "line 4 has 1 field but the header has 3"),
    ("time,TC1\n2024-01-01T00:00:00,80\n2024-01-01T00:00:10+01:00,80\n", "mix times with and without"),
    ("time [s],TC1\n2024-01-01T00:00:00,80\n", "timestamps need no unit"),
    ("time,AMB\n0,20\n", "none of the log's columns (AMB) is a sensor of the layout"),
    ("time,tc1\n0,20\n", "sensor 'tc1' is not in the layout; did you mean 'TC1'"),    # letter case only
    ("time,TC1,tc2\n0,20,21\n", "did you mean 'TC2'"),
    ("TC1,TC2\n80,81\n", "a log starts with a time column"),
    ("time,TC1,TC1\n0,80,80\n", "sensor 'TC1' appears twice"),
    ("time,TC1 [psi]\n0,80\n", "unit 'psi'"),
    ("time,TC1\n", "no data rows"),
])
def test_refusals_name_the_line_across_chunk_boundaries(tmp_path, layout, text, fragment):
    p = write(tmp_path, text)
    with pytest.raises(InputError, match=fragment.replace("(", r"\(").replace(")", r"\)")) as err:
        read_all(p, layout, chunk_rows=2)
    assert str(err.value).startswith(str(p))


def test_kept_with_warnings(tmp_path, layout):
    text = ("time,TC1,AMB,TC2\n" + "".join(f"{t},{80 + 0.01 * t},{20},{81}\n" for t in range(0, 100, 10))
            + "500,9999,20,81\n510,80,20,81\n")
    p = write(tmp_path, text)
    cols, reader, t, x = read_all(p, layout)
    assert cols.sensors == ["TC1", "TC2"] and cols.ignored == ["AMB"]
    assert any("column 'AMB' is not a sensor of the layout; ignored" in w for w in cols.warnings)
    assert any("no column for sensor TC3" in w for w in cols.warnings)
    notes = reader.warnings()
    assert any("TC1" in w and "outside the range of a type K" in w and "line 12" in w for w in notes)
    assert any("gap" in w and "lines 11-12" in w for w in notes)
    assert math.isnan(x[10, 0]) and x[11, 0] == pytest.approx(353.15)


def test_count_rows(tmp_path):
    assert count_rows(write(tmp_path, "a\nb\nc")) == 3
    assert count_rows(write(tmp_path, "a\nb\n", "b.csv")) == 2


def test_window_accumulator_is_chunk_invariant():
    rng = np.random.default_rng(0)
    t = np.cumsum(rng.uniform(5, 15, 800))
    x = 300 + 0.001 * t[:, None] + rng.normal(0, 0.1, (t.size, 3))
    x[rng.random(x.shape) < 0.05] = np.nan
    whole = steady.summarize(t, x, steady.window_index(t, t[0], 600.0), 600.0)
    for size in (1, 7, 100, 10_000):
        acc = WindowAccumulator(3, 600.0)
        for lo in range(0, t.size, size):
            acc.add(t[lo:lo + size], x[lo:lo + size])
        acc.finish()
        got = acc.stats
        for name in ("index", "start", "end", "n_rows", "count", "mean", "drift", "scatter", "rho"):
            np.testing.assert_allclose(getattr(got, name), getattr(whole, name), rtol=1e-9, atol=1e-12,
                                       equal_nan=True, err_msg=name)


def test_fast_writer_round_trips():
    rng = np.random.default_rng(1)
    cols = [rng.normal(1e4, 50, 500), rng.normal(0, 1e-3, 500), np.round(rng.normal(0, 5, 500), 2),
            rng.normal(0, 1e-13, 500), np.r_[1e15, rng.normal(0, 1, 499)],
            np.r_[np.nan, -0.0, 0.0, rng.uniform(-1e6, 1e6, 497)]]
    text = csv_rows([number_cells(c) for c in cols] + [text_cells(["ok"] * 500)])
    back = pd.read_csv(io.BytesIO(text), header=None)
    for j, c in enumerate(cols):
        scale = np.nanmax(np.abs(c))
        np.testing.assert_allclose(back[j].to_numpy(float), c, atol=max(scale * 1e-8, 1e-15), equal_nan=True)
    assert isinstance(text, bytes) and text.count(b"\n") == 500 and set(back[len(cols)]) == {"ok"}
    lines = text.split(b"\n")
    assert lines[0].split(b",")[5] == b"" and lines[1].split(b",")[5] == b"0"


@pytest.mark.parametrize("block_lines", [1, 2, 5, 10_000])
def test_short_row_found_across_text_blocks(tmp_path, layout, monkeypatch, block_lines):
    """Rows whose last column is empty are counted in the file's text, read in blocks: a row
    cut short is found wherever the blocks and chunks fall, and empty last fields that keep
    their separator are missing readings."""
    from heatsight.data_io.log_rows import RowWidths

    monkeypatch.setattr(RowWidths, "BLOCK_LINES", block_lines)
    rows = "".join(f"{t},80,\n" for t in range(0, 100, 10))        # TC2 never read, separator kept
    p = write(tmp_path, "time,TC1,TC2\n" + rows)
    _, reader, t, x = read_all(p, layout, chunk_rows=3)
    assert t.size == 10 and np.isnan(x[:, 1]).all() and reader.rows == 10
    after = "".join(f"{t},80,81\n" for t in range(110, 150, 10))
    p = write(tmp_path, "time,TC1,TC2\n" + rows + "100,80\n" + after, "cut.csv")
    with pytest.raises(InputError, match="line 12 has 2 fields but the header has 3"):
        read_all(p, layout, chunk_rows=3)


def test_an_extra_channel_is_not_offered_a_sensor_that_has_its_column(tmp_path, layout):
    """A log with every layout sensor and an extra channel TC4: the warning offered "did you
    mean 'TC3'?", a sensor whose column is there; only a sensor without a column is a likely
    typo (refused as such, test_refusals_name_the_line_across_chunk_boundaries)."""
    text = "time,TC1,TC2,TC3,TC4\n" + "".join(f"{t},80,81,82,83\n" for t in range(0, 100, 10))
    cols, *_ = read_all(write(tmp_path, text), layout)
    note = next(w for w in cols.warnings if "'TC4'" in w)
    assert "is not a sensor of the layout; ignored" in note and "did you mean" not in note
