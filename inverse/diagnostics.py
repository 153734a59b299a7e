"""Sensor health: residuals, leave-one-out predictions, and screening of outlying sensors.

`sensor_table` reports, at the fit's alpha, the standardized LOO error
z_i = (d_i - E[d_i | d_-i]) / sd(d_i | d_-i), N(0, 1) for a healthy sensor under the model.
`screen_outliers` decides on `averaged_loo` scores instead: the same check averaged over
alpha with weights that reading i does not influence (a faulty sensor near the face can
otherwise drive the evidence to a tiny alpha, fit itself, and mask its own LOO error).
A sensor is set aside when |score| exceeds

    t(m) = Phi^-1(1 - family_level / (2 m)),   m = sensors in the fit, family_level = 0.02,

a Bonferroni bound: with all m sensors healthy, P(any |score| > t) <= family_level. The
level is 0.02 rather than 0.05 so that "no sensor set aside in >= 95 % of healthy data
sets" holds with a margin: the bound is nearly tight for weakly correlated scores, so a 5 %
family level sits right on the 95 % line. t = 3.23 for m = 16, 3.29 for 20, 3.42 for 32,
3.61 for 64; a fault of 5 predictive sd is caught about 95 % of the time at m = 20.

Model first (`model_first=True`, as inverse.fit screens): when the screening would set
aside several sensors together -- at least MODEL_SUSPECT_COUNT, or more than
MODEL_SUSPECT_FRACTION of them (and always more than one) -- a shared cause (basis, prior
or face conditions) is likelier than that many independent faults, so none of them is set
aside; they are flagged 'suspect' and one warning says the model is the likely culprit.
Gross faults found by the robust first pass (inverse.robust) arrive as `preset` and stay out.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.special import log_ndtr, logsumexp, ndtr, ndtri, ndtri_exp

from .contamination import fault_probability
from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem
from .strength import StrengthChoice, choose_strength, default_alphas
from .strength_average import mixture_band

FAMILY_LEVEL = 0.02
MODEL_SUSPECT_COUNT = 3        # common practice, no source
#: the fewest sensors a screening leaves in a fit
MIN_KEPT = 3
MODEL_SUSPECT_FRACTION = 0.15  # common practice, no source
#: a sensor whose fixed offset the check catches only beyond this is named in a warning: four
#: times the 2.5 K of a class 2 type K tolerance at moderate temperature (IEC 60584-1: 2.5 K
#: or 0.75 % of the temperature in degC, whichever is larger; from memory); our own rule
UNCHECKED_OFFSET_K = 10.0
COLUMNS = ("sensor", "measured", "fitted", "residual", "standardized", "leverage",
           "loo_predicted", "loo_sd", "standardized_loo", "caught_offset", "flag")


def default_threshold(n_sensors: int, family_level: float = FAMILY_LEVEL) -> float:
    """Bonferroni threshold on |standardized LOO error|: Phi^-1(1 - family_level / (2 n))."""
    if n_sensors < 1 or not 0 < family_level < 1:
        raise InverseError("need at least one sensor and 0 < family_level < 1")
    return float(-ndtri(family_level / (2.0 * n_sensors)))   # norm.isf


def _names(names, n):
    if names is None:
        return [f"s{i}" for i in range(n)]
    names = [str(x) for x in names]
    if len(names) != n:
        raise InverseError(f"{len(names)} sensor names for {n} readings")
    return names


def sensor_table(problem: LinearGaussianProblem, alpha: float, names=None,
                 threshold: float | None = None) -> pd.DataFrame:
    """One row per reading of the solved problem (alpha given).

    measured d_i, fitted t0_i + G_i c, residual d_i - fitted_i, standardized = residual /
    sqrt(S_ii), leverage H_ii, loo_predicted E[d_i | d_-i], loo_sd its predictive sd,
    standardized_loo = (d_i - loo_predicted) / loo_sd, caught_offset = threshold * loo_sd
    [K] (the smallest fixed offset of the reading this check flags), flag 'ok' or 'suspect'
    (|standardized_loo| > threshold, default `default_threshold(n)`).
    """
    alpha = float(alpha)
    t = default_threshold(problem.n) if threshold is None else float(threshold)
    loo = LooScores.at(problem, alpha)
    z = loo.z
    fitted = problem.fitted(alpha)
    return pd.DataFrame({
        "sensor": _names(names, problem.n),
        "measured": problem.d,
        "fitted": fitted,
        "residual": problem.d - fitted,
        "standardized": problem.standardized_residuals(alpha),
        "leverage": problem.hat_diagonal(alpha),
        "loo_predicted": loo.predicted,
        "loo_sd": loo.sd,
        "standardized_loo": z,
        "caught_offset": loo.caught_offset(t),
        "flag": np.where(np.abs(z) > t, "suspect", "ok"),
    }, columns=list(COLUMNS))


@dataclass(frozen=True)
class LooScores:
    """Alpha-averaged leave-one-out check of every reading: z (n,) standardized score,
    predicted (n,) mean and sd (n,) of reading i given the others [K]; components: the
    predictive mixture (weights, means, sds), each (m, n), when averaged over alpha."""

    z: np.ndarray
    predicted: np.ndarray
    sd: np.ndarray
    components: tuple | None = None

    @classmethod
    def at(cls, problem: LinearGaussianProblem, alpha: float) -> "LooScores":
        """The check at one alpha: z = standardized LOO error, E[d_i | d_-i] and its sd."""
        return cls(problem.standardized_loo(alpha), problem.loo_predicted(alpha), problem.loo_sd(alpha))

    def caught_offset(self, threshold: float) -> np.ndarray:
        """(n,) [K]: the smallest fixed offset of a reading, from the middle of its predictive
        distribution given the others, that the check flags: half the width of the interval
        [Q(Phi(-t)), Q(Phi(t))] of that distribution (|z| > t outside it); t sd for one alpha,
        the mixture's quantiles (heavier tails) when averaged."""
        t = float(threshold)
        if self.components is None:
            return t * self.sd
        lo, hi = mixture_band(*self.components, 2.0 * float(ndtr(t)) - 1.0)     # weights per sensor
        return 0.5 * (hi - lo)

    def fault_probability(self, d) -> np.ndarray:
        """(n,): the probability that each reading d (n,) [K] is broken, given the others
        (contamination.fault_probability on this predictive: one Gaussian, or the mixture
        over alpha)."""
        d = np.asarray(d, float)
        if self.components is None:
            return fault_probability(d - self.predicted, self.sd ** 2)
        w, pred, sd = self.components
        return fault_probability(d[None, :] - pred, sd ** 2, w)


