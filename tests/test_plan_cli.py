"""`heatsight plan` and `heatsight.plan` end to end: outputs, the console line, a candidates
file with rule-breaking rows, and bad input (one line, exit 2, nothing written).

The case is the bundled demo platen; most runs leave its readings out (the default prior
with a stated expected variation), which keeps them quick; one run uses the readings.
"""

import json
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import heatsight
from heatsight.data_io.cli import main
from test_cli_errors import snapshot

DEMO = Path(heatsight.__file__).resolve().parent.parent / "demo_data"
PLAN_TABLE = '\n[plan]\nexpected_variation = "2 kW/m^2"\nexclude_theta = [["150 deg", "210 deg"]]\n'


def make_folder(tmp_path, readings=False, plan=PLAN_TABLE):
    text = (DEMO / "platen.toml").read_text()
    if not readings:
        text = text.replace('readings = "readings.csv"\n', "")
    (tmp_path / "platen.toml").write_text(text + plan)
    shutil.copy(DEMO / "layout.csv", tmp_path / "layout.csv")
    if readings:
        shutil.copy(DEMO / "readings.csv", tmp_path / "readings.csv")
    return tmp_path


def test_plan_without_readings(tmp_path, capsys, monkeypatch):
    folder = make_folder(tmp_path)
    monkeypatch.chdir(folder)
    code = main(["plan", "platen.toml", "--add", "3", "--target", "zones,power", "--out", "out"])
    out = capsys.readouterr()
    assert code == 0, out.err
    line = out.out.splitlines()[0]
    assert line.startswith("3 new sensors: the sd of the ") and "falls from" in line
    assert line.endswith(("W/m²", " W", "kW/m²")), line
    names = sorted(p.name for p in (folder / "out").iterdir())
    assert names == sorted(["plan.csv", "sensors_value.csv", "summary.json", "plan_layout.png", "plan_bands.png",
                            "plan.html"])
    plan = pd.read_csv(folder / "out" / "plan.csv")
    assert list(plan["sensor"]) == ["current", "new1", "new2", "new3"]
    sd_cols = [c for c in plan.columns if c.startswith("sd_")]
    assert "sd_total_power_W" in sd_cols and len(sd_cols) == 6
    assert np.all(np.diff(plan[sd_cols].to_numpy(), axis=0) <= 1e-12)      # a sensor never adds uncertainty
    theta = plan["theta_deg"].to_numpy()[1:]
    assert not np.any((theta >= 150) & (theta <= 210))                      # the excluded range
    value = pd.read_csv(folder / "out" / "sensors_value.csv")
    assert list(value["rank"]) == list(range(1, 21))
    summary = json.loads((folder / "out" / "summary.json").read_text())
    assert "expected variation" in summary["covariance"] and summary["drilled_from"] == "top"


def test_candidates_file_and_api(tmp_path):
    folder = make_folder(tmp_path)
    holes = pd.DataFrame({"r [mm]": [120, 120, 120, 60, 130, 20], "theta [deg]": [180, 100, 250, 300, 10, 90],
                          "z [mm]": [10, 10, 10, 39.5, 10, 10]})
    holes.to_csv(folder / "holes.csv", index=False)
    plan = heatsight.plan(folder / "platen.toml", 2, candidates=folder / "holes.csv", targets=["power"])
    assert any("2 of 6 candidates break the [plan] rules" in w for w in plan.raw.warnings)
    picks = plan.picks.iloc[1:]
    assert len(picks) == 2 and not np.any(picks["theta_deg"].round() == 180)
    assert not np.any(np.isclose(picks["z_mm"], 39.5))
    assert plan.summary().startswith("2 new sensors: the sd of the total power falls from")
    assert "sd_if_lost_total_power_W" in plan.sensors_value.columns
    out = plan.write(folder / "api-out")
    assert (out / "plan.csv").is_file()


