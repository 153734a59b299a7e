"""`heatsight fit` and `heatsight demo` end to end: outputs, bad input, safety."""

import csv
import json
import math
from pathlib import Path

import pytest

from heatsight.data_io.cli import main
from test_cli_errors import FIT, LAYOUT, READINGS, files, snapshot, sub

ROOT = Path(__file__).resolve().parent.parent

# Readings of FIT's layout that a smooth heater explains (bottom flux into the plate).
GOOD_LAYOUT = ("sensor,r [mm],theta [deg],z [mm],sigma [K]\n"
               "TC1,0,0,10,0.2\nTC2,50,90,10,0.2\nTC3,100,180,10,0.2\nTC4,120,270,10,0.2\n"
               "TC5,60,0,25,0.2\n=cmd,90,45,25,0.2\n")
GOOD_READINGS = "sensor,temperature [degC]\nTC1,60\nTC2,58\nTC3,50\nTC4,45\nTC5,52\n=cmd,49\n"


def _write(folder, content):
    for name, text in content.items():
        (folder / name).write_text(text, encoding="utf-8")


def _run(folder, monkeypatch, capsys, argv):
    monkeypatch.chdir(folder)
    code = main(argv)
    return code, capsys.readouterr()


def test_fit_writes_every_output(tmp_path, monkeypatch, capsys):
    _write(tmp_path, files(**{"case.toml": FIT, "layout.csv": GOOD_LAYOUT, "readings.csv": GOOD_READINGS,
                              "points.csv": "r [mm],theta [deg],z [mm]\n0,0,20\n75,90,20\n"}))
    before = snapshot(tmp_path)
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--at", "points.csv", "--out", "res"])
    assert code == 0, cap.err
    out = tmp_path / "res"
    names = {p.name for p in out.iterdir()}
    assert {"estimate.csv", "sensors.csv", "summary.json", "points.csv", "report.html"} <= names
    assert not [n for n in names if n.endswith(".tmp")]
    assert snapshot(tmp_path) == before  # inputs untouched (the new folder is not a file)
    with open(out / "estimate.csv") as fh:
        header = next(csv.reader(fh))
    # issue 10: mm and degrees, the unit in every column name
    assert header == ["r_mm", "theta_deg", "z_mm", "estimate_W_m2", "std_W_m2", "lower_W_m2", "upper_W_m2"]
    summary = json.loads((out / "summary.json").read_text())
    for key in ("face", "quantity", "unit", "mean", "min", "max", "total_power_W", "strength",
                "strength_method", "chi2", "effective_parameters", "zones", "warnings", "sensors"):
        assert key in summary
    assert summary["face"] == "bottom" and summary["quantity"] == "heat_flux" and summary["unit"] == "W/m^2"
    s0 = summary["sensors"][0]
    assert set(s0) >= {"sensor", "measured", "fitted", "residual", "standardized", "loo_predicted",
                       "caught_offset", "flag"}
    with open(out / "sensors.csv") as fh:
        rows = list(csv.DictReader(fh))
    assert {"loo_sd_K", "caught_offset_K"} <= set(rows[0])        # the unit in the column name
    kept = [r for r in rows if r["flag"] != "set aside"]
    assert all(float(r["caught_offset_K"]) >= 2.5 * float(r["loo_sd_K"]) for r in kept)   # t > 2.5 here
    assert "caught offset [K]" in (out / "report.html").read_text(encoding="utf-8")
    # one score everywhere: the screening's, in sensors.csv, summary.json and the report's table
    report = (out / "report.html").read_text(encoding="utf-8")
    for row, s in zip(rows, summary["sensors"]):
        assert float(row["score"]) == pytest.approx(s["score"], rel=1e-9)
        assert f">{float(row['score']):+.2f}<" in report
    # spreadsheet formula injection: the sensor named "=cmd" is neutralized in CSV outputs
    text = (out / "sensors.csv").read_text()
    assert "'=cmd" in text and "\n=cmd" not in text
    with open(out / "points.csv") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 2 and {"temperature_degC", "std_K", "lower_degC", "upper_degC"} <= set(rows[0])
    assert "bottom face heat flux" in cap.out


