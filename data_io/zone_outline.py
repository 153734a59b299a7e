"""Outlines of heater zones on a face map, in the map's own coordinates.

End faces (polar axes): (theta [rad], r [mm]) along the zone's edge: the arc at its inner
radius, the radial edge at its end angle, the arc at its outer radius back, the radial edge at
its start angle (a full ring: its two circles).  Side wall (unrolled): (theta [deg], z [mm])
of the rectangle, broken (NaN) where it wraps past 360 deg.  Zones are duck-typed: `name`,
`theta` = (start, end) [rad], `r` or `z` = (low, high) [m], optional `face`.
"""

from __future__ import annotations

import math

import numpy as np

from ..forward.geometry import WALLS

from .display import deg, mm

#: points per full turn of an arc
ARC_POINTS = 181


def _arc(start, end):
    n = max(int(ARC_POINTS * abs(end - start) / (2 * math.pi)), 8)
    return np.linspace(start, end, n)


def end_face_outline(zone, radius):
    """(theta [rad], r [mm]) of a zone's edge on an end face (NaN separates pieces)."""
    r0, r1 = zone.r if zone.r is not None else (0.0, radius)
    t0, t1 = zone.theta
    full = (t1 - t0) >= 2 * math.pi - 1e-9
    if full:
        th = _arc(0.0, 2 * math.pi)
        parts = [(th, np.full(th.size, r1))]
        if r0 > 0:
            parts.append((th, np.full(th.size, r0)))
    else:
        th = _arc(t0, t1)
        parts = [(np.concatenate([th, [t1, t1], th[::-1], [t0, t0]]),
                  np.concatenate([np.full(th.size, r0), [r0, r1], np.full(th.size, r1), [r1, r0]]))]
    thetas, rs = [], []
    for t, r in parts:
        thetas += [t, [np.nan]]
        rs += [r, [np.nan]]
    return np.mod(np.concatenate(thetas), 2 * math.pi), mm(np.concatenate(rs))


def side_outline(zone, height):
    """(theta [deg], z [mm]) of a zone's edge on the unrolled side wall, broken at 360 deg."""
    z0, z1 = zone.z if zone.z is not None else (0.0, height)
    t0, t1 = zone.theta
    th = _arc(t0, t1)
    t = np.concatenate([th, [t1, t1], th[::-1], [t0, t0]])
    z = np.concatenate([np.full(th.size, z0), [z0, z1], np.full(th.size, z1), [z1, z0]])
    x = deg(np.mod(t, 2 * math.pi))
    jump = np.flatnonzero(np.abs(np.diff(x)) > 180.0) + 1
    x, z = np.insert(x, jump, np.nan), np.insert(mm(z), jump, np.nan)
    return x, z


def _cartesian(face, x, y, radius_mm):
    """Map coordinates -> positions on the face [mm] for distances (side: unrolled arc)."""
    x, y = np.asarray(x, float), np.asarray(y, float)
    if face in WALLS:
        return np.deg2rad(x) * radius_mm, y
    return y * np.cos(x), y * np.sin(x)


def label_point(zone, face, radius, height, avoid=None):
    """Where a zone's name is written, in map coordinates: of a few points inside the zone
    (fractions 0.3, 0.5, 0.7 of its angle span and of its r or z range), the one farthest
    from the points `avoid` ((x, y) in map coordinates, e.g. the sensors), the middle first."""
    t0, t1 = zone.theta
    full = (t1 - t0) >= 2 * math.pi - 1e-9
    if face in WALLS:
        s0, s1 = zone.z if zone.z is not None else (0.0, height)
    else:
        s0, s1 = zone.r if zone.r is not None else (0.0, radius)
    fractions = (0.5, 0.3, 0.7)
    cands = []
    for fs in fractions:
        for ft in ((0.125, 0.375, 0.625, 0.875) if full else fractions):
            th = (t0 + ft * (t1 - t0)) % (2 * math.pi)
            s = s0 + fs * (s1 - s0)
            cands.append((float(deg(th)), float(mm(s))) if face in WALLS else (th, float(mm(s))))
    if face in WALLS:   # a name on the 0/360 deg seam would be cut in half
        inner = [c for c in cands if 15.0 <= c[0] <= 345.0]
        cands = inner or cands
    if avoid is None or len(avoid[0]) == 0:
        return cands[0]
    radius_mm = float(mm(radius))
    cx, cy = _cartesian(face, [c[0] for c in cands], [c[1] for c in cands], radius_mm)
    ax_, ay_ = _cartesian(face, avoid[0], avoid[1], radius_mm)
    gap = np.min(np.hypot(cx[:, None] - ax_[None, :], cy[:, None] - ay_[None, :]), axis=1)
    return cands[int(np.argmax(gap))]
