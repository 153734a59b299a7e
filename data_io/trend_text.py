"""Text of a trend for people: the report's trend section (HTML) and the console lines,
from the trend's summary dict (file units: degC / K or W/m^2)."""

from __future__ import annotations

import base64
import math
from html import escape

import numpy as np

from .display import FILE_UNITS


def _every_words(n) -> str:
    """'every row', 'every 2nd row', 'every 60th row'."""
    if n == 1:
        return "every row"
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"every {n}{suffix} row"


def _fmt(x, digits=4):
    return "–" if x is None or not np.isfinite(x) else f"{x:.{digits}g}"


def trend_html(summary: dict, figure_png: bytes, reader_timestamps: bool) -> str:
    """The report's trend section (safe HTML: every user or data string escaped)."""
    unit = summary["unit"]
    du = FILE_UNITS[summary["quantity"]][1]
    e = lambda s: escape(str(s), quote=True)  # noqa: E731
    ref = summary["reference_window"]
    when = (f"{ref['start_iso']} to {ref['end_iso']}" if "start_iso" in ref
            else f"t = {ref['start_s']:.6g} to {ref['end_s']:.6g} s")
    if summary["mode"] == "every":
        what = f"{_every_words(summary['every'])} of the log ({summary['trend_rows']} rows)"
    else:
        what = (f"every steady window: {summary['windows']['steady']} of {summary['windows']['total']} windows of "
                f"{summary['window_s']:g} s had every sensor within {summary['drift_K']:g} K")
    parts = [f"<p>Inverted: {e(what)}, from {e(summary['rows_read'])} logged rows. The reference is the first "
             f"steady window ({e(when)}); its fit is the one reported above, and it fixes the smoothing "
             f"strength (α = {summary['strength']:.3g}) and the sensors of the whole trend.</p>",
             f"<p>A zone's change is estimated from the difference of the readings to the reference window, "
             f"in which the thermocouple offsets (the same at every time) cancel; its sd is that of the "
             f"random noise only. A zone is flagged when its change exceeds "
             f"{summary['flag_threshold_sd']:.2f} times that sd (Bonferroni over {summary['flag_comparisons']} "
             f"comparisons at a family-wise {summary['flag_family_level']:.0%}). A large change of one zone "
             f"spreads a little into its neighbours through the fit's smoothing, so judge flags by the size "
             f"of the change: the zone that moves most is where the change is.</p>"]
    rows = []
    first, last = summary.get("first_row"), summary.get("last_row")

    def shown(row, z):          # a zone mean of a row (in the summary's unit)
        return row["zones"][z] if row else None
    for z in summary["zones"]:
        f = next((x for x in summary["flags"] if x["zone"] == z), None)
        flagged = "no"
        if f:
            at = f.get("first_flagged_start_iso") or f"t = {f['first_flagged_start_s']:.6g} s"
            flagged = f"yes, from {at} ({f['flagged_rows']} row{'' if f['flagged_rows'] == 1 else 's'})"
        ch = last["changes"].get(z) if last else None
        rows.append(f"<tr><td>{e(z)}</td><td class=\"num\">{e(_fmt(shown(first, z), 6))}</td>"
                    f"<td class=\"num\">{e(_fmt(shown(last, z), 6))}</td>"
                    f"<td class=\"num\">{e(_fmt(ch[0] if ch else None, 3))} ± {e(_fmt(ch[1] if ch else None, 2))}</td>"
                    f"<td>{e(flagged)}</td></tr>")
    if rows:
        parts.append(f"<table><tr><th>zone</th><th>first row [{e(unit)}]</th><th>last row [{e(unit)}]</th>"
                     f"<th>last change [{e(du)}] ± sd</th><th>flagged</th></tr>" + "".join(rows) + "</table>")
    else:
        parts.append("<p>The case defines no zones on the estimated face, so nothing is flagged; add "
                     "[[zones]] to the case to follow heater zones.</p>")
    data = base64.b64encode(figure_png).decode("ascii")
    caption = ("The face mean and each zone over the log with 95 % bands; below, each zone's change from the "
               "reference window with its flag limit; ▼ marks flagged rows.")
    parts.append(f'<figure id="figure-trend"><img alt="{e(caption)}" src="data:image/png;base64,{data}">'
                 f"<figcaption>{e(caption)}</figcaption></figure>")
    return "\n".join(parts)


def console_lines(summary: dict, folder) -> str:
    unit = summary["unit"]
    du = FILE_UNITS[summary["quantity"]][1]
    ref = summary["reference_window"]
    lines = [f"trend of the {summary['face']} face {summary['quantity'].replace('_', ' ')} ({unit}) over "
             f"{summary['log']}:",
             f"  rows read       {summary['rows_read']}; windows of {summary['window_s']:g} s: "
             f"{summary['windows']['steady']} steady of {summary['windows']['total']}",
             f"  trend rows      {summary['trend_rows']}"
             + (f" ({_every_words(summary['every'])})" if summary["mode"] == "every" else " (steady windows)"),
             f"  reference       t = {ref['start_s']:.6g} to {ref['end_s']:.6g} s; strength "
             f"{summary['strength']:.3g}; {len(summary['sensors_used'])} sensors"
             + (f" (set aside: {', '.join(summary['set_aside'])})" if summary["set_aside"] else ""),
             f"  flag limit      |change| > {summary['flag_threshold_sd']:.2f} sd"]
    last = summary.get("last_row")
    for z in summary["zones"]:
        f = next((x for x in summary["flags"] if x["zone"] == z), None)
        ch = last["changes"][z] if last else (math.nan, math.nan)
        text = f"  zone {z:<10} last change {_fmt(ch[0], 3)} +- {_fmt(ch[1], 2)} {du}"
        if f:
            text += (f"  FLAGGED from t = {f['first_flagged_start_s']:.6g} s ({f['flagged_rows']} "
                     f"row{'' if f['flagged_rows'] == 1 else 's'})")
        lines.append(text)
    for w in summary["warnings"]:
        lines.append(f"  warning: {w}")
    lines.append(f"outputs in {folder}")
    return "\n".join(lines)
