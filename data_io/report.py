"""The HTML report of a fit: one self-contained page (inline CSS, figures embedded as
base64 PNG data URIs, no scripts, no links to other files).

Order: the title, then the verdict in plain words (data_io.verdict; the first text after the
title), the figures, the numbers (face, zones), the sensors with their health flags,
warnings, any sections supplied by the caller, the case, how the fit was made, a short
glossary, and the cautions.  "±" is the half-width of the 95 % interval and says so.  Every string that comes from the user or from the data (sensor names, case
text, zone names, warnings, titles) is HTML-escaped; nothing is evaluated.  Values arrive
in SI from the inverse layer and are shown in user units through `data_io.units`
(temperatures degC, temperature differences K, lengths mm, angles deg).
"""

from __future__ import annotations

import base64
import math
from pathlib import Path

from ..inverse.bands import Z95
from ..inverse.diagnostics import UNCHECKED_OFFSET_K
from ..inverse.sensor_doubt import DOUBT

from . import plots
from .csv_out import atomic_write_text
from .report_format import (_celsius, _celsius_number, _deg, _e, _finite, _Fmt, _mm, _position, _power,
                            half95, length_scale_text, sig)
from .report_text import CAUTIONS, CSS, FIGURE_CAPTIONS, GLOSSARY, HOLLOW_CAUTION, LONG_CAPTIONS
from .display import power_unit
from .units import from_si, to_display, ureg
from .verdict import verdict_parts

PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"

FACE_PLACE = {"bottom": "z = 0", "top": "z = height", "side": "outer wall, r = radius",
              "bore": "inner wall, r = inner radius"}
#: order of the figures on the page (others follow in the order given)
FIGURE_ORDER = ("face_map", "profiles", "band_width", "sensors", "strength")

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
    if getattr(cyl, "hollow", False):
        rows.append(("inner radius (bore)", f"{from_si(cyl.inner_radius, 'length', 'mm'):.6g} mm"))
        rows.append(("wall thickness", f"{from_si(cyl.thickness, 'length', 'mm'):.6g} mm"))
    if getattr(cyl, "long", False):
        rows.append(("height", "long: nothing varies along the axis; areas and powers are per metre "
                               "of length"))
    elif math.isinf(cyl.height):
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


# ---------------------------------------------------------------------- numbers
def _pm_sd(fmt: _Fmt, sd) -> str:
    """'± 0.022 kW/m² (95 %)' from an sd in SI."""
    return f"± {sig(half95(fmt.d.diff(sd)))} {fmt.d.diff_symbol} (95 %)" if _finite(sd) else ""


def _numbers(result, fmt: _Fmt) -> str:
    """The face's figures with their 95 % intervals, and the zones."""
    s = result.summary
    mean, mean_sd = s.get("mean"), s.get("mean_sd")
    rows = [
        ("estimated face", f"{fmt.d.face_words}: {fmt.d.words} [{fmt.d.symbol}]"),
        ("face mean", f"{fmt.value(mean)} {_pm_sd(fmt, mean_sd)}; interval "
                      f"{fmt.band(mean - Z95 * mean_sd, mean + Z95 * mean_sd)}"
         if _finite(mean) and _finite(mean_sd) else fmt.value(mean)),
        ("minimum", f"{fmt.value(s.get('min'))} {_pm_sd(fmt, s.get('min_sd'))} "
                    f"{_position(result, s.get('min_at'))}"),
        ("maximum", f"{fmt.value(s.get('max'))} {_pm_sd(fmt, s.get('max_sd'))} "
                    f"{_position(result, s.get('max_at'))}"),
        ("spread over the face (maximum − minimum)",
         f"{fmt.diff(s.get('nonuniformity'))} {_pm_sd(fmt, s.get('nonuniformity_sd'))}"),
        ("heat into the part through this face" + (" (per metre of length)" if fmt_long(result) else ""),
         _power(s.get("total_power_W"), s.get("total_power_sd_W"), power_unit(result.cylinder))),
    ]
    if result.face == "bore" and _finite(s.get("total_power_W")) and s["total_power_W"] < 0:
        # the wall heats the fluid: the same figure, said from the fluid's side
        rows.append(("heat into the fluid through the bore",
                     _power(-s["total_power_W"], s.get("total_power_sd_W"), power_unit(result.cylinder))))
    out = [_kv_table(rows)]
    cal = s.get("calibrated")
    if cal:
        out.append("<h3>Face parameters fitted from the readings</h3>")
        out.append(_calibrated_table(cal))
    zones = s.get("zones") or []
    if zones:
        out.append("<h3>Zones</h3>")
        out.append(_zones_table(zones, fmt, power_unit(result.cylinder)))
    return "\n".join(out)


