"""Thermocouple tolerances as standard uncertainties, and usable temperature ranges.

A thermocouple's tolerance (its class or limits of error) bounds how far its reading may
sit from the true temperature for a new, correctly installed sensor.  It is mostly a
fixed, per-sensor offset rather than noise, so it is returned *separately* from the random
sigma and treated downstream as a bias with a prior standard deviation.

Tolerance -> standard uncertainty: the tolerance interval +-tol is read as a rectangular
(uniform) distribution, u = tol / sqrt(3) (GUM, JCGM 100:2008, §4.3.7).

TABLE VALUES (from memory): the tolerance classes below are recalled from memory of
IEC 60584-1:2013 (classes 1, 2, 3) and ASTM E230/E230M (standard and special limits of
error), not copied from the standards; check the standard before relying on a value.
Each entry is +-max(fixed, fraction * |t|), t in degC, over a temperature range; the only
exception is the class 1 of types R and S above 1100 degC, +-[1 + 0.003 (t - 1100)] degC.

Usable ranges (from memory) are the temperature ranges of the IEC 60584-1 reference
functions for each type; a reading outside them is physically impossible for that type
and most likely an open circuit or a wrong type setting.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from ..inverse.readings import DEFAULT_SIGMA_K  # noqa: F401  (sigma when none is given)

#: Class assumed when a layout row names a type but no class (common practice, no source:
#: standard-grade wire is the usual default).
DEFAULT_CLASS = "2"


@dataclass(frozen=True)
class ToleranceBand:
    """+-max(fixed, fraction*|t|) degC for t_min <= t <= t_max (degC).

    With `knee` set, the tolerance is `fixed` up to `knee` and
    fixed + fraction*(t - knee) above it.
    """

    t_min: float
    t_max: float
    fixed: float
    fraction: float
    knee: float | None = None

    def tolerance(self, t_c: float) -> float:
        if self.knee is not None:
            return self.fixed + (self.fraction * (t_c - self.knee) if t_c > self.knee else 0.0)
        return max(self.fixed, self.fraction * abs(t_c))


_B = ToleranceBand

# (type, class) -> bands, from memory; classes "1", "2", "3" per IEC 60584-1,
# "standard" and "special" per ASTM E230 (reference junction at 0 degC).
TOLERANCES: dict[tuple[str, str], tuple[ToleranceBand, ...]] = {
    # IEC 60584-1 (from memory)
    ("T", "1"): (_B(-40, 350, 0.5, 0.004),),
    ("T", "2"): (_B(-40, 350, 1.0, 0.0075),),
    ("T", "3"): (_B(-200, 40, 1.0, 0.015),),
    ("E", "1"): (_B(-40, 800, 1.5, 0.004),),
    ("E", "2"): (_B(-40, 900, 2.5, 0.0075),),
    ("E", "3"): (_B(-200, 40, 2.5, 0.015),),
    ("J", "1"): (_B(-40, 750, 1.5, 0.004),),
    ("J", "2"): (_B(-40, 750, 2.5, 0.0075),),
    ("K", "1"): (_B(-40, 1000, 1.5, 0.004),),
    ("K", "2"): (_B(-40, 1200, 2.5, 0.0075),),
    ("K", "3"): (_B(-200, 40, 2.5, 0.015),),
    ("N", "1"): (_B(-40, 1000, 1.5, 0.004),),
    ("N", "2"): (_B(-40, 1200, 2.5, 0.0075),),
    ("N", "3"): (_B(-200, 40, 2.5, 0.015),),
    ("R", "1"): (_B(0, 1600, 1.0, 0.003, knee=1100),),
    ("R", "2"): (_B(-40, 1600, 1.5, 0.0025),),
    ("S", "1"): (_B(0, 1600, 1.0, 0.003, knee=1100),),
    ("S", "2"): (_B(-40, 1600, 1.5, 0.0025),),
    ("B", "2"): (_B(600, 1700, 0.0, 0.0025),),
    ("B", "3"): (_B(600, 1700, 4.0, 0.005),),
    # ASTM E230 (from memory); below 0 degC only the standard limits of T, E, K are listed
    ("T", "standard"): (_B(-200, 0, 1.0, 0.015), _B(0, 370, 1.0, 0.0075)),
    ("T", "special"): (_B(0, 370, 0.5, 0.004),),
    ("E", "standard"): (_B(-200, 0, 1.7, 0.01), _B(0, 870, 1.7, 0.005)),
    ("E", "special"): (_B(0, 870, 1.0, 0.004),),
    ("J", "standard"): (_B(0, 760, 2.2, 0.0075),),
    ("J", "special"): (_B(0, 760, 1.1, 0.004),),
    ("K", "standard"): (_B(-200, 0, 2.2, 0.02), _B(0, 1260, 2.2, 0.0075)),
    ("K", "special"): (_B(0, 1260, 1.1, 0.004),),
    ("N", "standard"): (_B(0, 1260, 2.2, 0.0075),),
    ("N", "special"): (_B(0, 1260, 1.1, 0.004),),
    ("R", "standard"): (_B(0, 1480, 1.5, 0.0025),),
    ("R", "special"): (_B(0, 1480, 0.6, 0.001),),
    ("S", "standard"): (_B(0, 1480, 1.5, 0.0025),),
    ("S", "special"): (_B(0, 1480, 0.6, 0.001),),
    ("B", "standard"): (_B(870, 1700, 0.0, 0.005),),
    ("B", "special"): (_B(870, 1700, 0.0, 0.0025),),
}

#: Usable range per type, degC: the range of the IEC 60584-1 reference function (from memory).
USABLE_RANGE_C: dict[str, tuple[float, float]] = {
    "T": (-270.0, 400.0),
    "J": (-210.0, 1200.0),
    "E": (-270.0, 1000.0),
    "K": (-270.0, 1372.0),
    "N": (-270.0, 1300.0),
    "R": (-50.0, 1768.0),
    "S": (-50.0, 1768.0),
    "B": (0.0, 1820.0),
}

TYPES = tuple(sorted(USABLE_RANGE_C))
CLASSES = ("1", "2", "3", "standard", "special")
_STANDARD_OF_CLASS = {"1": "IEC 60584-1 class 1", "2": "IEC 60584-1 class 2",
                      "3": "IEC 60584-1 class 3", "standard": "ASTM E230 standard limits",
                      "special": "ASTM E230 special limits"}
KELVIN_OFFSET = 273.15


def normalize_type(text: str) -> str:
    """``"k"``, ``"type K"`` -> ``"K"``; ValueError with the valid list otherwise."""
    t = str(text).strip().upper()
    if t.startswith("TYPE"):
        t = t[4:].strip()
    if t not in USABLE_RANGE_C:
        raise ValueError(f"unknown thermocouple type {text!r}; expected one of {', '.join(TYPES)}")
    return t


def normalize_class(text: str) -> str:
    """``"1"``, ``"class 2"``, ``"Standard"`` -> ``"1"``, ``"2"``, ``"standard"``."""
    c = str(text).strip().lower()
    if c.startswith("class"):
        c = c[5:].strip()
    if c.endswith(".0") and c[:-2] in ("1", "2", "3"):
        c = c[:-2]
    if c not in CLASSES:
        raise ValueError(f"unknown thermocouple class {text!r}; expected 1, 2 or 3 "
                         f"(IEC 60584-1) or standard or special (ASTM E230)")
    return c


def class_name(tc_class: str) -> str:
    """Human name of a class, with its standard (``"IEC 60584-1 class 2"``)."""
    return _STANDARD_OF_CLASS[normalize_class(tc_class)]


def check_defined(tc_type: str, tc_class: str) -> None:
    """ValueError when the standard defines no tolerance for this type and class."""
    t, c = normalize_type(tc_type), normalize_class(tc_class)
    if (t, c) not in TOLERANCES:
        have = [k[1] for k in TOLERANCES if k[0] == t]
        raise ValueError(f"no tolerance is defined for type {t} {class_name(c)}; "
                         f"classes known for type {t}: {', '.join(have)}")


def tolerance_c(tc_type: str, tc_class: str, t_c: float) -> tuple[float, str | None]:
    """Tolerance (half-width, degC = K) of type/class at temperature t_c (degC).

    Returns (tolerance, note); `note` is None inside the class's temperature range, else a
    sentence saying the nearest band was extended to t_c.
    """
    check_defined(tc_type, tc_class)
    t, c = normalize_type(tc_type), normalize_class(tc_class)
    bands = TOLERANCES[(t, c)]
    for band in bands:
        if band.t_min <= t_c <= band.t_max:
            return band.tolerance(t_c), None
    nearest = min(bands, key=lambda b: min(abs(t_c - b.t_min), abs(t_c - b.t_max)))
    lo, hi = bands[0].t_min, bands[-1].t_max
    note = (f"{t_c:.1f} degC is outside the range of type {t} {class_name(c)} "
            f"({lo:g} to {hi:g} degC); its tolerance formula was extended")
    return nearest.tolerance(t_c), note


def standard_uncertainty(tc_type: str, tc_class: str, temperature_k: float) -> tuple[float, str | None]:
    """Standard uncertainty [K] of the sensor offset: tolerance / sqrt(3) (GUM §4.3.7).

    `temperature_k` is the (absolute) temperature of the reading in K.
    Returns (u, note) as `tolerance_c`.
    """
    tol, note = tolerance_c(tc_type, tc_class, float(temperature_k) - KELVIN_OFFSET)
    return tol / math.sqrt(3.0), note


def usable_range_k(tc_type: str) -> tuple[float, float]:
    """Usable temperature range [K] of a thermocouple type (IEC 60584-1 reference function range)."""
    lo, hi = USABLE_RANGE_C[normalize_type(tc_type)]
    return lo + KELVIN_OFFSET, hi + KELVIN_OFFSET
