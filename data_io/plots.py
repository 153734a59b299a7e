"""Figures of a fit: maps of the estimated face, its band width, profiles with bands, sensor
health and the smoothing-strength curve.

Every function takes an `inverse.FitResult` (SI values) and returns a
`matplotlib.figure.Figure` built directly, without pyplot, so no global state is touched
and no display is needed (PNG output goes through the Agg renderer; the user's matplotlib
backend is left alone).  Values are turned
into user units here only, through `data_io.units`: temperatures in degC (differences in
K), heat flux in W/m^2 or kW/m^2, lengths in mm, angles in degrees.

End faces are drawn as seen from above (looking along -z), angle counter-clockwise from
the x axis; the side wall is drawn unrolled, angle around the axis against height.
"""

from __future__ import annotations

import io
import math
from pathlib import Path

import numpy as np
from matplotlib.figure import Figure  # no pyplot: no global state, PNGs through the Agg renderer

from .csv_out import atomic_write_bytes
from .display import display_for
from .units import from_si

DPI = 110
#: order and file stems of the figures written by `save_figures`
FIGURE_NAMES = ("face_map", "band_width", "profiles", "sensors", "strength")
ESTIMATE_CMAP = "cividis"
BAND_CMAP = "magma"
#: colours of the profile lines (our own choice; distinct in print and for most colour vision)
LINE_COLOURS = ("#1f5f8b", "#c0562f", "#3c8d5a", "#7b4f9d", "#8c6d1f", "#2f8c8c")
FLAG_STYLE = {
    "ok": dict(marker="o", markerfacecolor="white", markeredgecolor="#222222", markersize=5,
               label="sensor in the fit"),
    "suspect": dict(marker="D", markerfacecolor="#f0b43c", markeredgecolor="#222222", markersize=5,
                    label="sensor kept, flagged suspect"),
    "set aside": dict(marker="X", markerfacecolor="#d03c50", markeredgecolor="#222222", markersize=8,
                      label="sensor set aside"),
}
FLAG_COLOUR = {"ok": "#1f5f8b", "suspect": "#d08a00", "set aside": "#d03c50"}
CRITERION_WORDS = {
    "log_evidence": "log marginal likelihood of the readings",
    "gcv": "generalized cross-validation function",
    "curvature": "curvature of the L-curve",
    "chi2": "chi-square of the weighted residuals",
}
#: depth [nepers] of the log-evidence curve shown below its peak
EVIDENCE_DEPTH = 60.0
#: Text properties for user text (sensor names...): shown literally, a '$' starts no mathematics
LITERAL = {"parse_math": False}


def _mm(x):
    return from_si(x, "length", "mm")


def _deg(x):
    return from_si(x, "angle", "deg")


def _new_figure(width, height) -> Figure:
    return Figure(figsize=(width, height), layout="constrained")


def _grid_arrays(result, column):
    """(s, theta, values) of the display grid as 2-D arrays [i, j], with the theta = 2 pi
    column appended (a copy of theta = 0) so that maps close around the circle."""
    shape = tuple(result.grid_shape)
    g = result.grid
    vals = np.asarray(g[column], float).reshape(shape) if isinstance(column, str) else \
        np.asarray(column, float).reshape(shape)
    th = np.asarray(g["theta_rad"], float).reshape(shape)
    s = np.asarray(g["z_m"] if result.face == "side" else g["r_m"], float).reshape(shape)
    vals = np.concatenate([vals, vals[:, :1]], axis=1)
    th = np.concatenate([th, th[:, :1] + 2 * math.pi], axis=1)
    s = np.concatenate([s, s[:, :1]], axis=1)
    return s, th, vals


def _flags(result):
    sens = result.sensors
    if "flag" in sens:
        return np.asarray(sens["flag"].astype(str))
    return np.full(len(sens), "ok")


def _sensor_overlay(ax, result, polar: bool, label_names: bool = True):
    """Mark sensors projected onto the face, one Line2D per flag (gid 'sensors:<flag>')."""
    sens = result.sensors
    flags = _flags(result)
    names = [str(s) for s in sens["sensor"]]
    th = np.mod(np.asarray(sens["theta_rad"], float), 2 * math.pi)
    if result.face == "side":
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


