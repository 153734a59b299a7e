"""Hollow parts through the command line, checked against textbook closed forms of steady
1-D radial conduction through a cylindrical wall (Incropera & DeWitt, Fundamentals of Heat
and Mass Transfer, ch. 3, the cylindrical wall and its thermal resistances; from memory):

    T(r) = T_i + (T_o - T_i) ln(r/a) / ln(b/a),        a <= r <= b
    q' = 2 pi k (T_i - T_o) / ln(b/a)                   heat per metre of length, outwards
    with convection outside (h, T_inf):  q' = (T_i - T_inf) / (ln(b/a)/(2 pi k) + 1/(2 pi b h))
"""

import json
import math

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io.cli import main

A, B, K = 0.040, 0.060, 16.0           # bore and outer radius [m], conductivity [W/(m K)]
TI, TO = 200.0, 50.0                   # bore and outer temperatures [degC]

WALLS = """\
[part]
radius = "60 mm"
inner_radius = "40 mm"
height = "{height}"
conductivity = "16 W/(m*K)"
[faces.bore]
condition = "{bore}"
{bore_value}
[faces.side]
{side}
"""
ENDS = """[faces.top]
condition = "insulated"
[faces.bottom]
condition = "insulated"
"""


def wall_temperature(r, ti, to):
    """Textbook closed form (module docstring)."""
    return ti + (to - ti) * np.log(r / A) / np.log(B / A)


def per_length(ti, to):
    return 2 * math.pi * K * (ti - to) / math.log(B / A)


def convective_per_length(ti, h, t_inf):
    return (ti - t_inf) / (math.log(B / A) / (2 * math.pi * K) + 1 / (2 * math.pi * B * h))


def _case(tmp_path, height="long", bore="temperature", bore_value=f'value = "{TI} degC"',
          side=f'condition = "temperature"\nvalue = "{TO} degC"', extra=""):
    text = WALLS.format(height=height, bore=bore, bore_value=bore_value, side=side)
    if height != "long":
        text += ENDS
    path = tmp_path / "case.toml"
    path.write_text(text + extra, encoding="utf-8")
    return path