def test_plan_from_readings_and_fit_plan(tmp_path, capsys, monkeypatch):
    folder = make_folder(tmp_path, readings=True)
    monkeypatch.chdir(folder)
    fit = heatsight.fit("platen.toml", grid=(11, 24))
    plan = fit.plan(2, targets=["outer 180-300"])
    # the moment-matched Gaussian is updated exactly for one model; an average of the smooth
    # and the zone model (the demo: about 0.4 zones) is updated approximately, and says so
    averaged = bool(fit.raw.summary.get("model_averaged"))
    assert ("moment-matched" in plan.raw.state.source) != averaged
    assert ("approximate" in plan.raw.state.source) == averaged
    sd = plan.picks["sd_outer 180-300_W_m2"].to_numpy()
    assert sd[-1] < sd[0]
    # the zone's sd now is the fit's own
    zone = next(z for z in fit.raw.summary["zones"] if z["name"] == "outer 180-300")
    assert sd[0] == pytest.approx(zone["sd"], rel=1e-8)


def test_a_dominant_covariance_the_fit_cannot_give_is_said(tmp_path, capsys, monkeypatch):
    """`[plan] covariance = "dominant"` serves a fit answered by the smooth model alone; the
    demo's answer averages the zone model in, and the option was silently ignored (the same
    files as the default).  The plan now says which covariance it used instead."""
    folder = make_folder(tmp_path, readings=True, plan='\n[plan]\ncovariance = "dominant"\n')
    monkeypatch.chdir(folder)
    assert main(["plan", "platen.toml", "--add", "1", "--out", "out"]) == 0
    summary = json.loads((folder / "out" / "summary.json").read_text())
    note = [w for w in summary["warnings"] if 'covariance = "dominant"' in w]
    assert note and summary["covariance"] in note[0]
    # a fit the option serves (the smooth model at one strength) takes it, without the note
    text = (folder / "platen.toml").read_text()
    (folder / "platen.toml").write_text(text.replace('[fit]\nstrength = "auto"\n',
                                                     '[fit]\nmodel = "smooth"\nprior = "fixed"\nstrength = "auto:gcv"\n'))
    assert main(["plan", "platen.toml", "--add", "1", "--out", "out2"]) == 0
    summary = json.loads((folder / "out2" / "summary.json").read_text())
    assert "dominant component" in summary["covariance"]
    assert not [w for w in summary["warnings"] if 'covariance = "dominant"' in w]


BAD = {
    "missing candidates file": (["--candidates", "nowhere.csv"], "nowhere.csv: candidates file not found"),
    "bad candidate columns": (["--candidates", "holes.csv"], "holes.csv"),
    "add zero": (["--add", "0"], "expected a whole number >= 1"),
    "add negative": (["--add", "-1"], "expected a whole number >= 1, got '-1'"),
    "unknown target zone": (["--target", "outer 90-120"], "unknown target 'outer 90-120'"),
    "empty target": (["--target", " , "], "--target names nothing"),
}


@pytest.mark.parametrize("name", list(BAD))
def test_bad_input(tmp_path, capsys, monkeypatch, name):
    folder = make_folder(tmp_path)
    (folder / "holes.csv").write_text("r [mm],angle [deg],z [mm]\n100,0,10\n")
    monkeypatch.chdir(folder)
    before = snapshot(folder)
    args, fragment = BAD[name]
    code = main(["plan", "platen.toml", "--out", "out"] + args)
    err = capsys.readouterr().err
    assert code == 2, err
    assert err.startswith("heatsight: error: ") and err.count("\n") == 1 and "Traceback" not in err
    assert fragment in err, err
    assert snapshot(folder) == before and not (folder / "out").exists()