def _map(result, values, cmap, colourbar_label, title, vmin, vmax):
    """Map of `values` (display units, grid order) on the estimated face."""
    s, th, vals = _grid_arrays(result, values)
    lo, hi = _limits(vals, vmin, vmax)
    if result.face == "side":
        fig = _new_figure(8.2, 4.9)
        ax = fig.add_subplot()
        mesh = ax.pcolormesh(_deg(th), _mm(s), vals, cmap=cmap, vmin=lo, vmax=hi, shading="gouraud")
        _sensor_overlay(ax, result, polar=False)
        ax.set_xlim(0.0, 360.0)
        ax.set_ylim(0.0, float(_mm(result.cylinder.height)))
        ax.set_xticks(np.arange(0, 361, 45))
        ax.set_xlabel("angle around the axis θ [°]")
        ax.set_ylabel("height z [mm]")
        radius_mm = float(_mm(result.cylinder.radius))
        arc = ax.secondary_xaxis("top", functions=(lambda d: np.deg2rad(d) * radius_mm,
                                                   lambda s_: np.rad2deg(s_ / radius_mm)))
        arc.set_xlabel("arc length along the wall [mm]")
        ax.set_title(title + "\n(wall unrolled, seen from outside)", fontsize=10)
    else:
        fig = _new_figure(6.6, 5.9)
        ax = fig.add_subplot(projection="polar")
        mesh = ax.pcolormesh(th, _mm(s), vals, cmap=cmap, vmin=lo, vmax=hi, shading="gouraud")
        _sensor_overlay(ax, result, polar=True)
        ax.set_ylim(0.0, float(_mm(result.cylinder.radius)))
        ax.set_rlabel_position(100.0)
        ax.tick_params(axis="y", labelsize=7)
        ax.set_xlabel("angle θ [°], counter-clockwise seen from above; radius r [mm]")
        ax.set_ylabel("r [mm]", labelpad=34)
        ax.grid(True, color="white", alpha=0.35, linewidth=0.6)
        ax.set_title(title, fontsize=10, pad=16)
    fig.colorbar(mesh, ax=ax, label=colourbar_label, shrink=0.85, pad=0.08)
    handles = [h for h in ax.get_lines() if str(h.get_gid()).startswith("sensors:")]
    if handles:
        fig.legend(handles=handles, loc="outside lower center", ncols=len(handles), fontsize=7,
                   frameon=False)
    return fig


def face_map(result, *, vmin=None, vmax=None) -> Figure:
    """Map of the estimated face (posterior mean) with the sensors projected onto it.

    vmin, vmax: colour-scale limits in the display unit (degC, W/m^2 or kW/m^2, see
    `display_for`), e.g. to share one scale between several results; default: the range
    of the estimate.
    """
    d = display_for(result)
    values = d.value(np.asarray(result.grid["estimate"], float))
    return _map(result, values, ESTIMATE_CMAP, f"estimated {d.words} [{d.symbol}]",
                f"Estimated {d.on_face}", vmin, vmax)


def band_width_map(result, *, vmax=None) -> Figure:
    """Map of the width of the 95 % band (upper - lower) of the estimate, sensors marked."""
    d = display_for(result)
    width = d.diff(np.asarray(result.grid["upper"], float) - np.asarray(result.grid["lower"], float))
    return _map(result, width, BAND_CMAP, f"95 % band width, upper − lower [{d.diff_symbol}]",
                f"How sure the estimate is: width of its 95 % band on the {d.face_words}",
                0.0, vmax)


def profiles(result, *, angles_deg=(0.0, 90.0, 180.0, 270.0), n_points=161) -> Figure:
    """Estimate with shaded 95 % bands along lines of the face: against r at fixed angles on
    an end face, against z at fixed angles on the side wall (from `result.face_profile`)."""
    d = display_for(result)
    fig = _new_figure(7.6, 4.8)
    ax = fig.add_subplot()
    side = result.face == "side"
    span = result.cylinder.height if side else result.cylinder.radius
    s = np.linspace(0.0, span, int(n_points))
    angles = np.asarray(angles_deg, float).ravel()
    if getattr(result, "design", None) is not None:
        S = np.tile(s, angles.size)                       # all lines in one evaluation
        TH = np.repeat(np.deg2rad(angles), s.size)
        est, _sd, lo, hi = (np.asarray(x, float).reshape(angles.size, s.size) for x in
                            (result.face_profile(TH, S) if side else result.face_profile(S, TH)))
    else:  # no model at hand (e.g. a result read back from files): the grid's nearest angles
        est, lo, hi, s = _grid_lines(result, angles)
    x = _mm(s)
    for i, ang in enumerate(angles):
        colour = LINE_COLOURS[i % len(LINE_COLOURS)]
        ax.fill_between(x, d.value(lo[i]), d.value(hi[i]), color=colour, alpha=0.18, linewidth=0)
        ax.plot(x, d.value(est[i]), color=colour, linewidth=1.6, label=f"θ = {ang:g}°",
                gid=f"profile:{ang:g}")
    mean = result.summary.get("mean")
    if mean is not None and np.isfinite(mean):
        ax.axhline(d.value(mean), color="#555555", linestyle="--", linewidth=0.9,
                   label="face mean")
    ax.set_xlim(0.0, float(_mm(span)))
    ax.set_xlabel("height z [mm]" if side else "radius r [mm]")
    ax.set_ylabel(f"{d.words} [{d.symbol}]")
    where = "up the side wall" if side else "out from the centre"
    ax.set_title(f"Estimated {d.words} {where} at several angles\n(shaded: 95 % band)", fontsize=10)
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