def _simulate(tmp_path, monkeypatch, points: str):
    (tmp_path / "points.csv").write_text(points, encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    assert main(["simulate", "case.toml", "--at", "points.csv", "--out", "field.csv", "-q"]) == 0
    return pd.read_csv(tmp_path / "field.csv")


RADII_MM = np.array([40.0, 42.5, 45.0, 50.0, 55.0, 57.5, 60.0])


@pytest.mark.parametrize("height", ["long", "300 mm"])
def test_tube_wall_temperatures_and_heat_per_length(tmp_path, monkeypatch, height):
    """A uniform bore and outer temperature: T(r) and the heat per length through every
    radius match the closed form, on a long tube and on a finite one with insulated ends."""
    _case(tmp_path, height=height)
    z = "" if height == "long" else ",z [mm]"
    rows = [f"{r:g},{37 * i}" + ("" if height == "long" else f",{[10, 150, 290][i % 3]}")
            for i, r in enumerate(RADII_MM)]
    field = _simulate(tmp_path, monkeypatch, f"r [mm],theta [deg]{z}\n" + "\n".join(rows) + "\n")
    r = RADII_MM / 1e3
    expected = wall_temperature(r, TI, TO)                          # textbook closed form
    span = TI - TO
    assert np.max(np.abs(field["temperature_degC"] - expected)) < 1e-6 * span
    heat = 2 * math.pi * r * field["qr_W_m2"].to_numpy()           # W per metre of length
    assert np.allclose(heat, per_length(TI, TO), rtol=1e-6)         # textbook closed form
    assert np.allclose(field["qtheta_W_m2"], 0.0, atol=1e-6 * per_length(TI, TO))
    assert np.allclose(field["qz_W_m2"], 0.0, atol=1e-6 * per_length(TI, TO))


def test_tube_wall_with_convection_outside(tmp_path, monkeypatch):
    """Bore at T_i, convection outside: the heat per length through the two resistances in
    series, and the outer surface at T_inf + q' / (2 pi b h) (textbook closed form)."""
    h, t_inf = 20.0, 25.0
    _case(tmp_path, side=f'condition = "convection"\nh = "{h} W/(m^2*K)"\nambient = "{t_inf} degC"')
    field = _simulate(tmp_path, monkeypatch, "r [mm],theta [deg]\n40,0\n50,90\n60,180\n")
    q = convective_per_length(TI, h, t_inf)                         # textbook closed form
    t_s = t_inf + q / (2 * math.pi * B * h)
    assert field["temperature_degC"].iloc[-1] == pytest.approx(t_s, abs=1e-6 * (TI - t_inf))
    assert field["temperature_degC"].iloc[1] == pytest.approx(wall_temperature(0.05, TI, t_s), abs=1e-6 * (TI - t_inf))
    heat = 2 * math.pi * np.array([0.04, 0.05, 0.06]) * field["qr_W_m2"].to_numpy()
    assert np.allclose(heat, q, rtol=1e-6)


LAYOUT = "sensor,r [mm],theta [deg],z [mm]\nT1,45,0,100\nT2,55,90,150\nT3,50,200,200\n"


def _check(tmp_path, monkeypatch, capsys, case_text, layout=LAYOUT):
    (tmp_path / "case.toml").write_text(case_text, encoding="utf-8")
    (tmp_path / "layout.csv").write_text(layout, encoding="utf-8")
    monkeypatch.chdir(tmp_path)
    assert main(["check", "case.toml"]) == 0
    return capsys.readouterr().out


def test_check_explains_the_wall(tmp_path, monkeypatch, capsys):
    """Thickness b - a = 20 mm; depth from the bore r - a as a fraction of it (definitions)."""
    text = WALLS.format(height="300 mm", bore="unknown-temperature", bore_value="",
                        side='condition = "convection"\nh = "20 W/(m^2*K)"\nambient = "25 degC"') \
        + ENDS + '[sensors]\nlayout = "layout.csv"\n'
    out = _check(tmp_path, monkeypatch, capsys, text)
    assert "wall: 20 mm thick, from the bore (r = 40 mm) to the outside (r = 60 mm)" in out
    assert "unknown face: the inner wall (bore)" in out
    assert "sensor depth in the wall, from the bore (inner wall), as a fraction of the 20 mm thickness:" in out
    for line in ("T1: 5 mm = 0.25", "T2: 15 mm = 0.75", "T3: 10 mm = 0.50"):
        assert line in out
    assert "ready for: fit (unknown face: bore)" in out
    assert "z is ignored" not in out
    # the outer wall unknown: depths from the outside
    side = text.replace('condition = "unknown-temperature"', 'condition = "temperature"\nvalue = "200 degC"') \
        .replace('condition = "convection"\nh = "20 W/(m^2*K)"\nambient = "25 degC"', 'condition = "unknown-flux"')
    out = _check(tmp_path, monkeypatch, capsys, side)
    assert "unknown face: the outer wall" in out and "from the outside (outer wall)" in out
    for line in ("T1: 15 mm = 0.75", "T2: 5 mm = 0.25", "T3: 10 mm = 0.50"):
        assert line in out


def test_check_says_where_the_bore_flux_is_not_estimated(tmp_path, monkeypatch, capsys):
    """An unknown bore flux beside an end held at a temperature: every axial eigenfunction
    vanishes at that end, so `check` says the flux is not estimated there (as `fit` warns);
    with both ends insulated it says nothing of the kind."""
    text = WALLS.format(height="300 mm", bore="unknown-flux", bore_value="",
                        side='condition = "temperature"\nvalue = "200 degC"') \
        + '[faces.top]\ncondition = "insulated"\n[faces.bottom]\ncondition = "temperature"\nvalue = "150 degC"\n' \
        + '[sensors]\nlayout = "layout.csv"\n'
    out = _check(tmp_path, monkeypatch, capsys, text)
    assert "series notes:" in out and "not estimated where it meets the bottom face" in out
    assert "meets the top face" not in out
    insulated = text.replace('condition = "temperature"\nvalue = "150 degC"', 'condition = "insulated"')
    out = _check(tmp_path, monkeypatch, capsys, insulated)
    assert "series notes:" not in out and "not estimated" not in out


def test_check_says_z_is_ignored_on_a_long_part(tmp_path, monkeypatch, capsys):
    text = WALLS.format(height="long", bore="unknown-flux", bore_value="",
                        side='condition = "temperature"\nvalue = "50 degC"') + '[sensors]\nlayout = "layout.csv"\n'
    out = _check(tmp_path, monkeypatch, capsys, text, "sensor,r [mm],theta [deg]\nT1,45,0\nT2,55,180\n")
    assert "long part: nothing varies along z, so the sensors' and points' z is ignored" in out
    assert "powers per metre of length, W/m" in out
    assert "T1: 5 mm = 0.25" in out and "T2: 15 mm = 0.75" in out


# ------------------------------------------------------------------ fit outputs of a long tube

SENSORS = [(45.0, 0), (45.0, 90), (45.0, 180), (45.0, 270), (52.0, 45), (52.0, 135), (52.0, 225), (52.0, 315),
           (58.0, 0), (58.0, 180)]


def _fit_long(tmp_path, monkeypatch, capsys, ti, h, t_inf):
    """Readings from the closed form (a uniform bore at ti, convection outside), then a fit
    of the bore as unknown; returns (summary, estimate frame, console text, folder)."""
    q = convective_per_length(ti, h, t_inf)
    t_s = t_inf + q / (2 * math.pi * B * h)
    layout = ["sensor,r [mm],theta [deg]"] + [f"S{i},{r},{t}" for i, (r, t) in enumerate(SENSORS, 1)]
    readings = ["sensor,temperature [degC]"] + [f"S{i},{wall_temperature(r / 1e3, ti, t_s):.6f}"
                                                for i, (r, _) in enumerate(SENSORS, 1)]
    (tmp_path / "layout.csv").write_text("\n".join(layout) + "\n", encoding="utf-8")
    (tmp_path / "readings.csv").write_text("\n".join(readings) + "\n", encoding="utf-8")
    _case(tmp_path, bore="unknown-temperature", bore_value="",
          side=f'condition = "convection"\nh = "{h} W/(m^2*K)"\nambient = "{t_inf} degC"',
          extra='[sensors]\nlayout = "layout.csv"\nreadings = "readings.csv"\n')
    monkeypatch.chdir(tmp_path)
    capsys.readouterr()
    assert main(["fit", "case.toml", "--out", "out"]) == 0
    text = capsys.readouterr().out
    out = tmp_path / "out"
    return json.loads((out / "summary.json").read_text()), pd.read_csv(out / "estimate.csv"), text, out, q


def test_long_tube_fit_gives_heat_per_metre_through_the_bore(tmp_path, monkeypatch, capsys):
    """Hot fluid: heat flows into the wall through the bore; total_power of the bore is the
    heat INTO the part, per metre (W/m), matching the closed form within its band."""
    s, est, text, out, q = _fit_long(tmp_path, monkeypatch, capsys, ti=200.0, h=20.0, t_inf=25.0)
    assert s["face"] == "bore" and s["power_unit"] == "W/m"
    assert "total_power_W" not in s                 # never a bare W for a per-metre figure
    p, sd = s["total_power_W_per_m"], s["total_power_sd_W_per_m"]
    assert p > 0 and abs(p - q) <= max(1.96 * sd, 1e-3 * q), (p, sd, q)   # textbook closed form
    assert s["mean"] == pytest.approx(200.0, abs=max(1.96 * s["mean_sd"], 0.05))
    assert np.allclose(est["r_mm"], 40.0)           # the bore's estimate lies at r = inner_radius
    assert "W/m (95 %) (per metre of length)" in text and "heat into the fluid" not in text
    for name in ("face_map.png", "band_width.png", "profiles.png", "report.html"):
        assert (out / name).is_file()


def test_long_tube_fit_when_the_wall_heats_the_fluid(tmp_path, monkeypatch, capsys):
    """Cold fluid in a tube heated from outside: the bore's power is negative and the words
    say 'heat into the fluid' with the positive amount."""
    s, _est, text, out, q = _fit_long(tmp_path, monkeypatch, capsys, ti=20.0, h=50.0, t_inf=150.0)
    p, sd = s["total_power_W_per_m"], s["total_power_sd_W_per_m"]
    assert q < 0 and p < 0 and abs(p - q) <= max(1.96 * sd, 1e-3 * abs(q))   # textbook closed form
    line = next(ln for ln in text.splitlines() if "heat into the fluid through the bore" in ln)
    # a long part has no height: its min and max are placed by r and theta alone
    extremes = [ln for ln in text.splitlines() if ln.strip().startswith(("min ", "max ")) and " at " in ln]
    assert extremes and all("theta =" in ln and "z =" not in ln for ln in extremes)
    shown = float(line.split("bore")[1].split("±")[0])
    assert shown == pytest.approx(-p, rel=5e-3) and "W/m" in line
    report = (out / "report.html").read_text()
    assert "heat into the fluid" in report and "W/m" in report
    for caution in ("Heated hardware can burn", "Local codes and licensed practice govern",
                    "pressure-equipment rules"):
        assert caution in report
    assert "nothing varies along a long part" in report     # the theta-curve captions


def test_thin_walls_plan_grid_message_and_check_without_a_plan_table():
    """A 2 mm wall leaves plan's default grid no depth: the message says 0 mm (not 1.7e-15) and
    what to change; `check` of a case without a [plan] table does not warn about plan's grid
    (plan says so itself when it is run).  A review found both."""
    from types import SimpleNamespace

    from heatsight.data_io.case_options import PlanOptions
    from heatsight.data_io.cli import plan_and_zone_notes
    from heatsight.forward import Cylinder
    from heatsight.inverse.errors import InverseError
    from heatsight.inverse.plan_rules import PlanRules, candidate_grid, drill_face

    cyl = Cylinder(0.08, 0.4, 45.0, inner_radius=0.078)
    rules = PlanRules()
    with pytest.raises(InverseError) as err:
        candidate_grid(rules, drill_face(rules, "bore", cyl), cyl, None)
    text = str(err.value)
    assert "ends at 0 mm" in text and "e-1" not in text and "--candidates" in text
    case = SimpleNamespace(path="tube.toml", zones=[], unknown_face="bore", cylinder=cyl, plan=PlanOptions())
    assert plan_and_zone_notes(case, None) == []
    case.plan = PlanOptions(rules=PlanRules(spacing=0.01))
    assert any("plan's own grid" in n for n in plan_and_zone_notes(case, None))


def test_positions_across_the_wall_for_an_unknown_end_face():
    """With an end face unknown, a hollow part's sensors are listed by where they sit across
    the wall, not as a depth under the unknown face."""
    from types import SimpleNamespace

    import pandas as pd

    from heatsight.data_io.describe import sensor_depths
    from heatsight.forward import Cylinder

    cyl = Cylinder(0.06, 0.03, 16.0, inner_radius=0.04)
    layout = SimpleNamespace(frame=pd.DataFrame({"r": [0.045], "theta": [0.0], "z": [0.008]}, index=["E01"]))
    end = sensor_depths(SimpleNamespace(cylinder=cyl, unknown_face="bottom"), layout)
    bore = sensor_depths(SimpleNamespace(cylinder=cyl, unknown_face="bore"), layout)
    assert end[0].startswith("sensor position across the wall, from the bore") and "E01: 5 mm = 0.25" in end[1]
    assert bore[0].startswith("sensor depth in the wall, from the bore")
