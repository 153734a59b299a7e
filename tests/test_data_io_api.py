"""`heatsight.fit(...)` for notebooks: a short repr, tables and predictions in user units that
agree with the SI result by the unit definitions, and `write_report` writing what the
command line writes."""

import json
import math
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import heatsight
from heatsight.data_io.cli import main
from heatsight.data_io.errors import InputError

DEMO = Path(__file__).resolve().parent.parent / "demo_data"
KELVIN_AT_0_DEGC = 273.15            # definition of the Celsius scale (SI brochure)
MM_PER_M = 1000.0                    # SI prefix milli
MM_PER_INCH = 25.4                   # international inch, exact by definition


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("demo")
    for name in ("platen.toml", "layout.csv", "readings.csv"):
        shutil.copy(DEMO / name, folder / name)
    return folder, heatsight.fit(folder / "platen.toml")


def test_repr_is_short_and_names_the_answers(demo):
    _, fit = demo
    text = repr(fit)
    assert "\n" not in text and len(text) < 240
    assert "bottom" in text and "heat flux" in text and "TC19" in text and " W " in text
    html = fit._repr_html_()
    assert html.startswith("<div>") and "<table" in html and "outer 60-180" in html and len(html) < 5000


def test_tables_in_user_units(demo):
    _, fit = demo
    raw = fit.raw
    face = fit.to_frame("face")
    assert list(face.columns) == ["r [mm]", "theta [deg]", "z [mm]", "estimate [kW/m^2]", "sd [kW/m^2]",
                                  "lower [kW/m^2]", "upper [kW/m^2]"]     # the demo's flux exceeds 10 kW/m^2
    np.testing.assert_allclose(face["estimate [kW/m^2]"], raw.grid["estimate"] / 1e3, rtol=1e-12)  # SI prefix kilo
    np.testing.assert_allclose(face["r [mm]"], raw.grid["r_m"] * MM_PER_M, rtol=1e-12)
    np.testing.assert_allclose(face["theta [deg]"], np.degrees(raw.grid["theta_rad"]), rtol=1e-12)
    sensors = fit.to_frame("sensors")
    np.testing.assert_allclose(sensors["measured [degC]"], raw.sensors["measured"] - KELVIN_AT_0_DEGC, rtol=1e-12)
    np.testing.assert_allclose(sensors["residual [K]"], raw.sensors["residual"], rtol=1e-12)
    assert sensors.loc[sensors["sensor"] == "TC19", "flag"].item() == "set aside"
    zones = fit.to_frame("zones")
    assert list(zones["zone"]) == [z["name"] for z in raw.summary["zones"]]
    np.testing.assert_allclose(zones["power [W]"], [z["power_W"] for z in raw.summary["zones"]], rtol=1e-12)
    np.testing.assert_allclose(zones["area [mm^2]"], [z["area_m2"] * MM_PER_M ** 2 for z in raw.summary["zones"]],
                               rtol=1e-12)
    with pytest.raises(ValueError, match="which must be"):
        fit.to_frame("sensor")


def test_predict_takes_user_units(demo):
    _, fit = demo
    r_mm, th_deg, z_mm = np.array([0.0, 50.0, 120.0]), np.array([0.0, 90.0, 150.0]), np.array([20.0, 20.0, 35.0])
    mean, sd = fit.predict(pd.DataFrame({"r [mm]": r_mm, "theta [deg]": th_deg, "z [mm]": z_mm}))
    ref, ref_sd, _, _ = fit.raw.predict(r_mm / MM_PER_M, np.radians(th_deg), z_mm / MM_PER_M)
    np.testing.assert_allclose(mean, ref - KELVIN_AT_0_DEGC, rtol=1e-12)
    np.testing.assert_allclose(sd, ref_sd, rtol=1e-12)
    inches = pd.DataFrame({"r [inch]": r_mm / MM_PER_INCH, "theta": th_deg, "z [inch]": z_mm / MM_PER_INCH})
    np.testing.assert_allclose(fit.predict(inches, return_std=False), mean, rtol=1e-12)
    np.testing.assert_allclose(fit.predict(r_mm, th_deg, z_mm)[0], mean, rtol=1e-12)
    np.testing.assert_allclose(fit.predict(np.c_[r_mm, th_deg, z_mm], return_std=False), mean, rtol=1e-12)
    with pytest.raises(InputError, match="point 1 .* lies outside the part"):
        fit.predict([200.0], [0.0], [10.0])
    with pytest.raises(InputError, match="missing z"), pytest.warns(UserWarning, match="names no unit"):
        fit.predict(pd.DataFrame({"r": [0.0], "theta": [0.0]}))


def test_a_points_table_without_length_units_says_how_it_is_read(demo, tmp_path, capsys):
    # the same unit-less table is read as mm by Fit.predict and as m at the command line
    # (both documented); each says so, since one written for the other is 1000x off
    _, fit = demo
    with pytest.warns(UserWarning, match=r"column 'r' names no unit; read as mm"):
        fit.predict(pd.DataFrame({"r": [50.0], "theta [deg]": [0.0], "z [mm]": [20.0]}))
    from heatsight.data_io.tables import read_points
    p = tmp_path / "points.csv"
    p.write_text("r,theta [deg],z [m]\n0.05,0,0.02\n")
    table = read_points(p, fit.raw.cylinder)
    assert table.warnings == [f"{p}: column 'r' names no unit; read as m (write 'r [mm]' or 'r [m]' to say)"]
    assert table.frame["r"].iloc[0] == 0.05


