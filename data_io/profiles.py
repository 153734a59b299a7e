"""Face profiles read from CSV and interpolated between their points.

End faces (bottom, top): columns ``r, theta, value``; a full polar grid (rings x rays, an
axis point allowed) is interpolated bilinearly in (r, theta), periodic in theta; other
tables piecewise linearly over a Delaunay triangulation in Cartesian x = r cos(theta),
y = r sin(theta), with the nearest point's value outside the convex hull of the points.
When every point (off the axis) has the same theta, the profile is taken as axisymmetric
and interpolated linearly in r alone.

Walls (side, and the bore of a hollow part): columns ``theta, z, value``; interpolation in
(arc length r_w*theta, z) with r_w the wall's radius, periodic in theta (the table is
repeated at -360 deg and +360 deg before triangulating), with the nearest value outside.
A single ring (one z) is interpolated periodically in theta alone; a single line (one
theta) in z alone.  On a long part (nothing varies along z) a wall profile has columns
``theta, value`` only and is interpolated periodically in theta.  End faces of a hollow
part: points with inner_radius <= r <= radius.

The returned callable is vectorized and works in SI: f(r [m], theta [rad]) on end faces,
f(theta [rad], z [m]) on walls (z ignored on a long part), giving K (temperature) or
W/m^2 (heat flux).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
from scipy.interpolate import LinearNDInterpolator, NearestNDInterpolator
from scipy.spatial import QhullError

from ..forward.geometry import is_wall

from .errors import InputError
from .csv_in import Column, RawTable, _parse, check_inside, read_raw

TWO_PI = 2.0 * np.pi
QUANTITIES = {"temperature": "temperature", "heat_flux": "heat_flux"}


class TableProfile:
    """A face datum interpolated from a CSV table (vectorized, SI in and out)."""

    def __init__(self, path: Path, face: str, quantity: str, n_points: int, func, description: str,
                 values: np.ndarray):
        self.path = Path(path)
        self.face = face
        self.quantity = quantity
        self.n_points = n_points
        self.description = description
        self.min = float(np.min(values))
        self.max = float(np.max(values))
        self._func = func

    def __call__(self, u, v):
        u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
        out = self._func(u.ravel(), v.ravel())
        return np.asarray(out, float).reshape(u.shape)

    def __repr__(self):
        return f"TableProfile({str(self.path)!r}, face={self.face!r}, {self.n_points} points, {self.description})"


def _columns(face: str, quantity: str, long: bool = False) -> tuple[Column, ...]:
    value = Column("value", QUANTITIES[quantity])
    if long:
        return (Column("theta", "angle"), value)
    if is_wall(face):
        return (Column("theta", "angle"), Column("z", "length"), value)
    return (Column("r", "length"), Column("theta", "angle"), value)


def _dedupe(raw: RawTable, keys: np.ndarray, values: np.ndarray, scale: float):
    """Merge rows at the same point; refuse two different values at one point."""
    rounded = np.round(keys / (scale * 1e-9)).astype(np.int64)
    seen: dict[tuple, int] = {}
    keep = []
    for i, key in enumerate(map(tuple, rounded)):
        if key in seen:
            j = seen[key]
            if not np.isclose(values[i], values[j], rtol=1e-12, atol=0.0):
                raise InputError(f"this point is the same as the one on line {raw.lines[j]} but "
                                 f"has a different value", file=raw.path, where=f"line {raw.lines[i]}")
            continue
        seen[key] = i
        keep.append(i)
    return np.asarray(keep, dtype=int)


def _collinear(pts: np.ndarray) -> bool:
    c = pts - pts.mean(axis=0)
    s = np.linalg.svd(c, compute_uv=False)
    return s.size < 2 or s[1] <= 1e-9 * max(s[0], 1e-300)


def _scattered(pts: np.ndarray, vals: np.ndarray, raw: RawTable):
    try:
        lin = LinearNDInterpolator(pts, vals)
    except (QhullError, ValueError) as exc:
        raise InputError(f"cannot triangulate the profile points ({str(exc).splitlines()[0]}); "
                         f"spread the points over the face", file=raw.path) from exc
    near = NearestNDInterpolator(pts, vals)

    def f(x, y):
        out = lin(x, y)
        miss = ~np.isfinite(out)
        if np.any(miss):
            out[miss] = near(x[miss], y[miss])
        return out

    return f


def _polar_grid(r, theta, vals, radius):
    """f(r, theta) bilinear in (r, theta), periodic in theta, when the off-axis points are a
    full grid of rings x rays (every ring at every ray's angle, at least 2 of each; a point on
    the axis, if any, closes the grid at r = 0), else None.  Outside the rings' span the
    nearest ring's value.  (A Cartesian triangulation of such a table puts chords between
    its rays: an axisymmetric profile on 10-degree rays came out 0.5 % low midway between
    them, and the face's power with it.)"""
    from scipy.interpolate import RegularGridInterpolator

    off = r > 1e-9 * radius
    r_off, t_off = r[off], np.mod(theta[off], TWO_PI)
    # rings and rays found to 1e-9 (of the radius, of a turn), kept at their values as given
    rkey, i = np.unique(np.round(r_off / radius, 9), return_inverse=True)
    tkey, j = np.unique(np.round(t_off / TWO_PI, 9), return_inverse=True)
    if rkey.size < 2 or tkey.size < 2 or off.sum() != rkey.size * tkey.size:
        return None
    grid = np.full((rkey.size, tkey.size), np.nan)
    grid[i.ravel(), j.ravel()] = vals[off]
    if np.isnan(grid).any():
        return None
    radii = np.zeros(rkey.size)
    radii[i.ravel()] = r_off
    ts = np.zeros(tkey.size)
    ts[j.ravel()] = t_off
    if (~off).any():                       # the axis point: one value at every angle
        radii = np.r_[0.0, radii]
        grid = np.vstack([np.full(ts.size, float(vals[~off][0])), grid])
    # periodic in theta: the first ray again after the last, the last before the first
    angles = np.r_[ts[-1] - TWO_PI, ts, ts[0] + TWO_PI]
    table = np.hstack([grid[:, -1:], grid, grid[:, :1]])
    interp = RegularGridInterpolator((radii, angles), table)

    def f(rr, t):
        rr = np.clip(np.asarray(rr, float), radii[0], radii[-1])
        tt = np.mod(np.asarray(t, float) - angles[0], TWO_PI) + angles[0]
        shape = np.broadcast(rr, tt).shape
        return interp(np.column_stack([np.broadcast_to(rr, shape).ravel(),
                                       np.broadcast_to(tt, shape).ravel()])).reshape(shape)

    return f


