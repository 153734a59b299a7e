"""The case file: parsing, validation, objects built for the forward model."""

import math
import os

import numpy as np
import pytest

from heatsight import inverse
from heatsight.data_io.case import Case, FitOptions, load_case
from heatsight.data_io.errors import InputError
from heatsight.forward import CylinderModel
from heatsight.forward.faces import Convection, Flux, Insulated, Temperature, UnknownFlux, UnknownTemperature

BASE = """\
[part]
radius = "150 mm"
height = "40 mm"
conductivity = "16 W/(m*K)"

[faces.bottom]
condition = "unknown-flux"
[faces.top]
condition = "convection"
h = "12 W/(m^2*K)"
ambient = "77 degF"
[faces.side]
condition = "temperature"
value = "25 degC"

[sensors]
layout = "data/layout.csv"
readings = "data/readings.csv"
"""

LAYOUT = "sensor,r [mm],theta [deg],z [mm]\nTC1,0,0,10\nTC2,50,90,10\nTC3,100,180,5\n"
READINGS = "sensor,temperature\nTC1,80\nTC2,75\nTC3,60\n"


def make(tmp_path, text=BASE, files=None):
    (tmp_path / "data").mkdir(exist_ok=True)
    (tmp_path / "data" / "layout.csv").write_text(LAYOUT)
    (tmp_path / "data" / "readings.csv").write_text(READINGS)
    for name, content in (files or {}).items():
        (tmp_path / name).write_text(content)
    p = tmp_path / "case.toml"
    p.write_text(text)
    return p


def test_base_case(tmp_path, monkeypatch):
    p = make(tmp_path)
    monkeypatch.chdir(tmp_path.parent)      # paths are relative to the case file, not the cwd
    case = load_case(p)
    assert isinstance(case, Case)
    cyl = case.cylinder
    assert (cyl.radius, cyl.height, cyl.conductivity) == (0.15, 0.04, 16.0)
    assert isinstance(case.faces["bottom"], UnknownFlux)
    top = case.faces["top"]
    assert isinstance(top, Convection) and top.h == 12.0
    assert top.ambient == pytest.approx(298.15)          # 77 degF = 25 degC, Fahrenheit definition
    assert isinstance(case.faces["side"], Temperature) and case.faces["side"].value == pytest.approx(298.15)
    assert case.unknown_face == "bottom"
    assert case.sensors.layout == tmp_path / "data" / "layout.csv"
    assert case.sensors.readings.exists()
    assert case.fit == FitOptions()
    assert case.folder == tmp_path and case.path == p
    assert case.face_text["top"]["ambient"] == "77 degF"
    case.require("fit")


def test_semi_infinite_part(tmp_path):
    text = BASE.replace('height = "40 mm"', 'height = "infinite"')
    text = text.replace('[faces.top]\ncondition = "convection"\nh = "12 W/(m^2*K)"\nambient = "77 degF"\n', "")
    case = load_case(make(tmp_path, text))
    assert math.isinf(case.cylinder.height)
    assert set(case.faces) == {"bottom", "side"}


@pytest.mark.parametrize("value, method, strength", [
    ('"auto"', "evidence", None),
    ('"auto:gcv"', "gcv", None),
    ('"auto:lcurve"', "lcurve", None),
    ('"auto:discrepancy"', "discrepancy", None),
    ('"AUTO:Evidence"', "evidence", None),
    ("0.01", "fixed", 0.01),
    ("3", "fixed", 3.0),
    ('"1e-3"', "fixed", 1e-3),
])
def test_fit_strength(tmp_path, value, method, strength):
    case = load_case(make(tmp_path, BASE + f"\n[fit]\nstrength = {value}\n"))
    assert case.fit.strength_method == method
    assert case.fit.strength == strength


def test_fit_options(tmp_path):
    text = BASE + '\n[fit]\nsmoothing = "curvature"\nkeep_all_sensors = true\nterms = 12\nharmonics = 4\n'
    fit = load_case(make(tmp_path, text)).fit
    assert (fit.smoothing, fit.keep_all_sensors, fit.terms, fit.harmonics) == ("curvature", True, 12, 4)
    assert fit.as_dict()["terms"] == 12
    fit = load_case(make(tmp_path, BASE + '\n[fit]\nkeep_sensors = ["TC1", " TC2 "]\n')).fit
    assert fit.keep_sensors == ("TC1", "TC2")


