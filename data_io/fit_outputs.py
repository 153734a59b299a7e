"""Tables and summary of a fit in user units (design notes §3): estimate.csv,
summary.json, points.csv, and the console summary."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .display import FILE_UNITS, deg, file_display, power_unit, power_words
from .report_format import eng, flux_relation, length_scale_text, pm95_of

#: sensor readings and predictions are temperatures whatever the face quantity
_TEMPERATURE = file_display("temperature")

CAUTION = ("Estimates support engineering judgement; they do not replace direct measurement, "
           "interlocks or inspection. Heated hardware can burn and heaters are electrical "
           "equipment: local codes and licensed practice govern.")


def display_unit(result) -> str:
    """Unit of the face quantity in the output files (data_io.display)."""
    return file_display(result.quantity).unit


def _value(result, x):
    """An estimate value from SI to the file unit (absolute temperature -> degC)."""
    return file_display(result.quantity).value(np.asarray(x, float))


def _spread(x):
    """A standard deviation or difference: K and degC differences are equal; W/m^2 as is."""
    return np.asarray(x, float)


def _deg(x):
    return deg(np.asarray(x, float))


def estimate_frame(result) -> pd.DataFrame:
    g = result.grid
    return pd.DataFrame({
        "r_m": g["r_m"].to_numpy(), "theta_deg": _deg(g["theta_rad"].to_numpy()), "z_m": g["z_m"].to_numpy(),
        "estimate": _value(result, g["estimate"]), "std": _spread(g["std"]),
        "lower": _value(result, g["lower"]), "upper": _value(result, g["upper"]),
    })


def _where(at):
    return {"r_m": at["r_m"], "theta_deg": float(_deg(at["theta_rad"])), "z_m": at["z_m"]}


def sensor_records(result) -> list[dict]:
    s = result.sensors
    out = []
    temp = lambda x: float(_TEMPERATURE.value(float(x)))  # noqa: E731
    for _, row in s.iterrows():
        out.append({
            "sensor": str(row["sensor"]),
            "r_m": float(row["r_m"]), "theta_deg": float(_deg(row["theta_rad"])), "z_m": float(row["z_m"]),
            "measured": temp(row["measured"]), "fitted": temp(row["fitted"]),
            "residual": float(row["residual"]), "standardized": float(row["standardized"]),
            "loo_predicted": temp(row["loo_predicted"]), "loo_sd": float(row["loo_sd"]),
            "standardized_loo": float(row["standardized_loo"]),
            "score": float(row["score"]) if "score" in row else float(row["standardized_loo"]),
            "caught_offset": float(row["caught_offset"]),
            # the probability that the reading is broken, given the others (inverse.contamination)
            "fault_probability": float(row["fault_probability"]) if "fault_probability" in row else None,
            "flag": str(row["flag"]),
        })
    return out


def power_key(result) -> str:
    """Suffix of the power keys in summary.json: "W", or "W_per_m" on a long part (whose
    powers are per metre of length), so that no key names a bare W for a per-metre figure."""
    return "W" if power_unit(result.cylinder) == "W" else "W_per_m"


def summary_dict(result, *, case_path=None, readings_path=None) -> dict:
    """summary.json: the contract's keys plus sds, positions and the calibration (if any).
    Temperatures in degC; temperature differences (sd, residual, non-uniformity) in K.
    Powers are heat INTO the part (on the bore negative when the wall heats the fluid), in
    W, or in W/m on a long part under keys ending _W_per_m (power_unit says which)."""
    s = result.summary
    pk = power_key(result)
    val = lambda x: float(_value(result, x))  # noqa: E731
    zones = []
    for z in s["zones"]:
        entry = {"name": z["name"], "mean": val(z["mean"]), "sd": z["sd"], "lower": val(z["lower"]),
                 "upper": val(z["upper"]), ("area_m2" if pk == "W" else "area_m2_per_m"): z["area_m2"],
                 "deviation_from_face_mean": z["deviation_from_face_mean"]}
        if "power_W" in z:
            entry.update({f"power_{pk}": z["power_W"], f"power_sd_{pk}": z["power_sd_W"]})
        if "nominal_W" in z:
            entry[f"nominal_{pk}"] = z["nominal_W"]          # W/m on a long part, as its power
        for key in ("delivered_fraction", "delivered_fraction_sd"):
            if key in z:
                entry[key] = z[key]
        zones.append(entry)
    out = {
        "face": s["face"], "quantity": s["quantity"], "unit": display_unit(result),
        "mean": val(s["mean"]), "mean_sd": s["mean_sd"],
        "min": val(s["min"]), "min_sd": s["min_sd"], "min_at": _where(s["min_at"]),
        "max": val(s["max"]), "max_sd": s["max_sd"], "max_at": _where(s["max_at"]),
        "nonuniformity": s["nonuniformity"], "nonuniformity_sd": s["nonuniformity_sd"],
        f"total_power_{pk}": s["total_power_W"], f"total_power_sd_{pk}": s["total_power_sd_W"],
        "power_unit": power_unit(result.cylinder),
        "strength": s["strength"], "strength_method": s["strength_method"],
        "strength_averaged": s["strength_averaged"], "smoothing": s["smoothing"],
        "chi2": s["chi2"], "effective_parameters": s["effective_parameters"],
        "n_sensors_used": s["n_sensors_used"], "basis_size": s["basis_size"],
        "set_aside": s["set_aside"], "zones": zones, "warnings": list(s["warnings"]),
        "sensors": sensor_records(result),
        "caution": CAUTION,
    }
    for key in ("model", "model_evidence", "model_weights", "zone_edge_widths_m", "zone_edge_weights",
                "zone_level_prior_sd", "zone_level_probability", "unseen_stretch_steps_m",
                "unseen_stretch_level_sd", "sensor_doubt"):
        # the face model (inverse.fit_models; the unseen edge stretch's steps, inverse.stretch;
        # the doubtful sensor the answer weighs, inverse.sensor_doubt)
        if key in s:
            out[key] = s[key]
    if "calibrated" in s:
        cal = {}
        for key, c in s["calibrated"].items():
            v, sd = c["value"], c["sd"]
            if c["parameter"] == "ambient":
                v = float(_TEMPERATURE.value(v))
            cal[key] = {"face": c["face"], "parameter": c["parameter"], "value": v, "sd": sd,
                        "unit": _TEMPERATURE.unit if c["parameter"] == "ambient" else "W/(m^2*K)"}
        out["calibrated"] = cal
    if "prior" in s:
        # what the data chose for the learned prior (inverse.hyperprior); amplitudes are
        # differences in the face's unit (K or W/m^2), lengths in m
        out["prior"] = dict(s["prior"], amplitude_unit="K" if s["quantity"] == "temperature" else "W/m^2")
    if case_path is not None:
        out["case"] = str(case_path)
    if readings_path is not None:
        out["readings"] = str(readings_path)
    return out


def points_frame(result, points) -> pd.DataFrame:
    """The fitted temperature with sd and 95 % band at query points (a points Table)."""
    p = points.frame
    r, th, z = (p[c].to_numpy(float) for c in ("r", "theta", "z"))
    mean, sd, lo, hi = result.predict(r, th, z)
    q = result.predict_flux(r, th, z) + 0.0
    T = lambda x: _TEMPERATURE.value(np.asarray(x, float))  # noqa: E731
    return pd.DataFrame({"r_m": r, "theta_deg": _deg(th), "z_m": z, "temperature_degC": T(mean),
                         "std": sd, "lower": T(lo), "upper": T(hi),
                         "qr_W_m2": q[0], "qtheta_W_m2": q[1], "qz_W_m2": q[2]})


def _pm(value, sd, unit) -> str:
    """'11568 ± 22 W/m^2 (95 %)': the value to at least 3 significant digits and to the last digit
    its band needs, the half-width Z95 x sd with 2 (report_format.pm95_of)."""
    return pm95_of(value, sd, unit)


def _at(where, long: bool = False) -> str:
    """Where a figure lies; a long part has no height to name."""
    text = f"at r = {eng(where['r_m'] * 1e3)} mm, theta = {where['theta_deg']:.0f} deg"
    return text if long else f"{text}, z = {eng(where['z_m'] * 1e3)} mm"


def summary_lines(result) -> list[str]:
    """The short plain-text summary of a fit (console and ``Fit.summary()``), as lines.
    "±" is the half-width of the 95 % interval and says "(95 %)"; the sd stays in
    summary.json under its own name."""
    s = summary_dict(result)
    u = s["unit"]
    pk, pu = power_key(result), s["power_unit"]
    power, power_sd = s[f"total_power_{pk}"], s[f"total_power_sd_{pk}"]
    du = FILE_UNITS[s["quantity"]][1]
    long = bool(getattr(result.cylinder, "long", False))
    lines = [f"{s['face']} face {s['quantity'].replace('_', ' ')} ({u}):",
             f"  mean            {_pm(s['mean'], s['mean_sd'], u)}",
             f"  min             {_pm(s['min'], s['min_sd'], u)} {_at(s['min_at'], long)}",
             f"  max             {_pm(s['max'], s['max_sd'], u)} {_at(s['max_at'], long)}",
             f"  max - min       {_pm(s['nonuniformity'], s['nonuniformity_sd'], du)}",
             f"  total power in  {_pm(power, power_sd, pu)}"
             + (" (per metre of length)" if pu == "W/m" else "")]
    if s["face"] == "bore" and np.isfinite(power) and power < 0:
        lines.append(f"  {power_words('bore', power):<15} {_pm(-power, power_sd, pu)}")
    width = max([10] + [len(str(z["name"])) for z in s["zones"]])
    for z in s["zones"]:
        dev = z["deviation_from_face_mean"]
        rel = ""
        if s["quantity"] == "heat_flux" and s["mean"]:
            size, relation = flux_relation(dev, s["mean"])     # heat out: in words; else signed
            rel = f" ({size} {relation.removesuffix(' than')})" if s["mean"] < 0 else f" ({'+' if dev >= 0 else '-'}{size})"
        lines.append(f"  zone {z['name']:<{width}} {_pm(z['mean'], z['sd'], u)}, "
                     f"{'+' if dev >= 0 else '-'}{eng(abs(dev))} {du}{rel} from the face mean")
    if "calibrated" in s:
        for key, c in s["calibrated"].items():
            lines.append(f"  fitted {c['face']}.{c['parameter']} = {_pm(c['value'], c['sd'], c['unit'])}")
    lines.append(f"  {_smoothness_words(s)}; misfit chi-square {eng(s['chi2'])} for {s['n_sensors_used']} sensors used")
    if s["set_aside"]:
        lines.append(f"  set aside: {', '.join(s['set_aside'])}")
    if s.get("sensor_doubt"):
        d = s["sensor_doubt"]
        lines.append(f"  weighed as possibly broken: {d['sensor']} (probability {d['fault_probability']:.2f}; "
                     "the answer blends the fits with and without it)")
    for w in s["warnings"]:
        lines.append(f"  warning: {w}")
    return lines


def _smoothness_words(s: dict) -> str:
    """How smooth the answer was made, in words people read: the learned prior's length scale
    (mm, with its 90 % range) where the readings chose it, else the strength alpha."""
    length = length_scale_text(s["prior"]) if isinstance(s.get("prior"), dict) else None
    if length is not None:
        return f"length scale the readings chose {length}"
    return f"smoothing strength {s['strength']:.3g} ({s['strength_method']})"


def console_summary(result, folder) -> str:
    """The summary for the terminal, ending with where the outputs are."""
    return "\n".join(summary_lines(result) + [f"outputs in {folder}"])
