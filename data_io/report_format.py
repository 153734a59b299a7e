"""Formatting for the HTML report (data_io.report): escaping, significant digits, the face
quantity in its display unit (data_io.display), temperatures, positions and powers in user
units.  Every function returns plain text; "–" stands for a value that is not finite."""

from __future__ import annotations

import html
import math

import numpy as np

from .display import display_for
from .units import from_si


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
    """x rounded to n significant digits, written without an exponent (0.016, 1000, 2.5)."""
    if not _finite(x):
        return "–"
    x = float(x)
    if x == 0:
        return "0"
    d = n - 1 - int(math.floor(math.log10(abs(x))))
    return f"{x:.{d}f}" if d > 0 else f"{round(x, d):.0f}"


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


def _celsius_number(t_k) -> str:
    return f"{from_si(t_k, 'temperature', 'degC'):.2f}" if _finite(t_k) else "–"


def _celsius(t_k) -> str:
    return f"{_celsius_number(t_k)} °C" if _finite(t_k) else "–"


def _kelvin_diff(dt) -> str:
    return f"{sig(from_si(dt, 'temperature_difference', 'K'))} K" if _finite(dt) else "–"


def _mm(x, decimals=1) -> str:
    return f"{from_si(x, 'length', 'mm'):.{decimals}f}" if _finite(x) else "–"


def _deg(x, decimals=0) -> str:
    return f"{from_si(x, 'angle', 'deg') % 360.0:.{decimals}f}" if _finite(x) else "–"


def _position(face, at) -> str:
    """Where on the face a point lies, in words and user units."""
    if not at:
        return ""
    if face == "side":
        return f"at θ = {_deg(at.get('theta_rad'))}°, z = {_mm(at.get('z_m'))} mm"
    r = at.get("r_m")
    if _finite(r) and abs(float(r)) < 1e-9:
        return "at the centre (r = 0)"
    return f"at r = {_mm(r)} mm, θ = {_deg(at.get('theta_rad'))}°"


def _power(w, sd=None) -> str:
    if not _finite(w):
        return "–"
    text = f"{w:.4g} W"
    if _finite(sd):
        text += f" (sd {sig(sd)} W)"
    return text
