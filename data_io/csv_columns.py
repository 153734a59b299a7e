"""The columns of the CSV files people open (estimate.csv, points.csv, sensors.csv and the
output of `simulate`): lengths in mm and angles in degrees like the inputs, and the unit of
every numeric column in its name (``r_mm``, ``estimate_W_m2``, ``std_K``).  summary.json
keeps its SI names (``r_m``) for scripts.

Written once here so that `fit`, `Fit.write_report` and `simulate` agree.
"""

from __future__ import annotations

import pandas as pd

from .display import FILE_UNITS

#: metres -> millimetres (definition of the prefix)
MM_PER_M = 1000.0
_LENGTHS = {"r_m": "r_mm", "z_m": "z_mm"}


def unit_token(unit: str) -> str:
    """A unit as it stands in a column name: "W/m^2" -> "W_m2", "degC" -> "degC", and a long
    part's power "W/m" -> "W_per_m" (as summary.json's keys, never to be read as W/m^2)."""
    if unit == "W/m":
        return "W_per_m"
    return unit.replace("/", "_").replace("^", "").replace("*", "").replace("(", "").replace(")", "")


def in_mm(frame: pd.DataFrame) -> pd.DataFrame:
    """r_m, z_m -> r_mm, z_mm (values times 1000); other columns unchanged, order kept."""
    out = frame.copy()
    for old, new in _LENGTHS.items():
        if old in out.columns:
            out[old] = out[old].astype(float) * MM_PER_M
    return out.rename(columns=_LENGTHS)


def estimate_columns(frame: pd.DataFrame, quantity: str) -> pd.DataFrame:
    """estimate.csv: r_mm, theta_deg, z_mm, estimate_<unit>, std_<unit>, lower_<unit>, upper_<unit>."""
    unit, diff = (unit_token(u) for u in FILE_UNITS[quantity])
    names = {"estimate": f"estimate_{unit}", "std": f"std_{diff}", "lower": f"lower_{unit}",
             "upper": f"upper_{unit}"}
    return in_mm(frame).rename(columns=names)


def points_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """points.csv: r_mm, theta_deg, z_mm, temperature_degC, std_K, lower_degC, upper_degC, q*_W_m2."""
    return in_mm(frame).rename(columns={"std": "std_K", "lower": "lower_degC", "upper": "upper_degC"})


def sensor_columns(frame: pd.DataFrame) -> pd.DataFrame:
    """sensors.csv: positions in mm and deg, readings in degC, differences and sds in K."""
    names = {"measured": "measured_degC", "fitted": "fitted_degC", "residual": "residual_K",
             "loo_predicted": "loo_predicted_degC", "loo_sd": "loo_sd_K", "caught_offset": "caught_offset_K"}
    return in_mm(frame).rename(columns=names)
