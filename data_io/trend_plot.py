"""The trend figure: the face mean and each zone over a log with their 95 % bands, and each
zone's change from the reference window against its flag limit.  Built like data_io.plots
(no pyplot), in the display units of data_io.display."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .display import display_of
from .plots import LINE_COLOURS, _new_figure


def trend_figure(trend: dict) -> Figure:
    """The face over time: the face mean with its 95 % band; each zone with its 95 % band; and
    each zone's change from the reference window against its flag limit (threshold x the
    sd of the change), flagged points marked.

    `trend` holds plain arrays in SI: ``quantity`` ('temperature' | 'heat_flux'), ``face``,
    ``time`` (P,) (hours as floats, or numpy datetime64), ``time_label``, ``mean`` (dict of
    ``value``, ``lower``, ``upper``), ``zones`` (list of dicts with ``name``, ``value``,
    ``lower``, ``upper``, ``change``, ``limit``, ``flag``) and ``reference`` ((start, end) on
    the time axis, or None).
    """
    mean = trend["mean"]
    d = display_of(trend["quantity"], trend["face"], mean["value"])
    zones = list(trend.get("zones") or [])
    t = np.asarray(trend["time"])
    fig = _new_figure(9.0, 3.0 + (4.6 if zones else 0.0))
    axes = fig.subplots(3 if zones else 1, 1, sharex=True, squeeze=False)[:, 0]
    ref = trend.get("reference")

    def shade(ax):
        if ref is not None:
            ax.axvspan(ref[0], ref[1], color="#888888", alpha=0.18, linewidth=0, label="reference window")
        ax.grid(True, alpha=0.3)

    ax = axes[0]
    ax.fill_between(t, d.value(mean["lower"]), d.value(mean["upper"]), color=LINE_COLOURS[0], alpha=0.2,
                    linewidth=0, label="95 % band")
    ax.plot(t, d.value(mean["value"]), color=LINE_COLOURS[0], linewidth=1.3, gid="trend:mean",
            label="face mean")
    shade(ax)
    ax.set_ylabel(f"face mean [{d.symbol}]")
    ax.set_title(f"{d.on_face.capitalize()} over the log", fontsize=10)
    ax.legend(fontsize=7, frameon=False, ncols=3)
    if zones:
        ax_z, ax_c = axes[1], axes[2]
        for i, z in enumerate(zones):
            colour = LINE_COLOURS[i % len(LINE_COLOURS)]
            flag = np.asarray(z["flag"], bool)
            ax_z.fill_between(t, d.value(z["lower"]), d.value(z["upper"]), color=colour, alpha=0.15, linewidth=0)
            label = str(z["name"]).replace("$", r"\$")    # user text: no mathematics
            ax_z.plot(t, d.value(z["value"]), color=colour, linewidth=1.2, label=label,
                      gid=f"trend:zone:{z['name']}")
            change, limit = d.diff(z["change"]), d.diff(z["limit"])
            ax_c.fill_between(t, -limit, limit, color=colour, alpha=0.10, linewidth=0)
            ax_c.plot(t, change, color=colour, linewidth=1.2, label=label)
            if flag.any():
                for a, y in ((ax_z, d.value(z["value"])), (ax_c, change)):
                    a.plot(t[flag], np.asarray(y)[flag], linestyle="none", marker="v", markersize=6,
                           markerfacecolor=colour, markeredgecolor="#d03c50", markeredgewidth=1.4,
                           gid=f"flagged:{z['name']}")
        shade(ax_z)
        shade(ax_c)
        ax_c.axhline(0.0, color="#555555", linewidth=0.8)
        ax_z.set_ylabel(f"zone mean [{d.symbol}]")
        ax_z.set_title("Zones with their 95 % bands (▼ flagged)", fontsize=9)
        ax_z.legend(fontsize=7, frameon=False, ncols=min(len(zones), 4))
        ax_c.set_ylabel(f"change from reference [{d.diff_symbol}]")
        ax_c.set_title("Change of each zone from the reference window; shaded: flag limit "
                       "(beyond it a zone is flagged)", fontsize=9)
    axes[-1].set_xlabel(trend.get("time_label", "time"))
    return fig
