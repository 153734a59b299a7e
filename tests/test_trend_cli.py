"""`heatsight trend` end to end: outputs, a weakening heater flagged at the right time, a
steady heater not flagged, --every with timestamps, and bad input.

The logs are made here from forward.CylinderModel of the demo platen with a known heater
flux (test_trend_batch.platen): the statistics of the trend are under test, not the
recovery accuracy of the series, so the fit's own model may make the readings.  Each log
has first-order noise-free physics plus seeded noise and constant per-sensor offsets.
"""

import csv
import json
import re
import io
import math
import sys
import shutil

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io.cli import main
from heatsight.data_io.trend_command import run_trend
from heatsight.inverse import steady
from test_cli_errors import snapshot
from test_trend_batch import CASE, WEAK_ZONE, platen

WINDOW = 600.0
DT = 10.0
RATE = 0.03          # fraction of the weak sector's flux lost per hour


def make_folder(tmp_path, *, zones_extra=""):
    shutil.copy(CASE, tmp_path / "platen.toml")
    shutil.copy(CASE.parent / "readings.csv", tmp_path / "readings.csv")
    if zones_extra:
        with open(tmp_path / "platen.toml", "a") as fh:
            fh.write(zones_extra)
    lines = (CASE.parent / "layout.csv").read_text().splitlines()
    out = [lines[0] + ",type,class"] + [line + ",K,1" for line in lines[1:] if line.strip()]
    (tmp_path / "layout.csv").write_text("\n".join(out) + "\n")
    return tmp_path


def make_log(folder, *, hours=6.0, weak_from_h=2.0, weak_per_h=0.0, warmup_tau=0.0, noise=0.05,
             offset_sd=0.5, seed=0, iso=False, name="log.csv"):
    """Readings [degC] of the demo layout: nominal heater; from weak_from_h on, the outer
    sector loses weak_per_h of its flux per hour; an optional first-order warm-up from 40 degC
    with time constant warmup_tau [s]; constant offsets and white noise."""
    _, lay, t_nom, t_off, _ = platen()
    rng = np.random.default_rng(seed)
    t = np.arange(0.0, hours * 3600.0, DT)
    lam = weak_per_h * np.maximum(t - weak_from_h * 3600.0, 0.0) / 3600.0
    T = t_nom + lam[:, None] * (t_off - t_nom)
    if warmup_tau:
        T = 313.15 + (T - 313.15) * (1 - np.exp(-t / warmup_tau))[:, None]
    T = T + rng.normal(0.0, offset_sd, t_nom.size) + rng.normal(0.0, noise, T.shape)
    frame = pd.DataFrame(T - 273.15, columns=list(lay.index))
    if iso:
        stamps = pd.Timestamp("2025-03-01T06:00:00") + pd.to_timedelta(t, unit="s")
        frame.insert(0, "time", [s.isoformat() for s in stamps])
    else:
        frame.insert(0, "time [s]", t)
    frame.to_csv(folder / name, index=False, float_format="%.4f")
    return t, T, lam


def trend(folder, monkeypatch, capsys, *args):
    monkeypatch.chdir(folder)
    code = main(["trend", "platen.toml", *args])
    return code, capsys.readouterr()


UNIT_SUFFIX = re.compile(r"_(W_m2|degC|K)$")


def read_trend(path):
    """trend.csv with the unit suffixes of its columns dropped (the contract test checks them)."""
    return pd.read_csv(path / "trend.csv").rename(columns=lambda c: UNIT_SUFFIX.sub("", c))


# ---------------------------------------------------------------------------- windows mode

@pytest.fixture(scope="module")
def weakening(tmp_path_factory):
    """A heater steady for 2 h, then its outer 60-180 sector weakening linearly (3 % an hour)."""
    folder = make_folder(tmp_path_factory.mktemp("weak"), zones_extra='\n[[zones]]\nname = "=risk"\n'
                                                                       'r = ["0 mm", "20 mm"]\n')
    # no warm-up here: the first steady window after a warm-up still settles by a tenth of a
    # kelvin (within the drift limit), which shifts every change by about one sd
    t, T, lam = make_log(folder, weak_per_h=RATE, seed=1)
    before = snapshot(folder)
    code = main(["trend", str(folder / "platen.toml"), "--log", str(folder / "log.csv")])
    assert code == 0
    return folder, t, T, lam, before


