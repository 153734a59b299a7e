"""Figures of a long part's wall (side or bore; height = "long"): nothing varies along z, so
the estimated face is a curve against the angle theta with its 95 % band, instead of an
unrolled map.  Built like data_io.plots (no pyplot); values in the display unit of the
face quantity (data_io.display), angles in degrees."""

from __future__ import annotations

import math

import numpy as np
from matplotlib.figure import Figure

from .display import display_for
from .figure_style import LINE_COLOURS, new_figure
from .sensor_plot import _flags
from .units import from_si

#: points of a curve around the full turn
N_THETA = 361
RUG_STYLE = {"ok": dict(color="#222222", label="sensor angle (in the fit)"),
             "suspect": dict(color="#f0b43c", label="sensor angle (flagged suspect)"),
             "set aside": dict(color="#d03c50", label="sensor angle (set aside)")}


def _curve(result):
    """(theta [deg], estimate, lower, upper [SI]) around the full turn at z = 0."""
    if getattr(result, "design", None) is not None:
        th = np.linspace(0.0, 2 * math.pi, N_THETA)
        est, _sd, lo, hi = (np.asarray(x, float) for x in result.face_profile(th, np.zeros_like(th)))
    else:   # a result read back from files: its grid, closed around the circle
        g = result.grid
        order = np.argsort(np.asarray(g["theta_rad"], float))
        th, est, lo, hi = (np.asarray(g[c], float)[order] for c in ("theta_rad", "estimate", "lower", "upper"))
        th, est, lo, hi = (np.append(x, x[0] + (2 * math.pi if k == 0 else 0.0))
                           for k, x in enumerate((th, est, lo, hi)))
    return from_si(th, "angle", "deg"), est, lo, hi


def _axes(title: str):
    fig = new_figure(7.8, 4.6)
    ax = fig.add_subplot()
    ax.set_xlim(0.0, 360.0)
    ax.set_xticks(np.arange(0, 361, 45))
    ax.set_xlabel("angle around the axis θ [°]")
    ax.grid(True, alpha=0.3)
    ax.set_title(title + "\n(long part: nothing varies along the axis)", fontsize=10)
    return fig, ax


def _sensor_rug(ax, result):
    """The sensors' angles as short ticks along the bottom of the axes (gid 'sensors:<flag>')."""
    sens = result.sensors
    th = np.mod(np.asarray(sens["theta_rad"], float), 2 * math.pi)
    x = from_si(th, "angle", "deg")
    flags = _flags(result)
    for flag, style in RUG_STYLE.items():
        sel = flags == flag
        if np.any(sel):
            ax.plot(np.atleast_1d(x)[sel], np.zeros(int(sel.sum())), linestyle="none", marker="|",
                    markersize=14, transform=ax.get_xaxis_transform(), gid=f"sensors:{flag}", **style)


#: vertical step [axes fraction] between rows of zone labels, and the rows at most
LABEL_ROW_STEP, LABEL_ROWS = 0.06, 4


def _label_rows(extents) -> list[int]:
    """Row of each label (extents: (left, right) [deg], in drawing order): the first row, from
    the top, where it overlaps no label already placed; labels that fit nowhere share the
    last row."""
    placed: list[list[tuple[float, float]]] = [[] for _ in range(LABEL_ROWS)]
    rows = []
    for left, right in extents:
        row = next((k for k, taken in enumerate(placed)
                    if all(right <= a or left >= b for a, b in taken)), LABEL_ROWS - 1)
        placed[row].append((left, right))
        rows.append(row)
    return rows


def _zone_spans(ax, result, zones):
    """Each zone's theta window shaded (gid 'zone:<name>') and named at the top; names that
    would overlap go to rows below (_label_rows; widths from the text as drawn, on the axes
    before the layout's last adjustment)."""
    labels = []
    for z in zones or ():
        if (getattr(z, "face", None) or result.face) != result.face:
            continue
        t0, t1 = (from_si(t, "angle", "deg") for t in z.theta)
        for lo, hi in ((t0 % 360.0, t0 % 360.0 + (t1 - t0)),):
            pieces = [(lo, min(hi, 360.0))] + ([(0.0, hi - 360.0)] if hi > 360.0 else [])
            for a, b in pieces:
                ax.axvspan(a, b, color="#e8e8e8", zorder=0, gid=f"zone:{z.name}")
            labels.append(ax.annotate(str(z.name), ((lo + min(hi, 360.0)) / 2, 0.97),
                                      xycoords=("data", "axes fraction"), ha="center", va="top", fontsize=7,
                                      color="#333333", gid=f"zone label:{z.name}"))
    if len(labels) < 2:
        return
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    canvas = ax.figure.canvas
    renderer = (canvas if hasattr(canvas, "get_renderer") else FigureCanvasAgg(ax.figure)).get_renderer()
    to_data = ax.transData.inverted()
    extents = []
    for text in labels:
        box = text.get_window_extent(renderer)
        (left, _), (right, _) = to_data.transform([(box.x0, box.y0), (box.x1, box.y0)])
        extents.append((left, right))
    for text, row in zip(labels, _label_rows(extents)):
        text.set_y(0.97 - LABEL_ROW_STEP * row)


def face_curve(result, *, zones=()) -> Figure:
    """The estimate against theta with its shaded 95 % band, the face mean, the sensors'
    angles and the zones (theta windows)."""
    d = display_for(result)
    x, est, lo, hi = _curve(result)
    fig, ax = _axes(f"Estimated {d.on_face}")
    _zone_spans(ax, result, zones)
    colour = LINE_COLOURS[0]
    ax.fill_between(x, d.value(lo), d.value(hi), color=colour, alpha=0.22, linewidth=0, label="95 % band")
    ax.plot(x, d.value(est), color=colour, linewidth=2.0, label="estimate", gid="profile:theta")
    mean = result.summary.get("mean")
    if mean is not None and np.isfinite(mean):
        ax.axhline(d.value(mean), color="#555555", linestyle="--", linewidth=0.9, label="face mean")
    _sensor_rug(ax, result)
    ax.set_ylabel(f"{d.words} [{d.symbol}]")
    ax.legend(fontsize=8, ncols=2, frameon=False)
    return fig


def band_curve(result) -> Figure:
    """The width of the 95 % band (upper - lower) against theta, with the sensors' angles."""
    d = display_for(result)
    x, _est, lo, hi = _curve(result)
    fig, ax = _axes(f"How sure the estimate is: width of its 95 % band on the {d.face_words}")
    ax.plot(x, d.diff(hi - lo), color=LINE_COLOURS[1 % len(LINE_COLOURS)], linewidth=1.8, gid="band:theta")
    ax.set_ylim(bottom=0.0)
    _sensor_rug(ax, result)
    ax.set_ylabel(f"95 % band width, upper − lower [{d.diff_symbol}]")
    handles = [h for h in ax.get_lines() if str(h.get_gid()).startswith("sensors:")]
    if handles:
        ax.legend(handles=handles, fontsize=8, frameon=False)
    return fig