def cautions_of(cylinder) -> tuple:
    """The report's cautions; a hollow part's adds the one on pressure and drilled walls."""
    return CAUTIONS + ((HOLLOW_CAUTION,) if getattr(cylinder, "hollow", False) else ())


def fmt_long(result) -> bool:
    """A long part: areas and powers per metre of length."""
    return bool(getattr(result.cylinder, "long", False))


def _how_fitted(result) -> str:
    """How the fit was made: smoothing, model, misfit, resolution (the terms of the glossary)."""
    s = result.summary
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
    rows = [("smoothing strength", how),
            ("what the smoothing penalizes", f"the {s.get('smoothing', '?')} of the face")]
    if s.get("model"):
        w = s.get("model_weights") or {}
        extra = ", ".join(f"{k} {sig(v, 2)}" for k, v in w.items() if _finite(v)) if isinstance(w, dict) else ""
        rows.append(("model of the face", str(s["model"]) + (f" (probabilities: {extra})" if extra else "")))
    widths, weights = s.get("zone_edge_widths_m"), s.get("zone_edge_weights")
    if isinstance(widths, list) and isinstance(weights, list) and len(widths) == len(weights) > 1:
        text = ", ".join(("sharp" if not w else f"{sig(from_si(w, 'length', 'mm'), 2)} mm") + f" {p:.2f}"
                         for w, p in zip(widths, weights) if _finite(w) and _finite(p))
        rows.append(("width of the zones' edges, the widest zone's (probabilities; averaged over)", text))
    levels = s.get("zone_level_prior_sd")
    if isinstance(levels, list) and levels and all(_finite(x) for x in levels):
        rows.append(("how far a zone's level may depart from the background before the readings "
                     "(prior sd at the scale the evidence finds most probable)",
                     ", ".join(map(_Fmt(result).sd, sorted(set(levels))))))
    own = s.get("zone_level_probability")
    p_zones = (s.get("model_weights") or {}).get("zones") if isinstance(s.get("model_weights"), dict) else None
    if isinstance(own, dict) and own and all(_finite(v) for v in own.values()) and _finite(p_zones):
        rows.append((f"if the face is read zone by zone (probability {p_zones:.2f}): the chance that each "
                     "zone's level steps away from the face around it at its edges",
                     ", ".join(f"{k} {v:.2f}" for k, v in own.items())))
    prior = s.get("prior")
    if isinstance(prior, dict):
        rows.append(("what the data chose for the smoothness", _prior_text(prior)))
    rows += [("misfit: chi-square of the weighted residuals", chi2_text),
             ("number of independent pieces of information used", edf_text)]
    return _kv_table(rows)


