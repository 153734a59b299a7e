"""The colour scale of a face map, written once: differences smaller than the bands are not
stretched into a pattern.

A map coloured from its minimum to its maximum paints a 0.3 % ripple as strongly as a failed
heater.  Here the scale spans at least the typical 95 % half-width h on either side of the face
mean m, and more only where the estimate itself goes further:

    lo = min(min(estimate), m - h),   hi = max(max(estimate), m + h),
    h  = median over the display grid of (upper - lower) / 2.

The face is called uniform within its bands when the face mean lies inside every point's
95 % band, |estimate - m| <= (upper - lower) / 2 everywhere, and inside every declared zone's
95 % interval (`zone_holds_mean`: a zone's mean pins the face more tightly than its points
do); the map and the report then say so.
All values in one display unit (data_io.display).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class ColourScale:
    """Limits of the colour scale [display unit], the typical 95 % half-width used, and
    whether the face is uniform within its bands."""

    lo: float
    hi: float
    half_width: float
    uniform: bool


def colour_scale(estimate, lower, upper, mean) -> ColourScale:
    """The colour scale of a face map (see the module doc); arrays over the display grid."""
    est, lo_b, hi_b = (np.asarray(x, float).ravel() for x in (estimate, lower, upper))
    ok = np.isfinite(est) & np.isfinite(lo_b) & np.isfinite(hi_b)
    if not ok.any():
        return ColourScale(-1.0, 1.0, float("nan"), False)
    est, lo_b, hi_b = est[ok], lo_b[ok], hi_b[ok]
    half = 0.5 * (hi_b - lo_b)
    h = float(np.median(half))
    m = float(mean) if np.isfinite(mean) else float(np.mean(est))
    lo, hi = min(float(est.min()), m - h), max(float(est.max()), m + h)
    if not hi > lo:  # an exact, band-free face: a small symmetric pad
        pad = max(abs(m) * 1e-3, 1e-6)
        lo, hi = m - pad, m + pad
    uniform = bool(np.all(np.abs(est - m) <= half))
    return ColourScale(lo, hi, h, uniform)


def zone_holds_mean(zone: dict, mean_si) -> bool:
    """The face mean lies inside the zone's 95 % interval (summary zone: 'lower', 'upper', SI)."""
    lo, hi = zone.get("lower"), zone.get("upper")
    vals = [lo, hi, mean_si]
    if not all(v is not None and np.isfinite(float(v)) for v in vals):
        return False
    return float(lo) <= float(mean_si) <= float(hi)

