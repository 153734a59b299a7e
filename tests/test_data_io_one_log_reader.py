"""`heatsight check` and `heatsight trend` read logs with one reader: the same logs are
accepted (with the same warnings) or refused (with the same message) by both.

The logs hold the demo's snapshot readings repeated over time with a small seeded wander;
what is under test is the reading of the file, not the physics."""

import shutil

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io.cli import main

ROOT = __import__("pathlib").Path(__file__).resolve().parent.parent
DEMO = ROOT / "demo_data"
STEP = 10.0          # s between logged rows
ROWS = 40


def _log_frame(seed=0) -> pd.DataFrame:
    snap = pd.read_csv(DEMO / "readings.csv")
    rng = np.random.default_rng(seed)
    t = np.arange(ROWS) * STEP
    values = snap["temperature [degC]"].to_numpy()[None, :] + rng.normal(0.0, 0.01, (ROWS, len(snap)))
    frame = pd.DataFrame(values, columns=list(snap["sensor"]))
    frame.insert(0, "time [s]", t)
    return frame


def _good(frame):
    return frame


def _extra_column(frame):
    out = frame.copy()
    out["AMBIENT"] = 21.5          # a logger channel that is not a sensor of the layout
    return out


def _unsorted(frame):
    out = frame.copy()
    out.loc[[10, 11], "time [s]"] = out.loc[[11, 10], "time [s]"].to_numpy()
    return out


def _text_cell(frame):
    out = frame.astype(object)
    out.iloc[7, 3] = "hot"
    return out


def _all_open_circuit(frame):
    out = frame.copy()
    out.iloc[:, 1:] = 9999.0       # beyond a type K thermocouple's range: no valid reading
    return out


# (name, make the log from the good one, expected exit status, fragment of the message or warning)
LOGS = [
    ("good", _good, 0, None),
    ("extra logger column", _extra_column, 0, "column 'AMBIENT' is not a sensor of the layout; ignored"),
    ("unsorted times", _unsorted, 2, "time goes back"),
    ("text in a reading", _text_cell, 2, "'hot' is not a number"),
    ("no valid reading", _all_open_circuit, 2, "no valid reading in the log"),
]


@pytest.fixture
def folder(tmp_path):
    text = (DEMO / "platen.toml").read_text().replace('readings = "readings.csv"', 'readings = "log.csv"')
    (tmp_path / "platen.toml").write_text(text)
    lines = (DEMO / "layout.csv").read_text().splitlines()
    typed = [lines[0] + ",type,class"] + [line + ",K,1" for line in lines[1:] if line.strip()]
    (tmp_path / "layout.csv").write_text("\n".join(typed) + "\n")
    return tmp_path


@pytest.mark.parametrize("name, make, status, fragment", LOGS, ids=[x[0] for x in LOGS])
def test_check_and_trend_accept_and_refuse_alike(folder, monkeypatch, capsys, name, make, status, fragment):
    make(_log_frame()).to_csv(folder / "log.csv", index=False)
    monkeypatch.chdir(folder)
    code_check = main(["check", "platen.toml"])
    err_check = capsys.readouterr().err
    code_trend = main(["trend", "platen.toml", "--log", "log.csv", "--window", "100", "--out", "trend"])
    captured = capsys.readouterr()
    err_trend, said_trend = captured.err, captured.out + captured.err     # trend lists warnings on stdout
    assert (code_check, code_trend) == (status, status), (err_check, err_trend)
    if status == 2:
        # one line each, and the same message (the trend creates no output folder)
        assert err_check.count("\n") == 1 and err_check == err_trend
        assert fragment in err_check and "log.csv" in err_check
        assert not (folder / "trend").exists()
    elif fragment is not None:
        assert fragment in err_check and fragment in said_trend
    else:
        assert "not a sensor" not in err_check + said_trend


def test_check_streams_the_log_without_holding_it(folder, monkeypatch, capsys):
    """`check` keeps only counts while streaming (issue 10, audit 8): the whole-log readers are
    never called, a refusal far past the first chunk is still found, and the summary line
    counts every row."""
    from heatsight.data_io import logs, tables

    def whole(*args, **kwargs):
        raise AssertionError("check read the whole log into memory")

    monkeypatch.setattr(logs, "read_whole_log", whole)
    monkeypatch.setattr(tables, "read_log", whole)
    monkeypatch.setattr(logs, "CHECK_CHUNK_ROWS", 7)
    monkeypatch.chdir(folder)
    frame = _log_frame()
    frame.to_csv(folder / "log.csv", index=False)
    assert main(["check", "platen.toml"]) == 0
    assert f"log of {ROWS} times over {(ROWS - 1) * STEP:g} s, 20 sensors" in capsys.readouterr().out
    late = frame.copy()
    late.loc[ROWS - 3, "time [s]"] = 0.0          # row 38 of 40 goes back: in the sixth chunk of 7 rows
    late.to_csv(folder / "log.csv", index=False)
    assert main(["check", "platen.toml"]) == 2
    assert f"line {ROWS - 1}, column 'time [s]': time goes back" in capsys.readouterr().err