def test_zones(tmp_path):
    text = BASE + ('\n[[zones]]\nname = "inner"\nr = ["0 mm", "50 mm"]\n'
                   '\n[[zones]]\nname = "wedge"\nr = ["50 mm", "150 mm"]\ntheta = ["-60 deg", "60 deg"]\n')
    zones = load_case(make(tmp_path, text)).zones
    assert [z.name for z in zones] == ["inner", "wedge"]
    inner, wedge = zones
    assert inner.face == "bottom" and inner.r == (0.0, 0.05) and inner.theta == (0.0, 2 * math.pi)
    assert wedge.theta == pytest.approx((-math.pi / 3, math.pi / 3))
    r = np.array([0.01, 0.1, 0.1, 0.1])
    th = np.radians([200.0, 10.0, 350.0, 180.0])
    np.testing.assert_array_equal(inner.contains(r, th), [True, False, False, False])
    np.testing.assert_array_equal(wedge.contains(r, th), [False, True, True, False])


def test_zone_model_nominal_and_edge(tmp_path):
    text = BASE + ('\n[fit]\nmodel = "zones"\n'
                   '\n[[zones]]\nname = "ring"\nr = ["50 mm", "100 mm"]\nnominal = "0.4 kW"\nedge = "5 mm"\n'
                   '\n[[zones]]\nname = "centre"\nr = ["0 mm", "20 mm"]\n')
    case = load_case(make(tmp_path, text))
    assert case.fit.model == "zones" and case.fit.as_dict()["model"] == "zones"
    ring, centre = case.zones
    assert ring.nominal == pytest.approx(400.0) and ring.edge == pytest.approx(0.005)   # 1 kW = 1000 W (SI)
    assert centre.nominal is None and centre.edge == 0.0
    # a 5 mm edge is a linear ramp centred on each radial edge: 1/2 on the edge, 0 and 1
    # half a width away (the definition written in inverse.problem.Zone)
    r = np.array([0.0475, 0.05, 0.0525, 0.075, 0.1025])
    np.testing.assert_allclose(ring.indicator(r, np.zeros(5), 0.15, 0.15), [0.0, 0.5, 1.0, 1.0, 0.0], atol=1e-12)
    # sharp zones: the indicator is the membership mask, except 1/2 on an edge itself (not
    # at the axis), so that two zones sharing an edge sum to 1 there
    np.testing.assert_array_equal(centre.indicator(r, np.zeros(5), 0.15, 0.15), centre.contains(r, np.zeros(5)))
    outer = inverse.Zone("outer", "bottom", (0.0, math.pi), r=(0.02, 0.15))
    at = np.array([0.0, 0.01, 0.02, 0.05, 0.05])
    th = np.array([1.0, 1.0, 1.0, 0.0, math.pi])
    np.testing.assert_allclose(centre.indicator(at[:3], th[:3], 0.15, 0.15), [1.0, 1.0, 0.5])
    np.testing.assert_allclose(outer.indicator(at, th, 0.15, 0.15), [0.0, 0.0, 0.5, 0.5, 0.5])
    np.testing.assert_allclose(centre.indicator(at[:3], th[:3], 0.15, 0.15)
                               + outer.indicator(at[:3], th[:3], 0.15, 0.15), [1.0, 1.0, 1.0])


def test_side_zone(tmp_path):
    text = (BASE.replace('condition = "unknown-flux"', 'condition = "insulated"')
            .replace('condition = "temperature"\nvalue = "25 degC"', 'condition = "unknown-temperature"')
            + '\n[[zones]]\nname = "lower"\nz = ["0 mm", "20 mm"]\n')
    z = load_case(make(tmp_path, text)).zones[0]
    assert z.face == "side" and z.z == (0.0, 0.02) and z.r is None
    np.testing.assert_array_equal(z.contains(np.array([1.0, 1.0]), np.array([0.01, 0.03])), [True, False])


