"""Formatting for people (report, verdict, console): escaping, significant digits, the face
quantity in its display unit (data_io.display), temperatures, positions and powers in user
units, and "x ± h (95 %)" with h = Z95 x sd.  Every function returns plain text; "–" stands
for a value that is not finite.

Number rule, written once: a value has 3 significant digits, but its integer digits are never
rounded away (11568 stays 11568, 817.7 -> 818, 9.6749 -> 9.67); a half-width or an sd has
2 significant digits (22.1 -> 22, 1111 -> 1100).  An absolute temperature in degC on its own
is a position on an offset scale, not a magnitude: it keeps 2 decimals (0.01 K); with its "±"
it is written as any value (pm95_of).
"""

from __future__ import annotations

import html
import math

import numpy as np

from ..inverse.bands import Z95

from .display import display_for
from .units import from_si

#: significant digits of a value and of an uncertainty (half-width or sd)
VALUE_DIGITS, SPREAD_DIGITS = 3, 2


# ---------------------------------------------------------------------- formatting
def _e(text) -> str:
    """HTML-escaped text (quotes too)."""
    return html.escape(str(text), quote=True)


def _finite(x) -> bool:
    try:
        return x is not None and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def sig(x, n: int = 2) -> str:
    """x rounded to n significant digits, without an exponent (0.016, 1000, 2.5) unless its size
    is 1e12 or more, or below 1e-6 (2.0e+30, 7.1e-12)."""
    if not _finite(x):
        return "–"
    x = float(x)
    if x == 0:
        return "0"
    rounded = abs(float(f"{x:.{n - 1}e}"))
    if rounded >= 1e12 or rounded < 1e-6:    # judged after rounding: no dozen-digit integer, no zeros
        return f"{x:.{n - 1}e}"
    d = n - 1 - int(math.floor(math.log10(abs(x))))
    return f"{x:.{d}f}" if d > 0 else f"{round(x, d):.0f}"


def length_scale_text(prior: dict) -> str | None:
    """The learned prior's length scale in mm with its 90 % range where summary.json's
    `prior` has one ("39 mm (90 % range 23 to 190 mm)"), else None."""
    ls, ls90 = prior.get("length_scale_m"), prior.get("length_scale_90_m")
    if not _finite(ls):
        return None
    text = f"{sig(from_si(ls, 'length', 'mm'), 2)} mm"
    if isinstance(ls90, (list, tuple)) and len(ls90) == 2 and all(_finite(x) for x in ls90):
        lo, hi = (sig(from_si(x, "length", "mm"), 2) for x in ls90)
        text += f" (90 % range {lo} to {hi} mm)"
    return text


def eng(x, n: int = VALUE_DIGITS) -> str:
    """x with n significant digits, no exponent, integer digits kept (11568 -> '11568',
    817.68 -> '818', 0.022137 -> '0.0221'); a tiny or huge magnitude falls back to 'a.bce±NN'."""
    if not _finite(x):
        return "–"
    x = float(x)
    if x == 0:
        return "0"
    mag = int(math.floor(math.log10(abs(float(f"{x:.{n - 1}e}")))))  # after rounding: 99.96 -> 100
    if mag < -4 or mag > 12:
        return f"{x:.{n - 1}e}"
    decimals = max(n - 1 - mag, 0)
    text = f"{x:.{decimals}f}"
    if decimals == 0 and abs(round(x)) >= 10 ** n:  # never round integer digits away
        text = f"{round(x):d}"
    return text


def half95(sd) -> float:
    """Half-width of the 95 % interval of a Gaussian figure: Z95 x sd (same unit)."""
    return Z95 * float(sd) if _finite(sd) else math.nan


def pm95(value: str, sd_shown, unit: str) -> str:
    """'<value> ± <Z95 x sd> <unit> (95 %)'; value already formatted, sd_shown in the unit."""
    if not _finite(sd_shown):
        return f"{value} {unit}".strip()
    return f"{value} ± {sig(half95(sd_shown), SPREAD_DIGITS)} {unit} (95 %)".replace("  ", " ")


