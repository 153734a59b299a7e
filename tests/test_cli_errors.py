"""Bad input through the command line: exit status 2, one line naming the problem, no
traceback, no output left behind, input files unchanged."""

import os

import pytest

from heatsight.data_io.cli import main

KNOWN = """\
[part]
radius = "150 mm"
height = "40 mm"
conductivity = "16 W/(m*K)"
[faces.bottom]
condition = "flux"
value = "5 kW/m^2"
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
"""
FIT = KNOWN.replace('condition = "flux"\nvalue = "5 kW/m^2"', 'condition = "unknown-flux"')
LAYOUT = "sensor,r [mm],theta [deg],z [mm],type,class\nTC1,0,0,10,K,1\nTC2,50,90,10,K,2\nTC3,100,180,5,T,1\n"
READINGS = "sensor,temperature [degC]\nTC1,85\nTC2,80\nTC3,40\n"
POINTS = "r [mm],theta [deg],z [mm]\n0,0,20\n75,90,20\n"
PROFILE = "theta [deg],z [mm],value [degC]\n0,0,25\n120,20,26\n240,40,27\n"


def files(**changes):
    base = {"case.toml": KNOWN, "layout.csv": LAYOUT, "readings.csv": READINGS, "points.csv": POINTS}
    base.update(changes)
    return base


def sub(old, new, text=KNOWN):
    assert old in text, old
    return text.replace(old, new)


SIM = ["simulate", "case.toml", "--at", "points.csv", "--out", "out.csv"]
CHECK = ["check", "case.toml"]

