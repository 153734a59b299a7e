"""Figures of a fit: maps of the estimated face, its band width, profiles with bands, sensor
health and the smoothing-strength curve.

Every function takes an `inverse.FitResult` (SI values) and returns a
`matplotlib.figure.Figure` built directly, without pyplot, so no global state is touched
and no display is needed (PNG output goes through the Agg renderer; the user's matplotlib
backend is left alone).  Values are turned
into user units here only, through `data_io.units`: temperatures in degC (differences in
K), heat flux in W/m^2 or kW/m^2, lengths in mm, angles in degrees.

End faces are drawn as seen from above (looking along -z), angle counter-clockwise from
the x axis, a hollow part's bore as an empty disc ringed at the inner radius; walls (the
side and the bore) are drawn unrolled, angle around the axis against height, the side seen
from outside (angle growing to the right) and the bore seen from the axis (to the left).  A long
part's wall varies with theta only: its figures are theta curves with their bands
(data_io.wall_curve).
"""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure  # no pyplot: no global state, PNGs through the Agg renderer

from ..forward.geometry import is_wall

from . import wall_curve
from .csv_out import atomic_write_bytes
from .display import display_for
from .face_scale import colour_scale, zone_holds_mean
from .figure_pngs import figure_png, figure_pngs  # noqa: F401 (figure_png re-exported)
from .figure_style import DPI, FLAG_COLOUR, LINE_COLOURS, LITERAL, new_figure as _new_figure
from .sensor_plot import _flags, sensor_health, sensor_threshold  # noqa: F401 (re-exported)
from .strength_plot import CRITERION_WORDS, EVIDENCE_DEPTH, strength_curve  # noqa: F401 (re-exported)
from .units import from_si
from .zone_outline import end_face_outline, label_point, side_outline

#: order and file stems of the figures written by `save_figures`
FIGURE_NAMES = ("face_map", "band_width", "profiles", "sensors", "strength")
ESTIMATE_CMAP = "cividis"
BAND_CMAP = "magma"
ZONE_COLOUR = "#e8e8e8"
FLAG_STYLE = {
    "ok": dict(marker="o", markerfacecolor="white", markeredgecolor="#222222", markersize=5,
               label="sensor in the fit"),
    "suspect": dict(marker="D", markerfacecolor="#f0b43c", markeredgecolor="#222222", markersize=5,
                    label="sensor kept, flagged suspect"),
    "set aside": dict(marker="X", markerfacecolor="#d03c50", markeredgecolor="#222222", markersize=8,
                      label="sensor set aside"),
}


def _mm(x):
    return from_si(x, "length", "mm")


def _deg(x):
    return from_si(x, "angle", "deg")


def _grid_arrays(result, column):
    """(s, theta, values) of the display grid as 2-D arrays [i, j], with the theta = 2 pi
    column appended (a copy of theta = 0) so that maps close around the circle."""
    shape = tuple(result.grid_shape)
    g = result.grid
    vals = np.asarray(g[column], float).reshape(shape) if isinstance(column, str) else \
        np.asarray(column, float).reshape(shape)
    th = np.asarray(g["theta_rad"], float).reshape(shape)
    s = np.asarray(g["z_m"] if is_wall(result.face) else g["r_m"], float).reshape(shape)
    vals = np.concatenate([vals, vals[:, :1]], axis=1)
    th = np.concatenate([th, th[:, :1] + 2 * math.pi], axis=1)
    s = np.concatenate([s, s[:, :1]], axis=1)
    return s, th, vals


