"""The verdict of a fit in plain words: the few sentences a report opens with.

What it says, in this order: the weakest and strongest zone (or, without zones, the lowest and
highest place) with its 95 % interval and its distance from the face mean; the face mean and
the heat into the part; which sensors were set aside or flagged and why (reading minus the
prediction of the other sensors); what the data cannot tell (the fit's own warnings about
unresolved quantities, else where the band is widest).  Keys a newer fit may add to the
summary are used when present and ignored when absent: ``model`` and ``model_weights``
(smooth profile or heater zones), per-zone ``delivered_fraction`` (of its nominal power),
``unresolved`` (text or list of texts).  Returns plain text; the report escapes it.
"""

from __future__ import annotations

import math

import numpy as np

from .display import power_unit, power_words
from .face_scale import zone_holds_mean
from .report_format import _Fmt, _finite, _position, eng, flux_relation, half95, percent, power_pm, sig
from .units import from_si

#: words of a warning that says the data cannot resolve something
UNRESOLVED_WORDS = ("cannot resolve", "unresolved", "not resolved", "cannot tell")


def _zone_phrase(z, fmt: _Fmt, mean_si, distance: bool = True) -> str:
    """'outer 60-180, at 9.67 ± 0.15 kW/m² (95 %), 16 % below the face mean'."""
    temp = fmt.d.quantity == "temperature"
    dev = z.get("deviation_from_face_mean")
    if not _finite(dev) and _finite(z.get("mean")) and _finite(mean_si):
        dev = float(z["mean"]) - float(mean_si)
    text = f"{z.get('name', '')}, at {fmt.pm(z.get('mean'), z.get('sd'))}"
    if distance and _finite(dev):
        if temp or not _finite(mean_si) or float(mean_si) == 0:
            text += f", {fmt.eng_diff(abs(dev))} {'below' if dev < 0 else 'above'} the face mean"
        else:
            size, relation = flux_relation(dev, mean_si)
            text += f", {size} {relation} the face mean"
    frac, frac_sd = z.get("delivered_fraction"), z.get("delivered_fraction_sd")
    if _finite(frac):
        text += f"; it delivers {percent(frac, 3)}"
        if _finite(frac_sd):
            text += f" ± {sig(100 * half95(frac_sd), 2)} % (95 %)"
        text += " of its nominal power"
    return text


def zone_sentences(summary, fmt: _Fmt) -> list[str]:
    zones = [z for z in summary.get("zones") or [] if _finite(z.get("mean"))]
    if not zones:
        return []
    mean = summary.get("mean")
    low = min(zones, key=lambda z: float(z["mean"]))
    high = max(zones, key=lambda z: float(z["mean"]))
    weak, strong = ("coldest", "hottest") if fmt.d.quantity == "temperature" else ("weakest", "strongest")
    if fmt.d.quantity != "temperature" and _finite(mean) and float(mean) < 0:
        # heat leaves the part through this face (a bore heating the fluid): the strongest zone
        # is the one that passes the most, the most negative flux
        low, high = high, low
    if low is high:
        return [f"The one zone is {_zone_phrase(low, fmt, mean)}."]
    if all(zone_holds_mean(z, mean) for z in zones):
        return [f"No zone differs from the face mean beyond its 95 % interval (the {weak} is "
                f"{_zone_phrase(low, fmt, mean, False)}; the {strong} is {_zone_phrase(high, fmt, mean, False)})."]
    out = []
    for z, word in ((low, weak), (high, strong)):
        note = " (within its 95 % interval of the face mean)" if zone_holds_mean(z, mean) else ""
        out.append(f"The {word} zone is {_zone_phrase(z, fmt, mean, not note)}{note}.")
    return out


def extreme_sentence(result, fmt: _Fmt) -> str:
    s = result.summary
    return (f"The lowest value is {fmt.pm(s.get('min'), s.get('min_sd'))} {_position(result, s.get('min_at'))}; "
            f"the highest is {fmt.pm(s.get('max'), s.get('max_sd'))} {_position(result, s.get('max_at'))}.")


def level_sentence(result, fmt: _Fmt) -> str:
    s = result.summary
    text = f"Face mean {fmt.pm(s.get('mean'), s.get('mean_sd'))}"
    power = s.get("total_power_W")
    if _finite(power):
        unit = power_unit(result.cylinder)
        per = " per metre of length" if unit == "W/m" else ""
        shown = -power if result.face == "bore" and power < 0 else power
        text += f"; {power_words(result.face, power)}{per}: {power_pm(shown, s.get('total_power_sd_W'), unit)}"
    return text + "."


