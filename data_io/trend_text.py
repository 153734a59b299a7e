"""Text of a trend for people: the report's opening flags, its trend section (HTML) and the
console lines, from the trend's summary dict (file units: degC / K or W/m^2).  Flags come
first; "±" is the half-width of the 95 % interval and says "(95 %)"; numbers have 3
significant digits (data_io.report_format); the report shows heat flux in the display unit
of data_io.display (kW/m^2 on a face whose largest value reaches 10 kW/m^2), the console in
the file unit."""

from __future__ import annotations

import base64
import math
from html import escape

import numpy as np

from .display import FILE_UNITS, display_of, symbol
from .report_format import eng, pm95_of


def _window_count(summary) -> str:
    """'22 of 24 complete windows (and 1 incomplete)': the steady ones among the complete, as
    the not-steady warning counts them."""
    w = summary["windows"]
    rest = w["total"] - w["complete"]
    return (f"{w['steady']} of {w['complete']} complete windows"
            + (f" (and {rest} incomplete, not used)" if rest else ""))


def _every_words(n) -> str:
    """'every row', 'every 2nd row', 'every 60th row'."""
    if n == 1:
        return "every row"
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"every {n}{suffix} row"


def _finite(x) -> bool:
    return x is not None and np.isfinite(x)


class _Units:
    """How a trend's values are shown: file units on the console; in the report the display
    rule (kW/m^2 for a face reaching KILO_FLUX), judged on the reference fit's range."""

    def __init__(self, summary: dict, report: bool):
        q = summary["quantity"]
        unit, diff_unit = summary["unit"], FILE_UNITS[q][1]
        self.scale = 1.0
        if report and q == "heat_flux":
            ref = summary.get("reference_fit") or {}
            d = display_of(q, summary.get("face", ""), [ref.get("min", np.nan), ref.get("max", np.nan)])
            unit = diff_unit = d.unit
            self.scale = 1e-3 if d.unit == "kW/m^2" else 1.0
        self.unit = symbol(unit) if report else unit
        self.diff_unit = symbol(diff_unit) if report else diff_unit

    def value(self, x) -> str:
        return eng(x * self.scale) if _finite(x) else "–"

    def change(self, x, sd) -> str:
        """'-4.98 ± 0.29 kW/m² (95 %)' (report) or '-4980 ± 290 W/m^2 (95 %)' (console)."""
        if not _finite(x):
            return "–"
        return pm95_of(x * self.scale, sd * self.scale if _finite(sd) else None, self.diff_unit)


def log_time(t, span=None) -> str:
    """A time on the log's axis, in one unit for the whole log: hours when the log (span: its
    last time [s]; default t itself) reaches 2 h, as on the trend figure, else seconds."""
    return f"{eng(t / 3600.0)} h" if abs(t if span is None else span) >= 7200.0 else f"{eng(t)} s"


def _span(summary) -> float:
    """The log's last time [s] the summary holds: its last row's, or a flag's or a sensor
    fault's when later (0 without any)."""
    times = [(summary.get("last_row") or {}).get("end_s")]
    times += [f.get("first_flagged_end_s", f.get("first_flagged_start_s")) for f in summary.get("flags") or ()]
    times += [f.get("last_start_s") for f in summary.get("sensor_faults") or ()]
    return max([float(t) for t in times if t is not None and _finite(t)] or [0.0])


def _when(f, span) -> str:
    return f.get("first_flagged_start_iso") or f"t = {log_time(f['first_flagged_start_s'], span)}"


def _rows(n) -> str:
    return f"{n} row{'' if n == 1 else 's'}"