def _sensor_overlay(ax, result, polar: bool, label_names: bool = True):
    """Mark sensors projected onto the face, one Line2D per flag (gid 'sensors:<flag>')."""
    sens = result.sensors
    flags = _flags(result)
    names = [str(s) for s in sens["sensor"]]
    th = np.mod(np.asarray(sens["theta_rad"], float), 2 * math.pi)
    if is_wall(result.face):
        x, y = _deg(th), _mm(np.asarray(sens["z_m"], float))
    elif polar:
        x, y = th, _mm(np.asarray(sens["r_m"], float))
    else:
        x, y = _deg(th), _mm(np.asarray(sens["r_m"], float))
    x, y = np.atleast_1d(x), np.atleast_1d(y)
    for flag, style in FLAG_STYLE.items():
        sel = flags == flag
        if sel.any():
            ax.plot(x[sel], y[sel], linestyle="none", gid=f"sensors:{flag}", zorder=5, **style)
    if label_names:
        for xi, yi, name in zip(x, y, names):
            ax.annotate(name, (xi, yi), xytext=(3, 3), textcoords="offset points", fontsize=6,
                        color="#111111", zorder=6, **LITERAL,
                        bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.6))
    unknown = sorted(set(flags) - set(FLAG_STYLE))
    if unknown:  # a flag we have no style for is still shown
        sel = np.isin(flags, unknown)
        ax.plot(x[sel], y[sel], linestyle="none", marker="s", color="grey", gid="sensors:other",
                label="sensor (" + ", ".join(unknown) + ")", zorder=5)


def _limits(values, vmin=None, vmax=None):
    v = np.asarray(values, float)
    lo = float(np.nanmin(v)) if vmin is None else float(vmin)
    hi = float(np.nanmax(v)) if vmax is None else float(vmax)
    if not hi > lo:
        pad = max(abs(lo) * 1e-3, 1e-6)
        lo, hi = lo - pad, hi + pad
    return lo, hi


def _zones_on_face(result, zones):
    """The zones (duck-typed, see data_io.zone_outline) that lie on the estimated face."""
    return [z for z in zones or () if (getattr(z, "face", None) or result.face) == result.face]


def _draw_zones(ax, result, zones):
    """Zone edges (light dashed lines, gid 'zone:<name>') and names on a face map."""
    cyl = result.cylinder
    marks = [ln for ln in ax.get_lines() if str(ln.get_gid()).startswith("sensors:")]
    sensors = [np.concatenate([np.asarray(ln.get_data()[k], float) for ln in marks]) if marks else np.zeros(0)
               for k in (0, 1)]
    for z in _zones_on_face(result, zones):
        if is_wall(result.face):
            x, y = side_outline(z, cyl.height)
        else:
            x, y = end_face_outline(z, cyl.radius)
        ax.plot(x, y, color=ZONE_COLOUR, linewidth=1.3, linestyle=(0, (5, 2)), gid=f"zone:{z.name}",
                zorder=4)
        ax.plot(x, y, color="#222222", linewidth=0.5, linestyle=(0, (5, 2)), zorder=4, alpha=0.7)
        lx, ly = label_point(z, result.face, _span_radius(result), cyl.height, avoid=sensors)
        ax.annotate(str(z.name), (lx, ly), ha="center", va="center", fontsize=7, color="#111111", zorder=6,
                    **LITERAL, bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="#888888", lw=0.5, alpha=0.8))