def test_fit_default_folder_next_to_case_and_refuses_non_empty(tmp_path, monkeypatch, capsys):
    _write(tmp_path, files(**{"case.toml": FIT, "layout.csv": GOOD_LAYOUT, "readings.csv": GOOD_READINGS}))
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml"])
    assert code == 0, cap.err
    assert (tmp_path / "case-fit" / "summary.json").is_file()
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml"])
    assert code == 2 and "not empty" in cap.err and "--overwrite" in cap.err
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--overwrite"])
    assert code == 0, cap.err


def test_overwrite_removes_its_own_earlier_outputs_and_keeps_the_users(tmp_path, monkeypatch, capsys):
    """--overwrite replaces heatsight's earlier outputs: one this run does not write (points.csv
    without --at) goes, so the folder and its summary.json agree and a later run with --at is
    not refused; a file of the user's own stays, and an earlier output that is an input of this
    run is refused before anything is written."""
    _write(tmp_path, files(**{"case.toml": FIT, "layout.csv": GOOD_LAYOUT, "readings.csv": GOOD_READINGS,
                              "points.csv": "r [mm],theta [deg],z [mm]\n0,0,20\n"}))
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--at", "points.csv", "--out", "res"])
    assert code == 0, cap.err
    out = tmp_path / "res"
    (out / "notes.txt").write_text("mine")
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--out", "res", "--overwrite"])
    assert code == 0, cap.err
    listed = set(json.loads((out / "summary.json").read_text())["output_files"])
    assert not (out / "points.csv").exists() and "points.csv" not in listed
    assert {p.name for p in out.iterdir()} == listed | {"notes.txt"}
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--at", "points.csv", "--out", "res",
                                                     "--overwrite"])
    assert code == 0, cap.err
    assert (out / "points.csv").is_file() and (out / "notes.txt").read_text() == "mine"
    # a summary.json that lists the user's file (copied, edited, stale) never gets it removed:
    # only names heatsight writes are
    s = json.loads((out / "summary.json").read_text())
    s["output_files"] += ["notes.txt", "../case.toml", "x" * 300]
    (out / "summary.json").write_text(json.dumps(s))
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--out", "res", "--overwrite"])
    assert code == 0, cap.err
    assert (out / "notes.txt").read_text() == "mine" and (tmp_path / "case.toml").is_file()
    # an earlier output given as an input of this run: refused, nothing written or removed
    before = snapshot(out)
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--readings", "res/points.csv",
                                                     "--out", "res", "--overwrite"])
    assert code == 2 and "points.csv in the output folder is an input of this run" in cap.err, cap.err
    assert snapshot(out) == before


def test_a_full_disk_names_the_file_and_leaves_nothing(tmp_path, monkeypatch, capsys):
    """A write that fails without a file name (ENOSPC on an open file) is reported naming the
    output file being written, exit 2, and the new folder is removed."""
    import errno

    from heatsight.data_io import csv_out

    _write(tmp_path, files(**{"case.toml": FIT, "layout.csv": GOOD_LAYOUT, "readings.csv": GOOD_READINGS}))

    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(csv_out.os, "fsync", full)
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--out", "res"])
    assert code == 2 and "No space left on device" in cap.err and "a file:" not in cap.err, cap.err
    assert "res/estimate.csv: No space left" in cap.err and cap.err.count("\n") == 1
    assert not (tmp_path / "res").exists()


LOG = "time [s],TC1,TC2,TC3\n0,85,80,40\n10,85.1,80.1,40.1\n"

