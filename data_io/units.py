"""Units at the data_io edge: one pint registry, parsing of "value unit" strings and of
CSV headers such as ``r [mm]``; everything leaves here as SI floats (m, rad, K, W...).

Temperatures are handled as pint offset units: an *absolute* temperature (a reading, a
face temperature, an ambient) converts "25 degC" -> 298.15 K, whereas a temperature
*difference* (a standard deviation, a tolerance) converts "0.5 degC" -> 0.5 K and
"0.9 delta_degF" -> 0.5 K.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np
import pint

from .errors import InputError
from .limits import PLAUSIBLE_ADVICE, implausible

def _registry() -> pint.UnitRegistry:
    """pint's registry with its parsed definitions kept in the user's cache folder (pint's own
    disk cache: 0.14 -> 0.01 s of every command's start on this project's machine), or parsed
    afresh where that folder cannot be used (read-only, or a cache another process is writing)."""
    try:
        return pint.UnitRegistry(cache_folder=":auto:")
    except Exception:       # noqa: BLE001  any failure of the cache leaves the plain registry
        return pint.UnitRegistry()


#: The one unit registry of the package.
ureg = _registry()


@dataclass(frozen=True)
class Dimension:
    name: str          # our name, used in messages ("a length")
    si_unit: str       # the SI unit values are converted to
    example: str       # an example shown in messages
    display_unit: str  # unit used when showing a value back to the user


DIMENSIONS: dict[str, Dimension] = {
    "length": Dimension("a length", "m", "150 mm", "mm"),
    "angle": Dimension("an angle", "rad", "120 deg", "deg"),
    "temperature": Dimension("a temperature", "K", "25 degC", "degC"),
    "temperature_difference": Dimension("a temperature difference", "K", "0.5 K", "K"),
    "conductivity": Dimension("a thermal conductivity", "W/(m*K)", "16 W/(m*K)", "W/(m*K)"),
    "heat_transfer_coefficient": Dimension(
        "a heat-transfer coefficient", "W/(m^2*K)", "12 W/(m^2*K)", "W/(m^2*K)"),
    "heat_flux": Dimension("a heat flux", "W/m^2", "5 kW/m^2", "W/m^2"),
    "time": Dimension("a time", "s", "10 s", "s"),
    "power": Dimension("a power", "W", "400 W", "W"),
    "power_per_length": Dimension("a power per metre of length", "W/m", "3 kW/m", "W/m"),
}

#: Unit assumed for a CSV column whose header names no unit (design §3: lengths m,
#: angles deg, temperatures degC; heat flux and time in SI).
DEFAULT_UNITS: dict[str, str] = {
    "length": "m",
    "angle": "deg",
    "temperature": "degC",
    "temperature_difference": "K",
    "heat_flux": "W/m^2",
    "time": "s",
}

_NUMBER = re.compile(r"^\s*([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*(.*?)\s*$")
_HEADER = re.compile(r"^\s*([^\[\]]*?)\s*(?:\[\s*([^\[\]]*?)\s*\])?\s*$")


def _dimension(dimension: str) -> Dimension:
    try:
        return DIMENSIONS[dimension]
    except KeyError:
        raise ValueError(f"unknown dimension {dimension!r}") from None


def _describe_units(units) -> str:
    """Name the kind of quantity a unit measures, for messages ("a heat flux")."""
    if _is_angle(units):
        return "an angle"
    for key, dim in DIMENSIONS.items():
        if key in ("angle", "temperature_difference"):
            continue
        if units.dimensionality == ureg.parse_units(dim.si_unit).dimensionality:
            return dim.name
    for name, unit in (("a power", "W"), ("an energy", "J"), ("a mass", "kg"), ("a time", "s"),
                       ("a pressure", "Pa"), ("an area", "m^2"), ("a thermal conductance", "W/K")):
        if units.dimensionality == ureg.parse_units(unit).dimensionality:
            return name
    if units.dimensionless:
        return "a plain number"
    return f"a quantity of dimension {units.dimensionality}"


def _is_angle(units) -> bool:
    if not units.dimensionless:
        return False
    _, root = ureg.get_root_units(units)
    return root == ureg.radian


def _is_offset(units) -> bool:
    """True for offset temperature units (degC, degF...), not for their delta_ forms."""
    return any(not ureg._units[name].is_multiplicative for name in units._units)  # noqa: SLF001


def _is_delta(units) -> bool:
    return any(name.startswith("delta_") for name in units._units)  # noqa: SLF001


#: how the trade writes temperature units: in a temperature, "C" and "F" mean degrees Celsius
#: and Fahrenheit, never coulomb or farad
TEMPERATURE_ALIASES = {"c": "degC", "°c": "degC", "ºc": "degC", "deg c": "degC", "f": "degF", "°f": "degF",
                       "ºf": "degF", "deg f": "degF", "°k": "K"}


#: how the trade writes conductivities and heat-transfer coefficients (blanks removed, lower
#: case): "W/mK" is watts per metre kelvin there, never per millikelvin
TRADE_ALIASES = {
    "conductivity": {f"w/m{sep}k": "W/(m*K)" for sep in ("", "-", ".", "·", "*")} | {"w/(mk)": "W/(m*K)"},
    "heat_transfer_coefficient": {f"w/m{sq}{sep}k": "W/(m^2*K)" for sq in ("2", "²", "^2")
                                  for sep in ("", "-", ".", "·", "*")} | {"w/(m2k)": "W/(m^2*K)",
                                                                         "w/(m²k)": "W/(m^2*K)"},
}


def _trade_unit(text: str, dimension: str) -> str:
    """The pint name of a unit as written; the trade's spellings (TEMPERATURE_ALIASES,
    TRADE_ALIASES) resolved."""
    text = str(text).strip()
    if dimension in ("temperature", "temperature_difference"):
        return TEMPERATURE_ALIASES.get(" ".join(text.lower().split()), text)
    return TRADE_ALIASES.get(dimension, {}).get("".join(text.lower().split()), text)


def _case_hint(text: str, dimension: str) -> str:
    """"; did you mean 'mm'?" when the unit written in another case measures `dimension`."""
    dim = _dimension(dimension)
    target = ureg.parse_units(dim.si_unit).dimensionality
    for other in dict.fromkeys((text.lower(), text.upper(), text[:1].upper() + text[1:].lower())):
        if other == text:
            continue
        try:
            units = ureg.parse_units(_trade_unit(other, dimension))
        except Exception:      # pint raises assorted errors on garbage  # noqa: BLE001
            continue
        if (_is_angle(units) if dimension == "angle" else units.dimensionality == target):
            return f"; did you mean {other!r}?"
    return ""


def parse_unit(text: str, dimension: str, where: str, *, file=None):
    """Parse a unit name (e.g. ``"mm"``, ``"degF"``; in a temperature also ``"C"``, ``"°F"``)
    and check it measures `dimension`.

    Returns the pint Unit.  Raises InputError naming `where`.
    """
    dim = _dimension(dimension)
    try:
        units = ureg.parse_units(_trade_unit(text, dimension))
    except (pint.errors.UndefinedUnitError, pint.errors.DefinitionSyntaxError,
            AttributeError, TypeError, ValueError, SyntaxError) as exc:
        raise InputError(f"unknown unit {str(text).strip()!r}; expected {dim.name} unit "
                         f"such as {dim.example.split(' ', 1)[1]!r}{_case_hint(str(text).strip(), dimension)}",
                         file=file, where=where) from exc
    except Exception as exc:  # pint raises assorted errors on garbage
        raise InputError(f"cannot read unit {str(text).strip()!r}; expected {dim.name} unit "
                         f"such as {dim.example.split(' ', 1)[1]!r}", file=file, where=where) from exc
    if str(text).strip() == "":
        raise InputError(f"a unit is needed; expected {dim.name} unit such as "
                         f"{dim.example.split(' ', 1)[1]!r}", file=file, where=where)
    ok = _is_angle(units) if dimension == "angle" else (
        units.dimensionality == ureg.parse_units(dim.si_unit).dimensionality)
    if not ok:
        raise InputError(f"unit {str(text).strip()!r} is {_describe_units(units)}; expected "
                         f"{dim.name} (e.g. {dim.example!r}){_case_hint(str(text).strip(), dimension)}",
                         file=file, where=where)
    if dimension == "temperature" and _is_delta(units):
        raise InputError(f"unit {str(text).strip()!r} is a temperature difference; expected an "
                         f"absolute temperature such as 'degC', 'degF' or 'K'", file=file, where=where)
    return units


def convert(values, units, dimension: str):
    """Convert a number or array given in pint `units` to SI floats for `dimension`.

    For "temperature" the values are absolute (offset units honoured); for
    "temperature_difference" they are differences (degC and degF count as delta units).
    """
    dim = _dimension(dimension)
    arr = np.asarray(values, dtype=float)
    if dimension == "temperature_difference" and _is_offset(units):
        q = ureg.Quantity(arr, units) - ureg.Quantity(np.zeros_like(arr), units)
    else:
        q = ureg.Quantity(arr, units)
    out = np.asarray(q.to(dim.si_unit).magnitude, dtype=float)
    return float(out) if out.ndim == 0 else out


def parse_quantity(text, dimension: str, where: str, *, allow_infinite: bool = False,
                   file=None) -> float:
    """Parse a string such as ``"150 mm"`` or ``"25 degC"`` into an SI float.

    `dimension` is one of DIMENSIONS ("length", "angle", "temperature",
    "temperature_difference", "conductivity", "heat_transfer_coefficient", "heat_flux",
    "time").  `where` names the key or cell for messages (e.g. ``"part.radius"``).
    With `allow_infinite`, the word ``"infinite"`` gives ``math.inf``.
    Raises InputError for a missing unit, a wrong dimension or unreadable text.
    """
    dim = _dimension(dimension)
    if isinstance(text, bool) or not isinstance(text, (str, int, float)):
        raise InputError(f"expected {dim.name} as text with its unit, e.g. {dim.example!r}; "
                         f"got {text!r}", file=file, where=where)
    if isinstance(text, (int, float)):
        raise InputError(f"{text!r} has no unit; write {dim.name} with its unit in quotes, "
                         f"e.g. \"{dim.example}\"", file=file, where=where)
    s = text.strip()
    if allow_infinite and s.lower() == "infinite":
        return math.inf
    if s.lower() in ("inf", "infinity", "+inf", "∞") and allow_infinite:
        raise InputError(f"write \"infinite\" for a semi-infinite part; got {text!r}",
                         file=file, where=where)
    m = _NUMBER.match(s)
    if not m:
        hint = " or \"infinite\"" if allow_infinite else ""
        raise InputError(f"cannot read {text!r}; expected {dim.name} such as "
                         f"\"{dim.example}\"{hint}", file=file, where=where)
    number, unit_text = m.group(1), m.group(2)
    if unit_text == "":
        raise InputError(f"{text!r} has no unit; expected {dim.name} with its unit, e.g. "
                         f"\"{dim.example}\"", file=file, where=where)
    units = parse_unit(unit_text, dimension, where, file=file)
    value = convert(float(number), units, dimension)
    if not math.isfinite(value):
        raise InputError(f"{text!r} is not a finite value", file=file, where=where)
    if dimension == "temperature" and value <= 0.0:
        raise InputError(f"{text!r} is at or below absolute zero", file=file, where=where)
    reason = plausibility(value, dimension, float(number))
    if reason:
        raise InputError(f"{text!r} {reason}", file=file, where=where)
    return value


def number_as_written(text) -> float | None:
    """The number a quantity's text starts with (``"150 m"`` -> 150.0), or None."""
    m = _NUMBER.match(str(text))
    return float(m.group(1)) if m else None


