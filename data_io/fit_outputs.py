"""Tables and summary of a fit in user units (design notes §3): estimate.csv,
summary.json, points.csv, and the console summary."""

from __future__ import annotations

import numpy as np
import pandas as pd

from .units import from_si

CAUTION = ("Estimates support engineering judgement; they do not replace direct measurement, "
           "interlocks or inspection. Heated hardware can burn and heaters are electrical "
           "equipment: local codes and licensed practice govern.")


def display_unit(result) -> str:
    return "degC" if result.quantity == "temperature" else "W/m^2"


def _value(result, x):
    """An estimate value from SI to the display unit (absolute temperature -> degC)."""
    if result.quantity == "temperature":
        return from_si(np.asarray(x, float), "temperature", "degC")
    return np.asarray(x, float)


def _spread(x):
    """A standard deviation or difference: K and degC differences are equal; W/m^2 as is."""
    return np.asarray(x, float)


def _deg(x):
    return from_si(np.asarray(x, float), "angle", "deg")


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
    temp = lambda x: float(from_si(float(x), "temperature", "degC"))  # noqa: E731
    for _, row in s.iterrows():
        out.append({
            "sensor": str(row["sensor"]),
            "r_m": float(row["r_m"]), "theta_deg": float(_deg(row["theta_rad"])), "z_m": float(row["z_m"]),
            "measured": temp(row["measured"]), "fitted": temp(row["fitted"]),
            "residual": float(row["residual"]), "standardized": float(row["standardized"]),
            "loo_predicted": temp(row["loo_predicted"]), "loo_sd": float(row["loo_sd"]),
            "standardized_loo": float(row["standardized_loo"]), "flag": str(row["flag"]),
        })
    return out


def summary_dict(result, *, case_path=None, readings_path=None) -> dict:
    """summary.json: the contract's keys plus sds, positions and the calibration (if any).
    Temperatures in degC; temperature differences (sd, residual, non-uniformity) in K."""
    s = result.summary
    val = lambda x: float(_value(result, x))  # noqa: E731
    zones = []
    for z in s["zones"]:
        entry = {"name": z["name"], "mean": val(z["mean"]), "sd": z["sd"], "lower": val(z["lower"]),
                 "upper": val(z["upper"]), "area_m2": z["area_m2"],
                 "deviation_from_face_mean": z["deviation_from_face_mean"]}
        if "power_W" in z:
            entry.update(power_W=z["power_W"], power_sd_W=z["power_sd_W"])
        for key in ("nominal_W", "delivered_fraction", "delivered_fraction_sd"):
            if key in z:
                entry[key] = z[key]
        zones.append(entry)
    out = {
        "face": s["face"], "quantity": s["quantity"], "unit": display_unit(result),
        "mean": val(s["mean"]), "mean_sd": s["mean_sd"],
        "min": val(s["min"]), "min_sd": s["min_sd"], "min_at": _where(s["min_at"]),
        "max": val(s["max"]), "max_sd": s["max_sd"], "max_at": _where(s["max_at"]),
        "nonuniformity": s["nonuniformity"], "nonuniformity_sd": s["nonuniformity_sd"],
        "total_power_W": s["total_power_W"], "total_power_sd_W": s["total_power_sd_W"],
        "strength": s["strength"], "strength_method": s["strength_method"],
        "strength_averaged": s["strength_averaged"], "smoothing": s["smoothing"],
        "chi2": s["chi2"], "effective_parameters": s["effective_parameters"],
        "n_sensors_used": s["n_sensors_used"], "basis_size": s["basis_size"],
        "set_aside": s["set_aside"], "zones": zones, "warnings": list(s["warnings"]),
        "sensors": sensor_records(result),
        "caution": CAUTION,
    }
    for key in ("model", "model_evidence", "model_weights"):   # the face model (inverse.zones)
        if key in s:
            out[key] = s[key]
    if "calibrated" in s:
        cal = {}
        for key, c in s["calibrated"].items():
            v, sd = c["value"], c["sd"]
            if c["parameter"] == "ambient":
                v = float(from_si(v, "temperature", "degC"))
            cal[key] = {"face": c["face"], "parameter": c["parameter"], "value": v, "sd": sd,
                        "unit": "degC" if c["parameter"] == "ambient" else "W/(m^2*K)"}
        out["calibrated"] = cal
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
    T = lambda x: from_si(np.asarray(x, float), "temperature", "degC")  # noqa: E731
    return pd.DataFrame({"r_m": r, "theta_deg": _deg(th), "z_m": z, "temperature_degC": T(mean),
                         "std": sd, "lower": T(lo), "upper": T(hi),
                         "qr_W_m2": q[0], "qtheta_W_m2": q[1], "qz_W_m2": q[2]})


def _fmt(x, digits=4):
    return f"{x:.{digits}g}"


def console_summary(result, folder) -> str:
    """A short plain-text summary for the terminal."""
    s = summary_dict(result)
    u = s["unit"]
    du = "K" if u == "degC" else u
    lines = [f"{s['face']} face {s['quantity'].replace('_', ' ')} ({u}):",
             f"  mean            {_fmt(s['mean'])} +- {_fmt(s['mean_sd'], 2)} {du}",
             f"  min             {_fmt(s['min'])} at r = {s['min_at']['r_m'] * 1e3:.3g} mm, "
             f"theta = {s['min_at']['theta_deg']:.0f} deg, z = {s['min_at']['z_m'] * 1e3:.3g} mm",
             f"  max             {_fmt(s['max'])} at r = {s['max_at']['r_m'] * 1e3:.3g} mm, "
             f"theta = {s['max_at']['theta_deg']:.0f} deg, z = {s['max_at']['z_m'] * 1e3:.3g} mm",
             f"  non-uniformity  {_fmt(s['nonuniformity'])} +- {_fmt(s['nonuniformity_sd'], 2)} {du} (max - min)",
             f"  total power in  {_fmt(s['total_power_W'])} +- {_fmt(s['total_power_sd_W'], 2)} W"]
    for z in s["zones"]:
        lines.append(f"  zone {z['name']:<10} {_fmt(z['mean'])} +- {_fmt(z['sd'], 2)} {du}"
                     f" ({z['deviation_from_face_mean']:+.3g} {du} from the face mean)")
    if "calibrated" in s:
        for key, c in s["calibrated"].items():
            lines.append(f"  calibrated {c['face']}.{c['parameter']} = {_fmt(c['value'])} +- "
                         f"{_fmt(c['sd'], 2)} {c['unit']}")
    lines.append(f"  smoothing strength {s['strength']:.3g} ({s['strength_method']}), "
                 f"chi2 {s['chi2']:.3g}, {s['effective_parameters']:.1f} effective parameters, "
                 f"{s['n_sensors_used']} sensors used")
    if s["set_aside"]:
        lines.append(f"  set aside: {', '.join(s['set_aside'])}")
    for w in s["warnings"]:
        lines.append(f"  warning: {w}")
    lines.append(f"outputs in {folder}")
    return "\n".join(lines)