def load_profile(path, face: str, quantity: str, cylinder) -> TableProfile:
    """Read a profile CSV for `face` ("bottom", "top", "side", "bore") of `quantity`
    ("temperature": value is an absolute temperature, default unit degC; "heat_flux":
    default W/m^2) and return its interpolating callable.

    Raises InputError (file, line) for wrong columns, non-numeric values, fewer than 3
    distinct points, points outside the face, or one point given two values.
    """
    path = Path(path)
    raw = read_raw(path)
    what = f"a profile on the {face} face"
    long = bool(getattr(cylinder, "long", False))
    if long and "z" in raw.names:
        raise InputError(f"a long part (height = \"long\") does not vary along z: a profile on its {face} "
                         f"takes the columns theta, value (drop the z column)", file=path)
    cols = _columns(face, quantity, long)
    v = _parse(raw, cols, what)
    values = v["value"]
    wall = is_wall(face)
    if long:
        v["z"] = np.zeros(values.size)
    elif wall:
        check_inside(raw, {"z": v["z"]}, cylinder, "profile point")
    else:
        check_inside(raw, {"r": v["r"]}, cylinder, "profile point")
    a = cylinder.wall_radius(face) if wall else cylinder.radius
    if wall:
        theta = np.mod(v["theta"], TWO_PI)
        keys = np.column_stack([a * theta, v["z"]])
        scale = a if math.isinf(cylinder.height) else max(a, cylinder.height)
    else:
        theta = v["theta"]
        keys = np.column_stack([v["r"] * np.cos(theta), v["r"] * np.sin(theta)])
        scale = a
    keep = _dedupe(raw, keys, values, scale)
    if keep.size < 3:
        raise InputError(f"a profile needs at least 3 distinct points; found {keep.size}", file=path)
    pts, vals = keys[keep], values[keep]

    if wall:
        th, z = theta[keep], v["z"][keep]
        if np.ptp(z) <= 1e-9 * scale:
            order = np.argsort(th)
            tt, vv = th[order], vals[order]
            desc = "varies with theta only" + ("" if long else " (one ring)")
            func = lambda t, zz: np.interp(np.mod(t, TWO_PI), tt, vv, period=TWO_PI)  # noqa: E731
        elif np.ptp(pts[:, 0]) <= 1e-9 * scale:
            order = np.argsort(z)
            zs, vv = z[order], vals[order]
            desc = f"varies with z only (one line along the {face})"
            func = lambda t, zz: np.interp(zz, zs, vv)  # noqa: E731
        else:
            if _collinear(pts):
                raise InputError(f"the profile points lie on one line across the {face}; spread them "
                                 "over the face, or give one ring (one z) or one line (one theta)",
                                 file=path)
            period = TWO_PI * a
            padded = np.vstack([pts, pts + [period, 0.0], pts - [period, 0.0]])
            f2 = _scattered(padded, np.concatenate([vals, vals, vals]), raw)
            desc = "interpolated in theta and z (periodic in theta)"
            func = lambda t, zz: f2(a * np.mod(t, TWO_PI), zz)  # noqa: E731
    else:
        r = v["r"][keep]
        off_axis = r > 1e-9 * a
        th = theta[keep][off_axis]
        one_angle = th.size == 0 or bool(np.all(np.abs(np.angle(np.exp(1j * (th - th[0])))) < 1e-9))
        if one_angle:
            order = np.argsort(r)
            rs, vv = r[order], vals[order]
            desc = "axisymmetric (all points at one theta), interpolated in r"
            func = lambda rr, t: np.interp(rr, rs, vv)  # noqa: E731
        else:
            polar = _polar_grid(r, theta[keep], vals, a)
            if polar is not None:
                desc = "a polar grid (rings x rays), interpolated linearly in r and theta"
                func = polar
            else:
                if _collinear(pts):
                    raise InputError("the profile points lie on one line across the face; spread them over "
                                     "the face, or give them all at one theta for an axisymmetric profile",
                                     file=path)
                f2 = _scattered(pts, vals, raw)
                desc = "interpolated over the face"
                func = lambda rr, t: f2(rr * np.cos(t), rr * np.sin(t))  # noqa: E731
    return TableProfile(path, face, quantity, int(keep.size), func, desc + _coverage(face, cylinder, v, keep), vals)


def _coverage(face, cylinder, v, keep) -> str:
    """'' when the profile's points reach both ends of the face (along z on a wall, r on an
    end face, within 1 % of its span), else where they stop: beyond them the nearest point's
    value holds (interpolation does not extrapolate)."""
    wall = is_wall(face)
    if wall and (math.isinf(cylinder.height) or getattr(cylinder, "long", False)):
        return ""
    lo, hi = (0.0, cylinder.height) if wall else (cylinder.inner_radius, cylinder.radius)
    x = (v["z"] if wall else v["r"])[keep]
    slack = 0.01 * (hi - lo)
    if x.min() <= lo + slack and x.max() >= hi - slack:
        return ""
    what = "z" if wall else "r"
    return (f"; its points cover {what} = {x.min() * 1e3:.4g}-{x.max() * 1e3:.4g} mm of the face's "
            f"{lo * 1e3:.4g}-{hi * 1e3:.4g} mm, and beyond them the nearest point's value holds")
