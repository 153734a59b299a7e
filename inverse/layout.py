"""Layout rules shared by `fit` warnings and `heatsight check` notes (one place for each).

- Angular coverage: sensors off the axis (r > OFF_AXIS_FRACTION a) should surround the axis;
  the smallest arc holding all of them, span = 2 pi - (largest gap between sorted angles),
  below 1 deg means one angle, below 90 deg one sector: variation of the face around the
  axis is then unseen or poorly resolved.
- Distance: a nearest sensor farther than FAR_FRACTION of the radius from the unknown face
  sees only the face's broad shape.
- Edges beyond the sensors: along a wall (z) or across an end face (r), a stretch next to an
  edge of the face longer than END_GAP_FRACTION of its extent with no sensor over it is an
  extrapolation: the map there follows the sensors' profile, while heat leaves or enters at
  an edge (a liquid inlet, a cooled end, a heater's end). The tube demo's inlet end, 120 mm
  of 600 beyond its sensors, came out 16 K warm with a band of +-13 K (95 %).  The fit lets
  such a stretch step (a heat flux) or bend by ramps (a temperature) away from the rest
  (stretch.py), which widens its bands there instead.
"""

from __future__ import annotations

import math

import numpy as np

from ..forward.geometry import is_wall

from .face_grid import face_interval

#: sensors farther from the unknown face than this fraction of the radius see little detail
FAR_FRACTION = 0.25  # common practice, no source
#: sensors nearer the axis than this fraction of the radius carry no angle
OFF_AXIS_FRACTION = 0.02  # common practice, no source
ONE_ANGLE_RAD = math.radians(1.0)
SECTOR_RAD = math.pi / 2  # common practice, no source
#: a stretch next to an edge of the face without a sensor over it, as a fraction of the face's extent
END_GAP_FRACTION = 0.15  # common practice, no source


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


def edge_gaps(face: str, cylinder, r, z) -> list:
    """[(a, b)] [m]: the stretches of the unknown face next to one of its edges, longer than
    END_GAP_FRACTION of the face's extent, with no sensor over them. The edges lie along z on
    a wall (none on a long part or beyond a semi-infinite one) and along r on an end face (the
    rim, and the bore's edge on a hollow part; a solid part's axis is not an edge). r, z: the
    sensors' positions [m]."""
    wall = is_wall(face)
    if wall and (cylinder.long or not math.isfinite(cylinder.height)):
        return []
    x = np.asarray(z if wall else r, dtype=float)
    lo, hi = face_interval(face, cylinder)
    extent = hi - lo
    if x.size == 0 or extent <= 0:
        return []
    gaps = []
    if (wall or cylinder.hollow) and x.min() - lo > END_GAP_FRACTION * extent:
        gaps.append((lo, float(x.min())))
    if hi - x.max() > END_GAP_FRACTION * extent:
        gaps.append((float(x.max()), hi))
    return gaps


def edge_gap_note(face: str, cylinder, r, z, carried=None, quantity: str = "heat_flux") -> str | None:
    """One sentence when the unknown face has an unseen edge stretch (edge_gaps), else None.
    carried: does the fit let the stretch depart from the rest of the face (stretch.py: steps
    of a heat flux, ramps of a temperature)?  None: said of fits in general (`check`)."""
    gaps = edge_gaps(face, cylinder, r, z)
    if not gaps:
        return None
    wall = is_wall(face)
    what = "z" if wall else "r"
    where = " and ".join(f"{what} = {a * 1e3:.4g}-{b * 1e3:.4g} mm" for a, b in gaps)
    if carried is None:
        how = ("a fit with the learned prior lets an unknown heat flux step, and an unknown temperature bend, "
               "away from the rest of the face there, which widens its bands")
    elif carried:
        how = (f"this fit lets the {'temperature bend' if quantity == 'temperature' else 'heat flux step'} away "
               f"from the rest of the face there, which widens its bands")
    else:
        how = ("this fit does not let the face depart there (calibrated face parameters, a fixed prior, or an "
               "edge held by the series or by a known temperature), so its bands there can be too narrow")
    return (f"no sensor over the {face} face's edge stretch {where}: the readings cannot see where a heater "
            f"ends, an inlet or a cooled end there ({how}); "
            f"a thermocouple near {'that edge' if len(gaps) == 1 else 'each of those edges'} settles it")