def test_zone_in_known_case_keeps_no_face(tmp_path):
    text = (BASE.replace('condition = "unknown-flux"', 'condition = "flux"\nvalue = "5 kW/m^2"')
            + '\n[[zones]]\nname = "inner"\nr = ["0 mm", "50 mm"]\n')
    case = load_case(make(tmp_path, text), purpose="simulate")
    assert case.zones[0].face is None and case.zones[0].r == (0.0, 0.05)


def test_profile_faces(tmp_path):
    text = (BASE.replace('value = "25 degC"', 'profile = "side.csv"')
            .replace('ambient = "77 degF"', 'profile = "amb.csv"'))
    side = "theta [deg],z [mm],value [degC]\n0,0,20\n120,0,30\n240,0,40\n0,40,20\n120,40,30\n240,40,40\n"
    amb = "r [mm],theta [deg],value [degC]\n0,0,20\n150,0,20\n150,90,20\n"
    case = load_case(make(tmp_path, text, {"side.csv": side, "amb.csv": amb}))
    assert callable(case.faces["side"].value)
    assert case.faces["side"].value(np.array([0.0]), np.array([0.02])) == pytest.approx(293.15)
    assert case.faces["top"].ambient(np.array([0.1]), np.array([1.0])) == pytest.approx(293.15)
    assert set(case.profiles) == {"side", "top"}
    assert tmp_path / "side.csv" in case.input_files()


def test_calibrating_an_ambient_profile_is_refused_at_load(tmp_path):
    """An ambient given as a profile has no one value to calibrate: `check` (load_case) says so,
    naming fit.calibrate, as `fit` would; its h may still be calibrated."""
    text = BASE.replace('ambient = "77 degF"', 'profile = "amb.csv"')
    amb = "r [mm],theta [deg],value [degC]\n0,0,20\n150,0,20\n150,90,20\n"
    with pytest.raises(InputError, match="fit.calibrate: 'top.ambient': faces.top has an ambient profile"):
        load_case(make(tmp_path, text + '\n[fit]\ncalibrate = ["top.ambient"]\n', {"amb.csv": amb}))
    case = load_case(make(tmp_path, text + '\n[fit]\ncalibrate = ["top.h"]\n', {"amb.csv": amb}))
    assert case.fit.calibrate == (("top", "h"),)


def test_flux_profile(tmp_path):
    text = BASE.replace('condition = "unknown-flux"', 'condition = "flux"\nprofile = "q.csv"')
    q = "r [mm],theta [deg],value [kW/m^2]\n0,0,5\n150,0,1\n"  + "75,0,3\n"
    case = load_case(make(tmp_path, text, {"q.csv": q}), purpose="simulate")
    assert isinstance(case.faces["bottom"], Flux)
    assert case.faces["bottom"].value(np.array([0.0]), np.array([0.0])) == pytest.approx(5000.0)


def test_purposes(tmp_path):
    case = load_case(make(tmp_path))
    with pytest.raises(InputError, match="simulate needs a fully known case"):
        case.require("simulate")
    known = BASE.replace('condition = "unknown-flux"', 'condition = "insulated"')
    with pytest.raises(InputError, match="fit needs one face with condition"):
        load_case(make(tmp_path, known), purpose="fit")
    assert isinstance(load_case(make(tmp_path, known), purpose="simulate").faces["bottom"], Insulated)


def test_fit_needs_layout(tmp_path):
    text = BASE.split("[sensors]")[0]
    with pytest.raises(InputError, match="fit needs the sensor layout"):
        load_case(make(tmp_path, text), purpose="fit")


def test_unknown_temperature_needs_no_conductivity(tmp_path):
    text = (BASE.replace('conductivity = "16 W/(m*K)"\n', "")
            .replace('condition = "unknown-flux"', 'condition = "unknown-temperature"')
            .replace('condition = "convection"\nh = "12 W/(m^2*K)"\nambient = "77 degF"',
                     'condition = "insulated"'))
    case = load_case(make(tmp_path, text))
    assert case.cylinder.conductivity is None
    assert isinstance(case.faces["bottom"], UnknownTemperature)


def test_build_model(tmp_path):
    text = BASE.replace('condition = "unknown-flux"', 'condition = "flux"\nvalue = "5 kW/m^2"')
    model = load_case(make(tmp_path, text)).build_model(tolerance=1e-4)
    assert isinstance(model, CylinderModel)