FIT_CASES = {
    "fit on a known case": (files(), ["fit", "case.toml", "--out", "res"], "fit needs one face"),
    "log readings to fit": (files(**{"case.toml": FIT, "readings.csv": LOG}), ["fit", "case.toml", "--out", "res"],
                            "reads as a log"),
    "too few sensors": (files(**{"case.toml": FIT, "readings.csv": "sensor,temperature\nTC1,85\nTC2,80\n"}),
                        ["fit", "case.toml", "--out", "res"], "a fit needs at least 3"),
    "no readings named": (files(**{"case.toml": sub('readings = "readings.csv"\n', "", FIT)}),
                          ["fit", "case.toml", "--out", "res"], "no readings"),
    "out is a file": (files(**{"case.toml": FIT, "res": "x"}), ["fit", "case.toml", "--out", "res"],
                      "is not a folder"),
    "out parent missing": (files(**{"case.toml": FIT}), ["fit", "case.toml", "--out", "no/res"],
                           "does not exist"),
    "negative monte carlo": (files(**{"case.toml": FIT}), ["fit", "case.toml", "--monte-carlo", "-3"],
                             "expected a whole number"),
    "missing readings file": (files(**{"case.toml": FIT}), ["fit", "case.toml", "--readings", "nope.csv"],
                              "nope.csv"),
    "reading of an unknown sensor": (files(**{"case.toml": FIT, "readings.csv": READINGS.replace("TC2", "TC8")}),
                                     ["fit", "case.toml", "--out", "res"], "not in the layout"),
    # a snapshot with a wrong second header is told what a snapshot needs, not what a log needs
    "snapshot with a misnamed column": (files(**{"case.toml": FIT, "readings.csv": "sensor,temp [degC]\nTC1,85\n"}),
                                        ["fit", "case.toml", "--out", "res"],
                                        "unknown column 'temp [degC]' in snapshot readings"),
    "the layout as readings": (files(**{"case.toml": FIT}), ["fit", "case.toml", "--readings", "layout.csv"],
                               "unknown column 'r"),
}


@pytest.mark.parametrize("name", list(FIT_CASES))
def test_fit_bad_input(tmp_path, monkeypatch, capsys, name):
    content, argv, fragment = FIT_CASES[name]
    _write(tmp_path, content)
    before = snapshot(tmp_path)
    code, cap = _run(tmp_path, monkeypatch, capsys, argv)
    assert code == 2, cap.err
    assert cap.err.startswith("heatsight: error: ") and cap.err.count("\n") == 1, cap.err
    assert "Traceback" not in cap.err and fragment in cap.err, cap.err
    assert snapshot(tmp_path) == before
    assert not (tmp_path / "res").is_dir() and not (tmp_path / "case-fit").exists()


def test_case_file_is_never_evaluated(tmp_path, monkeypatch, capsys):
    """A case value that looks like code is refused as text, never run."""
    evil = sub('"16 W/(m*K)"', '"__import__(\'os\').system(\'touch pwned\')"', FIT)
    _write(tmp_path, files(**{"case.toml": evil, "layout.csv": GOOD_LAYOUT, "readings.csv": GOOD_READINGS}))
    code, cap = _run(tmp_path, monkeypatch, capsys, ["fit", "case.toml", "--out", "res"])
    assert code == 2 and "conductivity" in cap.err
    assert not (tmp_path / "pwned").exists()


def test_demo_end_to_end_finds_the_weak_sector(tmp_path, monkeypatch, capsys):
    """The demo's truth comes from an independent finite-element solution (scikit-fem) of
    the same platen, demo_data/truth.json; the fit must find the weak sector, set the faulty
    thermocouple aside and bracket the true power with its 95 % band."""
    code, cap = _run(tmp_path, monkeypatch, capsys, ["demo", "--out", "demo"])
    assert code == 0, cap.err
    truth = json.loads((ROOT / "demo_data" / "truth.json").read_text())
    s = json.loads((tmp_path / "demo" / "summary.json").read_text())
    zones = {z["name"]: z for z in s["zones"]}
    weakest = min(zones.values(), key=lambda z: z["mean"])
    true_weakest = min(truth["zone_mean_W_m2"], key=truth["zone_mean_W_m2"].get)
    assert weakest["name"] == true_weakest
    assert abs(s["total_power_W"] - truth["total_power_W"]) <= 1.96 * s["total_power_sd_W"]
    assert s["set_aside"] == [truth["bad_sensor"]]
    assert "report:" in cap.out and (tmp_path / "demo" / "report.html").is_file()
    html = (tmp_path / "demo" / "report.html").read_text()
    assert "licensed practice" in html and "src=\"http" not in html
    for name, mean in truth["zone_mean_W_m2"].items():   # every zone within 3 sd of the truth
        assert abs(zones[name]["mean"] - mean) <= 3 * zones[name]["sd"] + 1e-9, name
    assert math.isfinite(s["chi2"])