#: a 95 % half-width below this fraction of its value is round-off, shown as ± 0
EXACT_BELOW = 1e-9


def pm95_of(x, sd, unit: str) -> str:
    """'11.57 ± 0.025 kW/m² (95 %)': x with eng's significant digits, or more decimals where
    its last digit would be coarser than the half-width (11.6 ± 0.025 would round the value
    by more than its own band), then pm95."""
    if not _finite(x):
        return "–"
    text = eng(x)
    half = half95(sd) if _finite(sd) else math.nan
    if _finite(half) and half > 0 and "e" in text and abs(float(x)) < half:
        # a value lost inside its band (1.49e-07 ± 0.55): written to the band's last digit
        text = f"{float(x):.{max(math.ceil(-math.log10(half)), 0)}f}"
    if _finite(half) and half > 0 and "e" not in text and float(x) != 0:
        # at most 7 significant digits: a figure known to 1e-12 is shown as exact, not to 12 places
        whole = int(math.floor(math.log10(abs(float(x))))) + 1
        need = min(math.ceil(-math.log10(half)), max(7 - whole, 0))
        have = len(text.split(".")[1]) if "." in text else 0
        if need > have:
            text = f"{float(x):.{need}f}"
    if _finite(half) and float(x) != 0 and half < EXACT_BELOW * abs(float(x)):
        # round-off of a figure the model fixes exactly (a long tube's heat through the bore
        # is the heat the outer wall takes in): no band to speak of
        return pm95(text, 0.0, unit)
    return pm95(text, sd, unit)


def percent(x, n: int = 2) -> str:
    """A fraction as a percentage with n significant digits (0.1637 -> '16 %')."""
    return f"{sig(100.0 * float(x), n)} %" if _finite(x) else "–"


def flux_relation(dev, mean) -> tuple[str, str]:
    """(size, relation) of a zone's flux deviation dev from the face mean (same unit), read
    as '<size> <relation> the face mean': ('16 %', 'below') or 'above'; on a face that heat
    leaves through (mean < 0: a bore heating the fluid) a less negative flux passes less heat:
    ('33 %', 'less heat out than') or 'more heat out than'."""
    size = percent(abs(float(dev)) / abs(float(mean)))
    if float(mean) < 0:
        return size, "less heat out than" if dev > 0 else "more heat out than"
    return size, "below" if dev < 0 else "above"