def _prior_text(prior: dict) -> str:
    parts = []
    length = length_scale_text(prior)
    if length is not None:
        parts.append(f"length scale {length}")
    widened, hyper = prior.get("length_scale_range_widened_from_m"), prior.get("length_scale_hyperprior_m")
    if isinstance(widened, (list, tuple)) and isinstance(hyper, (list, tuple)) and len(widened) == len(hyper) == 2 \
            and all(_finite(x) for x in (*widened, *hyper)):
        parts.append(f"the longest length scale tried widened from {sig(from_si(widened[1], 'length', 'mm'), 2)} to "
                     f"{sig(from_si(hyper[1], 'length', 'mm'), 2)} mm, as the readings favoured the longest ones")
    if _finite(prior.get("smooth_limit_weight")) and prior["smooth_limit_weight"] > 0.6:
        parts.append("the smoothest profiles the prior family holds (probability "
                     f"{prior['smooth_limit_weight']:.2f})")
    ratios = prior.get("axisymmetric_ratio_weights") or {}
    if len(ratios) > 1:
        best = max(ratios, key=ratios.get)
        parts.append(f"the axisymmetric part (rings, bands) {best} times as strong as the rest "
                     f"(probability {ratios[best]:.2f})")
    dims = prior.get("axisymmetric_dimension_weights") or {}
    if len(dims) > 1:
        own = float(dims.get("1", 0.0))
        shape = ("with edges of their own, as rough as the rest of the face" if own >= 0.5
                 else "smoother than the rest (like an average around the axis)")
        parts.append(f"the rings and bands {shape} (probability {max(own, 1.0 - own):.2f})")
    if prior.get("hyperprior_dominated"):
        parts.append("the size of the departures from the nominal profile is set by the prior, not the readings")
    return "; ".join(parts) or ", ".join(f"{k}" for k in prior)


def _calibrated_table(cal: dict) -> str:
    rows = []
    for info in cal.values():
        if not isinstance(info, dict):
            continue
        what, value, sd = info.get("parameter"), info.get("value"), info.get("sd")
        if what == "h":
            v = f"{to_display(value, 'heat_transfer_coefficient'):.4g} W/(m²·K)" if _finite(value) else "–"
            u = f"{sig(half95(sd))} W/(m²·K)" if _finite(sd) else "–"
        else:
            v = _celsius(value)
            u = f"{sig(half95(from_si(sd, 'temperature_difference', 'K')))} K" if _finite(sd) else "–"
        rows.append(f"<tr><td>{_e(info.get('face', ''))}</td><td>{_e(what)}</td>"
                    f'<td class="num">{_e(v)}</td><td class="num">{_e(u)}</td></tr>')
    return ("<table><tr><th>face</th><th>parameter</th><th>value</th><th>± (95 %)</th></tr>"
            + "".join(rows) + "</table>")


def _zones_table(zones, fmt: _Fmt, unit: str = "W") -> str:
    d = fmt.d
    flux = d.quantity == "heat_flux"
    area_unit = "cm²" if unit == "W" else "cm² per m of length"
    head = ["zone", f"area [{area_unit}]", f"mean [{d.symbol}]", f"± (95 %) [{d.diff_symbol}]",
            f"95 % interval [{d.symbol}]", f"difference from face mean [{d.diff_symbol}]"]
    if flux:
        head.append(f"heat in ± (95 %) [{unit}]")
    if any(_finite(z.get("delivered_fraction")) for z in zones):
        head.append("share of nominal power")
    rows = []
    for z in zones:
        area = z.get("area_m2")
        area_txt = sig(ureg.Quantity(float(area), "m^2").to("cm^2").magnitude, 3) if _finite(area) else "–"
        cells = [_e(z.get("name", "")), area_txt, fmt.number(z.get("mean")),
                 sig(half95(d.diff(z.get("sd")))) if _finite(z.get("sd")) else "–",
                 f"{fmt.number(z.get('lower'))} to {fmt.number(z.get('upper'))}",
                 fmt.diff_number(z.get("deviation_from_face_mean"))]
        if flux:
            cells.append(_power(z.get("power_W"), z.get("power_sd_W"), unit).replace(f" {unit}", "")
                         .replace(" (95 %)", ""))
        if len(head) > len(cells):
            frac, fsd = z.get("delivered_fraction"), z.get("delivered_fraction_sd")
            cells.append(f"{sig(100 * frac, 3)} ± {sig(100 * half95(fsd))} %" if _finite(frac) and _finite(fsd)
                         else (f"{sig(100 * frac, 3)} %" if _finite(frac) else "–"))
        rows.append("<tr><td>" + cells[0] + "</td>" +
                    "".join(f'<td class="num">{_e(c)}</td>' for c in cells[1:]) + "</tr>")
    return ("<table><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>"
            + "".join(rows) + "</table>")