def sensor_threshold(result) -> float:
    """|score| above which a sensor is set aside (or flagged when all are kept)."""
    t = result.summary.get("threshold")
    if t is not None and np.isfinite(t):
        return float(t)
    from ..inverse import default_threshold

    n = int(result.summary.get("n_sensors_used") or len(result.sensors))
    return default_threshold(max(n, 1))


def sensor_health(result) -> Figure:
    """Per sensor: leave-one-out error (reading minus its prediction from the other sensors,
    whiskers ±2 predictive sd) and residual of the fit [K] on top; the screening score with
    the set-aside threshold below.  Set-aside sensors are drawn in their own colour."""
    sens = result.sensors
    n = len(sens)
    flags = _flags(result)
    x = np.arange(n)
    measured = np.asarray(sens["measured"], float)
    loo_err = from_si(measured - np.asarray(sens["loo_predicted"], float), "temperature_difference", "K")
    loo_sd = from_si(np.asarray(sens["loo_sd"], float), "temperature_difference", "K")
    resid = from_si(np.asarray(sens["residual"], float), "temperature_difference", "K")
    score_col = "score" if "score" in sens else "standardized_loo"
    score = np.asarray(sens[score_col], float)
    t = sensor_threshold(result)

    fig = _new_figure(max(6.5, 0.42 * n + 2.5), 6.2)
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    loo_err, loo_sd, resid = np.atleast_1d(loo_err), np.atleast_1d(loo_sd), np.atleast_1d(resid)
    for flag in ("ok", "suspect", "set aside"):
        sel = flags == flag
        if not sel.any():
            continue
        c = FLAG_COLOUR[flag]
        ax1.errorbar(x[sel], loo_err[sel], yerr=2 * loo_sd[sel], fmt="o", color=c, ecolor=c,
                     elinewidth=1.2, capsize=3, markersize=5, gid=f"loo:{flag}",
                     label=f"leave-one-out error ±2 sd ({flag})")
        ax2.bar(x[sel], score[sel], color=c, edgecolor="#222222", linewidth=0.5,
                hatch="//" if flag == "set aside" else None, gid=f"score:{flag}", label=flag)
    ax1.plot(x, resid, linestyle="none", marker="_", markersize=12, markeredgewidth=2,
             color="#222222", gid="residual", label="residual of the fit")
    ax1.axhline(0.0, color="#888888", linewidth=0.8)
    ax1.set_ylabel("reading − prediction [K]")
    ax1.set_title("Sensor check: each reading against the fit and against the other sensors",
                  fontsize=10)
    ax1.legend(fontsize=7, frameon=False, ncols=2)
    ax1.grid(True, axis="y", alpha=0.3)

    for sign in (1, -1):
        ax2.axhline(sign * t, color="#d03c50", linestyle="--", linewidth=1.0,
                    label=f"set-aside threshold ±{t:.2f}" if sign > 0 else None, gid="threshold")
    ax2.axhline(0.0, color="#888888", linewidth=0.8)
    ax2.set_ylabel("score [sd]" if score_col == "score" else "standardized LOO error [sd]")
    ax2.set_xlabel("sensor")
    ax2.grid(True, axis="y", alpha=0.3)
    ax2.legend(fontsize=7, frameon=False, ncols=4)
    ax2.set_xticks(x, [str(s) for s in sens["sensor"]], rotation=90 if n > 8 else 0, fontsize=7,
                   **LITERAL)
    for lab, flag in zip(ax2.get_xticklabels(), flags):
        if flag != "ok":
            lab.set_color(FLAG_COLOUR.get(flag, "black"))
            lab.set_fontweight("bold")
    return fig


def _positive(x):
    x = np.asarray(x, float)
    return np.where(x > 0, x, np.nan)