class _Fmt:
    """Formatting of the face quantity of one result in its display unit."""

    def __init__(self, result):
        self.d = display_for(result)
        if self.d.quantity == "temperature":
            self.decimals = 2
        else:
            est = self.d.value(np.asarray(result.grid["estimate"], float))
            big = float(np.nanmax(np.abs(est))) if np.size(est) else 0.0
            self.decimals = max(0, 3 - int(math.floor(math.log10(big)))) if big > 0 else 2

    def number(self, si) -> str:
        return f"{self.d.value(si):.{self.decimals}f}" if _finite(si) else "–"

    def value(self, si) -> str:
        return f"{self.number(si)} {self.d.symbol}"

    def diff_number(self, si) -> str:
        return f"{self.d.diff(si):.{self.decimals}f}" if _finite(si) else "–"

    def diff(self, si) -> str:
        return f"{self.diff_number(si)} {self.d.diff_symbol}"

    def sd(self, si) -> str:
        return f"{sig(self.d.diff(si)) if _finite(si) else '–'} {self.d.diff_symbol}"

    def band(self, lo, hi) -> str:
        return f"{self.number(lo)} to {self.number(hi)} {self.d.symbol}"

    def eng(self, si) -> str:
        """A value of the face quantity for people: 3 significant digits (degC: 2 decimals)."""
        if self.d.quantity == "temperature":
            return _celsius(si)
        return f"{eng(self.d.value(si))} {self.d.symbol}" if _finite(si) else "–"

    def eng_diff(self, si, signed: bool = False) -> str:
        """A difference of the face quantity, 3 significant digits, optionally signed."""
        if not _finite(si):
            return "–"
        v = float(self.d.diff(si))
        text = eng(abs(v)) if signed else eng(v)
        sign = ("+" if v >= 0 else "−") if signed else ""
        return f"{sign}{text} {self.d.diff_symbol}"

    def pm(self, si, sd_si) -> str:
        """'11.57 ± 0.022 kW/m² (95 %)': value with the half-width of its 95 % interval
        (pm95_of; a temperature to the decimals of its half-width, at most 2)."""
        if self.d.quantity == "temperature":
            value, unit = _celsius_number(si), "°C"
        else:
            value, unit = (eng(self.d.value(si)) if _finite(si) else "–"), self.d.symbol
        sd = float(self.d.diff(sd_si)) if _finite(sd_si) else math.nan
        if self.d.quantity == "temperature" and _finite(sd):
            half = half95(sd)
            return f"{_celsius_number(si, _decimals_for(half))} °C ± {sig(half, SPREAD_DIGITS)} K (95 %)"
        if self.d.quantity != "temperature" and _finite(si):
            return pm95_of(self.d.value(si), sd, unit)
        return pm95(value, sd, unit)


def _decimals_for(half) -> int:
    """Decimals of an absolute temperature next to a ± half [K]: those of the half-width's
    2 significant digits, 0 to 2 (141.5 °C ± 1.8 K; 141 °C ± 18 K)."""
    if not _finite(half) or float(half) <= 0:
        return 2
    return min(max(SPREAD_DIGITS - 1 - int(math.floor(math.log10(float(half)))), 0), 2)


def _celsius_number(t_k, decimals: int = 2) -> str:
    return f"{from_si(t_k, 'temperature', 'degC'):.{decimals}f}" if _finite(t_k) else "–"


def _celsius(t_k) -> str:
    return f"{_celsius_number(t_k)} °C" if _finite(t_k) else "–"


def _kelvin_diff(dt) -> str:
    return f"{sig(from_si(dt, 'temperature_difference', 'K'))} K" if _finite(dt) else "–"


def _mm(x, decimals=1) -> str:
    return f"{from_si(x, 'length', 'mm'):.{decimals}f}" if _finite(x) else "–"


def _deg(x, decimals=0) -> str:
    return f"{from_si(x, 'angle', 'deg') % 360.0:.{decimals}f}" if _finite(x) else "–"


def _position(result, at) -> str:
    """Where on the result's face a point lies, in words and user units (a long part's wall:
    its angle alone, nothing varies along z)."""
    if not at:
        return ""
    face = result.face
    if face in ("side", "bore"):
        if result.cylinder.long:
            return f"at θ = {_deg(at.get('theta_rad'))}°"
        return f"at θ = {_deg(at.get('theta_rad'))}°, z = {_mm(at.get('z_m'))} mm"
    r = at.get("r_m")
    if _finite(r) and abs(float(r)) < 1e-9:
        return "at the centre (r = 0)"
    return f"at r = {_mm(r)} mm, θ = {_deg(at.get('theta_rad'))}°"


def _power(w, sd=None, unit: str = "W") -> str:
    """Power with its 95 % half-width, the one rule of pm95_of: '818 ± 1.6 W (95 %)' (unit W/m on
    a long part: data_io.display.power_unit)."""
    return pm95_of(w, sd, unit) if _finite(sd) else (f"{eng(w)} {unit}" if _finite(w) else "–")


def power_pm(w, sd=None, unit: str = "W") -> str:
    """Power for people: '818 ± 1.6 W (95 %)' (or W/m on a long part)."""
    return pm95_of(w, sd, unit)
