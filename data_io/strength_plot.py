"""The figure of how the smoothing strength was chosen: the criterion against the strength,
and the trade-off between misfit and roughness (the L-curve).  Built like data_io.plots."""

from __future__ import annotations

import numpy as np
from matplotlib.figure import Figure

from .display import display_for
from .figure_style import LINE_COLOURS, LITERAL, new_figure

CRITERION_WORDS = {
    "log_evidence": "how well α explains the readings\n(log marginal likelihood)",
    "gcv": "generalized cross-validation function",
    "curvature": "curvature of the L-curve",
    "chi2": "chi-square of the weighted residuals",
}
METHOD_WORDS = {"evidence": "the evidence (marginal likelihood)", "gcv": "generalized cross-validation",
                "lcurve": "the L-curve corner", "discrepancy": "the discrepancy principle", "fixed": "the case file"}


def _method_words(method: str) -> str:
    words = METHOD_WORDS.get(method)
    return f"{words} ({method})" if words and method not in words else (words or method)


#: depth [nepers] of the log-evidence curve shown below its peak
EVIDENCE_DEPTH = 60.0


def _positive(x):
    x = np.asarray(x, float)
    return np.where(x > 0, x, np.nan)


def _grid(ax):
    """Major grid lines; minor ticks and grid lines too unless a log axis spans over 4
    decades (then they are a hundred ticks that cost half the figure's drawing time, 1.2 ->
    0.6 s on the demo, and read as a tint)."""
    wide = any(scale == "log" and np.log10(max(hi, lo) / min(hi, lo)) > 4
               for scale, (lo, hi) in ((ax.get_xscale(), ax.get_xlim()), (ax.get_yscale(), ax.get_ylim()))
               if lo > 0 and hi > 0)
    if wide:
        ax.minorticks_off()
    ax.grid(True, which="major" if wide else "both", alpha=0.25)


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
    fig = new_figure(10.0, 4.4)
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
            ax1.set_ylabel(CRITERION_WORDS[crit][:-1] + ", relative to its maximum)")
            if np.nanmin(v) < -EVIDENCE_DEPTH:
                ax1.set_ylim(-EVIDENCE_DEPTH, 0.08 * EVIDENCE_DEPTH)
        else:
            ax1.set_ylabel(CRITERION_WORDS.get(crit, crit))
        ax1.legend(fontsize=8, frameon=False)
    ax1.set_xlabel(f"smoothing strength α [{alpha_unit}] (SI)")
    note = "\n(answers averaged over α; dashed line: most probable α)" \
        if result.summary.get("strength_averaged") else ""
    ax1.set_title(f"How smooth the estimate is made: strength α chosen by {_method_words(method)}{note}", fontsize=9, **LITERAL)
    _grid(ax1)

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
    ax2.set_xlabel("misfit to the readings (in units of their stated uncertainty)")
    ax2.set_ylabel(f"roughness of the estimated face [{d.diff_symbol}]")
    ax2.set_title("Trade-off between misfit and roughness (L-curve)", fontsize=9)
    _grid(ax2)
    return fig


