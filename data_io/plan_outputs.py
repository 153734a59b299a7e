"""What `heatsight plan` writes and prints: plan.csv, sensors_value.csv, summary.json, the
layout and band-width figures, plan.html, and the one console line saying what the picks
buy.  Values arrive in SI from inverse.plan (through data_io.plan_command.PlanRun) and
leave here in user units: mm, degrees, the face's display unit (data_io.display) and W.
"""

from __future__ import annotations

import base64
import math
from html import escape

import numpy as np
import pandas as pd

from ..forward.geometry import is_wall

from .csv_columns import unit_token
from .display import power_unit, symbol
from .figure_style import DPI, LITERAL, new_figure
from .report import cautions_of
from .report_format import sig
from .units import from_si

#: files `heatsight plan` writes into its output folder, in writing order
PLAN_OUTPUT_NAMES = ("plan.csv", "sensors_value.csv", "summary.json", "plan_layout.png", "plan_bands.png",
                     "plan.html")
PICK_PREFIX = "new"
LAYOUT_CMAP = "viridis"
BAND_CMAP = "magma"


# ------------------------------------------------------------------------------ units
def target_unit(run, name: str, shown: bool = False) -> str:
    """Unit of a target's sd: W for the total power (W/m on a long part,
    data_io.display.power_unit), else the face's difference unit in files
    (data_io.display.file_display) or, `shown`, on the console, figures and report."""
    from .display import power_unit

    return power_unit(run.case.cylinder) if name == "total_power" else _display(run, shown).diff_unit


def _display(run, shown):
    from .display import file_display

    return run.display if shown else file_display(run.quantity, run.case.unknown_face)


def _show(run, name, sd_si, shown: bool = False):
    sd_si = np.asarray(sd_si, float)
    return sd_si if name == "total_power" else _display(run, shown).diff(sd_si)


def _words(name: str) -> str:
    return {"total_power": "total power", "face": "face map (RMS over the face)", "mean": "face mean"}.get(
        name, f"zone '{name}'")


def _mm(x):
    return from_si(np.asarray(x, float), "length", "mm")


def _deg(x):
    return from_si(np.mod(np.asarray(x, float), 2 * math.pi), "angle", "deg")


# ------------------------------------------------------------------------------ tables
def picks_frame(run) -> pd.DataFrame:
    """plan.csv: row 0 the current layout, then one row per pick in order: name, r_mm,
    theta_deg, z_mm, depth_mm, the sd of every target after it and, for zones, the smallest
    zone change then flagged at the trend's flag level (detectable_<zone>)."""
    from ..inverse.plan import detection_limit
    from ..inverse.plan_rules import depth_of

    r, th, z = run.candidates
    p = run.plan.picks
    names = ["current"] + [f"{PICK_PREFIX}{i + 1}" for i in range(len(p))]
    nan = [np.nan]
    frame = pd.DataFrame({
        "pick": np.arange(len(p) + 1), "sensor": names,
        "r_mm": np.concatenate([nan, _mm(r[p])]), "theta_deg": np.concatenate([nan, _deg(th[p])]),
        "z_mm": np.concatenate([nan, _mm(z[p])]),
        "depth_mm": np.concatenate([nan, _mm(depth_of(run.face, run.case.cylinder, r[p], z[p]))]),
    })
    limit = detection_limit(len(run.state.zone_names))
    for j, name in enumerate(run.plan.target_names):
        unit = unit_token(target_unit(run, name))
        frame[f"sd_{name}_{unit}"] = _show(run, name, run.plan.sd[:, j])
    for j, name in enumerate(run.plan.target_names):
        if name in run.state.zone_names:
            frame[f"detectable_{name}_{unit_token(target_unit(run, name))}"] = \
                limit * _show(run, name, run.plan.sd[:, j])
    return frame


