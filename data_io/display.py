"""The display-unit rule, written once: in which unit a face quantity is shown.

- temperature: degC for values, K for differences (sd, band width, change);
- heat flux: W/m^2 in output files (the contract of estimate.csv / summary.json / trend.csv);
  on figures, in the report and in notebook tables kW/m^2 once the largest magnitude shown
  reaches KILO_FLUX, else W/m^2 (values and differences alike).

Lengths are shown in mm and angles in degrees.  Values arrive in SI (K, W/m^2, m, rad) and
leave through `data_io.units` (pint).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .units import from_si

#: heat flux is shown in kW/m^2 once the largest magnitude on the face reaches this [W/m^2]
KILO_FLUX = 1.0e4
#: unit of values and of differences in output files, per quantity
FILE_UNITS = {"temperature": ("degC", "K"), "heat_flux": ("W/m^2", "W/m^2")}
UNIT_SYMBOLS = {"degC": "°C", "K": "K", "W/m^2": "W/m²", "kW/m^2": "kW/m²", "mm": "mm", "deg": "°",
                "W": "W", "W/m": "W/m", "W/(m*K)": "W/(m·K)", "W/(m^2*K)": "W/(m²·K)"}
FACE_WORDS = {"bottom": "bottom end face (z = 0)", "top": "top end face (z = height)",
              "side": "side wall (r = radius)", "bore": "bore (inner wall, r = inner radius)"}
QUANTITY_WORDS = {"temperature": "temperature", "heat_flux": "heat flux into the part"}


def power_unit(cylinder) -> str:
    """Unit of every power: W, or W/m on a long part (its powers are per metre of length)."""
    return "W/m" if getattr(cylinder, "long", False) else "W"


def power_words(face: str, power: float) -> str:
    """The total power in words: heat into the part through a face, and on the bore, where
    the fluid is, the heat into the fluid when the wall heats it (power < 0)."""
    if face == "bore" and power < 0:
        return "heat into the fluid through the bore"
    return f"heat into the part through the {FACE_WORDS.get(face, face)}"


def symbol(unit: str) -> str:
    """Printable symbol of a unit name used here ("degC" -> "°C", "W/m^2" -> "W/m²")."""
    return UNIT_SYMBOLS.get(unit, unit)


@dataclass(frozen=True)
class Display:
    """How the face quantity is shown: unit of values, of differences (sd, band widths),
    their symbols and the words for the quantity and the face."""

    quantity: str
    unit: str
    diff_unit: str
    face: str

    @property
    def dimension(self) -> str:
        return "temperature" if self.quantity == "temperature" else "heat_flux"

    @property
    def diff_dimension(self) -> str:
        return "temperature_difference" if self.quantity == "temperature" else "heat_flux"

    @property
    def symbol(self) -> str:
        return symbol(self.unit)

    @property
    def diff_symbol(self) -> str:
        return symbol(self.diff_unit)

    @property
    def words(self) -> str:
        return QUANTITY_WORDS.get(self.quantity, self.quantity.replace("_", " "))

    @property
    def face_words(self) -> str:
        return FACE_WORDS.get(self.face, self.face)

    @property
    def on_face(self) -> str:
        """'temperature on the side wall (r = radius)', 'heat flux into the part through the
        bottom end face (z = 0)'."""
        return f"{self.words} {'on' if self.quantity == 'temperature' else 'through'} the {self.face_words}"

    def value(self, si):
        """Absolute values (estimate, bounds) in the display unit."""
        return from_si(si, self.dimension, self.unit)

    def diff(self, si):
        """Differences (sd, band width, non-uniformity) in the display unit."""
        return from_si(si, self.diff_dimension, self.diff_unit)


def file_display(quantity: str, face: str = "") -> Display:
    """Units of output files (CSV, JSON, console): degC / K, or W/m^2."""
    unit, diff_unit = FILE_UNITS[quantity]
    return Display(quantity, unit, diff_unit, face)


def display_of(quantity: str, face: str, values_si) -> Display:
    """Units for showing `values_si` (SI) of the quantity: degC / K for temperature; W/m^2,
    or kW/m^2 when the largest finite magnitude reaches KILO_FLUX, for heat flux."""
    if quantity == "temperature":
        return file_display(quantity, face)
    v = np.asarray(values_si, float)
    fin = np.isfinite(v)
    big = float(np.max(np.abs(v[fin]))) if fin.any() else 0.0
    unit = "kW/m^2" if big >= KILO_FLUX else "W/m^2"
    return Display("heat_flux", unit, unit, face)


def display_for(result) -> Display:
    """Display units of a fit result's face (from its estimate on the display grid)."""
    return display_of(result.quantity, result.face, result.grid["estimate"])


def mm(x):
    """Lengths [m] -> mm."""
    return from_si(x, "length", "mm")


def deg(x):
    """Angles [rad] -> degrees."""
    return from_si(x, "angle", "deg")