def test_outputs_and_contract(weakening):
    folder, t, T, lam, before = weakening
    out = folder / "platen-trend"
    assert snapshot(folder) == before                  # inputs untouched (the new folder is no file)
    names = {p.name for p in out.iterdir()}
    assert names == {"trend.csv", "trend.png", "summary.json", "report.html"}
    with open(out / "trend.csv") as fh:
        header = next(csv.reader(fh))
    assert header[:12] == ["start_s", "end_s", "n_rows", "n_sensors", "mean_W_m2", "mean_sd_W_m2", "min_W_m2",
                           "max_W_m2", "nonuniformity_W_m2", "nonuniformity_sd_W_m2", "total_power_W",
                           "total_power_sd_W"]
    for z in ("inner", WEAK_ZONE):
        assert [f"{z}_{k}" for k in ("mean_W_m2", "sd_W_m2", "change_W_m2", "change_sd_W_m2", "flag")] == \
            header[header.index(f"{z}_mean_W_m2"):header.index(f"{z}_mean_W_m2") + 5]
    assert "'=risk_mean_W_m2" in header                 # formula injection neutralized
    summary = json.loads((out / "summary.json").read_text())
    for key in ("mode", "window_s", "drift_K", "windows", "trend_rows", "reference_window", "strength",
                "flags", "flag_threshold_sd", "warnings", "reference_fit", "caution"):
        assert key in summary
    assert summary["windows"]["steady"] == summary["trend_rows"] == len(read_trend(out)) == t.size // 60
    html = (out / "report.html").read_text()
    assert "Trend over the log" in html and 'id="figure-trend"' in html and "=risk" in html
    assert (out / "trend.png").read_bytes().startswith(b"\x89PNG")


def test_weakening_zone_flagged_at_the_right_time(weakening):
    folder, t, T, lam, _ = weakening
    out = folder / "platen-trend"
    rows = read_trend(out)
    summary = json.loads((out / "summary.json").read_text())
    thr = summary["flag_threshold_sd"]
    loss = platen()[4][WEAK_ZONE]                      # true zone change for a full loss [W/m^2]
    mid = 0.5 * (rows["start_s"] + rows["end_s"]).to_numpy()
    true_change = loss * RATE * np.maximum(mid - 2 * 3600.0, 0.0) / 3600.0
    expected = rows["start_s"][np.flatnonzero(np.abs(true_change) > thr * rows[f"{WEAK_ZONE}_change_sd"])[0]]
    flagged = rows[rows[f"{WEAK_ZONE}_flag"]]
    assert len(flagged) and abs(flagged["start_s"].iloc[0] - expected) <= WINDOW
    # flagged from then on, never while the heater was steady
    assert flagged.index[0] == flagged.index.min() and rows[f"{WEAK_ZONE}_flag"][flagged.index[0]:].all()
    assert not rows[f"{WEAK_ZONE}_flag"][rows["end_s"] < 2 * 3600.0].any()
    entry = next(f for f in summary["flags"] if f["zone"] == WEAK_ZONE)
    assert entry["first_flagged_start_s"] == pytest.approx(flagged["start_s"].iloc[0])
    # the weakened zone is the one that moved most
    last = rows.iloc[-1]
    changes = {z: abs(last[f"{z}_change"]) for z in summary["zones"] if not z.startswith("=")}
    assert max(changes, key=changes.get) == WEAK_ZONE
    assert last[f"{WEAK_ZONE}_change"] == pytest.approx(true_change[-1], rel=0.25)