def value_frame(run) -> pd.DataFrame:
    """sensors_value.csv: existing sensors, most valuable first: rank, position, every
    target's sd if that sensor is lost, the largest ratio to the sd now, and the targets
    that sensor alone supports."""
    v = run.value
    if not len(v) or "r_m" not in v:
        return pd.DataFrame(columns=["rank", "sensor", "r_mm", "theta_deg", "z_mm", "largest_ratio",
                                     "sole_support"])
    out = pd.DataFrame({"rank": v["rank"], "sensor": v["sensor"], "r_mm": _mm(v["r_m"]),
                        "theta_deg": _deg(v["theta_rad"]), "z_mm": _mm(v["z_m"])})
    for name in run.plan.target_names:
        out[f"sd_if_lost_{name}_{unit_token(target_unit(run, name))}"] = _show(run, name, v[f"sd_if_lost:{name}"])
    out["largest_ratio"] = v["largest_ratio"]
    out["sole_support"] = v["sole_support"]
    return out


def summary_dict(run) -> dict:
    """summary.json of a plan (SI names like the fit's summary; sds in the targets' units)."""
    from ..inverse.plan import SINGLE_SENSOR_RATIO, detection_limit

    r, th, z = run.candidates
    p = run.plan.picks
    sd = run.plan.sd
    targets = [{"name": n, "unit": power_unit(run.case.cylinder) if n == "total_power" else
                ("K" if run.quantity == "temperature" else "W/m^2"),
                "sd_now": float(sd[0, j]), "sd_after": float(sd[-1, j])}
               for j, n in enumerate(run.plan.target_names)]
    sole = [{"sensor": s, "targets": t} for s, t in zip(run.value.get("sensor", []), run.value.get("sole_support", []))
            if t]
    return {
        "case": str(run.case.path), "face": run.case.unknown_face, "quantity": run.quantity,
        "drilled_from": run.face, "covariance": run.state.source, "readings": str(run.readings_path or ""),
        "candidates": str(run.candidates_path or "grid from the [plan] rules"), "n_candidates": int(r.size),
        "picks": [{"r_m": float(r[j]), "theta_rad": float(th[j]), "z_m": float(z[j])} for j in p],
        "targets": targets, "detection_limit_sd": detection_limit(len(run.state.zone_names)),
        "single_sensor_ratio": SINGLE_SENSOR_RATIO, "single_sensor_targets": sole,
        "warnings": list(run.warnings), "cautions": list(cautions_of(run.case.cylinder)),
    }


def console_line(run) -> str:
    """One line: what the picks buy, for the target whose sd falls most (relatively), in user units."""
    sd = run.plan.sd
    n = len(run.plan.picks)
    rel = sd[-1] / np.where(sd[0] > 0, sd[0], np.nan)
    j = int(np.nanargmin(rel)) if np.any(np.isfinite(rel)) else 0
    name = run.plan.target_names[j]
    unit = symbol(target_unit(run, name, shown=True))
    before, after = _show(run, name, sd[0, j], True), _show(run, name, sd[-1, j], True)
    return (f"{n} new sensor{'s' if n != 1 else ''}: the sd of the {_words(name)} falls from {sig(before)} to "
            f"{sig(after)} {unit}")


# ------------------------------------------------------------------------------ figures
def _long(run) -> bool:
    """A long part: nothing varies along z, so its figures show the cross-section (theta, r)."""
    return bool(getattr(run.case.cylinder, "long", False))


def _face_xy(run, r, th, z):
    """Plot coordinates: (theta [rad], r [mm]) on a polar end-face map; (theta [deg], z [mm]) on the
    side; (theta [deg], r [mm]) through the wall of a long part."""
    if is_wall(run.case.unknown_face):
        return _deg(th), _mm(r if _long(run) else z)
    return np.mod(np.asarray(th, float), 2 * math.pi), _mm(r)