def _map(result, values, cmap, colourbar_label, title, vmin, vmax, zones=()):
    """Map of `values` (display units, grid order) on the estimated face, zones outlined."""
    s, th, vals = _grid_arrays(result, values)
    lo, hi = _limits(vals, vmin, vmax)
    if is_wall(result.face):
        fig = _new_figure(8.2, 4.9)
        ax = fig.add_subplot()
        mesh = ax.pcolormesh(_deg(th), _mm(s), vals, cmap=cmap, vmin=lo, vmax=hi, shading="gouraud")
        _sensor_overlay(ax, result, polar=False)
        _draw_zones(ax, result, zones)
        # seen from outside the angle grows to the right; seen from the axis (the bore) to the
        # left, as it does for someone looking at that wall from inside
        ax.set_xlim(*((360.0, 0.0) if result.face == "bore" else (0.0, 360.0)))
        ax.set_ylim(0.0, float(_mm(result.cylinder.height)))
        ax.set_xticks(np.arange(0, 361, 45))
        ax.set_xlabel("angle around the axis θ [°]")
        ax.set_ylabel("height z [mm]")
        radius_mm = float(_mm(result.cylinder.wall_radius(result.face)))
        arc = ax.secondary_xaxis("top", functions=(lambda d: np.deg2rad(d) * radius_mm,
                                                   lambda s_: np.rad2deg(s_ / radius_mm)))
        arc.set_xlabel(f"arc length along the {'bore' if result.face == 'bore' else 'wall'} at "
                       f"r = {radius_mm:.4g} mm [mm]")
        seen = "seen from the axis" if result.face == "bore" else "seen from outside"
        ax.set_title(title + f"\n({result.face} unrolled, {seen})", fontsize=10)
    else:
        fig = _new_figure(6.6, 5.9)
        ax = fig.add_subplot(projection="polar")
        mesh = ax.pcolormesh(th, _mm(s), vals, cmap=cmap, vmin=lo, vmax=hi, shading="gouraud")
        _sensor_overlay(ax, result, polar=True)
        _draw_zones(ax, result, zones)
        _draw_bore(ax, result.cylinder)
        ax.set_ylim(0.0, float(_mm(result.cylinder.radius)))
        ax.set_rlabel_position(100.0)
        ax.tick_params(axis="y", labelsize=7)
        ax.set_xlabel("angle θ [°], counter-clockwise seen from above; radius r [mm]")
        ax.set_ylabel("r [mm]", labelpad=34)
        ax.grid(True, color="white", alpha=0.35, linewidth=0.6)
        ax.set_title(title, fontsize=10, pad=16)
    bar = fig.colorbar(mesh, ax=ax, label=colourbar_label, shrink=0.85, pad=0.08)
    bar.formatter.set_useOffset(False)   # plain values, never "+1.2e1" above the scale
    bar.update_ticks()
    handles = [h for h in ax.get_lines() if str(h.get_gid()).startswith("sensors:")]
    if handles:
        fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=7,
                   frameon=False)
    return fig


def map_scale(result):
    """The colour scale of the face map in display units (data_io.face_scale): at least the
    typical 95 % half-width around the face mean; `uniform` when the mean is inside every band
    and inside every zone's 95 % interval (face_scale.zone_holds_mean)."""
    d = display_for(result)
    g = result.grid
    mean = result.summary.get("mean")
    scale = colour_scale(d.value(np.asarray(g["estimate"], float)), d.value(np.asarray(g["lower"], float)),
                         d.value(np.asarray(g["upper"], float)),
                         d.value(float(mean)) if mean is not None and np.isfinite(mean) else np.nan)
    zones = result.summary.get("zones") or ()
    if scale.uniform and not all(zone_holds_mean(z, mean) for z in zones):
        scale = replace(scale, uniform=False)
    return scale


def face_map(result, *, vmin=None, vmax=None, zones=()) -> Figure:
    """Map of the estimated face (posterior mean) with the sensors projected onto it and the
    zones outlined (`zones`: the case's zones, e.g. ``case.zones``; those of other faces are
    left out).

    vmin, vmax: colour-scale limits in the display unit (degC, W/m^2 or kW/m^2, see
    `display_for`), e.g. to share one scale between several results; default: `map_scale`,
    which never stretches differences smaller than the bands over the whole colour range.
    """
    if _long(result):
        return wall_curve.face_curve(result, zones=zones)
    d = display_for(result)
    values = d.value(np.asarray(result.grid["estimate"], float))
    scale = map_scale(result)
    lo = scale.lo if vmin is None else vmin
    hi = scale.hi if vmax is None else vmax
    title = f"Estimated {d.on_face}"
    if scale.uniform and vmin is None and vmax is None:
        title += "\nuniform within its 95 % bands: the shading shows no significant pattern"
    return _map(result, values, ESTIMATE_CMAP, f"estimated {d.words} [{d.symbol}]", title, lo, hi, zones)


def band_width_map(result, *, vmax=None) -> Figure:
    """Map of the width of the 95 % band (upper - lower) of the estimate, sensors marked."""
    if _long(result):
        return wall_curve.band_curve(result)
    d = display_for(result)
    width = d.diff(np.asarray(result.grid["upper"], float) - np.asarray(result.grid["lower"], float))
    return _map(result, width, BAND_CMAP, f"95 % band width, upper − lower [{d.diff_symbol}]",
                f"How sure the estimate is: width of its 95 % band on the {d.face_words}",
                0.0, vmax)


