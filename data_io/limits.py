"""Bounds on every size a user can ask for, checked before the work starts, so that no case
file or option can hang the program or exhaust memory; and names a zone may not take.

The bounds are ours (common practice, no source): far beyond what a few dozen
thermocouples can resolve, and small enough to be served in seconds on a laptop.
"""

from __future__ import annotations

import math

import numpy as np

from .errors import InputError

#: a layout, snapshot, points or profile file above this size is refused (logs are streamed)
MAX_TABLE_BYTES = 200_000_000
#: most candidate positions a plan weighs at once (a candidates file's rows, or the [plan] grid)
MAX_CANDIDATES = 200_000
#: angular harmonics m = 0..MAX_HARMONICS of the unknown face
MAX_HARMONICS = 48
#: radial (end face) or axial (side) terms of the unknown face
MAX_TERMS = 200
#: unknown coefficients, (2 harmonics + 1) x terms
MAX_COEFFICIENTS = 2000
#: relative truncation tolerance of the series: tighter cannot be met in double precision,
#: looser drops terms that carry the answer
TOLERANCE_RANGE = (1e-12, 1e-3)
#: Monte Carlo draws of `fit --monte-carlo`
MAX_MONTE_CARLO = 100_000
#: `trend --every N`
MAX_EVERY = 10**12
#: an absolute temperature above this is a logger code or a unit slip, not a reading [K]
MAX_TEMPERATURE_K = 1e4
#: plausible magnitudes of a value of each dimension in SI units, (smallest nonzero, largest):
#: beyond them a number is a unit slip, a logger code or an overflow, and the series and the
#: statistics would break down on it (common practice, no source).  Zero and signs are left to
#: each key's own rule (a radius must be positive, a flux may be negative).  Lengths reach from
#: a thermocouple's offset to a kilometre; conductivities from an aerogel's (~0.015 W/(m K),
#: from memory) to diamond's (~2000, from memory); h below 0.01 W/(m^2 K) is an insulated face
#: and above 1e7 a face held at the fluid's temperature; fluxes and powers up to a GW (per m^2).
PLAUSIBLE = {
    "length": (0.0, 1e3),
    "angle": (0.0, 4.0 * math.pi),
    "temperature_difference": (0.0, MAX_TEMPERATURE_K),
    "conductivity": (1e-3, 1e4),
    "heat_transfer_coefficient": (1e-2, 1e7),
    "heat_flux": (0.0, 1e9),
    "power": (0.0, 1e9),
    "power_per_length": (0.0, 1e9),
}
#: what to write instead of a value beyond PLAUSIBLE, where something else is meant
PLAUSIBLE_ADVICE = {
    ("heat_transfer_coefficient", "below"): "with less, the face is insulated: write condition = \"insulated\", "
                                            "and let another face hold the temperature level",
    ("heat_transfer_coefficient", "above"): "with more, the face is at the fluid's temperature: write "
                                            "condition = \"temperature\"",
}
#: a part's radius [m]: from a thin rod's to a storage tank's floor (common practice, no source)
RADIUS_RANGE = (5e-4, 100.0)
#: zone names that are also names of whole-face figures (trend.csv columns, summary keys)
RESERVED_ZONE_NAMES = ("mean", "min", "max", "nonuniformity", "total_power")


def check_tolerance(value: float, option: str = "--tolerance") -> float:
    """The series tolerance, refused outside TOLERANCE_RANGE."""
    lo, hi = TOLERANCE_RANGE
    if not (math.isfinite(value) and lo <= value <= hi):
        raise InputError(f"{option} {value:g} is outside {lo:g} to {hi:g} (a relative truncation tolerance; "
                         f"the default suits nearly every case)")
    return value


def check_count(value: int, limit: int, option: str, what: str) -> int:
    if value > limit:
        raise InputError(f"{option} {value} is more than {limit} {what} can be served; give at most {limit}")
    return value


def check_case(case) -> None:
    """The case's sizes ([fit] harmonics, terms) and zone names, before any work."""
    opts = getattr(case, "fit", None)
    harmonics = getattr(opts, "harmonics", None)
    terms = getattr(opts, "terms", None)
    if harmonics is not None and harmonics > MAX_HARMONICS:
        raise InputError(f"harmonics = {harmonics} is more than {MAX_HARMONICS}; a few dozen thermocouples "
                         f"resolve far fewer (leave it out for the automatic choice)",
                         file=case.path, where="fit.harmonics")
    if terms is not None and terms > MAX_TERMS:
        raise InputError(f"terms = {terms} is more than {MAX_TERMS} (leave it out for the automatic choice)",
                         file=case.path, where="fit.terms")
    if harmonics is not None and terms is not None and (2 * harmonics + 1) * terms > MAX_COEFFICIENTS:
        raise InputError(f"harmonics = {harmonics} with terms = {terms} makes {(2 * harmonics + 1) * terms} "
                         f"unknown coefficients, more than {MAX_COEFFICIENTS}; lower one of them",
                         file=case.path, where="fit")
    for i, zone in enumerate(getattr(case, "zones", ()) or ()):
        if zone.name.strip().lower() in RESERVED_ZONE_NAMES:
            raise InputError(f"zone name '{zone.name}' is also the name of a whole-face figure "
                             f"({', '.join(RESERVED_ZONE_NAMES)}); rename the zone",
                             file=case.path, where=f"zones[{i}].name")
    seen: dict[str, str] = {}
    for i, zone in enumerate(getattr(case, "zones", ()) or ()):
        key = zone.name.strip().lower()
        if key in seen:
            raise InputError(f"zone names '{seen[key]}' and '{zone.name}' differ only in case or blanks; "
                             f"output columns would collide", file=case.path, where=f"zones[{i}].name")
        seen[key] = zone.name


def _bounds(dimension: str) -> tuple[float, float] | None:
    """(smallest nonzero, largest) plausible magnitude [SI] of `dimension`, or None (unbounded)."""
    if dimension == "temperature":
        return 0.0, MAX_TEMPERATURE_K
    return PLAUSIBLE.get(dimension)


def implausible_mask(values, dimension: str) -> np.ndarray:
    """True where an SI value of `dimension` lies beyond its plausible magnitudes (PLAUSIBLE; a
    temperature above MAX_TEMPERATURE_K); zero, NaN and unbounded dimensions are not judged."""
    size = np.abs(np.asarray(values, dtype=float))
    bounds = _bounds(dimension)
    if bounds is None:
        return np.zeros(size.shape, dtype=bool)
    lo, hi = bounds
    return (size > hi) | ((size < lo) & (size > 0))


def implausible(value: float, dimension: str) -> tuple[str, float] | None:
    """("above" or "below", the bound [SI]) where implausible_mask flags the value, else None."""
    if not implausible_mask(value, dimension):
        return None
    lo, hi = _bounds(dimension)
    return ("above", hi) if abs(value) > hi else ("below", lo)


def check_temperature_k(value: float) -> bool:
    """True when an absolute temperature [K] is physically plausible (0 < T <= MAX_TEMPERATURE_K)."""
    return 0.0 < value <= MAX_TEMPERATURE_K
