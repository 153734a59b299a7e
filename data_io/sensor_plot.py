"""The sensor-health figure: each reading against the fit and against the other sensors
(leave-one-out), and the screening score against the set-aside threshold.  Built like
data_io.plots (no pyplot); temperature differences in K."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .figure_style import FLAG_COLOUR, LITERAL, new_figure
from .units import from_si


def _flags(result):
    sens = result.sensors
    if "flag" in sens:
        return np.asarray(sens["flag"].astype(str))
    return np.full(len(sens), "ok")


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

    fig = new_figure(max(6.5, 0.42 * n + 2.5), 6.2)
    ax1, ax2 = fig.subplots(2, 1, sharex=True)
    loo_err, loo_sd, resid = np.atleast_1d(loo_err), np.atleast_1d(loo_sd), np.atleast_1d(resid)
    for flag in ("ok", "suspect", "set aside"):
        sel = flags == flag
        if not sel.any():
            continue
        c = FLAG_COLOUR[flag]
        ax1.errorbar(x[sel], loo_err[sel], yerr=2 * loo_sd[sel], fmt="o", color=c, ecolor=c,
                     elinewidth=1.2, capsize=3, markersize=5, gid=f"loo:{flag}",
                     label=f"reading − prediction from the others, ±2 sd ({flag})")
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
    ax2.set_ylabel("score [sd]" if score_col == "score" else "reading − prediction from the others [sd]")
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