def in_display_unit(number: float, dimension: str) -> float:
    """The SI value of `number` written in the dimension's display unit (the unit a slip most
    often meant: mm for a length)."""
    return convert(number, ureg.parse_units(_dimension(dimension).display_unit), dimension)


def plausibility(value_si: float, dimension: str, number: float | None = None) -> str | None:
    """Why an SI value is not plausible for `dimension` (limits.implausible), in words with the
    bound (in SI units, degrees for an angle) and, where the number as written would be
    plausible in the dimension's display unit, a hint to that unit; None when it is plausible."""
    found = implausible(value_si, dimension)
    if found is None:
        return None
    side, bound = found
    dim = _dimension(dimension)
    unit = "deg" if dimension == "angle" else dim.si_unit
    hint = ""
    if number is not None and math.isfinite(number):
        other = in_display_unit(number, dimension)
        if implausible(other, dimension) is None and other != value_si:
            hint = f"; in {dim.display_unit} it would be plausible"
    advice = PLAUSIBLE_ADVICE.get((dimension, side))
    text = f"is {side} {format_quantity(bound, dimension, unit)}, not a plausible {dim.name.split(' ', 1)[1]} " \
           + (f"({advice})" if advice else f"(check the unit{hint})")
    return text


def split_header(header: str) -> tuple[str, str | None]:
    """``"r [mm]"`` -> ``("r", "mm")``; ``"theta"`` -> ``("theta", None)``.

    The name and the unit text are stripped of surrounding blanks, otherwise as written.
    Raises ValueError when the brackets are malformed.
    """
    m = _HEADER.match(str(header))
    if not m:
        raise ValueError(f"cannot read column header {header!r}; write e.g. 'r [mm]'")
    name, unit = m.group(1), m.group(2)
    return name.strip(), (None if unit is None else unit.strip())