def strength_curve(result) -> Figure:
    """Choice of the smoothing strength: the criterion against alpha (log scale) with the
    chosen alpha marked, and the L-curve (weighted residual norm against prior seminorm)."""
    d = display_for(result)
    curve = result.strength_curve
    alpha_unit = "K⁻²" if result.quantity == "temperature" else "(W/m²)⁻²"
    crit = next((c for c in curve.columns if c not in ("alpha", "residual_norm", "seminorm")), None)
    alpha = np.asarray(curve["alpha"], float)
    chosen = float(result.summary.get("strength", np.nan))
    method = str(result.summary.get("strength_method", ""))
    fig = _new_figure(10.0, 4.4)
    ax1, ax2 = fig.subplots(1, 2)
    if crit is not None:
        v = np.asarray(curve[crit], float)
        if crit == "log_evidence" and np.any(np.isfinite(v)):
            v = v - np.nanmax(v)  # relative to the peak, so that its shape stays visible
        ax1.plot(alpha, v, color=LINE_COLOURS[0], linewidth=1.5, gid="criterion")
        ax1.set_xscale("log")
        if crit in ("gcv", "chi2") and np.all(v[np.isfinite(v)] > 0):
            ax1.set_yscale("log")
        if np.isfinite(chosen) and chosen > 0:
            ax1.axvline(chosen, color=LINE_COLOURS[1], linestyle="--", linewidth=1.0, gid="chosen",
                        label=f"chosen α = {chosen:.3g}")
            if alpha.min() <= chosen <= alpha.max():
                ax1.plot([chosen], [np.interp(np.log(chosen), np.log(alpha), v)], "o",
                         color=LINE_COLOURS[1])
        if crit == "chi2":
            n_used = result.summary.get("n_sensors_used")
            if n_used:
                ax1.axhline(float(n_used), color="#555555", linestyle=":", linewidth=1.0,
                            label=f"number of readings ({int(n_used)})")
        if crit == "log_evidence":
            ax1.set_ylabel(CRITERION_WORDS[crit] + "\nrelative to its maximum")
            if np.nanmin(v) < -EVIDENCE_DEPTH:
                ax1.set_ylim(-EVIDENCE_DEPTH, 0.08 * EVIDENCE_DEPTH)
        else:
            ax1.set_ylabel(CRITERION_WORDS.get(crit, crit))
        ax1.legend(fontsize=8, frameon=False)
    ax1.set_xlabel(f"smoothing strength α [{alpha_unit}] (SI)")
    note = "\n(answers averaged over α; dashed line: most probable α)" \
        if result.summary.get("strength_averaged") else ""
    ax1.set_title(f"Smoothing strength chosen by: {method}{note}", fontsize=9, **LITERAL)
    ax1.grid(True, which="both", alpha=0.25)

    rn = _positive(curve["residual_norm"])
    sn = d.diff(np.asarray(curve["seminorm"], float))
    sn = _positive(sn)
    ax2.plot(rn, sn, color=LINE_COLOURS[2], linewidth=1.5, gid="lcurve")
    if np.isfinite(chosen) and chosen > 0 and alpha.min() <= chosen <= alpha.max():
        la = np.log(alpha)
        px = np.exp(np.interp(np.log(chosen), la, np.log(np.nan_to_num(rn, nan=1e-300))))
        py = np.exp(np.interp(np.log(chosen), la, np.log(np.nan_to_num(sn, nan=1e-300))))
        ax2.plot([px], [py], "o", color=LINE_COLOURS[1], label="chosen α")
        ax2.legend(fontsize=8, frameon=False)
    if np.any(np.isfinite(rn)) and np.any(np.isfinite(sn)):
        ax2.set_xscale("log")
        ax2.set_yscale("log")
    ax2.set_xlabel("misfit: weighted residual norm (dimensionless, = √χ²)")
    ax2.set_ylabel(f"roughness: prior seminorm [{d.diff_symbol}]")
    ax2.set_title("Trade-off between misfit and roughness (L-curve)", fontsize=9)
    ax2.grid(True, which="both", alpha=0.25)
    return fig


_BUILDERS = {
    "face_map": face_map,
    "band_width": band_width_map,
    "profiles": profiles,
    "sensors": sensor_health,
    "strength": strength_curve,
}


def all_figures(result, names=FIGURE_NAMES) -> dict:
    """name -> Figure for the given figure names (default: all of FIGURE_NAMES)."""
    unknown = [n for n in names if n not in _BUILDERS]
    if unknown:
        raise ValueError(f"unknown figure name(s) {unknown}; choose from {list(FIGURE_NAMES)}")
    return {n: _BUILDERS[n](result) for n in names}


def figure_png(fig: Figure, dpi: int = DPI) -> bytes:
    """PNG bytes of a figure (Agg renderer)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def save_figures(result, folder, *, dpi: int = DPI, names=FIGURE_NAMES, prefix: str = "") -> dict:
    """Write the figures as PNG files `<prefix><name>.png` in `folder` (atomically each).

    Returns name -> Path in FIGURE_NAMES order.
    """
    folder = Path(folder)
    unknown = [n for n in names if n not in _BUILDERS]
    if unknown:
        raise ValueError(f"unknown figure name(s) {unknown}; choose from {list(FIGURE_NAMES)}")
    out = {}
    for name in names:
        fig = _BUILDERS[name](result)
        path = folder / f"{prefix}{name}.png"
        atomic_write_bytes(path, figure_png(fig, dpi))
        out[name] = path
    return out
