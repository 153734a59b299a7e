"""The display-unit rule (data_io.display), written once and used by files, figures, the
report and notebook tables."""

import numpy as np
import pytest

from heatsight.data_io import display

KELVIN_AT_0_DEGC = 273.15      # definition of the Celsius scale (SI brochure)


def test_temperature_in_degc_differences_in_kelvin():
    d = display.display_of("temperature", "side", [300.0, 5000.0])
    assert (d.unit, d.diff_unit, d.symbol, d.diff_symbol) == ("degC", "K", "°C", "K")
    np.testing.assert_allclose(d.value([300.0, 373.15]), [300.0 - KELVIN_AT_0_DEGC, 100.0], rtol=1e-12)
    np.testing.assert_allclose(d.diff([0.5, 2.0]), [0.5, 2.0], rtol=1e-15)     # a kelvin is a degree Celsius wide
    assert d.on_face == "temperature on the side wall (r = radius)"


@pytest.mark.parametrize("largest, unit", [(9_999.0, "W/m^2"), (10_000.0, "kW/m^2"), (-25_000.0, "kW/m^2"),
                                           (np.nan, "W/m^2")])
def test_heat_flux_switches_to_kilowatts_at_the_threshold(largest, unit):
    d = display.display_of("heat_flux", "bottom", [10.0, largest])
    assert d.unit == d.diff_unit == unit
    scale = 1e3 if unit == "kW/m^2" else 1.0                                  # SI prefix kilo
    np.testing.assert_allclose(d.value([12_000.0]), [12_000.0 / scale], rtol=1e-12)


def test_files_keep_the_contract_units():
    assert display.file_display("heat_flux").unit == "W/m^2"
    assert display.file_display("temperature").unit == "degC"
    assert display.FILE_UNITS["temperature"][1] == "K"
    np.testing.assert_allclose(display.mm([0.15]), [150.0], rtol=1e-15)      # SI prefix milli
    np.testing.assert_allclose(display.deg([np.pi / 2]), [90.0], rtol=1e-15)  # pi rad = 180 deg