def _axes(run, fig, pos=111):
    if is_wall(run.case.unknown_face):
        ax = fig.add_subplot(pos)
        ax.set_xlim(0, 360)
        ax.set_xlabel("angle θ [°]")
        if _long(run):
            cyl = run.case.cylinder
            ax.set_ylim(float(_mm(cyl.inner_radius)), float(_mm(cyl.radius)))
            ax.set_ylabel("radius r [mm] (through the wall)")
        else:
            ax.set_ylabel("height z [mm]")
        return ax
    ax = fig.add_subplot(pos, projection="polar")
    ax.set_ylim(0, float(_mm(run.case.cylinder.radius)))
    ax.tick_params(axis="y", labelsize=7)
    return ax


def layout_figure(run):
    """The unknown face seen along the holes: existing sensors, admissible candidates and the
    picks in order (numbered, with their depth)."""
    fig = new_figure(6.6, 6.0)
    ax = _axes(run, fig)
    r, th, z = run.candidates
    x, y = _face_xy(run, r, th, z)
    ax.plot(x, y, linestyle="none", marker=".", markersize=2, color="#9a9a9a", label="admissible candidate")
    ex = run.state.existing
    if len(ex["names"]):
        ex_x, ex_y = _face_xy(run, ex["r"], ex["theta"], ex["z"])
        ax.plot(ex_x, ex_y, linestyle="none", marker="o", markerfacecolor="white", markeredgecolor="#222222",
                markersize=5, label="existing sensor")
    frame = picks_frame(run).iloc[1:]
    p = run.plan.picks
    px, py = _face_xy(run, r[p], th[p], z[p])
    ax.plot(px, py, linestyle="none", marker="*", markersize=11, color="#d03c50", markeredgecolor="#222222",
            label="new sensor (in order)")
    for xi, yi, name, depth in zip(px, py, frame["sensor"], frame["depth_mm"]):
        ax.annotate(f"{name} ({depth:.0f} mm deep)", (xi, yi), xytext=(4, 4), textcoords="offset points",
                    fontsize=7, **LITERAL, bbox=dict(boxstyle="round,pad=0.1", fc="white", ec="none", alpha=0.7))
    ax.set_title(f"where to drill next (holes from the {run.face} face)", fontsize=10, pad=14)
    fig.legend(loc="outside lower center", ncols=3, fontsize=7, frameon=False)
    return fig


def band_maps(run):
    """sd of the face on the display grid now and after the picks (one colour scale)."""
    from ..inverse.face_grid import display_grid

    cyl = run.case.cylinder
    pts = display_grid(run.state.design.face_name, cyl, 15, 36)
    B = run.state.face_rows(pts.u, pts.v)
    before = run.display.diff(np.sqrt(np.maximum(np.einsum("qk,kl,ql->q", B, run.state.C, B), 0.0)))
    after = run.display.diff(np.sqrt(np.maximum(np.einsum("qk,kl,ql->q", B, run.plan.C_after, B), 0.0)))
    if _long(run):
        return _band_curves(run, pts, before, after)
    shape = pts.shape
    s = (pts.z if is_wall(run.case.unknown_face) else pts.r).reshape(shape)
    t = np.asarray(pts.theta, float).reshape(shape)
    s = np.concatenate([s, s[:, :1]], axis=1)
    t = np.concatenate([t, t[:, :1] + 2 * math.pi], axis=1)
    hi = float(np.nanmax(before)) or 1.0
    fig = new_figure(11.0, 5.2)
    mesh = None
    for k, (vals, title) in enumerate(((before, "sd now"), (after, f"sd after {len(run.plan.picks)} new"))):
        ax = _axes(run, fig, 121 + k)
        v = vals.reshape(shape)
        v = np.concatenate([v, v[:, :1]], axis=1)
        xx = np.degrees(t) if is_wall(run.case.unknown_face) else t
        mesh = ax.pcolormesh(xx, _mm(s), v, cmap=BAND_CMAP, vmin=0.0, vmax=hi, shading="gouraud")
        ax.set_title(title, fontsize=10, pad=12)
    fig.colorbar(mesh, ax=fig.axes, label=f"sd of the {run.display.words} [{run.display.diff_symbol}]", shrink=0.8)
    return fig


