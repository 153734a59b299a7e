"""A doubtful sensor weighed rather than decided.

The screening (diagnostics.screen_outliers) sets a sensor aside only beyond its Bonferroni
limit: a hard decision.  A fault just below the limit stays in the fit, and the answer near
it follows the fault with bands that know nothing of the doubt (a tube bore, seed 1 of the
scenario suite: a thermocouple 6 K high, score 3.1 against a limit of 3.3, the bore's zone
beside it 4.6 sd off).  So when the screening's own predictive (the reading given the
others) makes a kept sensor's fault likely enough, the answer is the mixture of two fits:

    p(answer | d) = (1 - p_j) p(answer | d, sensor j healthy) + p_j p(answer | d, j broken),

p_j = P(sensor j broken | d) from the contamination model (contamination.py; the fit's
diagnostics.LooScores.fault_probability, column `fault_probability` of the sensor table),
j the most doubtful kept sensor, weighed when p_j > DOUBT.  "j broken" is the fit with j
set aside (a broken reading says nothing of the part).  One sensor at most: the screening
has already set aside every clear fault, and two faults at once below its limit are rarer
than either (each fit costs a whole fit).  The mixture's mean and sd are its moments, its
bands those of the mixture of the two answers' bands (strength_average.answers_mixture).
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pandas as pd

from .diagnostics import MIN_KEPT
from .result import zone_entry
from .strength_average import answers_mixture

#: a kept sensor whose fault probability exceeds this is weighed: with the prior probability
#: of a fault, contamination.EPSILON = 0.02, the readings then make a fault at least 5.4 times
#: likelier than beforehand, "substantial" on Jeffreys' scale of Bayes factors (above 10^(1/2);
#: from memory).  Healthy sensors of 20 stay below it in about 9 fits of 10 (the scenario
#: suite's largest among sensors not broken: 0.04 except one model misfit, 0.2); each weighed
#: sensor costs a second fit.
DOUBT = 0.1


def most_doubtful(table: pd.DataFrame):
    """(row, fault probability) of the sensor most likely broken among those the screening
    passed (flag 'ok'), if above DOUBT, else None.  None also when the screening did not weigh
    the sensors (no `fault_probability`) or when setting one aside would leave fewer than
    diagnostics.MIN_KEPT in the fit; a sensor beyond the limit that the screening kept on
    purpose (the model blamed, or too few sensors left) is not weighed either."""
    if "fault_probability" not in table:
        return None
    p = table["fault_probability"].to_numpy(float)
    flag = table["flag"].to_numpy()
    kept = (flag == "ok") & np.isfinite(p)
    if not kept.any() or np.count_nonzero(flag != "set aside") - 1 < MIN_KEPT:
        return None
    j = int(np.argmax(np.where(kept, p, -1.0)))
    return (j, float(p[j])) if p[j] > DOUBT else None


def _moments(w, pairs):
    """Mixture mean and sd of scalars given as (mean, sd) per component."""
    m = np.array([a for a, _ in pairs], float)
    s = np.array([b for _, b in pairs], float)
    mean = float(w @ m)
    return mean, math.sqrt(float(w @ (s ** 2 + (m - mean) ** 2)))


def weighed(primary, broken, p: float, sensor: str, warning: str):
    """The FitResult of the mixture (module doc): `primary` the fit with every kept sensor,
    `broken` the fit with `sensor` set aside, p its probability of a fault.  The face map,
    the face mean, the total power, the zones and the extremes are the mixture's; the sensor
    table, the model and the prior are the primary fit's, which `plan` and `trend` build on
    (face_profile and predict mix both fits: FitResult.doubt)."""
    w = np.array([1.0 - p, p])
    g1, g2 = primary.grid, broken.grid
    mean, sd, lower, upper = answers_mixture(w, [tuple(g[c].to_numpy(float) for c in ("estimate", "std", "lower",
                                                                                         "upper"))
                                                 for g in (g1, g2)])
    grid = g1.copy()
    grid["estimate"], grid["std"], grid["lower"], grid["upper"] = mean, sd, lower, upper
    s1, s2 = primary.summary, broken.summary
    summary = dict(s1)

    def mix(key, sd_key):
        return _moments(w, [(s1[key], s1[sd_key]), (s2[key], s2[sd_key])])

    summary["mean"], summary["mean_sd"] = mix("mean", "mean_sd")
    summary["total_power_W"], summary["total_power_sd_W"] = mix("total_power_W", "total_power_sd_W")
    i_min, i_max = int(np.argmin(mean)), int(np.argmax(mean))
    for end, i in (("min", i_min), ("max", i_max)):
        summary[end] = float(mean[i])
        summary[f"{end}_sd"] = mix(end, f"{end}_sd")[1]
        summary[f"{end}_at"] = {"r_m": float(grid["r_m"].iat[i]), "theta_rad": float(grid["theta_rad"].iat[i]),
                                "z_m": float(grid["z_m"].iat[i])}
    summary["nonuniformity"] = float(mean[i_max] - mean[i_min])
    summary["nonuniformity_sd"] = mix("nonuniformity", "nonuniformity_sd")[1]
    other = {z["name"]: z for z in s2["zones"]}
    zones = []
    for z in s1["zones"]:
        o = other.get(z["name"], z)
        zm, zsd = _moments(w, [(z["mean"], z["sd"]), (o["mean"], o["sd"])])
        entry = zone_entry(z["name"], zm, zsd, z["area_m2"], z.get("nominal_W"), primary.quantity)
        entry["deviation_from_face_mean"] = zm - summary["mean"]
        zones.append(entry)
    summary["zones"] = zones
    summary["sensor_doubt"] = {"sensor": sensor, "fault_probability": p}
    warnings = list(primary.warnings) + [warning]
    summary["warnings"] = list(dict.fromkeys(list(s1["warnings"]) + [warning]))
    return replace(primary, grid=grid, summary=summary, zones=zones, warnings=list(dict.fromkeys(warnings)),
                   doubt=(broken, p))


def doubt_warning(row, p: float) -> str:
    """The plain sentence for the weighed sensor (`row` its sensor-table row)."""
    name, delta = row["sensor"], float(row["measured"]) - float(row["loo_predicted"])
    return (f"sensor {name} reads {delta:+.2g} K away from what the other sensors predict (score "
            f"{float(row['score']):+.1f}, not far enough to set it aside): the answer weighs a fault of {name} "
            f"(probability {p:.2f}) against a good reading, so its bands hold both; check or calibrate {name} "
            f"in place to settle it")


def weigh_doubtful(result, refit):
    """`result`, or the mixture with refit(j) (the same fit with reading j set aside) when a
    kept sensor is doubtful (most_doubtful)."""
    found = most_doubtful(result.sensors)
    if found is None:
        return result
    j, p = found
    row = result.sensors.iloc[j]
    index = list(result.readings.names).index(str(row["sensor"]))
    return weighed(result, refit(index), p, str(row["sensor"]), doubt_warning(row, p))