def test_steady_heater_is_not_flagged_and_offsets_stay_in_the_level(tmp_path, monkeypatch, capsys):
    folder = make_folder(tmp_path)
    t, T, _ = make_log(folder, seed=2, offset_sd=0.5, warmup_tau=300.0)
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv", "--out", "a")
    assert code == 0, cap.err
    make_log(folder, seed=2, offset_sd=0.0, warmup_tau=300.0, name="clean.csv")
    code, cap = trend(folder, monkeypatch, capsys, "--log", "clean.csv", "--out", "b")
    assert code == 0, cap.err
    a, b = read_trend(folder / "a"), read_trend(folder / "b")
    sa = json.loads((folder / "a" / "summary.json").read_text())
    assert sa["flags"] == [] and not any(a[f"{z}_flag"].any() for z in sa["zones"])
    # the reference is the first settled steady window after the warm-up (inverse.steady on the
    # same log): drifting at most a quarter of the limit
    stats, mask = steady.detect(t, T, WINDOW, 0.5)
    first = int(np.flatnonzero(mask)[0])
    ref = int(np.flatnonzero(mask & (stats.max_drift() <= 0.125))[0])
    assert 2 <= first < ref and sa["reference_window"]["start_s"] == pytest.approx(stats.start[ref])
    assert a["start_s"][0] == pytest.approx(stats.start[first]) and len(a) == mask.sum()
    assert a[f"{WEAK_ZONE}_change"][ref - first] == 0 and a[f"{WEAK_ZONE}_change_sd"][ref - first] == 0
    # the level carries the offsets' uncertainty (type K class 1 in the layout); changes do not
    for z in sa["zones"]:
        assert np.all(a[f"{z}_change_sd"].iloc[1:] < a[f"{z}_sd"].iloc[1:])
    shift = a["mean"] - b["mean"]
    assert np.all(np.abs(shift) < 3 * a["mean_sd"])
    assert np.abs((a["mean"] - a["mean"][0]) - (b["mean"] - b["mean"][0])).max() < 0.2 * a["mean_sd"].min()


# ---------------------------------------------------------------------------- every N-th row

class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_every_nth_row_with_timestamps_and_progress(tmp_path, capsys, monkeypatch):
    folder = make_folder(tmp_path)
    t, _, _ = make_log(folder, hours=2.0, weak_per_h=0.0, seed=3, iso=True)
    terminal = _Terminal()
    monkeypatch.setattr(sys, "stderr", terminal)        # issue 10: bars only on a terminal
    summary, out = run_trend(folder / "platen.toml", log=folder / "log.csv", every=7, chunk_rows=200,
                             echo=lambda s: None)
    monkeypatch.undo()
    err = terminal.getvalue()
    assert "reading the log: chunk" in err            # more than a few chunks: a progress bar
    # the reference window's fit says which step it is on: here the reference window settles
    # while the log is read, so beside the bar, which takes its own label back afterwards
    steps = [m.start() for m in re.finditer(r"\r  fitting the reference window \[\d/\d\]: ", err)]
    assert steps and re.search(r"fitting the reference window \[1/\d\]: ", err)
    assert "\r  reading the log: chunk" in err[steps[-1]:]
    assert "heatsight: fitting the reference window" not in err        # not on a status line
    again = run_trend(folder / "platen.toml", log=folder / "log.csv", every=7, chunk_rows=200,
                      out=folder / "again", echo=lambda s: None)
    assert again[0]["trend_rows"] == summary["trend_rows"]
    assert "reading the log" not in capsys.readouterr().err   # stderr not a terminal: no bar
    rows = read_trend(out)
    assert len(rows) == math.ceil(t.size / 7) == summary["trend_rows"]
    assert {"start_iso", "end_iso"} <= set(rows.columns)
    assert rows["start_iso"][1] == "2025-03-01T06:01:10" and (rows["n_rows"] == 1).all()
    np.testing.assert_allclose(rows["start_s"], t[::7])
    assert summary["mode"] == "every" and summary["flags"] == []
    # the same log in one chunk: the same numbers, and no progress bar
    summary2, out2 = run_trend(folder / "platen.toml", log=folder / "log.csv", every=7, out=folder / "one",
                               echo=lambda s: None)
    assert "reading the log" not in capsys.readouterr().err
    pd.testing.assert_frame_equal(read_trend(out2), rows, rtol=1e-7)


# ---------------------------------------------------------------------------- bad input

LOG_HEAD = "time [s],TC01,TC02,TC03,TC04,TC05\n"


def _rows(times, value="110"):
    return "".join(f"{t:g}," + ",".join([value] * 5) + "\n" for t in times)


