"""Layout rules shared by `fit` warnings and `heatsight check` notes (one place for each).

- Angular coverage: sensors off the axis (r > OFF_AXIS_FRACTION a) should surround the axis;
  the smallest arc holding all of them, span = 2 pi - (largest gap between sorted angles),
  below 1 deg means one angle, below 90 deg one sector: variation of the face around the
  axis is then unseen or poorly resolved.
- Distance: a nearest sensor farther than FAR_FRACTION of the radius from the unknown face
  sees only the face's broad shape.
"""

from __future__ import annotations

import math

import numpy as np

#: sensors farther from the unknown face than this fraction of the radius see little detail
FAR_FRACTION = 0.25  # common practice, no source
#: sensors nearer the axis than this fraction of the radius carry no angle
OFF_AXIS_FRACTION = 0.02  # common practice, no source
ONE_ANGLE_RAD = math.radians(1.0)
SECTOR_RAD = math.pi / 2  # common practice, no source


def angular_span(theta) -> float:
    """Smallest arc [rad] containing all angles `theta` [rad] (0 for fewer than two)."""
    t = np.sort(np.mod(np.asarray(theta, dtype=float), 2 * math.pi))
    if t.size < 2:
        return 0.0
    gaps = np.diff(np.concatenate([t, [t[0] + 2 * math.pi]]))
    return float(2 * math.pi - gaps.max())


def angular_note(face: str, radius: float, r, theta) -> str | None:
    """One sentence when the sensors do not surround the axis, else None (r [m], theta [rad])."""
    r, theta = np.asarray(r, dtype=float), np.asarray(theta, dtype=float)
    off_axis = r > OFF_AXIS_FRACTION * radius
    if r.size == 0:
        return None
    if off_axis.sum() <= 1:
        return f"at most one sensor is off the axis: how the {face} face varies around the axis cannot be seen"
    span = angular_span(theta[off_axis])
    if span < ONE_ANGLE_RAD:
        ang = math.degrees(float(np.mod(theta[off_axis][0], 2 * math.pi)))
        return (f"all off-axis sensors lie at one angle (theta = {ang:.4g} deg): how the {face} "
                f"face varies around the axis cannot be seen")
    if span < SECTOR_RAD:
        return (f"the sensors cover only {math.degrees(span):.0f} deg around the axis: "
                f"angular variation of the {face} face is poorly resolved")
    return None