def averaged_loo(problem: LinearGaussianProblem, alphas=None) -> LooScores:
    """Predictive check of each reading from the others, averaged over alpha.

    With u_ik = LOO error / LOO sd at alpha_k and weights w_ik ∝ p(d_-i | alpha_k) (prior
    flat in log alpha on the grid, default `default_alphas`):

        z_i = Phi^-1( sum_k w_ik Phi(u_ik) ),

    the probability-integral transform of d_i under its predictive p(d_i | d_-i); N(0, 1)
    for a healthy sensor. Reading i has no say in its own alpha weights, so a faulty
    sensor cannot hide by pulling alpha down and fitting itself with rough modes.
    """
    grid = default_alphas(problem) if alphas is None else np.asarray(alphas, dtype=float)
    e, sd, lw = problem.loo_summary(grid)                                 # (m, n) each
    lw = lw - logsumexp(lw, axis=0)
    u = e / sd
    lo = logsumexp(lw + log_ndtr(u), axis=0)          # log P(D_i <= d_i)
    hi = logsumexp(lw + log_ndtr(-u), axis=0)         # log P(D_i >= d_i)
    z = np.where(lo < hi, ndtri_exp(lo), -ndtri_exp(hi))
    w = np.exp(lw)
    pred = problem.d[None, :] - e
    mean = np.sum(w * pred, axis=0)
    var = np.sum(w * (sd**2 + (pred - mean) ** 2), axis=0)
    return LooScores(z, mean, np.sqrt(var), (w, pred, sd))


@dataclass(frozen=True)
class SetAside:
    """A sensor set aside: its name, index in the original problem, the score and threshold
    that triggered it, and a sentence saying why."""

    sensor: str
    index: int
    score: float
    threshold: float
    reason: str


@dataclass
class Screening:
    """Outcome of `screen_outliers`.

    set_aside: in the order they were set aside; kept: boolean mask (n,) of sensors in the
    final fit; problem, strength: the final fit; table: `sensor_table` columns for all n
    sensors (set-aside ones predicted from the final fit; the kept ones' loo_predicted,
    loo_sd and standardized_loo from the screening's own check, LooScores) plus `score`, the screening
    statistic (for set-aside sensors, its value when they were set aside), `caught_offset`
    of that statistic (LooScores.caught_offset; NaN for a set-aside sensor),
    `fault_probability` (LooScores.fault_probability; NaN for a set-aside sensor); flag 'ok',
    'suspect' (|score| > threshold but not set aside) or 'set aside'.
    """

    set_aside: list
    kept: np.ndarray
    problem: LinearGaussianProblem
    strength: StrengthChoice
    table: pd.DataFrame
    warnings: list = field(default_factory=list)


