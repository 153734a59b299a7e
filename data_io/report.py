"""The HTML report of a fit: one self-contained page (inline CSS, figures embedded as
base64 PNG data URIs, no scripts, no links to other files).

Sections: the case, the answers (face mean, extremes with their positions,
non-uniformity, heat into the part, zones, smoothing strength, fit quality), the sensors
with their health flags, warnings, figures, any extra sections supplied by the caller, and
cautions.  Every string that comes from the user or from the data (sensor names, case
text, zone names, warnings, titles) is HTML-escaped; nothing is evaluated.  Values arrive
in SI from the inverse layer and are shown in user units through `data_io.units`
(temperatures degC, temperature differences K, lengths mm, angles deg).
"""

from __future__ import annotations

import base64
import math
from pathlib import Path

from ..inverse.bands import Z95

from . import plots
from .csv_out import atomic_write_text
from .report_format import (_celsius, _celsius_number, _deg, _e, _finite, _Fmt, _kelvin_diff, _mm, _position,
                            _power, sig)
from .units import from_si, to_display, ureg

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

FACE_PLACE = {"bottom": "z = 0", "top": "z = height", "side": "r = radius"}

FIGURE_CAPTIONS = {
    "face_map": "Estimated face (posterior mean). Markers: thermocouples projected onto the face; "
                "a cross marks a sensor set aside.",
    "band_width": "Width of the 95 % band of the estimate. Narrow near the sensors, wide where no "
                  "sensor looks.",
    "profiles": "The estimate along lines of the face at several angles; shading is the 95 % band.",
    "sensors": "Per sensor: reading minus its prediction from the other sensors (whiskers ±2 sd) and "
               "the residual of the fit; below, the screening score against the set-aside threshold.",
    "strength": "How the smoothing strength was chosen: the criterion against the strength, and the "
                "trade-off between misfit and roughness.",
}

CAUTIONS = (
    "Heated hardware can burn. A part, its fixtures and the air around it can stay hot long "
    "after the heater is switched off.",
    "Heaters are electrical equipment. Work on heaters, wiring and thermocouples only as your "
    "site's electrical-safety rules allow.",
    "The numbers and maps in this report are estimates from a model fitted to a few readings. "
    "They support engineering judgement; they do not replace direct measurement, interlocks or "
    "inspection.",
    "Local codes and licensed practice govern the design, operation and maintenance of heated "
    "equipment.",
)

CSS = """
:root { --ink: #1d232a; --muted: #5a6470; --line: #d5dbe1; --band: #f3f6f8;
        --aside: #fbe3e6; --suspect: #fdf1d6; --accent: #1f5f8b; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #ffffff;
       font: 15px/1.45 system-ui, -apple-system, "Segoe UI", Roboto, sans-serif; }
main { max-width: 1060px; margin: 0 auto; padding: 24px 28px 48px; }
h1 { font-size: 1.55em; margin: 0 0 4px; }
h2 { font-size: 1.2em; margin: 32px 0 10px; padding-bottom: 4px;
     border-bottom: 2px solid var(--accent); }
h3 { font-size: 1.02em; margin: 20px 0 8px; }
p.sub { color: var(--muted); margin: 0 0 10px; }
nav { font-size: 0.9em; color: var(--muted); margin: 10px 0 0; }
nav a { color: var(--accent); margin-right: 12px; text-decoration: none; }
table { border-collapse: collapse; margin: 6px 0 12px; font-size: 0.92em; }
th, td { border: 1px solid var(--line); padding: 4px 8px; vertical-align: top; }
th { background: var(--band); text-align: left; font-weight: 600; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.kv th { width: 15em; }
tr.set-aside td { background: var(--aside); }
tr.suspect td { background: var(--suspect); }
.tag { display: inline-block; padding: 0 6px; border-radius: 3px; font-size: 0.85em; }
.tag.set-aside { background: #d03c50; color: #fff; }
.tag.suspect { background: #f0b43c; color: #1d232a; }
.tag.ok { background: #e3ecf2; color: #1d232a; }
ul.warnings li { margin-bottom: 4px; }
figure { margin: 14px 0 22px; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--line); }
figcaption { color: var(--muted); font-size: 0.9em; margin-top: 4px; }
section.cautions { background: #fff7e8; border-left: 5px solid #d08a00;
                   padding: 4px 16px 10px; margin-top: 32px; }
section.cautions h2 { border-bottom: none; }
footer { color: var(--muted); font-size: 0.82em; margin-top: 28px; }
"""


# ---------------------------------------------------------------------- case
def _datum(value, kind: str) -> str:
    if callable(value):
        return "given as a profile"
    if kind == "temperature":
        return _celsius(value)
    return f"{to_display(float(value), 'heat_flux', 'W/m^2'):.6g} W/m²"