# ---------------------------------------------------------------------- sensors
def _sensor_table(result) -> str:
    sens = result.sensors
    score_col = "score" if "score" in sens else "standardized_loo"
    head = ["sensor", "r [mm]", "θ [°]", "z [mm]", "measured [°C]", "fitted [°C]", "residual [K]",
            "prediction from the others [°C]", "reading − prediction [K]", "± (95 %) [K]",
            "score", "caught offset [K]", "fault probability", "flag"]
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
            sig(half95(from_si(row.get("loo_sd"), "temperature_difference", "K")))
            if _finite(row.get("loo_sd")) else "–",
            f"{row.get(score_col):+.2f}" if _finite(row.get(score_col)) else "–",
            sig(from_si(row.get("caught_offset"), "temperature_difference", "K"))
            if _finite(row.get("caught_offset")) else "–",
            f"{row.get('fault_probability'):.2f}" if _finite(row.get("fault_probability")) else "–",
        ]
        rows.append(f'<tr class="{cls}"><td>{_e(row.get("sensor"))}</td>'
                    + "".join(f'<td class="num">{_e(c)}</td>' for c in cells)
                    + f'<td><span class="tag {cls}">{_e(flag)}</span></td></tr>')
    table = ("<table><tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>"
             + "".join(rows) + "</table>")
    aside = list(result.summary.get("set_aside") or [])
    t = plots.sensor_threshold(result)
    # the default limit grows with the number of sensors checked (Bonferroni): say for how many
    which = "" if result.summary.get("threshold") is not None else (
        f" (the limit for the {int(result.summary.get('n_sensors_used') or len(sens))} sensors in the fit; "
        "one set aside earlier met the limit for the sensors then in it)")
    if aside:
        lead = ("<p>Set aside (left out of the fit; their row shows the prediction of the final fit): "
                + ", ".join(f"<strong>{_e(s)}</strong>" for s in aside) + ".</p>")
    else:
        lead = "<p>No sensor was set aside.</p>"
    doubt = result.summary.get("sensor_doubt")
    if doubt:
        lead += (f"<p>Weighed as possibly broken: <strong>{_e(doubt['sensor'])}</strong> (probability "
                 f"{doubt['fault_probability']:.2f}); the answer blends the fit with it and the fit without it.</p>")
    note = (f"<p class=\"sub\">The score compares each reading with what the other sensors predict, "
            f"in predictive standard deviations; beyond ±{t:.2f}{which} a sensor is treated as faulty or "
            f"misplaced. The ± column is the 95 % interval of that prediction; a fixed offset of a "
            f"reading is caught only beyond its “caught offset” (past "
            f"{sig(UNCHECKED_OFFSET_K)} K the fit warns: the others check that sensor only for large "
            f"faults). The fault probability is the chance that the reading is broken, given the "
            f"others; when it is above {DOUBT:g} for sensors the screening kept (and it blamed no "
            f"model), the answer also weighs the fit without the most doubtful of them. "
            f"Temperatures in °C, differences in K.</p>")
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


def _figures_html(figures: dict, long: bool = False) -> str:
    captions = {**FIGURE_CAPTIONS, **LONG_CAPTIONS} if long else FIGURE_CAPTIONS
    order = [n for n in FIGURE_ORDER if n in figures] + [n for n in figures if n not in FIGURE_ORDER]
    parts = []
    for name in order:
        data = base64.b64encode(_png_bytes(figures[name])).decode("ascii")
        caption = captions.get(name, str(name))
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


def verdict_html(result, fmt: _Fmt | None = None) -> str:
    """The verdict (data_io.verdict) as escaped HTML paragraphs."""
    fmt = fmt or _Fmt(result)
    answer, trust = verdict_parts(result, fmt, plots.map_scale(result))
    return "".join(f"<p>{_e(' '.join(part))}</p>" for part in (answer, trust) if part)