@pytest.mark.parametrize("body, args, fragment", [
    (_rows([0, 10, 20, 15]), [], "log.csv: line 5, column 'time [s]': time goes back (earlier than line 4)"),
    (_rows([0, 10, 10]), [], "log.csv: line 4, column 'time [s]': duplicated time: the same as line 3"),
    (_rows([0, 10]) + "20,110,110,open,110,110\n", [], "log.csv: line 4, column 'TC03': 'open' is not a number"),
    ("".join(f"{t},{100 + t / 100}," + ",".join(["110"] * 4) + "\n" for t in range(0, 4000, 10)), [],
     "no steady window: in every 600-s window some sensor drifts by 0.5 K or more"),
    (_rows(range(0, 300, 10)), [], "no complete window of 600 s"),
    (_rows(range(0, 24000, 600)), [], "the log's rows are about 600 s apart, too far apart for 3 of them in a "
                                      "window of 600 s; give a longer --window (at least 1800 s)"),
    (_rows(range(0, 4000, 10)), ["--every", "0"], "expected a whole number >= 1"),
    (_rows(range(0, 4000, 10)), ["--window", "-5"], "expected a positive number"),
])
def test_bad_input_exit_2_nothing_written(tmp_path, monkeypatch, capsys, body, args, fragment):
    folder = make_folder(tmp_path)
    (folder / "log.csv").write_text(LOG_HEAD + body)
    before = snapshot(folder)
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv", *args)
    assert code == 2
    assert cap.err.startswith("heatsight: error: ") and cap.err.count("\n") == 1 and fragment in cap.err
    assert "Traceback" not in cap.err
    assert snapshot(folder) == before and not (folder / "platen-trend").exists()


def test_no_steady_window_suggests_a_threshold(tmp_path, monkeypatch, capsys):
    folder = make_folder(tmp_path)
    (folder / "log.csv").write_text(LOG_HEAD + "".join(
        f"{t},{100 + t / 1000}," + ",".join(["110"] * 4) + "\n" for t in range(0, 4000, 10)))
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv")
    assert code == 2 and "drifts 0.6 K at sensor TC01" in cap.err and "--drift 0.75" in cap.err
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv", "--drift", "0.75", "--out", "ok")
    assert code == 0, cap.err


def test_extra_and_missing_columns_and_gaps_are_warnings(tmp_path, monkeypatch, capsys):
    folder = make_folder(tmp_path)
    _, lay, t_nom, _, _ = platen()
    t = np.r_[np.arange(0, 3600, DT), np.arange(5400, 9000, DT)]          # a 30-min gap
    rng = np.random.default_rng(4)
    frame = pd.DataFrame(t_nom[None, :] - 273.15 + rng.normal(0, 0.05, (t.size, t_nom.size)), columns=list(lay.index))
    frame = frame.drop(columns=["TC07"])
    frame.insert(0, "time [s]", t)
    frame["water [degC]"] = 40.0
    frame.loc[5, "TC02"] = np.nan
    frame.loc[40, [c for c in frame.columns if c.startswith("TC")]] = np.nan     # a row the logger lost
    frame.to_csv(folder / "log.csv", index=False, float_format="%.4f")
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv", "--out", "res")
    assert code == 0, cap.err
    warnings = json.loads((folder / "res" / "summary.json").read_text())["warnings"]
    text = " | ".join(warnings)
    assert "column 'water [degC]' is not a sensor of the layout; ignored" in text
    assert "no column for sensor TC07" in text
    assert "1 gap in time" in text
    # the empty row is one warning for the 18 sensors with no other gap, with its line (header line 1, row 40
    # on line 42); TC02 has its own two, lines 7 and 42
    assert "sensor 'TC02' has 2 empty, NaN or inf readings (lines 7 to 42; missing)" in text
    assert "log.csv: 18 sensors (TC01, TC03, TC04, TC05, TC06, TC08, ...) have 1 empty, NaN or inf reading each (line 42" in text
    assert sum("empty, NaN or inf" in w for w in warnings) == 2
    assert "TC07" not in json.loads((folder / "res" / "summary.json").read_text())["sensors_used"]
    assert "warning: " in cap.err and "warning: " not in cap.out    # issue 10: warnings go to stderr