def test_figures_and_summary(demo):
    _, fit = demo
    from matplotlib.figure import Figure

    face = fit.plot_face()
    assert isinstance(face, Figure) and isinstance(fit.plot_sensors(), Figure)
    labels = {t.get_text() for ax in face.axes for t in ax.texts}
    assert "outer 60-180" in labels          # the case's zones are outlined on the notebook map
    text = fit.summary()
    assert text.splitlines()[0] == "bottom face heat flux (W/m^2):" and "set aside: TC19" in text
    assert math.isfinite(fit.raw.summary["total_power_W"])


def _approx(a, b, rel=1e-9) -> bool:
    """Equal JSON trees, numbers to `rel`."""
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(_approx(a[k], b[k], rel) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(_approx(x, y, rel) for x, y in zip(a, b))
    if isinstance(a, float) and isinstance(b, float):
        return a == pytest.approx(b, rel=rel, abs=1e-12) or (math.isnan(a) and math.isnan(b))
    return a == b


def test_write_report_writes_what_the_command_writes(demo, monkeypatch, capsys):
    folder, fit = demo
    monkeypatch.chdir(folder)
    assert main(["fit", "platen.toml", "--out", "cli"]) == 0
    console = capsys.readouterr().out
    written = fit.write_report(folder / "lib")
    cli, lib = folder / "cli", folder / "lib"
    assert sorted(p.name for p in cli.iterdir()) == sorted(p.name for p in written.iterdir())
    # the same tables; numbers to 1e-9 (the first fit in a process and a later one differ in
    # the tenth digit of a leave-one-out sd: caches filled by the first)
    for name in ("estimate.csv", "sensors.csv"):
        a, b = pd.read_csv(cli / name), pd.read_csv(lib / name)
        pd.testing.assert_frame_equal(a, b, check_exact=False, rtol=1e-9, obj=name)
    a, b = (json.loads((f / "summary.json").read_text()) for f in (cli, lib))
    for key in ("case", "readings"):
        assert Path(a.pop(key)).name == Path(b.pop(key)).name
    assert _approx(a, b)
    # issue 10: the console's warnings go to stderr, the rest of the summary to stdout
    assert console.splitlines()[:-1] == [x for x in fit.summary().splitlines() if not x.startswith("  warning: ")]
    with pytest.raises(InputError, match="not empty; give another folder or pass overwrite=True") as err:
        fit.write_report(folder / "lib")
    assert "--" not in str(err.value)              # the API's words, not the command line's
    for bad, fragment in ((None, "folder must be a path"), ):
        with pytest.raises(InputError, match=fragment):
            fit.write_report(bad)
    with pytest.raises(InputError, match="at must be the path of a CSV file"):
        fit.write_report(folder / "lib2", at=pd.DataFrame({"r [mm]": [0], "theta [deg]": [0], "z [mm]": [20]}))


@pytest.mark.parametrize("column, fragment", [
    ("r [foo]", "column 'r [foo]': unknown unit 'foo'"),
    ("r [degC]", "column 'r [degC]': unit 'degC' is a temperature; expected a length"),
])
def test_predict_names_a_bad_unit(demo, column, fragment):
    _, fit = demo
    with pytest.raises(InputError, match=fragment.replace("[", r"\[").replace("]", r"\]")):
        fit.predict(pd.DataFrame({column: [1.0], "theta [deg]": [0.0], "z [mm]": [20.0]}))


@pytest.mark.parametrize("options, fragment", [
    ({"harmonics": 100}, "harmonics = 100 is more than 48"),
    ({"terms": 300}, "terms = 300 is more than 200"),
    ({"monte_carlo": 10 ** 7}, "monte_carlo 10000000 is more than 100000"),
    ({"terms": "ten"}, "fit option terms: expected a whole number >= 1, got 'ten'"),
    ({"smoothing": "smooth"}, "fit option smoothing: got 'smooth'"),
    ({"nonsense": 1}, "unknown option 'nonsense'"),
    ({"calibrate": ["side.h"]}, "calibrate: 'side.h': only h or ambient of a convection face"),
])
def test_keyword_options_are_checked_like_the_case_files(demo, monkeypatch, options, fragment):
    """Sizes and values given as keywords meet the case file's limits before any work (they
    ran for minutes, or asked for 220 GiB, before); one message, no traceback of our own."""
    from heatsight.data_io import fit_steps

    def no_fit(*args, **kwargs):
        raise AssertionError("the fit ran")

    monkeypatch.setattr(fit_steps, "fit_case", no_fit)
    folder, _ = demo
    with pytest.raises(InputError, match=fragment):
        heatsight.fit(folder / "platen.toml", **options)


def test_keyword_calibrate_and_strength_take_the_case_files_spelling():
    from heatsight.inverse.problem import FitOptions

    o = FitOptions().with_overrides(calibrate=["top.h"], strength="1e-6")
    assert o.calibrate == (("top", "h"),) and o.strength_method == "fixed" and o.strength == 1e-6