def test_bad_plan_table(tmp_path, capsys, monkeypatch):
    for table, fragment in (('\n[plan]\ndrill_from = "inside"\n', "plan.drill_from"),
                            ('\n[plan]\nexisting_from = "rim"\n', "plan.existing_from"),
                            ('\n[plan]\nspacing = 5\n', "plan.spacing"),
                            ('\n[plan]\ndepth_min = "50 mm"\n',
                             "the depth range ends at 38 mm (the part's height less [plan] face_distance), below "
                             "50 mm ([plan] depth_min)"),
                            ('\n[plan]\nexpected_variation = "2 K"\n', "plan.expected_variation"),
                            ('\n[plan]\nspacng = "5 mm"\n', "did you mean 'spacing'"),
                            ('\n[plan]\nexclude_theta = [["0 deg", "360 deg"]]\n',
                             "none of the 1152 positions of the [plan] grid meets the [plan] rules (in an "
                             "excluded angular range): relax them")):
        folder = tmp_path / fragment.split("'")[0].strip().replace(" ", "_")[:40]
        folder.mkdir()
        make_folder(folder, plan=table)
        monkeypatch.chdir(folder)
        code = main(["plan", "platen.toml", "--out", "out"])
        err = capsys.readouterr().err
        assert code == 2 and fragment in err and err.count("\n") == 1, err
        assert not (folder / "out").exists()


def test_check_says_what_fit_skips_and_plan_refuses(tmp_path, capsys, monkeypatch):
    """A zone on a known face (fit skips it) and [plan] rules that leave no grid position (plan
    refuses): check read both without a word and said the case was ready."""
    folder = make_folder(tmp_path, plan='\n[plan]\nexclude_theta = [["0 deg", "360 deg"]]\n')
    text = (folder / "platen.toml").read_text()
    (folder / "platen.toml").write_text(text.replace("[[zones]]", '[[zones]]\nname = "lid"\nface = "top"\n'
                                                                  'r = ["0 mm", "50 mm"]\n\n[[zones]]', 1))
    monkeypatch.chdir(folder)
    assert main(["check", "platen.toml"]) == 0
    err = capsys.readouterr().err
    assert "zone lid is on the top face, not the estimated bottom face; skipped" in err
    assert "plan's own grid (without --candidates) holds no position: none of the 1152 positions of the [plan] grid meets the [plan] rules" in err


def test_holes_through_the_estimated_face_are_questioned(tmp_path, capsys, monkeypatch):
    """drill_from = "bottom" on the platen: the holes would go in through its heater face, the
    one being estimated; the plan was made without a word."""
    folder = make_folder(tmp_path, plan=PLAN_TABLE + 'drill_from = "bottom"\n')
    monkeypatch.chdir(folder)
    code = main(["plan", "platen.toml", "--add", "1", "--out", "out"])
    err = capsys.readouterr().err
    assert code == 0, err
    assert "the holes go in from the bottom face, the face being estimated" in err


def test_holes_entering_a_heated_stretch_of_the_drill_face_are_named():
    """A tube's outer wall carries a band heater at z = 80-260 mm (a flux profile): the plan
    put a hole's entry under it without a word (the tube demo's new4 at z = 225 mm).  Picks
    whose entry point gets a heat flux are named (invented positions)."""
    import types

    import heatsight.forward as fw
    from heatsight.data_io.plan_command import heated_entries

    band = fw.Flux(lambda th, z: np.where((np.asarray(z) >= 0.08) & (np.asarray(z) <= 0.26), 11000.0, 0.0))
    case = types.SimpleNamespace(faces={"side": band, "top": fw.Insulated()})
    pos = (np.array([0.07, 0.07, 0.07]), np.radians([0.0, 90.0, 180.0]), np.array([0.05, 0.225, 0.30]))
    text = heated_entries(case, "side", pos, [0, 1, 2])
    assert text.startswith("new2 enters the side face where the case gives it a heat flux (up to 11000 W/m^2)")
    assert heated_entries(case, "side", pos, [0, 2]) == "" and heated_entries(case, "top", pos, [1]) == ""