def _condition_text(cond) -> str:
    name = getattr(cond, "condition", type(cond).__name__)
    if name == "temperature":
        return f"temperature {_datum(cond.value, 'temperature')}"
    if name == "flux":
        return f"heat flux into the part {_datum(cond.value, 'heat_flux')}"
    if name == "insulated":
        return "insulated (no heat flow)"
    if name == "convection":
        h = to_display(float(cond.h), "heat_transfer_coefficient")
        return f"convection, h = {h:.4g} W/(m²·K), ambient {_datum(cond.ambient, 'temperature')}"
    if name == "unknown-temperature":
        return "temperature unknown: estimated in this report"
    if name == "unknown-flux":
        return "heat flux unknown: estimated in this report"
    return str(name)


def default_case_text(result) -> list:
    """(label, value) rows describing the part and its faces, from the result itself."""
    cyl = result.cylinder
    rows = [("radius", f"{from_si(cyl.radius, 'length', 'mm'):.6g} mm")]
    if math.isinf(cyl.height):
        rows.append(("height", "infinite (semi-infinite part)"))
    else:
        rows.append(("height", f"{from_si(cyl.height, 'length', 'mm'):.6g} mm"))
    if getattr(cyl, "conductivity", None) is not None:
        rows.append(("thermal conductivity",
                     f"{to_display(cyl.conductivity, 'conductivity'):.4g} W/(m·K)"))
    faces = getattr(getattr(result, "design", None), "faces", None) or {}
    for name, cond in faces.items():
        rows.append((f"{name} face ({FACE_PLACE.get(name, name)})", _condition_text(cond)))
    n_all = len(result.sensors)
    n_used = result.summary.get("n_sensors_used", n_all)
    rows.append(("thermocouples", f"{n_all} listed, {n_used} used in the fit"))
    return rows