def line_means(result):
    """(angles [deg], mean of the estimate along each display-grid line [SI]): r-weighted
    along the radius on an end face (the area average of the line's sector), plain along z on
    the side wall."""
    s, th, est = _grid_arrays(result, "estimate")
    s, th, est = s[:, :-1], th[:, :-1], est[:, :-1]
    w = np.ones_like(s) if is_wall(result.face) else np.abs(s)
    w = np.where(np.isfinite(est), w, 0.0)
    mean = np.sum(np.nan_to_num(est) * w, axis=0) / np.maximum(np.sum(w, axis=0), 1e-300)
    return np.mod(_deg(th[0]), 360.0), mean


def profile_angles(result, n: int = 4):
    """n angles [deg] for the profiles figure: the strongest and the weakest line of the face
    (largest and smallest `line_means`), then the angles farthest from those already chosen."""
    ang, mean = line_means(result)
    chosen = [float(ang[int(np.argmax(mean))])]
    weakest = float(ang[int(np.argmin(mean))])
    if weakest != chosen[0]:
        chosen.append(weakest)
    while len(chosen) < min(n, ang.size):
        gap = np.min(np.abs((ang[:, None] - np.asarray(chosen)[None, :] + 180.0) % 360.0 - 180.0), axis=1)
        chosen.append(float(ang[int(np.argmax(gap))]))
    return tuple(round(a, 6) for a in chosen)


def profiles(result, *, angles_deg=None, n_points=161) -> Figure:
    """Estimate with shaded 95 % bands along lines of the face: against r at fixed angles on
    an end face, against z at fixed angles on the side wall (from `result.face_profile`).

    angles_deg: the angles [deg]; default `profile_angles`: the strongest and weakest line
    first (drawn bold, with their bands), then two more for context (thin, lighter bands)."""
    if _long(result):
        return wall_curve.face_curve(result)
    d = display_for(result)
    auto = angles_deg is None
    if auto:
        angles_deg = profile_angles(result)
    fig = _new_figure(7.6, 4.8)
    ax = fig.add_subplot()
    side = is_wall(result.face)
    start = 0.0 if side else result.cylinder.inner_radius
    span = result.cylinder.height if side else result.cylinder.radius
    s = np.linspace(start, span, int(n_points))
    angles = np.asarray(angles_deg, float).ravel()
    if getattr(result, "design", None) is not None:
        S = np.tile(s, angles.size)                       # all lines in one evaluation
        TH = np.repeat(np.deg2rad(angles), s.size)
        est, _sd, lo, hi = (np.asarray(x, float).reshape(angles.size, s.size) for x in
                            (result.face_profile(TH, S) if side else result.face_profile(S, TH)))
    else:  # no model at hand (e.g. a result read back from files): the grid's nearest angles
        est, lo, hi, s = _grid_lines(result, angles)
    x = _mm(s)
    hot, cold = ("hottest", "coldest") if result.quantity == "temperature" else ("strongest", "weakest")
    roles = {0: hot, 1: cold} if auto else {}
    for i, ang in enumerate(angles):
        colour = LINE_COLOURS[i % len(LINE_COLOURS)]
        lead = i in roles or not auto
        ax.fill_between(x, d.value(lo[i]), d.value(hi[i]), color=colour, alpha=0.22 if lead else 0.08,
                        linewidth=0)
        for edge in (lo[i], hi[i]):   # band edges in the line's colour, so overlapping bands stay readable
            ax.plot(x, d.value(edge), color=colour, linewidth=0.8 if lead else 0.5,
                    linestyle=(0, (4, 2)) if lead else (0, (1, 2)), gid=f"band:{ang:g}")
        label = f"θ = {ang:g}°" + (f" ({roles[i]} line)" if i in roles else "")
        ax.plot(x, d.value(est[i]), color=colour, linewidth=2.2 if lead else 1.1, label=label,
                gid=f"profile:{ang:g}", zorder=3)
    mean = result.summary.get("mean")
    if mean is not None and np.isfinite(mean):
        ax.axhline(d.value(mean), color="#555555", linestyle="--", linewidth=0.9,
                   label="face mean")
    ax.set_xlim(float(_mm(start)), float(_mm(span)))
    ax.set_xlabel("height z [mm]" if side else "radius r [mm]")
    ax.set_ylabel(f"{d.words} [{d.symbol}]")
    where = f"up the {result.face}" if side else ("out from the bore" if result.cylinder.hollow
                                                  else "out from the centre")
    ax.set_title(f"Estimated {d.words} {where} at several angles\n(shaded, between dashed edges: "
                 "95 % band)", fontsize=10)
    ax.grid(True, alpha=0.3)
    ax.legend(fontsize=8, ncols=2, frameon=False)
    return fig