def model_suspect(count: int, n: int) -> bool:
    """Several sensors failing together point at the model: count >= 2 and (count >=
    MODEL_SUSPECT_COUNT or count > MODEL_SUSPECT_FRACTION n)."""
    return count >= 2 and (count >= MODEL_SUSPECT_COUNT or count > MODEL_SUSPECT_FRACTION * n)


def screen_outliers(problem: LinearGaussianProblem, strength="evidence", threshold: float | None = None,
                    names=None, family_level: float = FAMILY_LEVEL, max_set_aside: int | None = None,
                    min_kept: int = MIN_KEPT, preset=(), model_first: bool = False, protect=(),
                    spare=()) -> Screening:
    """Set aside outlying sensors one at a time, then fit with alpha chosen by `strength`.

    Repeat on the sensors still in: score every sensor by `averaged_loo` (for a fixed
    numeric strength: the standardized LOO error at that alpha); if the largest |score|
    exceeds the threshold (default Phi^-1(1 - family_level / (2 m)), m = sensors still
    in), set that sensor aside. Stops at `max_set_aside` (default n // 4: beyond that the
    model, not the sensors, is suspect) or when only `min_kept` sensors would remain.
    preset: SetAside entries (gross faults) out from the start. model_first: see module doc.
    protect: indices of readings never set aside (their scores still reported and flagged);
    when the worst reading beyond the threshold is one of them the screening stops, with a warning.
    spare: indices of readings another model explains (the caller says so): never set aside,
    flagged 'suspect' beyond the limit, and passed over: the worst of the others is judged.
    """
    n = problem.n
    names = _names(names, n)
    cap = max(1, n // 4) if max_set_aside is None else int(max_set_aside)
    fixed = not isinstance(strength, str)
    keep = np.ones(n, dtype=bool)
    score = np.full(n, np.nan)
    out, warns = list(preset), []
    for s in out:
        keep[s.index] = False
        score[s.index] = s.score
    n_preset = len(out)
    protected, spared = {int(x) for x in protect}, {int(x) for x in spare}

    def check(sub):
        return LooScores.at(sub, float(strength)) if fixed else averaged_loo(sub)

    def limit(m):
        return default_threshold(m, family_level) if threshold is None else float(threshold)

    while True:       # ends with sc the check of the sensors still in (sub, idx)
        idx = np.flatnonzero(keep)
        sub = problem if idx.size == n else problem.subset(idx)
        sc = check(sub)
        score[idx] = sc.z
        t = limit(sub.n)
        # the worst reading that is not spared (a spared one beyond the limit stays in, flagged)
        order = np.argsort(-np.abs(sc.z), kind="stable")
        j = next((int(k) for k in order if int(idx[k]) not in spared or int(idx[k]) in protected), None)
        if j is None or abs(sc.z[j]) <= t:
            break
        if int(idx[j]) in protected:
            # the worst reading is one the user vouches for: setting others aside in its place
            # would only make room for it
            warns.append(f"sensor {names[idx[j]]} is kept as asked (keep_sensors) although its score "
                         f"{sc.z[j]:+.1f} is beyond {t:.2f}: no other sensor is set aside in its place; if it "
                         "is not known good, drop it from keep_sensors")
            break
        if len(out) - n_preset >= cap or sub.n - 1 < min_kept:
            why = (f"setting it aside would leave fewer than {min_kept} sensors in the fit"
                   if sub.n - 1 < min_kept else
                   f"{len(out) - n_preset} already are, the most this screening sets aside of {n} sensors")
            warns.append(f"sensor {names[idx[j]]} still exceeds the threshold (|score| = {abs(sc.z[j]):.2f} > "
                         f"{t:.2f}) but is kept: {why}; check the model and the sensor layout")
            break
        i = int(idx[j])
        diff = float(sub.d[j] - sc.predicted[j])
        reason = (f"reading differs from the prediction of the other {sub.n - 1} sensors by {diff:+.3g} K "
                  f"(predictive sd {sc.sd[j]:.2g} K, score {sc.z[j]:+.1f}), beyond {t:.2f} (Bonferroni, "
                  f"family-wise {100 * family_level:g} % over {sub.n} sensors)")
        out.append(SetAside(names[i], i, float(sc.z[j]), t, reason))
        keep[i] = False
    together = out[n_preset:]
    if model_first and model_suspect(len(together), n):
        for s in together:
            keep[s.index] = True
        idx = np.flatnonzero(keep)
        sub = problem if idx.size == n else problem.subset(idx)
        out = out[:n_preset]
        sc = check(sub)
        score[idx] = sc.z
        warns.append(f"{len(together)} sensors ({', '.join(s.sensor for s in together)}) disagree with the "
                     "model together: the model (face conditions, h or ambient, the prior or the sensor "
                     "positions) is the likelier culprit than that many faults, so none of them is set "
                     "aside; they are flagged suspect")
    choice = choose_strength(sub, strength)
    warns.extend(choice.warnings)
    table = _final_table(problem, sub, idx, keep, choice.alpha, names)
    # the kept sensors' prediction from the others is the one the score judges (averaged over
    # alpha: the predictive mixture's mean and sd), so that the table's prediction, its sd and
    # the score describe one check
    table.loc[idx, "loo_predicted"] = sc.predicted
    table.loc[idx, "loo_sd"] = sc.sd
    table.loc[idx, "standardized_loo"] = (sub.d - sc.predicted) / sc.sd
    table["score"] = score
    t = limit(sub.n)
    caught = np.full(n, np.nan)           # a set-aside sensor is no longer checked
    caught[idx] = sc.caught_offset(t)
    table["caught_offset"] = caught
    fault = np.full(n, np.nan)            # and no longer weighed
    fault[idx] = sc.fault_probability(sub.d)
    table["fault_probability"] = fault
    table["flag"] = np.where(~keep, "set aside", np.where(np.abs(score) > t, "suspect", "ok"))
    table = table[list(COLUMNS[:-1]) + ["score", "fault_probability", "flag"]]
    return Screening(out, keep, sub, choice, table, warns)


def unchecked_warnings(table, limit: float = UNCHECKED_OFFSET_K) -> list[str]:
    """One warning naming the sensors in the fit that the others can check only for large
    faults: caught_offset [K] beyond `limit`.  Such a sensor sees its part of the face nearly
    alone (leverage near 1), so a smaller fault there moves the answer without showing in
    any score."""
    fit = table[table["flag"] != "set aside"]
    weak = fit[fit["caught_offset"] > limit]
    if weak.empty:
        return []
    lo, hi = (f"{x:.0f}" if x < 1e6 else f"{x:.2g}" for x in (weak["caught_offset"].min(),
                                                              weak["caught_offset"].max()))
    size = f"{lo} K" if lo == hi else f"{lo}-{hi} K"
    names = ", ".join(map(str, weak["sensor"]))
    if len(weak) == 1:
        who, them = f"Sensor {names} is", "it"
    elif len(weak) == len(fit):
        who, them = "Every sensor is", "each of them"
    else:
        who, them = f"{len(weak)} of {len(fit)} sensors ({names}) are", "each of them"
    return [f"{who} checked by the others only for large faults: an offset would show only beyond {size} "
            f"(the caught offset of each sensor), so a smaller fault would move the answer near {them} "
            f"without any sign. What would help: a second sensor near {them}, or calibrating the "
            f"thermocouples in place"]


def _final_table(problem, sub, idx, keep, alpha, names):
    """sensor_table of the kept sensors plus out-of-fit predictions of the set-aside ones."""
    rows = sensor_table(sub, alpha, [names[i] for i in idx])
    rows.index = idx
    gone = np.flatnonzero(~keep)
    if gone.size:
        mean, sd = problem.held_out_prediction(alpha, gone)
        fitted = problem.t0[gone] + problem.G[gone] @ sub.coefficients(alpha)
        d = problem.d[gone]
        extra = pd.DataFrame({
            "sensor": [names[i] for i in gone], "measured": d, "fitted": fitted,
            "residual": d - fitted, "standardized": (d - fitted) / problem.noise.own_sd[gone],
            "leverage": 0.0, "loo_predicted": mean, "loo_sd": sd,
            "standardized_loo": (d - mean) / sd, "flag": "set aside"}, index=gone)
        rows = pd.concat([rows, extra])
    return rows.sort_index().reset_index(drop=True)