def _glossary() -> str:
    return '<dl class="glossary">' + "".join(f"<dt>{_e(t)}</dt><dd>{_e(m)}</dd>" for t, m in GLOSSARY) + "</dl>"


def render_report(result, *, case_text=None, title=None, figures=None, extra_sections=None, lead=None) -> str:
    """The report page as HTML text.

    case_text: list of (label, value) strings describing the case as the user wrote it
    (default: built from the result's part and face conditions).  title: page heading.
    figures: dict name -> Figure | PNG bytes | PNG path (default: all figures of
    `plots.FIGURE_NAMES`; an empty dict leaves figures out).  extra_sections: list of
    (heading, html_fragment); the heading is escaped, the fragment must already be safe.
    lead: a safe HTML fragment that opens the verdict (e.g. a trend's flags); the fit's own
    verdict follows it.
    """
    fmt = _Fmt(result)
    d = fmt.d
    title = title or f"heatsight: estimated {d.on_face}"
    rows = default_case_text(result) if case_text is None else [(str(k), str(v)) for k, v in case_text]
    if figures is None:
        figures = plots.all_figures(result)
    warnings = list(result.summary.get("warnings") or result.warnings or [])

    sections = []
    if figures:
        sections.append(("figures", "Figures", _figures_html(figures, fmt_long(result))))
    sections += [("numbers", "The numbers", _numbers(result, fmt)),
                 ("sensors", "The sensors", _sensor_table(result))]
    if warnings:
        sections.append(("warnings", "Warnings",
                         '<ul class="warnings">' + "".join(f"<li>{_e(w)}</li>" for w in warnings)
                         + "</ul>"))
    else:
        sections.append(("warnings", "Warnings", "<p>No warnings.</p>"))
    for i, (heading, fragment) in enumerate(extra_sections or []):
        sections.append((f"extra-{i + 1}", str(heading), str(fragment)))
    sections += [("case", "The case", _kv_table(rows)),
                 ("method", "How the fit was made", _how_fitted(result)),
                 ("glossary", "Words used here", _glossary())]

    nav = "".join(f'<a href="#{sid}">{_e(h)}</a>' for sid, h, _ in sections) + '<a href="#cautions">Cautions</a>'
    body = "\n".join(f'<section id="{sid}"><h2>{_e(h)}</h2>\n{content}\n</section>'
                     for sid, h, content in sections)
    cautions = ('<section class="cautions" id="cautions"><h2>Cautions</h2>'
                + "".join(f"<p>{_e(c)}</p>" for c in cautions_of(result.cylinder)) + "</section>")
    version = _version()
    footer = (f"<footer>Written by heatsight{' ' + _e(version) if version else ''}. "
              "Estimates from a steady-conduction model fitted to thermocouple readings; "
              "± and bands are 95 % intervals.</footer>")
    sub = (f'<p class="sub">{_e(d.on_face.capitalize())}, reconstructed from '
           f"{_e(result.summary.get('n_sensors_used', len(result.sensors)))} thermocouple readings; "
           "± is the 95 % interval.</p>")
    fit_verdict = verdict_html(result, fmt)
    if lead:  # e.g. a trend: its flags first, then the fit of its reference window
        fit_verdict = fit_verdict.replace("<p>", "<p><strong>Reference window:</strong> ", 1)
    verdict_section = f'<section class="verdict" id="verdict">{lead or ""}{fit_verdict}</section>'
    return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
            "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
            f"<title>{_e(title)}</title>\n<style>{CSS}</style>\n</head>\n<body>\n<main>\n"
            f"<h1>{_e(title)}</h1>\n{verdict_section}\n{sub}\n<nav>{nav}</nav>\n{body}\n{cautions}\n"
            f"{footer}\n</main>\n</body>\n</html>\n")


def write_report(result, path, *, case_text=None, title=None, figures=None, extra_sections=None,
                 lead=None) -> Path:
    """Write the report (see `render_report`) to `path` atomically; returns the path."""
    path = Path(path)
    atomic_write_text(path, render_report(result, case_text=case_text, title=title, figures=figures,
                                          extra_sections=extra_sections, lead=lead))
    return path