def flag_sentences(summary: dict, report: bool = True) -> list[str]:
    """The trend's flags in plain words, first thing a reader sees."""
    u = _Units(summary, report)
    last = summary.get("last_row") or {}
    span = _span(summary)
    out = []
    def size(f):                  # the zone that moves most first
        ch = (last.get("changes") or {}).get(f["zone"])
        return -abs(ch[0]) if ch and _finite(ch[0]) else 0.0
    for f in sorted(summary["flags"], key=size):
        z = f["zone"]
        ch = (last.get("changes") or {}).get(z)
        text = f"Zone {z} changed beyond its flag limit from {_when(f, span)} ({_rows(f['flagged_rows'])} flagged)"
        if ch:
            text += f"; by the last row it has changed by {u.change(ch[0], ch[1])} from the reference window"
        lone = f.get("lone_sensor")
        if lone:
            text += (f". In {f['rests_on_one_sensor'][lone]} of the {_rows(f['support_rows_examined'])} examined "
                     f"the flag rests on sensor {lone} alone (without its reading the other sensors show no "
                     f"change there): a drifting or loose thermocouple there would look the same, so check "
                     f"{lone} before reading this as the heater's")
        out.append(text + ".")
    if not summary["flags"]:
        n = len(summary["zones"])
        out.append(f"No zone changed beyond its flag limit over the log ({summary['trend_rows']} rows inverted"
                   + (f", {n} zones followed)." if n else "; the case defines no zones)."))
    for f in summary.get("sensor_faults") or ():
        when = f.get("first_start_iso") or f"t = {log_time(f['first_start_s'], span)}"
        out.append(f"Sensor {f['sensor']} disagreed with the others from {when} and was left out of "
                   f"{_rows(f['rows'])}: check that thermocouple (a fault, not a heater change).")
    return out


def _flag_list(summary: dict) -> str:
    return "<ul>" + "".join(f"<li>{escape(t, quote=False)}</li>" for t in flag_sentences(summary)) + "</ul>"


def trend_lead(summary: dict) -> str:
    """The flags as safe HTML, to open the trend report."""
    return "<p><strong>Trend over the log:</strong></p>" + _flag_list(summary)


def trend_html(summary: dict, figure_png: bytes, reader_timestamps: bool) -> str:
    """The report's trend section (safe HTML: every user or data string escaped): the flags,
    the table of zones, the figure, then how the flags are set."""
    u = _Units(summary, True)
    span = _span(summary)
    e = lambda s: escape(str(s), quote=True)  # noqa: E731
    ref = summary["reference_window"]
    when = (f"{ref['start_iso']} to {ref['end_iso']}" if "start_iso" in ref
            else f"t = {log_time(ref['start_s'], span)} to {log_time(ref['end_s'], span)}")
    if summary["mode"] == "every":
        what = f"{_every_words(summary['every'])} of the log ({summary['trend_rows']} rows)"
    else:
        what = (f"every steady window: {_window_count(summary)} of {summary['window_s']:g} s had every sensor "
                f"within {summary['drift_K']:g} K")
    parts = [_flag_list(summary)]
    rows = []
    first, last = summary.get("first_row"), summary.get("last_row")

    def shown(row, z):          # a zone mean of a row (in the summary's unit)
        return row["zones"][z] if row else None
    flagged_first = sorted(summary["zones"], key=lambda z: not any(x["zone"] == z for x in summary["flags"]))
    for z in flagged_first:
        f = next((x for x in summary["flags"] if x["zone"] == z), None)
        flagged = f"yes, from {_when(f, span)} ({_rows(f['flagged_rows'])})" if f else "no"
        ch = last["changes"].get(z) if last else None
        rows.append(f"<tr><td>{e(z)}</td><td>{e(flagged)}</td>"
                    f"<td class=\"num\">{e(u.change(ch[0], ch[1]) if ch else '–')}</td>"
                    f"<td class=\"num\">{e(u.value(shown(first, z)))}</td>"
                    f"<td class=\"num\">{e(u.value(shown(last, z)))}</td></tr>")
    if rows:
        parts.append(f"<table><tr><th>zone</th><th>flagged</th><th>change by the last row</th>"
                     f"<th>first row [{e(u.unit)}]</th><th>last row [{e(u.unit)}]</th></tr>"
                     + "".join(rows) + "</table>")
    else:
        parts.append("<p>The case defines no zones on the estimated face, so nothing is flagged; add "
                     "[[zones]] to the case to follow heater zones.</p>")
    data = base64.b64encode(figure_png).decode("ascii")
    caption = ("The face mean and each zone over the log with 95 % bands; below, each zone's change from the "
               "reference window with its flag limit; ▼ marks flagged rows.")
    parts.append(f'<figure id="figure-trend"><img alt="{e(caption)}" src="data:image/png;base64,{data}">'
                 f"<figcaption>{e(caption)}</figcaption></figure>")
    parts += [f"<p>Inverted: {e(what)}, from {e(summary['rows_read'])} logged rows. The reference is the first "
              f"steady window ({e(when)}); its fit, made as `fit` makes it, is the one reported above. "
              f"The trend uses the sensors it kept (less any the trend's own strength sets aside, named in the "
              f"warnings); its smoothing strength comes from the {e(summary['strength_method'])}. Every row's "
              f"absolute figures also carry what that fit knows it cannot see, so their sds are at least the "
              f"fit's.</p>",
              f"<p>A zone's change is estimated from the difference of the readings to the reference window, "
              f"in which the thermocouple offsets (the same at every time) cancel; its uncertainty is the "
              f"random noise's and what the sensors cannot see of the change (the spread of a change between "
              f"them, which the fit's smoothing fills in). A zone is flagged when its change exceeds "
              f"{summary['flag_threshold_sd']:.2f} of its standard deviations (a limit that keeps the "
              f"chance of any false flag over all {summary['flag_comparisons']} rows and zones below "
              f"{summary['flag_family_level']:.0%}). A large change of one zone spreads a little into its "
              f"neighbours through the fit's smoothing, within their bands; the zone that moves most is "
              f"where the change is. Each zone may change by a step of its own over its whole area as well "
              f"as smoothly, so a heater zone's loss keeps its edges; a change that follows no zone is "
              f"smoothed and comes out somewhat smaller than it is.</p>",
              f"<p>Before a row is inverted, each sensor's change is checked against what the other sensors "
              f"predict (a limit of {summary.get('sensor_check_threshold_sd', math.nan):.2f} sd, over all rows "
              f"and sensors); one beyond it is left out of that row, so that a thermocouple failing partway "
              f"through the log is not read as a heater's change.</p>"]
    own = [w for w in summary.get("warnings") or ()
           if w not in set((summary.get("reference_fit") or {}).get("warnings") or ())]
    if own:
        parts.append("<p>Warnings of the trend:</p><ul class=\"warnings\">"
                     + "".join(f"<li>{e(w)}</li>" for w in own) + "</ul>")
    return "\n".join(parts)