def _replace(old, new):
    assert old in BASE
    return BASE.replace(old, new)


BAD_CASES = {
    "unknown key with suggestion": (_replace('radius =', 'radus ='), "part.radus: unknown key 'radus'; did you mean 'radius'?"),
    "unknown top-level table": (BASE + "\n[sensor]\nlayout = 'x'\n", "did you mean 'sensors'?"),
    "unknown face name": (_replace("[faces.side]", "[faces.Side]"), "did you mean 'side'?"),
    "unknown face key": (_replace('value = "25 degC"', 'valeu = "25 degC"'), "did you mean 'value'?"),
    "missing unit": (_replace('"150 mm"', '"150"'), "part.radius: '150' has no unit"),
    "number without unit": (_replace('"150 mm"', "150"), "part.radius: 150 has no unit"),
    "wrong dimension": (_replace('"16 W/(m*K)"', '"16 W/m^2"'), "part.conductivity: unit 'W/m^2' is a heat flux; expected a thermal conductivity"),
    "negative radius": (_replace('"150 mm"', '"-150 mm"'), "part.radius: the radius must be positive"),
    "zero height": (_replace('"40 mm"', '"0 mm"'), "part.height: the height must be positive"),
    "garbage value": (_replace('"25 degC"', '"warm"'), "faces.side.value: cannot read 'warm'"),
    "unknown unit": (_replace('"25 degC"', '"25 degrees"'), "faces.side.value: unit 'degrees' is an angle"),
    "temperature difference as value": (_replace('"25 degC"', '"25 delta_degC"'), "temperature difference"),
    "unknown condition": (_replace('"unknown-flux"', '"unknown_flux"'), "faces.bottom.condition: unknown condition 'unknown_flux'; did you mean 'unknown-flux'?"),
    "two unknown faces": (_replace('condition = "temperature"\nvalue = "25 degC"', 'condition = "unknown-temperature"'), "faces bottom and side are both unknown"),
    "top face on infinite part": (_replace('"40 mm"', '"infinite"'), "faces.top: the part is semi-infinite"),
    "missing conductivity": (_replace('conductivity = "16 W/(m*K)"\n', ""), "part.conductivity: missing key 'conductivity', needed because faces.bottom is 'unknown-flux'"),
    "missing face": (_replace('[faces.side]\ncondition = "temperature"\nvalue = "25 degC"\n', ""), "missing [faces.side] table"),
    "missing condition": (_replace('condition = "temperature"\n', ""), "faces.side.condition: missing key 'condition'"),
    "key not for condition": (_replace('value = "25 degC"', 'value = "25 degC"\nh = "5 W/(m^2*K)"'), "faces.side.h: 'h' does not apply to condition 'temperature'"),
    "value and profile": (_replace('value = "25 degC"', 'value = "25 degC"\nprofile = "data/layout.csv"'), "give either 'value' or 'profile'"),
    "no value": (_replace('value = "25 degC"\n', ""), "condition 'temperature' needs 'value'"),
    "convection without h": (_replace('h = "12 W/(m^2*K)"\n', ""), "faces.top.h: condition 'convection' needs 'h'"),
    "negative h": (_replace('"12 W/(m^2*K)"', '"-12 W/(m^2*K)"'), "h must be positive"),
    "missing profile file": (_replace('value = "25 degC"', 'profile = "nope.csv"'), "faces.side.profile: file not found"),
    "missing layout file": (_replace('"data/layout.csv"', '"data/lay.csv"'), "sensors.layout: file not found"),
    "readings without layout": (_replace('layout = "data/layout.csv"\n', ""), "readings are given without a layout"),
    "bad strength method": (BASE + '\n[fit]\nstrength = "auto:gvc"\n', "fit.strength: unknown method 'gvc'; did you mean 'auto:gcv'?"),
    "negative strength": (BASE + "\n[fit]\nstrength = -1\n", "a fixed strength must be a positive number"),
    "bad smoothing": (BASE + '\n[fit]\nsmoothing = "smooth"\n', "fit.smoothing"),
    "fit key typo": (BASE + '\n[fit]\nsmothing = "size"\n', "fit.smothing: unknown key 'smothing'; did you mean 'smoothing'?"),
    "bool as text": (BASE + '\n[fit]\nkeep_all_sensors = "yes"\n', "expected true or false"),
    "keep_sensors as text": (BASE + '\n[fit]\nkeep_sensors = "TC1"\n', "fit.keep_sensors: expected a list of sensor ids"),
    "keep_sensors twice": (BASE + '\n[fit]\nkeep_sensors = ["TC1", "TC1"]\n', "a sensor is listed twice"),
    "terms not integer": (BASE + "\n[fit]\nterms = 2.5\n", "expected a whole number"),
    "zones as table": (BASE + '\n[zones]\nname = "a"\n', "write each zone under [[zones]]"),
    "zone without name": (BASE + '\n[[zones]]\nr = ["0 mm", "5 mm"]\n', "zones[1].name: missing key 'name'"),
    "zone duplicate name": (BASE + '\n[[zones]]\nname = "a"\n[[zones]]\nname = "a"\n', "zone name 'a' is used twice"),
    "zone r beyond radius": (BASE + '\n[[zones]]\nname = "a"\nr = ["0 mm", "200 mm"]\n', "zones[1].r: the range must lie within 0 and the radius"),
    "zone z on end face": (BASE + '\n[[zones]]\nname = "a"\nz = ["0 mm", "5 mm"]\n', "zones[1].z: a zone on the bottom face takes r and theta, not z"),
    "zone reversed range": (BASE + '\n[[zones]]\nname = "a"\nr = ["50 mm", "0 mm"]\n', "the first value must be below the second"),
    "zone range not a list": (BASE + '\n[[zones]]\nname = "a"\nr = "0 mm"\n', "expected a list of two values"),
    "zone across 0 deg": (BASE + '\n[[zones]]\nname = "a"\ntheta = ["330 deg", "30 deg"]\n',
                          'a sector across 0 deg starts below 0, e.g. ["-30 deg", "30 deg"]'),
    "zone theta too wide": (BASE + '\n[[zones]]\nname = "a"\ntheta = ["0 deg", "400 deg"]\n', "spans more than 360 deg"),
    "bad model": (BASE + '\n[fit]\nmodel = "zone"\n', "fit.model: got 'zone'; did you mean 'zones'?"),
    "calibrate a temperature face": (BASE + '\n[fit]\ncalibrate = ["side.h"]\n',
                                     "fit.calibrate: 'side.h': only h or ambient of a convection face can be "
                                     "calibrated, and faces.side is 'temperature'"),
    "calibrate the unknown face": (BASE + '\n[fit]\ncalibrate = ["bottom.ambient"]\n',
                                   "faces.bottom is 'unknown-flux'"),
    "zone nominal without unit": (BASE + '\n[[zones]]\nname = "a"\nnominal = "400"\n', "zones[1].nominal"),
    "zone nominal not a power": (BASE + '\n[[zones]]\nname = "a"\nnominal = "400 K"\n', "zones[1].nominal"),
    "zone nominal zero": (BASE + '\n[[zones]]\nname = "a"\nnominal = "0 W"\n', "expected a non-zero power"),
    "zone negative edge": (BASE + '\n[[zones]]\nname = "a"\nedge = "-5 mm"\n', "zones[1].edge: expected an edge width >= 0"),
    "toml syntax": (BASE + "\n[fit\n", "not valid TOML"),
    "part not a table": ('part = "x"\n', "expected a table [part]"),
    "no part": ("[faces.bottom]\ncondition = 'insulated'\n", "missing [part] table"),
}


@pytest.mark.parametrize("name", list(BAD_CASES))
def test_bad_case(tmp_path, name):
    text, fragment = BAD_CASES[name]
    p = make(tmp_path, text)
    before = p.read_bytes()
    with pytest.raises(InputError) as err:
        load_case(p)
    msg = str(err.value)
    assert fragment in msg, msg
    assert msg.startswith(str(p) + ": ")
    assert "\n" not in msg
    assert p.read_bytes() == before


def test_missing_case_file(tmp_path):
    with pytest.raises(InputError, match="case file not found"):
        load_case(tmp_path / "nope.toml")