def test_sensors_without_any_reading_are_one_warning(tmp_path, monkeypatch, capsys):
    """Three columns that are empty from start to end: one line naming them (a log whose cells
    were all empty gave one line per sensor, twenty on one line)."""
    folder = make_folder(tmp_path)
    _, lay, t_nom, _, _ = platen()
    t = np.arange(0, 3600, DT)
    rng = np.random.default_rng(4)
    frame = pd.DataFrame(t_nom[None, :] - 273.15 + rng.normal(0, 0.05, (t.size, t_nom.size)), columns=list(lay.index))
    frame[["TC03", "TC05", "TC11"]] = np.nan
    frame.insert(0, "time [s]", t)
    frame.to_csv(folder / "log.csv", index=False, float_format="%.4f")
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv", "--out", "res")
    assert code == 0, cap.err
    warnings = json.loads((folder / "res" / "summary.json").read_text())["warnings"]
    assert [w for w in warnings if "no valid reading" in w] == ["log.csv: 3 sensors (TC03, TC05, TC11) have no valid reading"]


def test_refusals_before_reading(tmp_path, monkeypatch, capsys):
    folder = make_folder(tmp_path)
    code, cap = trend(folder, monkeypatch, capsys)                  # the case names a snapshot
    assert code == 2 and "readings are a snapshot; give the log with --log LOG.csv" in cap.err
    (folder / "busy").mkdir()
    (folder / "busy" / "note.txt").write_text("keep me")
    (folder / "log.csv").write_text(LOG_HEAD + _rows(range(0, 4000, 10)))
    code, cap = trend(folder, monkeypatch, capsys, "--log", "log.csv", "--out", "busy")
    assert code == 2 and "not empty" in cap.err and (folder / "busy" / "note.txt").read_text() == "keep me"
    code, cap = trend(folder, monkeypatch, capsys, "--log", "missing.csv")
    assert code == 2 and "missing.csv: file not found" in cap.err
    (folder / "one.csv").write_text(LOG_HEAD + _rows(range(0, 10, 10)))     # one row: not a shorter window
    (folder / "two.csv").write_text(LOG_HEAD + _rows(range(0, 2000, 1000)))  # two rows far apart: not a longer one
    code, cap = trend(folder, monkeypatch, capsys, "--log", "two.csv", "--out", "two", "--window", "60")
    assert code == 2 and "the log has 2 rows; a trend needs at least 3" in cap.err, cap.err
    for every in ([], ["--every", "1"]):
        code, cap = trend(folder, monkeypatch, capsys, "--log", "one.csv", "--out", "one", *every)
        assert code == 2 and "the log has 1 row; a trend needs at least 3 in one window" in cap.err, cap.err


def test_every_nth_row_with_a_sensor_silent_in_the_reference_window(tmp_path):
    """A thermocouple open at start-up (an overflow code, then empty cells) that recovers later:
    --every runs as the windows mode does; its changes are left out of the rows where the
    reference window has no reading of it, and the others' changes are those of the same log
    with that sensor's column blank throughout (the change of a zone is the same problem
    without that sensor)."""
    folder = make_folder(tmp_path)
    make_log(folder, hours=1.0, seed=5)
    log = pd.read_csv(folder / "log.csv")
    log.loc[:15, "TC20"] = 9.9e37          # a logger's overflow code
    log.loc[16:70, "TC20"] = np.nan
    log.to_csv(folder / "log.csv", index=False, float_format="%.4f")
    summary, out = run_trend(folder / "platen.toml", log=folder / "log.csv", every=10, echo=lambda s: None)
    rows = read_trend(out)
    assert summary["trend_rows"] == len(rows) > 0
    change = [c for c in rows.columns if c.endswith(("_change", "_change_sd"))]
    assert change and np.isfinite(rows[change].to_numpy()).all()
    blank = log.copy()
    blank["TC20"] = np.nan
    blank.to_csv(folder / "blank.csv", index=False, float_format="%.4f")
    _, out2 = run_trend(folder / "platen.toml", log=folder / "blank.csv", every=10, out=folder / "blank",
                        echo=lambda s: None)
    np.testing.assert_allclose(rows[change].to_numpy(), read_trend(out2)[change].to_numpy(), rtol=1e-9, atol=1e-9)