def _reference_sensors(summary: dict) -> int:
    """The sensors the reference window's fit used (not those without a reading there)."""
    used = (summary.get("reference_fit") or {}).get("n_sensors_used")
    return int(used) if used is not None else len(summary["sensors_used"])


def console_lines(summary: dict, folder) -> str:
    """The trend for the terminal: the flags first, then what was read, in file units."""
    u = _Units(summary, False)
    ref = summary["reference_window"]
    span = _span(summary)
    lines = [f"trend of the {summary['face']} face {summary['quantity'].replace('_', ' ')} ({summary['unit']}) over "
             f"{summary['log']}:"]
    lines += [f"  {t}" for t in flag_sentences(summary, report=False)]
    lines += [f"  rows read       {summary['rows_read']}; windows of {summary['window_s']:g} s: "
              f"{_window_count(summary)}",
              f"  trend rows      {summary['trend_rows']}"
              + (f" ({_every_words(summary['every'])})" if summary["mode"] == "every" else " (steady windows)"),
              f"  reference       t = {log_time(ref['start_s'], span)} to {log_time(ref['end_s'], span)}; "
              f"{_reference_sensors(summary)} sensors in its fit"
              + (f" (set aside: {', '.join(summary['set_aside'])})" if summary["set_aside"] else ""),
              f"  flag limit      |change| > {summary['flag_threshold_sd']:.2f} sd of the change"]
    last = summary.get("last_row")
    for z in summary["zones"]:
        ch = last["changes"][z] if last else (math.nan, math.nan)
        flagged = any(f["zone"] == z for f in summary["flags"])
        lines.append(f"  zone {z:<10} last change {u.change(ch[0], ch[1])}" + ("  FLAGGED" if flagged else ""))
    for w in summary["warnings"]:
        lines.append(f"  warning: {w}")
    lines.append(f"outputs in {folder}")
    return "\n".join(lines)
