"""A doubtful sensor weighed rather than decided.

The screening (diagnostics.screen_outliers) sets a sensor aside only beyond its Bonferroni
limit: a hard decision.  A fault just below the limit stays in the fit, and the answer near
it follows the fault with bands that know nothing of the doubt (a tube bore, seed 1 of the
scenario suite: a thermocouple 6 K high, score 3.1 against a limit of 3.3, the bore's zone
beside it 4.6 sd off).  So the answer is the mixture of two fits,

    p(answer | d) = (1 - p_j) p(answer | d, sensor j healthy) + p_j p(answer | d, j broken),

"j broken" being the fit with j set aside (a broken reading says nothing of the part), and
p_j = P(j broken | d) from the contamination model (contamination.py) on j's predictive from
the others: eps N(d_j; m, v + tau^2) / [eps N(d_j; m, v + tau^2) + (1 - eps) N(d_j; m, v)].
Which sensor: the one the screening passed (flag 'ok') with the largest fault probability in
the screening's table (`fault_probability`, diagnostics.LooScores), when it exceeds DOUBT.
The weight itself comes from the fit without j (m, v: its prediction of j, the sensor
table's loo columns): the screening's predictive leaves j out of the strength's weights
only, while the prior's length scale, order and amplitude were learned with d_j in, and a
fault makes them rougher and its own predictive wider (tube bore, seed 1: p = 0.34 from the
screening, 0.65 from the fit without TC07, whose length scale is 179 mm against 35 mm).

The other side of the limit alike: when no passed sensor is doubtful, the set-aside sensor
whose fault is least sure (its fault probability from the fit, which left it out) is weighed
back when that probability is below 1 - DOUBT: the answer mixes the fit with the one that
keeps it (FitOptions.keep_sensors), weighed 1 - p.  So the answer moves smoothly as a
reading crosses the screening's limit instead of jumping from keeping it to dropping it.

Not weighed: when the screening blamed the model (a sensor flagged 'suspect': the
contamination model assumes the model right), when setting j aside would leave fewer than
diagnostics.MIN_KEPT sensors, and with a robust loss (which already down-weights j).  One
sensor at most: the screening has already set every clear fault aside, two faults below its
limit at once are rarer than either, and each weighed sensor costs a second fit; the
warning names any other sensor above DOUBT.

What is mixed: the face map (strength_average.answers_mixture), the face mean, the total
power, the zones and the extremes (their mean and sd by the mixture's moments, the zones'
bands as the map's), calibrated parameters, and the sensors' `fitted` (linear in the
answer); `face_profile`, `predict` and `predict_flux` mix the two fits (FitResult.doubt).
The model, the prior, the strength and chi2 in the summary are the answer's first fit (the
one that keeps j; for a sensor weighed back, the one that set it aside), on which `plan` and
`trend` build; summary.json's `sensor_doubt` says which (`weighed_back`).  A sensor named in
FitOptions.keep_sensors is never weighed.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pandas as pd

from .bands import Z95
from .contamination import fault_probability
from .diagnostics import MIN_KEPT
from .errors import InverseError
from .result import grid_position, zone_entry
from .strength_average import answers_mixture, mixture_moments

#: a kept sensor whose fault probability exceeds this is weighed: with the prior probability
#: of a fault, contamination.EPSILON = 0.02, the readings then make a fault at least 5.4 times
#: likelier than beforehand, "substantial" on Jeffreys' scale of Bayes factors (above 10^(1/2);
#: from memory).  The score where a Gaussian predictive reaches it (computed from
#: contamination.py): 3.35 for a predictive sd of 0.2 K (about the screening's limit for 20
#: sensors, 3.29), 3.07 for 0.5 K, 2.84 for 1 K, 2.63 for 2 K; healthy readings pass it 0.08,
#: 0.22, 0.45 and 0.86 % of the time, so with 20 sensors alike 1.6, 4.2, 8.6 and 16 % of fits
#: weigh one.  Each weighed sensor costs a second fit.
DOUBT = 0.1


def doubtful(table: pd.DataFrame) -> list[tuple[int, float]]:
    """[(row, fault probability)] of the sensors the screening passed (flag 'ok') whose
    fault probability exceeds DOUBT, most doubtful first; [] when the screening did not weigh
    the sensors (no `fault_probability`), blamed the model (a sensor 'suspect') or would be
    left with fewer than diagnostics.MIN_KEPT sensors."""
    if "fault_probability" not in table:
        return []
    p = table["fault_probability"].to_numpy(float)
    flag = table["flag"].to_numpy()
    if np.any(flag == "suspect") or np.count_nonzero(flag != "set aside") - 1 < MIN_KEPT:
        return []
    rows = np.flatnonzero((flag == "ok") & np.isfinite(p) & (p > DOUBT))
    return [(int(j), float(p[j])) for j in rows[np.argsort(-p[rows], kind="stable")]]


def _scalar(w, pairs):
    """Mixture mean and sd of scalars given as (mean, sd) per fit (mixture_moments)."""
    mean, sd = mixture_moments(w, *(np.array([[x[i]] for x in pairs], float) for i in (0, 1)))
    return float(mean[0]), float(sd[0])


def _answer(t):
    return tuple(np.atleast_1d(np.asarray(t[c], float)) for c in ("mean", "sd", "lower", "upper"))


def weighed(primary, broken, q: float, sensor: str, warnings, fault: float | None = None):
    """The FitResult of the mixture (module doc): `primary` the fit whose model, prior and
    sensor table the answer keeps, `broken` the other fit, weighed q; `sensor` the one the
    two fits differ by, `fault` its probability of a fault (default q: `broken` sets it
    aside); warnings: the sentences that say so (they lead the answer's own)."""
    p = q if fault is None else float(fault)
    w = np.array([1.0 - q, q])
    g1, g2 = primary.grid, broken.grid
    cols = ("estimate", "std", "lower", "upper")
    mean, sd, lower, upper = answers_mixture(w, [tuple(g[c].to_numpy(float) for c in cols) for g in (g1, g2)])
    grid = g1.copy()
    grid["estimate"], grid["std"], grid["lower"], grid["upper"] = mean, sd, lower, upper
    s1, s2 = primary.summary, broken.summary
    summary = dict(s1)

    def mix(key, sd_key):
        return _scalar(w, [(s1[key], s1[sd_key]), (s2[key], s2[sd_key])])

    summary["mean"], summary["mean_sd"] = mix("mean", "mean_sd")
    summary["total_power_W"], summary["total_power_sd_W"] = mix("total_power_W", "total_power_sd_W")
    i_min, i_max = int(np.argmin(mean)), int(np.argmax(mean))
    for end, i in (("min", i_min), ("max", i_max)):
        summary[end] = float(mean[i])
        summary[f"{end}_sd"] = mix(end, f"{end}_sd")[1]
        summary[f"{end}_at"] = grid_position(grid, i)
    summary["nonuniformity"] = float(mean[i_max] - mean[i_min])
    summary["nonuniformity_sd"] = mix("nonuniformity", "nonuniformity_sd")[1]
    other = {z["name"]: z for z in s2["zones"]}
    zones = []
    for z in s1["zones"]:
        zm, zsd, lo, hi = (float(x[0]) for x in answers_mixture(w, [_answer(z), _answer(other[z["name"]])]))
        entry = zone_entry(z["name"], zm, zsd, z["area_m2"], z.get("nominal_W"), primary.quantity)
        entry["lower"], entry["upper"] = lo, hi
        entry["deviation_from_face_mean"] = zm - summary["mean"]
        zones.append(entry)
    summary["zones"] = zones
    calibration = summary.get("calibrated")
    if calibration:
        summary["calibrated"] = {key: dict(c, **dict(zip(("value", "sd"), _scalar(
            w, [(c["value"], c["sd"]), (s2["calibrated"][key]["value"], s2["calibrated"][key]["sd"])]))))
            for key, c in calibration.items()}
    summary["sensor_doubt"] = {"sensor": sensor, "fault_probability": p, "weighed_back": False}
    notes = list(dict.fromkeys(list(warnings) + list(primary.warnings)))
    summary["warnings"] = notes
    return replace(primary, grid=grid, summary=summary, zones=zones, warnings=notes,
                   nonlinear=summary.get("calibrated"), sensors=_mixed_sensors(primary, broken, w, sensor, p),
                   doubt=(broken, q))


def _mixed_sensors(primary, broken, w, sensor, fault):
    """The primary fit's sensor table with `fitted` (and `residual`, `standardized`) the
    mixture's own prediction at each sensor: linear in the answer, w_1 f_1 + w_2 f_2; the
    weighed sensor's fault probability the one the answer uses."""
    out = primary.sensors.copy()
    out.loc[out["sensor"] == sensor, "fault_probability"] = fault
    other = broken.sensors.set_index("sensor")["fitted"]
    fitted = w[0] * out["fitted"].to_numpy(float) + w[1] * other.loc[out["sensor"]].to_numpy(float)
    # the reading's sd, residual / standardized (a residual of exactly 0 keeps a score of 0)
    old_r, old_z = out["residual"].to_numpy(float), out["standardized"].to_numpy(float)
    resid = out["measured"].to_numpy(float) - fitted
    out["fitted"], out["residual"] = fitted, resid
    out["standardized"] = np.divide(resid * old_z, old_r, out=np.zeros_like(resid), where=old_r != 0)
    return out


def doubt_warnings(name: str, delta: float, sd: float, p: float, others, broken_warnings) -> list[str]:
    """The plain sentences: the weighed sensor `name` (its reading minus the others'
    prediction without it, delta [K], that prediction's sd [K], p its weight), the other
    sensors above DOUBT (names), and what the fit without it warns of that the answer would
    otherwise not say."""
    out = [f"sensor {name} reads {delta:+.2g} K away from what the other sensors predict without it "
           f"(+-{Z95 * sd:.2g} K at 95 %), not far enough out to set it aside: the answer weighs a fault of "
           f"{name} (probability {p:.2f}) against a good reading, so its bands hold both; check or calibrate "
           f"{name} in place to settle it (a sharp feature of the face next to it, which the fit smooths, "
           f"would look the same)"]
    if others:
        out.append(f"{', '.join(others)} also read{'s' if len(others) == 1 else ''} away from the others' "
                   f"prediction (fault probability above {DOUBT:g}) but {'is' if len(others) == 1 else 'are'} "
                   f"not weighed: only the most doubtful sensor is; check {'it' if len(others) == 1 else 'them'} too")
    # the fit without it may warn of what the answer does not (a zone it alone saw); its
    # screening's own set-aside notes repeat the answer's with other numbers
    out += [f"without {name}: {w}" for w in broken_warnings if name not in w and " set aside: " not in w]
    return out


def weigh_doubtful(result, refit, loss: str = "linear", keeping=None):
    """`result`, or the mixture with refit(j) (the same fit with reading j set aside) when a
    sensor the screening passed is doubtful (`doubtful`); else, with `keeping` (keeping(name):
    the same fit with that sensor never set aside), the mixture with the fit that keeps the
    set-aside sensor whose fault is least sure, when its fault probability (from the fit
    without it) is below 1 - DOUBT (`set_aside_doubt`).  Not with a robust loss.  A refit the
    readings cannot carry leaves `result` with a warning."""
    if loss != "linear":
        return result
    vouched = set(result.options.keep_sensors)      # known good: never weighed
    found = [(j, p) for j, p in doubtful(result.sensors) if str(result.sensors.iloc[j]["sensor"]) not in vouched]
    if not found:
        back = set_aside_doubt(result.sensors) if keeping is not None else None
        return result if back is None else _weigh_back(result, keeping, *back)
    j, p_screen = found[0]
    row = result.sensors.iloc[j]
    name = str(row["sensor"])
    try:
        broken = refit(list(result.readings.names).index(name))
    except InverseError as exc:
        return _failed(result, f"sensor {name} may be broken (fault probability {p_screen:.2f}), but the fit "
                               f"without it failed ({exc}); the answer keeps it")
    # the weight from the fit without j: its prediction of j learned from the others alone
    held = broken.sensors.set_index("sensor").loc[name]
    delta, sd = float(held["measured"]) - float(held["loo_predicted"]), float(held["loo_sd"])
    p = float(fault_probability(np.array([delta]), np.array([sd ** 2]))[0])
    if not np.isfinite(p):
        p, delta, sd = p_screen, float(row["measured"]) - float(row["loo_predicted"]), float(row["loo_sd"])
    new = [x for x in broken.warnings if x not in set(result.warnings)]
    others = [str(result.sensors.iloc[i]["sensor"]) for i, _ in found[1:]]
    return weighed(result, broken, p, name, doubt_warnings(name, delta, sd, p, others, new))


def set_aside_doubt(table: pd.DataFrame):
    """(name, fault probability, delta [K], sd [K]) of the set-aside sensor whose fault is
    least sure, from the fit's prediction of it without it (the table's loo columns of a
    set-aside row), if that probability is below 1 - DOUBT; None when none is, or when the
    screening blamed the model (a sensor 'suspect')."""
    flag = table["flag"].to_numpy()
    aside = np.flatnonzero(flag == "set aside")
    if not aside.size or np.any(flag == "suspect"):
        return None
    rows = table.iloc[aside]
    delta = (rows["measured"] - rows["loo_predicted"]).to_numpy(float)
    sd = rows["loo_sd"].to_numpy(float)
    ok = np.isfinite(delta) & np.isfinite(sd) & (sd > 0)
    if not ok.any():
        return None
    p = np.where(ok, fault_probability(np.where(ok, delta, 0.0), np.where(ok, sd, 1.0) ** 2), np.inf)
    i = int(np.argmin(p))
    if not p[i] < 1.0 - DOUBT:
        return None
    return str(rows["sensor"].iat[i]), float(p[i]), float(delta[i]), float(sd[i])


def _weigh_back(result, keeping, name, p, delta, sd):
    """The mixture of `result` (sensor `name` set aside) with the fit that keeps it, weighed
    1 - p (p: its fault probability from `result`)."""
    try:
        kept = keeping(name)
    except InverseError as exc:
        return _failed(result, f"sensor {name} was set aside, though a good reading that far out is not unlikely "
                               f"(fault probability {p:.2f}); the fit that keeps it failed ({exc})")
    if set(kept.summary["set_aside"]) != set(result.summary["set_aside"]) - {name}:
        # keeping it moved which other sensors are set aside: the two fits differ by more than it
        return _failed(result, f"sensor {name} was set aside, though a good reading that far out is not unlikely "
                               f"(fault probability {p:.2f}); keeping it sets other sensors aside "
                               f"({', '.join(sorted(set(kept.summary['set_aside']) - set(result.summary['set_aside'])))}), "
                               "so the answer leaves it out")
    note = (f"sensor {name} was set aside ({delta:+.2g} K from what the other sensors predict, +-{Z95 * sd:.2g} K "
            f"at 95 %), but a good reading that far out is not unlikely (fault probability {p:.2f}): the answer "
            f"also weighs the fit that keeps it (weight {1.0 - p:.2f}); check or calibrate {name} in place to "
            f"settle it")
    out = weighed(result, kept, 1.0 - p, name, [note], fault=p)
    out.summary["sensor_doubt"]["weighed_back"] = True
    return out


def _failed(result, note):
    return replace(result, warnings=result.warnings + [note],
                   summary={**result.summary, "warnings": list(result.summary["warnings"]) + [note]})