def _kv_table(rows) -> str:
    body = "".join(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>" for k, v in rows)
    return f'<table class="kv">{body}</table>'


# ---------------------------------------------------------------------- answers
def _answers(result, fmt: _Fmt) -> str:
    s = result.summary
    d = fmt.d
    mean, mean_sd = s.get("mean"), s.get("mean_sd")
    rows = [
        ("estimated face", f"{d.face_words}: {d.words} [{d.symbol}]"),
        ("face mean", f"{fmt.value(mean)} (sd {fmt.sd(mean_sd)}; 95 % band "
                      f"{fmt.band(mean - Z95 * mean_sd, mean + Z95 * mean_sd)})"
         if _finite(mean) and _finite(mean_sd) else fmt.value(mean)),
        ("minimum", f"{fmt.value(s.get('min'))} (sd {fmt.sd(s.get('min_sd'))}) "
                    f"{_position(result.face, s.get('min_at'))}"),
        ("maximum", f"{fmt.value(s.get('max'))} (sd {fmt.sd(s.get('max_sd'))}) "
                    f"{_position(result.face, s.get('max_at'))}"),
        ("non-uniformity (maximum − minimum)",
         f"{fmt.diff(s.get('nonuniformity'))} (sd {fmt.sd(s.get('nonuniformity_sd'))})"),
        ("heat into the part through this face",
         _power(s.get("total_power_W"), s.get("total_power_sd_W"))),
    ]
    alpha = s.get("strength")
    method = s.get("strength_method", "")
    how = f"α = {alpha:.3g} (SI), chosen by {method}" if _finite(alpha) else f"chosen by {method}"
    if s.get("strength_averaged"):
        how += "; answers averaged over α, weighted by how well each α explains the readings"
    chi2, edf, n_used = s.get("chi2"), s.get("effective_parameters"), s.get("n_sensors_used")
    if _finite(chi2) and _finite(edf) and _finite(n_used):
        chi2_text = (f"{chi2:.3g} for {int(n_used)} readings (about {max(n_used - edf, 0.0):.1f} "
                     "expected when the stated uncertainties hold)")
    else:
        chi2_text = f"{chi2:.3g}" if _finite(chi2) else "–"
    edf_text = (f"{edf:.2f} of {s.get('basis_size', '?')} basis functions "
                f"({s.get('harmonics', '?')} harmonics, {s.get('terms', '?')} terms each)"
                if _finite(edf) else "–")
    fit_rows = [
        ("smoothing strength", how),
        ("smoothness prior", f"penalizes the {s.get('smoothing', '?')} of the profile"),
        ("chi-square of the weighted residuals", chi2_text),
        ("effective number of parameters", edf_text),
    ]
    out = ["<h3>The face</h3>", _kv_table(rows), "<h3>The fit</h3>", _kv_table(fit_rows)]
    cal = s.get("calibrated")
    if cal:
        out.append("<h3>Calibrated face parameters</h3>")
        out.append(_calibrated_table(cal))
    zones = s.get("zones") or []
    if zones:
        out.append("<h3>Zones</h3>")
        out.append(_zones_table(zones, fmt))
    return "\n".join(out)


def _calibrated_table(cal: dict) -> str:
    rows = []
    for info in cal.values():
        if not isinstance(info, dict):
            continue
        what, value, sd = info.get("parameter"), info.get("value"), info.get("sd")
        if what == "h":
            v = f"{to_display(value, 'heat_transfer_coefficient'):.4g} W/(m²·K)" if _finite(value) else "–"
            u = f"{sig(sd)} W/(m²·K)" if _finite(sd) else "–"
        else:
            v, u = _celsius(value), _kelvin_diff(sd)
        rows.append(f"<tr><td>{_e(info.get('face', ''))}</td><td>{_e(what)}</td>"
                    f'<td class="num">{_e(v)}</td><td class="num">{_e(u)}</td></tr>')
    return ("<table><tr><th>face</th><th>parameter</th><th>value</th><th>sd</th></tr>"
            + "".join(rows) + "</table>")


def _zones_table(zones, fmt: _Fmt) -> str:
    d = fmt.d
    flux = d.quantity == "heat_flux"
    head = ["zone", "area [cm²]", f"mean [{d.symbol}]", f"sd [{d.diff_symbol}]",
            f"95 % band [{d.symbol}]", f"difference from face mean [{d.diff_symbol}]"]
    if flux:
        head.append("heat in [W]")
    rows = []
    for z in zones:
        area = z.get("area_m2")
        area_txt = sig(ureg.Quantity(float(area), "m^2").to("cm^2").magnitude, 3) if _finite(area) else "–"
        cells = [_e(z.get("name", "")), area_txt, fmt.number(z.get("mean")),
                 sig(d.diff(z.get("sd"))) if _finite(z.get("sd")) else "–",
                 f"{fmt.number(z.get('lower'))} to {fmt.number(z.get('upper'))}",
                 fmt.diff_number(z.get("deviation_from_face_mean"))]
        if flux:
            cells.append(_power(z.get("power_W"), z.get("power_sd_W")).replace(" W", ""))
        rows.append("<tr><td>" + cells[0] + "</td>" +
                    "".join(f'<td class="num">{_e(c)}</td>' for c in cells[1:]) + "</tr>")
    return ("<table><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>"
            + "".join(rows) + "</table>")


# ---------------------------------------------------------------------- sensors
def _sensor_table(result) -> str:
    sens = result.sensors
    score_col = "score" if "score" in sens else "standardized_loo"
    head = ["sensor", "r [mm]", "θ [°]", "z [mm]", "measured [°C]", "fitted [°C]", "residual [K]",
            "prediction from the others [°C]", "reading − prediction [K]", "± 2 sd [K]",
            "score", "flag"]
    flags = plots._flags(result)  # noqa: SLF001 (same layer)
    rows = []
    for i, (_, row) in enumerate(sens.iterrows()):
        flag = str(flags[i])
        cls = {"set aside": "set-aside", "suspect": "suspect"}.get(flag, "ok")
        measured = row.get("measured")
        loo = row.get("loo_predicted")
        cells = [
            _mm(row.get("r_m")), _deg(row.get("theta_rad")), _mm(row.get("z_m")),
            _celsius_number(measured), _celsius_number(row.get("fitted")),
            f"{from_si(row.get('residual'), 'temperature_difference', 'K'):.3f}"
            if _finite(row.get("residual")) else "–",
            _celsius_number(loo),
            f"{from_si(measured - loo, 'temperature_difference', 'K'):.3f}"
            if _finite(measured) and _finite(loo) else "–",
            sig(2 * from_si(row.get("loo_sd"), "temperature_difference", "K"))
            if _finite(row.get("loo_sd")) else "–",
            f"{row.get(score_col):+.2f}" if _finite(row.get(score_col)) else "–",
        ]
        rows.append(f'<tr class="{cls}"><td>{_e(row.get("sensor"))}</td>'
                    + "".join(f'<td class="num">{_e(c)}</td>' for c in cells)
                    + f'<td><span class="tag {cls}">{_e(flag)}</span></td></tr>')
    table = ("<table><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>"
             + "".join(rows) + "</table>")
    aside = list(result.summary.get("set_aside") or [])
    t = plots.sensor_threshold(result)
    if aside:
        lead = ("<p>Set aside (left out of the fit; their row shows the prediction of the final fit): "
                + ", ".join(f"<strong>{_e(s)}</strong>" for s in aside) + ".</p>")
    else:
        lead = "<p>No sensor was set aside.</p>"
    note = (f"<p class=\"sub\">The score compares each reading with what the other sensors predict, "
            f"in predictive standard deviations; beyond ±{t:.2f} a sensor is treated as faulty or "
            f"misplaced. Temperatures in °C, differences in K.</p>")
    return lead + note + table


# ---------------------------------------------------------------------- figures
def _png_bytes(obj) -> bytes:
    """PNG bytes from a Figure, PNG bytes, or the path of a PNG file."""
    if hasattr(obj, "savefig"):
        return plots.figure_png(obj)
    if isinstance(obj, (bytes, bytearray)):
        data = bytes(obj)
    elif isinstance(obj, (str, Path)):
        data = Path(obj).read_bytes()
    else:
        raise TypeError(f"a figure must be a matplotlib Figure, PNG bytes or a PNG path, got {type(obj).__name__}")
    if not data.startswith(PNG_SIGNATURE):
        raise ValueError("figure data is not a PNG image")
    return data


def _figures_html(figures: dict) -> str:
    parts = []
    for name, obj in figures.items():
        data = base64.b64encode(_png_bytes(obj)).decode("ascii")
        caption = FIGURE_CAPTIONS.get(name, str(name))
        parts.append(f'<figure id="figure-{_e(name)}"><img alt="{_e(caption)}" '
                     f'src="data:image/png;base64,{data}"><figcaption>{_e(caption)}</figcaption></figure>')
    return "\n".join(parts)


# ---------------------------------------------------------------------- page
def _version() -> str:
    try:
        from importlib.metadata import version
        return version("heatsight")
    except Exception:  # not installed as a distribution
        return ""


def render_report(result, *, case_text=None, title=None, figures=None, extra_sections=None) -> str:
    """The report page as HTML text.

    case_text: list of (label, value) strings describing the case as the user wrote it
    (default: built from the result's part and face conditions).  title: page heading.
    figures: dict name -> Figure | PNG bytes | PNG path (default: all figures of
    `plots.FIGURE_NAMES`; an empty dict leaves figures out).  extra_sections: list of
    (heading, html_fragment); the heading is escaped, the fragment must already be safe.
    """
    fmt = _Fmt(result)
    d = fmt.d
    title = title or f"heatsight: estimated {d.on_face}"
    rows = default_case_text(result) if case_text is None else [(str(k), str(v)) for k, v in case_text]
    if figures is None:
        figures = plots.all_figures(result)
    warnings = list(result.summary.get("warnings") or result.warnings or [])

    sections = [("case", "The case", _kv_table(rows)),
                ("answers", "The answers", _answers(result, fmt)),
                ("sensors", "The sensors", _sensor_table(result))]
    if warnings:
        sections.append(("warnings", "Warnings",
                         '<ul class="warnings">' + "".join(f"<li>{_e(w)}</li>" for w in warnings)
                         + "</ul>"))
    else:
        sections.append(("warnings", "Warnings", "<p>No warnings.</p>"))
    if figures:
        sections.append(("figures", "Figures", _figures_html(figures)))
    for i, (heading, fragment) in enumerate(extra_sections or []):
        sections.append((f"extra-{i + 1}", str(heading), str(fragment)))

    nav = "".join(f'<a href="#{sid}">{_e(h)}</a>' for sid, h, _ in sections) + '<a href="#cautions">Cautions</a>'
    body = "\n".join(f'<section id="{sid}"><h2>{_e(h)}</h2>\n{content}\n</section>'
                     for sid, h, content in sections)
    cautions = ('<section class="cautions" id="cautions"><h2>Cautions</h2>'
                + "".join(f"<p>{_e(c)}</p>" for c in CAUTIONS) + "</section>")
    version = _version()
    footer = (f"<footer>Written by heatsight{' ' + _e(version) if version else ''}. "
              "Estimates from a steady-conduction model fitted to thermocouple readings; "
              "bands are 95 % bands.</footer>")
    sub = (f'<p class="sub">{_e(d.on_face.capitalize())}, reconstructed from '
           f"{_e(result.summary.get('n_sensors_used', len(result.sensors)))} thermocouple readings, "
           "with 95 % bands.</p>")
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>{_e(title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<main>\n"
            f"<h1>{_e(title)}</h1>\n{sub}\n<nav>{nav}</nav>\n{body}\n{cautions}\n{footer}\n"
            "</main>\n</body>\n</html>\n")


def write_report(result, path, *, case_text=None, title=None, figures=None, extra_sections=None) -> Path:
    """Write the report (see `render_report`) to `path` atomically; returns the path."""
    path = Path(path)
    atomic_write_text(path, render_report(result, case_text=case_text, title=title, figures=figures,
                                          extra_sections=extra_sections))
    return path
