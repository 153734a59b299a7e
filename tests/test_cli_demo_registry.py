"""`heatsight demo --list` and `heatsight demo NAME`: the registry of bundled scenarios.

The tube scenario's data are written by another change; here the registry is tested on the
platen and on a temporary copy of it standing in as 'tube' (in tmp_path only)."""

import fnmatch
import json
import shutil
import tomllib
from pathlib import Path

import pytest

from heatsight.data_io import demos
from heatsight.data_io.cli import main

ROOT = Path(__file__).resolve().parent.parent
PLATEN = ROOT / "demo_data"
PLATEN_FILES = ("platen.toml", "layout.csv", "readings.csv", "truth.json")


@pytest.fixture
def installed(tmp_path, monkeypatch):
    """A demo folder holding the platen only; the registry reads it."""
    folder = tmp_path / "demo_data"
    folder.mkdir()
    for name in PLATEN_FILES:
        shutil.copy(PLATEN / name, folder / name)
    monkeypatch.setattr(demos, "demo_folder", lambda: folder)
    return folder


def test_list_names_each_demo_on_one_line(installed, capsys):
    assert main(["demo", "--list"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert [ln.split()[0] for ln in lines] == ["platen", "tube"]
    assert "(default)" in lines[0] and "(not in this installation)" in lines[1]
    (installed / "tube").mkdir()
    shutil.copy(installed / "platen.toml", installed / "tube" / "tube.toml")
    assert main(["demo", "--list"]) == 0
    assert "not in this installation" not in capsys.readouterr().out


@pytest.mark.parametrize("argv, fragment", [
    (["demo", "tub"], "unknown demo 'tub'; did you mean 'tube'? expected one of: platen, tube"),
    (["demo", "tube"], "the bundled demo 'tube' is missing from this installation"),
])
def test_bad_demo_name(installed, tmp_path, monkeypatch, capsys, argv, fragment):
    monkeypatch.chdir(tmp_path)
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert err.startswith("heatsight: error: ") and err.count("\n") == 1 and fragment in err, err
    assert not (tmp_path / "heatsight-demo").exists()


def test_named_demo_runs_from_its_own_folder(installed, tmp_path, capsys):
    """'tube' resolves to tube/tube.toml with its own tables and truth.json beside it."""
    tube = installed / "tube"
    tube.mkdir()
    for name in PLATEN_FILES:
        shutil.copy(installed / name, tube / ("tube.toml" if name == "platen.toml" else name))
    # mark the copy, so the run is seen to read tube/, not the platen beside it
    truth = (tube / "truth.json").read_text().replace('"story": "', '"story": "TUBE COPY: ')
    (tube / "truth.json").write_text(truth)
    out = tmp_path / "run"
    assert main(["demo", "tube", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "demo truth: TUBE COPY:" in text
    assert "(truth 818 W: " in text                 # demo_data/truth.json: 818.2 W (our scenario)
    assert (out / "report.html").is_file() and (out / "summary.json").is_file()


def test_package_data_names_every_demo_file():
    """Every file of a registered demo's folder (case, tables, truth) matches a package-data
    glob, so the wheel carries it (the wheel itself: tests/test_install.py)."""
    data = tomllib.loads((ROOT / "pyproject.toml").read_text())
    globs = data["tool"]["setuptools"]["package-data"]["heatsight.demo_data"]
    for d in demos.DEMOS:
        folder = (PLATEN / d.case).parent
        if not folder.is_dir():
            continue
        for path in folder.iterdir():
            if path.is_file() and path.suffix in (".toml", ".csv", ".json"):
                rel = path.relative_to(PLATEN).as_posix()
                assert any(fnmatch.fnmatch(rel, g) and rel.count("/") == g.count("/") for g in globs), rel


def test_demo_says_where_each_truth_lies_against_the_band(tmp_path):
    """The demo checks itself in the open: each truth shown beside the fit says how many sd it
    lies from the answer and whether the 95 % band (mean +- 1.96 sd, the normal quantile)
    holds it.  Truths here are made up for the check."""
    assert demos.against_truth(10.0, 9.0, 1.0) == "1.0 sd away, inside the 95 % band"
    assert demos.against_truth(7.0, 9.0, 1.0) == "2.0 sd away, OUTSIDE the 95 % band"   # 2 > 1.96
    assert demos.against_truth(1.0, 1.0, 0.0) == "no band to compare"
    (tmp_path / "truth.json").write_text(json.dumps({"total_power_W": 100.0, "zone_mean_W_m2": {"a": 50.0}}))
    summary = {"quantity": "heat_flux", "total_power_W": 103.0, "total_power_sd_W": 1.0,
               "zones": [{"name": "a", "mean": 45.0, "sd": 2.0, "deviation_from_face_mean": -5.0},
                         {"name": "b", "mean": 60.0, "sd": 2.0, "deviation_from_face_mean": 5.0}]}
    line = demos._truth_lines(tmp_path / "case.toml", summary, "W")[-1]
    assert "weakest zone a" in line and "truth 50 W/m^2: 2.5 sd away, OUTSIDE the 95 % band" in line
    assert "(truth 100 W: 3.0 sd away, OUTSIDE the 95 % band)" in line