def column_unit(unit_text: str | None, dimension: str, where: str, *, file=None):
    """Pint unit for a CSV column: the unit in its header, or the default for `dimension`."""
    if unit_text is None:
        unit_text = DEFAULT_UNITS[dimension]
    return parse_unit(unit_text, dimension, where, file=file)


def to_display(value_si: float, dimension: str, unit: str | None = None) -> float:
    """An SI value shown back in a user unit (absolute temperatures honour offsets)."""
    dim = _dimension(dimension)
    unit = unit or dim.display_unit
    if dimension == "temperature_difference":
        return float(ureg.Quantity(value_si, "K").to("delta_degC" if unit == "degC" else unit).magnitude)
    return float(ureg.Quantity(value_si, dim.si_unit).to(unit).magnitude)


def format_quantity(value_si: float, dimension: str, unit: str | None = None, digits: int = 6) -> str:
    """``format_quantity(0.15, "length")`` -> ``"150 mm"``; infinite lengths -> ``"infinite"``."""
    if math.isinf(value_si):
        return "infinite"
    dim = _dimension(dimension)
    unit = unit or dim.display_unit
    return f"{to_display(value_si, dimension, unit):.{digits}g} {unit}"


def from_si(values, dimension: str, unit: str):
    """SI values (array or number) expressed in `unit` (absolute temperatures honour offsets)."""
    dim = _dimension(dimension)
    q = ureg.Quantity(np.asarray(values, dtype=float), dim.si_unit)
    out = np.asarray(q.to(unit).magnitude, dtype=float)
    return float(out) if out.ndim == 0 else out