def uniform_sentence(scale) -> str:
    return ("The face is uniform within its 95 % bands: no variation stands out from the uncertainty."
            if scale is not None and scale.uniform else "")


def sensor_sentences(result) -> list[str]:
    """Set-aside and suspect sensors with how far each reads from the prediction of the others."""
    sens = result.sensors
    flags = np.asarray(sens["flag"].astype(str)) if "flag" in sens else np.full(len(sens), "ok")
    out = []
    for flag, verb in (("set aside", "was set aside (left out of the fit)"),
                       ("suspect", "is kept but flagged suspect")):
        for i in np.flatnonzero(flags == flag):
            row = sens.iloc[int(i)]
            gap = float(row.get("measured", math.nan)) - float(row.get("loo_predicted", math.nan))
            if _finite(gap):
                k = float(from_si(gap, "temperature_difference", "K"))
                why = f"it reads {eng(abs(k))} K {'higher' if k > 0 else 'lower'} than the other sensors predict"
                if _finite(row.get("loo_sd")):
                    why += (f" (± {sig(half95(from_si(float(row['loo_sd']), 'temperature_difference', 'K')), 2)} K"
                            " at 95 %)")
                out.append(f"{row['sensor']} {verb}: {why}.")
            else:
                out.append(f"{row['sensor']} {verb}.")
    doubt = result.summary.get("sensor_doubt")
    if doubt:
        out.append(f"{doubt['sensor']} may be broken (probability {doubt['fault_probability']:.2f}): "
                   f"the answer blends the fit with it and the fit without it.")
    if not out:
        n = len(sens)
        out.append(f"All {n} thermocouples agree with each other; none was set aside.")
    return out


def unresolved_sentences(result, fmt: _Fmt) -> list[str]:
    """What the data cannot tell: the fit's own words where it has any, else where the 95 %
    band is widest (the place furthest from the sensors' view)."""
    s = result.summary
    said = s.get("unresolved")
    if isinstance(said, str):
        said = [said]
    texts = [str(t) for t in said or []]
    texts += [str(w) for w in s.get("warnings") or result.warnings or []
              if any(k in str(w).lower() for k in UNRESOLVED_WORDS) and str(w) not in texts]
    if texts:
        return ["What these readings cannot tell: " + " ".join(t[0].upper() + t[1:] for t in texts)]
    g = result.grid
    half = 0.5 * (np.asarray(g["upper"], float) - np.asarray(g["lower"], float))
    if not np.isfinite(half).any():
        return []
    i = int(np.nanargmax(half))
    at = {"r_m": float(g["r_m"].iloc[i]), "theta_rad": float(g["theta_rad"].iloc[i]), "z_m": float(g["z_m"].iloc[i])}
    # the place by its band, the "±" as everywhere else: 1.96 sd (the glossary's; the band
    # of a mixture may sit unevenly about the estimate)
    pm = half95(float(g["std"].iloc[i]))
    return [f"What these readings tell least: the estimate {_position(result, at)}, where the 95 % "
            f"interval is widest: ± {sig(fmt.d.diff(pm), 2)} {fmt.d.diff_symbol} (95 %); more sensors near "
            "there would narrow it (see the band-width map)."]


def model_sentence(summary) -> str:
    model = summary.get("model")
    weights = summary.get("model_weights") or {}
    p = weights.get("zones") if isinstance(weights, dict) else None
    prob = f" (probability {sig(p, 2)})" if _finite(p) else ""
    if model == "zones":
        return f"The readings favour a model of uniform heater zones{prob} over a smooth profile; the figures come from it."
    if model == "smooth" and _finite(p):
        return f"A smooth profile explains the readings; a model of uniform heater zones is less likely{prob}."
    return ""


def verdict_parts(result, fmt: _Fmt | None = None, scale=None) -> tuple[list[str], list[str]]:
    """(the answer: zones or extremes, level and power, uniformity, model; the trust: sensors
    and what the data cannot tell), each a list of plain-text sentences."""
    fmt = fmt or _Fmt(result)
    s = result.summary
    answer = zone_sentences(s, fmt) or [extreme_sentence(result, fmt)]
    answer.append(level_sentence(result, fmt))
    answer += [t for t in (uniform_sentence(scale), model_sentence(s)) if t]
    return answer, sensor_sentences(result) + unresolved_sentences(result, fmt)


def verdict(result, fmt: _Fmt | None = None, scale=None) -> list[str]:
    """The verdict sentences of a fit (plain text, in reading order)."""
    answer, trust = verdict_parts(result, fmt, scale)
    return answer + trust