def _grid_lines(result, angles_deg):
    """estimate, lower, upper (n_angles, n_s) and s [m] along the display-grid columns whose
    angle is nearest to each of `angles_deg`."""
    s, th, _ = _grid_arrays(result, "estimate")
    th0 = th[0, :-1]
    gap = np.abs((th0[None, :] - np.deg2rad(angles_deg)[:, None] + math.pi) % (2 * math.pi) - math.pi)
    j = np.argmin(gap, axis=1)
    cols = [_grid_arrays(result, c)[2][:, j].T for c in ("estimate", "lower", "upper")]
    return cols[0], cols[1], cols[2], s[:, 0]


_BUILDERS = {
    "face_map": face_map,
    "band_width": band_width_map,
    "profiles": profiles,
    "sensors": sensor_health,
    "strength": strength_curve,
}


def _build(name, result, zones):
    return face_map(result, zones=zones) if name == "face_map" else _BUILDERS[name](result)


def _long(result) -> bool:
    """A long part: nothing varies along z, its wall is drawn as theta curves."""
    return bool(getattr(result.cylinder, "long", False))


def _span_radius(result) -> float:
    """Radius [m] a face map's distances are measured at: the wall's own on a wall."""
    return result.cylinder.wall_radius(result.face) if is_wall(result.face) else result.cylinder.radius


def _draw_bore(ax, cylinder):
    """A hollow part's bore on an end-face map: an empty disc ringed at the inner radius."""
    a = getattr(cylinder, "inner_radius", 0.0)
    if not a > 0:
        return
    th = np.linspace(0.0, 2 * math.pi, 181)
    ax.fill_between(th, 0.0, float(_mm(a)), color="white", zorder=3)
    ax.plot(th, np.full(th.size, float(_mm(a))), color="#222222", linewidth=0.9, gid="bore", zorder=4)
    ax.annotate("bore", (0.0, 0.0), ha="center", va="center", fontsize=8, color="#444444", zorder=5)


def all_figures(result, names=FIGURE_NAMES, *, zones=()) -> dict:
    """name -> Figure for the given figure names (default: all of FIGURE_NAMES); `zones`
    (e.g. ``case.zones``) are outlined on the face map."""
    unknown = [n for n in names if n not in _BUILDERS]
    if unknown:
        raise ValueError(f"unknown figure name(s) {unknown}; choose from {list(FIGURE_NAMES)}")
    return {n: _build(n, result, zones) for n in names}


def save_figures(result, folder, *, dpi: int = DPI, names=FIGURE_NAMES, prefix: str = "", zones=()) -> dict:
    """Write the figures as PNG files `<prefix><name>.png` in `folder` (atomically each).

    Returns name -> Path in FIGURE_NAMES order.
    """
    folder = Path(folder)
    unknown = [n for n in names if n not in _BUILDERS]
    if unknown:
        raise ValueError(f"unknown figure name(s) {unknown}; choose from {list(FIGURE_NAMES)}")
    out = {}
    for name, png in figure_pngs({name: _build(name, result, zones) for name in names}, dpi).items():
        path = folder / f"{prefix}{name}.png"
        atomic_write_bytes(path, png)
        out[name] = path
    return out
