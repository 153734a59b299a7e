"""Unit parsing at the data_io edge (pint registry)."""

import math

import numpy as np
import pytest

from heatsight.data_io.errors import InputError
from heatsight.data_io.units import column_unit, convert, format_quantity, parse_quantity, split_header


@pytest.mark.parametrize("text, dimension, expected", [
    ("32 degF", "temperature", 273.15),      # definition of the Fahrenheit scale: 32 degF = 0 degC
    ("212 degF", "temperature", 373.15),     # definition of the Fahrenheit scale: 212 degF = 100 degC
    ("77 degF", "temperature", 298.15),      # (77 - 32) * 5/9 = 25 degC, definition of the scale
    ("25 degC", "temperature", 298.15),      # definition of the Celsius scale: T/K = t/degC + 273.15
    ("-40 degC", "temperature", 233.15),     # definition of the Celsius scale
    ("300 K", "temperature", 300.0),
    ("0.9 delta_degF", "temperature_difference", 0.5),   # 1 degF difference = 5/9 K (definition)
    ("0.9 degF", "temperature_difference", 0.5),         # a sigma in degF is a difference
    ("0.5 degC", "temperature_difference", 0.5),         # a sigma in degC is a difference
    ("0.5 K", "temperature_difference", 0.5),
    ("150 mm", "length", 0.15),
    ("1 inch", "length", 0.0254),            # international inch = 25.4 mm exactly (1959 definition)
    ("16 W/(m*K)", "conductivity", 16.0),
    ("16 W/m/K", "conductivity", 16.0),
    ("12 W/(m^2*K)", "heat_transfer_coefficient", 12.0),
    ("5 kW/m^2", "heat_flux", 5000.0),
    ("-2.5e3 W/m^2", "heat_flux", -2500.0),
    ("120 deg", "angle", 2 * math.pi / 3),
    ("1.5 rad", "angle", 1.5),
    # the trade's spellings: W/mK is watts per metre kelvin in a conductivity, not per millikelvin
    ("16 W/mK", "conductivity", 16.0),
    ("16 W/m-K", "conductivity", 16.0),
    ("16 W/m·K", "conductivity", 16.0),
    ("250 W/m²K", "heat_transfer_coefficient", 250.0),
    ("250 W/m2K", "heat_transfer_coefficient", 250.0),
    ("250 W/m^2-K", "heat_transfer_coefficient", 250.0),
])
def test_parse_quantity_converts_to_si(text, dimension, expected):
    assert parse_quantity(text, dimension, "key") == pytest.approx(expected, rel=1e-12, abs=1e-12)


def test_infinite_height():
    assert parse_quantity("infinite", "length", "part.height", allow_infinite=True) == math.inf


@pytest.mark.parametrize("value, dimension, fragment", [
    ("150", "length", "has no unit"),
    (150, "length", "has no unit"),
    (150.0, "length", "has no unit"),
    ("150 W", "length", "is a power; expected a length"),
    ("16 W/m^2", "conductivity", "is a heat flux; expected a thermal conductivity"),
    ("25 mm", "temperature", "is a length; expected a temperature"),
    ("3 mm", "angle", "is a length; expected an angle"),
    ("5 %", "angle", "plain number"),
    ("abc", "length", "cannot read 'abc'"),
    ("5 foo", "length", "unknown unit 'foo'"),
    ("25 delta_degC", "temperature", "temperature difference"),
    ("-300 degC", "temperature", "absolute zero"),
    ("infinite", "length", "cannot read"),
    (True, "length", "expected a length"),
    (["1 mm"], "length", "expected a length"),
    # a unit in the wrong case: the right one named
    ("313 k", "temperature", "did you mean 'K'?"),
    ("150 MM", "length", "did you mean 'mm'?"),
    # beyond plausible magnitudes (data_io.limits.PLAUSIBLE; common practice, no source)
    ("1e308 mm", "length", "is above 1000 m, not a plausible length (check the unit)"),
    ("1e-300 W/(m*K)", "conductivity", "is below 0.001 W/(m*K)"),
    ("2e7 W/(m^2*K)", "heat_transfer_coefficient", "write condition = \"temperature\""),
    ("1e300 W/m^2", "heat_flux", "is above 1e+09 W/m^2"),
    ("1e5 degC", "temperature", "is above 10000 K"),
    ("3000 deg", "angle", "is above 720 deg"),
    ("5e9 W", "power", "is above 1e+09 W"),
])
def test_parse_quantity_refuses(value, dimension, fragment):
    with pytest.raises(InputError) as err:
        parse_quantity(value, dimension, "part.radius", file="case.toml")
    msg = str(err.value)
    assert msg.startswith("case.toml: part.radius: ")
    assert fragment in msg
    assert "\n" not in msg


def test_inf_suggests_infinite():
    with pytest.raises(InputError, match='write "infinite"'):
        parse_quantity("inf", "length", "part.height", allow_infinite=True)


@pytest.mark.parametrize("header, expected", [
    ("r [mm]", ("r", "mm")),
    ("theta [deg]", ("theta", "deg")),
    ("value [degC]", ("value", "degC")),
    ("temperature [degF]", ("temperature", "degF")),
    ("value [W/(m^2*K)]", ("value", "W/(m^2*K)")),
    ("r[mm]", ("r", "mm")),
    ("  z  ", ("z", None)),
])
def test_split_header(header, expected):
    assert split_header(header) == expected


def test_default_header_units():
    # design §3: no unit in a header means m, deg, degC
    assert convert(2.0, column_unit(None, "length", "h"), "length") == 2.0
    assert convert(90.0, column_unit(None, "angle", "h"), "angle") == pytest.approx(math.pi / 2)
    assert convert(0.0, column_unit(None, "temperature", "h"), "temperature") == pytest.approx(273.15)


def test_convert_arrays_of_absolute_temperatures():
    out = convert(np.array([32.0, 212.0]), column_unit("degF", "temperature", "h"), "temperature")
    np.testing.assert_allclose(out, [273.15, 373.15])   # definition of the Fahrenheit scale


def test_format_quantity():
    assert format_quantity(0.15, "length") == "150 mm"
    assert format_quantity(298.15, "temperature") == "25 degC"
    assert format_quantity(math.inf, "length") == "infinite"


def test_the_registry_works_where_its_disk_cache_cannot_be_written():
    # pint's disk cache of parsed definitions (cache_folder) lives in the user's cache folder;
    # where that cannot be made (here under /proc) the registry is parsed afresh, same units
    import subprocess
    import sys

    code = ("from heatsight.data_io.units import ureg, parse_quantity; "
            "print(ureg._diskcache is None, parse_quantity('25 degC', 'temperature', 'test'))")
    env = {**__import__("os").environ, "XDG_CACHE_HOME": "/proc/no-such-folder"}
    out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    uncached, value = out.stdout.split()
    assert uncached == "True" and float(value) == 298.15   # definition of the Celsius scale: T/K = t/degC + 273.15