# name -> (files, argv, expected fragment of the message)
CASES = {
    "unknown key": (files(**{"case.toml": sub("radius =", "radus =")}), SIM,
                    "part.radus: unknown key 'radus'; did you mean 'radius'?"),
    "missing unit": (files(**{"case.toml": sub('"150 mm"', '"150"')}), SIM, "part.radius: '150' has no unit"),
    "wrong dimension": (files(**{"case.toml": sub('"5 kW/m^2"', '"5 kW"')}), SIM,
                        "faces.bottom.value: unit 'kW' is a power; expected a heat flux"),
    "negative radius": (files(**{"case.toml": sub('"150 mm"', '"-150 mm"')}), SIM,
                        "part.radius: the radius must be positive"),
    "unknown condition": (files(**{"case.toml": sub('"convection"', '"convective"')}), SIM,
                          "did you mean 'convection'?"),
    "two unknown faces": (files(**{"case.toml": sub('condition = "temperature"\nvalue = "25 degC"',
                                                    'condition = "unknown-temperature"', FIT)}), CHECK,
                          "faces bottom and side are both unknown"),
    "unknown face for simulate": (files(**{"case.toml": FIT}), SIM, "simulate needs a fully known case"),
    "top face on infinite part": (files(**{"case.toml": sub('"40 mm"', '"infinite"')}), SIM,
                                  "faces.top: the part is semi-infinite"),
    "missing conductivity": (files(**{"case.toml": sub('conductivity = "16 W/(m*K)"\n', "")}), SIM,
                             "part.conductivity: missing key 'conductivity'"),
    "point outside with mm hint": (files(**{"points.csv": "r,theta,z\n75,90,20\n"}), SIM,
                                   "points.csv: line 2, column 'r': point at r = 75 (m) lies outside the part "
                                   "(0 <= r <= radius 150 mm); the values would fit if they were mm"),
    "points wrong columns": (files(**{"points.csv": "x,y,z\n0,0,0.01\n"}), SIM, "unknown column 'x'"),
    "points non-numeric": (files(**{"points.csv": "r,theta,z\n0,zero,0.01\n"}), SIM,
                           "line 2, column 'theta': 'zero' is not a number"),
    "missing points file": (files(), ["simulate", "case.toml", "--at", "nope.csv", "--out", "out.csv"],
                            "nope.csv: file not found"),
    "profile wrong columns": (files(**{"case.toml": sub('value = "25 degC"\n[sensors]', 'profile = "side.csv"\n[sensors]'),
                                       "side.csv": "r,theta,value\n0,0,25\n0.1,0,26\n0.1,90,27\n"}), SIM,
                              "side.csv: line 1: unknown column 'r' in a profile on the side face"),
    "profile two points": (files(**{"case.toml": sub('value = "25 degC"\n[sensors]', 'profile = "side.csv"\n[sensors]'),
                                    "side.csv": "theta,z,value\n0,0,25\n90,0.01,26\n"}), SIM,
                           "at least 3 distinct points"),
    "profile point outside": (files(**{"case.toml": sub('value = "25 degC"\n[sensors]', 'profile = "side.csv"\n[sensors]'),
                                       "side.csv": PROFILE.replace("240,40,27", "240,60,27")}), SIM,
                              "line 4, column 'z [mm]': profile point at z = 60"),
    "missing layout file": (files(**{"case.toml": sub('"layout.csv"', '"lay.csv"', FIT)}), CHECK,
                            "sensors.layout: file not found"),
    "duplicated sensor id": (files(**{"case.toml": FIT, "layout.csv": LAYOUT + "TC2,60,90,10,K,2\n"}), CHECK,
                             "layout.csv: line 5, column 'sensor': sensor 'TC2' appears twice"),
    "non-numeric reading": (files(**{"case.toml": FIT, "readings.csv": READINGS.replace("80", "eighty")}), CHECK,
                            "readings.csv: line 3, column 'temperature [degC]': 'eighty' is not a number"),
    "unknown sensor in readings": (files(**{"case.toml": FIT, "readings.csv": READINGS.replace("TC3", "TC9")}), CHECK,
                                   "sensor 'TC9' is not in the layout"),
    "open circuit": (files(**{"case.toml": FIT, "readings.csv": READINGS.replace("40", "1500")}), CHECK,
                     "likely an open circuit"),
    "sensor outside with hint": (files(**{"case.toml": FIT, "layout.csv": "sensor,r,theta,z\nA,50,0,10\n"}), CHECK,
                                 "would fit if they were mm"),
    "unknown thermocouple type": (files(**{"case.toml": FIT, "layout.csv": LAYOUT.replace("T,1", "Q,1")}), CHECK,
                                  "unknown thermocouple type 'Q'"),
    "no layout for fit": (files(**{"case.toml": FIT.split("[sensors]")[0]}), CHECK, "fit needs the sensor layout"),
    "decreasing log times": (files(**{"case.toml": FIT, "readings.csv": "time,TC1,TC2\n10,80,81\n5,80,81\n"}), CHECK,
                             "times must increase"),
    "toml syntax": (files(**{"case.toml": KNOWN + "[fit\n"}), SIM, "not valid TOML"),
    "ill-posed all flux": (files(**{"case.toml": sub('condition = "temperature"\nvalue = "25 degC"',
                                                     'condition = "insulated"',
                                                     sub('condition = "convection"\nh = "12 W/(m^2*K)"\nambient = "25 degC"',
                                                         'condition = "insulated"'))}), SIM,
                           "case.toml: the net heat input"),
    "out is an input": (files(), ["simulate", "case.toml", "--at", "points.csv", "--out", "case.toml"],
                        "case.toml: is an input file of this run"),
    "out folder missing": (files(), ["simulate", "case.toml", "--at", "points.csv", "--out", "no/out.csv"],
                           "the folder no does not exist"),
    "missing --at": (files(), ["simulate", "case.toml"], "the following arguments are required: --at"),
    "bad tolerance": (files(), SIM + ["--tolerance", "-1"], "expected a positive number"),
    "unknown command": (files(), ["fitt", "case.toml"], "invalid choice"),
    "missing case file": (files(), ["check", "other.toml"], "other.toml: case file not found"),
    "a basis of one uniform level": (files(**{"case.toml": sub('condition = "temperature"\nvalue = "25 degC"',
                                                               'condition = "insulated"', FIT)
                                              + "[fit]\nharmonics = 0\nterms = 1\n"}),
                                     ["fit", "case.toml", "--out", "fitted"],
                                     "holds no mode beside its nominal level (as with fit.harmonics = 0 and fit.terms = 1)"),
    "a log given to fit": (files(**{"case.toml": FIT, "readings.csv": "time,TC1,TC2,TC3\n0,80,81,40\n1,80,81,40\n"}),
                           ["fit", "case.toml", "--out", "fitted"],
                           "reads as a log (its first column 'time' the time, then one column per sensor: TC1, TC2, "
                           "TC3)"),
    "zone name with a newline": (files(**{"case.toml": FIT + '[[zones]]\nname = "mid\\ndle"\nr = ["0 mm", "50 mm"]\n'}),
                                 CHECK, "zones[1].name: holds the control character '\\n'"),
    # values beyond plausible magnitudes (data_io.limits.PLAUSIBLE, common practice, no source):
    # a unit slip or an overflow code, which the series and statistics would break down on
    "radius in metres meant mm": (files(**{"case.toml": sub('"150 mm"', '"150 m"')}), SIM,
                                  "part.radius: '150 m' is outside 0.5 mm to 100 m, not a plausible part's radius "
                                  "(check the unit: 150 mm would be)"),
    "huge height": (files(**{"case.toml": sub('"40 mm"', '"1e308 mm"')}), SIM,
                    "part.height: '1e308 mm' is above 1000 m, not a plausible length"),
    "huge conductivity": (files(**{"case.toml": sub('"16 W/(m*K)"', '"1e20 W/(m*K)"')}), SIM,
                          "part.conductivity: '1e20 W/(m*K)' is above 10000 W/(m*K)"),
    "tiny h": (files(**{"case.toml": sub('"12 W/(m^2*K)"', '"0.001 W/(m^2*K)"')}), SIM,
               "faces.top.h: '0.001 W/(m^2*K)' is below 0.01 W/(m^2*K), not a plausible heat-transfer "
               "coefficient (with less, the face is insulated"),
    "overflow flux": (files(**{"case.toml": sub('"5 kW/m^2"', '"1e308 W/m^2"')}), SIM,
                      "faces.bottom.value: '1e308 W/m^2' is above 1e+09 W/m^2"),
    "hot ambient": (files(**{"case.toml": sub('ambient = "25 degC"', 'ambient = "1e5 degC"')}), SIM,
                    "faces.top.ambient: '1e5 degC' is above 10000 K"),
    "overflow in a profile": (files(**{"case.toml": sub('value = "25 degC"\n[sensors]', 'profile = "side.csv"\n[sensors]'),
                                       "side.csv": PROFILE.replace("120,20,26", "120,20,1e308")}), SIM,
                              "side.csv: line 3, column 'value [degC]': 1e308 is above 10000 K"),
    "huge sigma": (files(**{"case.toml": FIT, "layout.csv": "sensor,r [mm],theta [deg],z [mm],sigma [K]\n"
                                                            "TC1,0,0,10,0.1\nTC2,50,90,10,1e200\nTC3,100,180,5,0.1\n"}),
                   CHECK, "layout.csv: line 3, column 'sigma [K]': 1e200 is above 10000 K"),
    "angle of many turns": (files(**{"case.toml": FIT, "layout.csv": LAYOUT.replace("50,90,10", "50,3000,10")}), CHECK,
                            "layout.csv: line 3, column 'theta [deg]': 3000 is above 720 deg"),
}


def snapshot(folder):
    return {p.name: (p.read_bytes(), p.stat().st_mtime_ns) for p in folder.iterdir() if p.is_file()}


@pytest.mark.parametrize("name", list(CASES))
def test_bad_input(tmp_path, monkeypatch, capsys, name):
    content, argv, fragment = CASES[name]
    for fname, text in content.items():
        (tmp_path / fname).write_text(text, encoding="utf-8")
    before = snapshot(tmp_path)
    monkeypatch.chdir(tmp_path)
    code = main(argv)
    captured = capsys.readouterr()
    assert code == 2, captured.err
    assert captured.out == ""
    err = captured.err
    assert err.startswith("heatsight: error: ") and err.endswith("\n")
    assert err.count("\n") == 1, err
    assert "Traceback" not in err
    assert fragment in err, err
    # no partial output, inputs untouched, no temporary files left
    assert snapshot(tmp_path) == before
    assert not os.path.exists(tmp_path / "out.csv")