def _band_curves(run, pts, before, after):
    """A long part's face is a curve around the axis: its sd now and after the picks against theta."""
    order = np.argsort(np.asarray(pts.theta, float))
    deg = np.degrees(np.asarray(pts.theta, float)[order])
    fig = new_figure(8.0, 4.4)
    ax = fig.add_subplot(111)
    ax.plot(deg, np.asarray(before)[order], color="#444444", label="sd now")
    ax.plot(deg, np.asarray(after)[order], color="#d03c50", label=f"sd after {len(run.plan.picks)} new")
    ax.set_xlim(0, 360)
    ax.set_ylim(bottom=0.0)
    ax.set_xlabel("angle θ [°]")
    ax.set_ylabel(f"sd of the {run.display.words} [{run.display.diff_symbol}]")
    ax.legend(fontsize=8, frameon=False)
    return fig


def _png(fig) -> bytes:
    import io

    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    return buf.getvalue()


# ------------------------------------------------------------------------------ report
def report_section(run, figures) -> str:
    """The plan's HTML section: the line, the picks table, the sensors' value, the figures."""
    picks = picks_frame(run)
    value = value_frame(run)
    imgs = "".join(f'<figure><img alt="{escape(n)}" src="data:image/png;base64,{base64.b64encode(b).decode()}">'
                   f"</figure>" for n, b in figures.items())
    sole = value[value["sole_support"].astype(str) != ""] if len(value) else value
    sole_text = ("<p>Targets that depend on a single sensor (losing it multiplies their sd by more than "
                 "1.5): " + "; ".join(f"{escape(s)}: {escape(t)}" for s, t in zip(sole["sensor"], sole["sole_support"]))
                 + "</p>") if len(sole) else "<p>No target depends on a single sensor.</p>"
    warn = "".join(f"<li>{escape(w)}</li>" for w in run.warnings)
    return (f"<section><h2>Where to drill next</h2><p><strong>{escape(console_line(run))}</strong></p>"
            f"<p>Covariance used: {escape(run.state.source)}. Holes are drilled from the {escape(run.face)} face; "
            f"{run.candidates[0].size} admissible candidates.</p>"
            f"{picks.to_html(index=False, float_format=lambda x: f'{x:.4g}', na_rep='')}"
            f"<h3>Value of the existing sensors</h3>{sole_text}"
            f"{value.to_html(index=False, float_format=lambda x: f'{x:.4g}', na_rep='')}"
            f"{imgs}{'<h3>Warnings</h3><ul>' + warn + '</ul>' if warn else ''}"
            "<p>Planned sds assume the model and the prior hold.</p><h3>Cautions</h3><ul>"
            + "".join(f"<li>{escape(c)}</li>" for c in cautions_of(run.case.cylinder)) + "</ul></section>")


def output_files(run):
    """([(file name, text or bytes)] in writing order, summary dict)."""
    from .csv_out import OUTPUT_FILES_KEY, csv_text, json_text

    figures = {"plan_layout": _png(layout_figure(run)), "plan_bands": _png(band_maps(run))}
    summary = summary_dict(run)
    summary[OUTPUT_FILES_KEY] = list(PLAN_OUTPUT_NAMES)
    html = ("<!DOCTYPE html><html><head><meta charset=\"utf-8\"><title>heatsight plan: "
            f"{escape(run.case.path.name)}</title></head><body><h1>heatsight plan: {escape(run.case.path.name)}</h1>"
            f"{report_section(run, figures)}</body></html>")
    files = [("plan.csv", csv_text(picks_frame(run))), ("sensors_value.csv", csv_text(value_frame(run))),
             ("summary.json", json_text(summary)), ("plan_layout.png", figures["plan_layout"]),
             ("plan_bands.png", figures["plan_bands"]), ("plan.html", html)]
    assert [n for n, _ in files] == list(PLAN_OUTPUT_NAMES)
    return files, summary
