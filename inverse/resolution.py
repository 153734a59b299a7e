"""When the data cannot say: one plain warning naming what the readings leave unresolved.

Two checks, one message:

- Quantities whose posterior is close to their prior: for each zone, the deviation of its
  mean from the face mean, f = f_zone - f_mean (the nearly free nominal level cancels), is
  unresolved when sd_post(f) / sd_prior(f) > UNRESOLVED_RATIO, i.e. the readings removed
  less than about half of its prior variance. The face mean and the total power are checked
  the same way (they rarely trip: their prior includes the nearly free nominal level).
  sd_prior is the prior averaged over the hyperparameters' posterior.
- The learned prior's amplitude (inverse.hyperprior) set by its hyperprior, not the data.
- Offsets as large as the signal: the declared thermocouple offset sd (rms over the sensors,
  with a common offset added in quadrature) against the readings' spread after removing the
  known field and the fitted nominal level, rms(d - t0 - G c0) [K]: comparable when
  offset_rms > OFFSET_RATIO x spread.

The proper hyperprior already keeps such bands wide; the warning says why and what would
fix it: calibrating the thermocouples in place, more sensors near the face, or following
changes with `heatsight trend`, where fixed offsets cancel.
"""

from __future__ import annotations

import numpy as np

#: posterior sd / prior sd above which a quantity counts as unresolved (common practice, no source)
UNRESOLVED_RATIO = 0.7
#: declared offset rms / readings' spread above which offsets rival the signal (common practice, no source)
OFFSET_RATIO = 0.5
#: a zone whose mean differs from the face mean by less than this (relative, in its rows on the
#: coefficients) covers the whole face: its deviation is round-off, not a quantity to resolve
WHOLE_FACE = 1e-6


def _post_and_prior_sd(posterior, problem, B):
    """(posterior sd, prior sd) of B c, each (q,). posterior: inverse.result.Posterior."""
    mix = getattr(posterior, "averaged", None)
    _, sd, _, _ = posterior.band(B, np.zeros(B.shape[0]))
    if mix is not None and hasattr(mix, "prior_sd"):
        return np.asarray(sd), np.asarray(mix.prior_sd(B))
    prior = np.sqrt((B ** 2) @ (1.0 / (float(posterior.alpha) * problem.prior_diag)))
    return np.asarray(sd), prior


def unresolved_warning(posterior, problem, functionals, face: str, offset_sd=None,
                       common_offset_sd=None) -> str | None:
    """One warning (or None) for quantities the readings leave unresolved (see module doc).

    posterior: inverse.result.Posterior (with .band, .alpha, .averaged); problem: the final
    LinearGaussianProblem (readings in the fit); functionals: [(name, f (K,), k), ...] from
    inverse.functionals.face_functionals (mean, total_power, zones...); offset_sd: declared
    per-sensor offset sd [K] of the readings in the fit; common_offset_sd [K] or None.
    """
    names, rows = [], []
    by_name = {name: f for name, f, _ in functionals}
    f_mean = by_name.get("mean")
    for name, f, _ in functionals:
        if name in ("mean", "total_power"):
            rows.append(f)
            names.append("the face mean" if name == "mean" else "the total power")
        else:
            dev = f - f_mean
            if f_mean is not None and np.linalg.norm(dev) <= WHOLE_FACE * np.linalg.norm(f):
                continue        # a zone over the whole face: its mean is the face mean's, no deviation
            rows.append(dev)
            names.append(f"zone {name}")
    unresolved = []
    mix = getattr(posterior, "averaged", None)
    if hasattr(mix, "description") and mix.description().get("hyperprior_dominated"):
        unresolved.append("how far the face departs from its nominal profile (that amplitude follows its "
                          "hyperprior, scaled from the readings' spread)")
    if rows:
        post, prior = _post_and_prior_sd(posterior, problem, np.array(rows))
        ratio = post / np.maximum(prior, 1e-300)
        unresolved += [n for n, q in zip(names, ratio) if q > UNRESOLVED_RATIO]

    offsets = None
    tau = np.zeros(problem.n) if offset_sd is None else np.broadcast_to(np.asarray(offset_sd, float), (problem.n,))
    tau_rms = float(np.sqrt(np.mean(tau ** 2) + (common_offset_sd or 0.0) ** 2))
    spread = float(np.sqrt(np.mean((problem.d - problem.t0 - problem.G @ problem.c0) ** 2)))
    if tau_rms > 0 and tau_rms > OFFSET_RATIO * spread:
        offsets = (f"the declared thermocouple offsets (rms {tau_rms:.2g} K) are comparable to the readings' "
                   f"spread about the nominal profile ({spread:.2g} K)")
    if not unresolved and offsets is None:
        return None
    parts = []
    if unresolved:
        parts.append("these readings cannot resolve " + ", ".join(unresolved) +
                     f" (the readings narrow its uncertainty by less than {1 - UNRESOLVED_RATIO:.0%}, or only "
                     "the assumptions bound it)")
    if offsets:
        parts.append(offsets)
    return ("; ".join(parts) + ". The bands there are wide for that reason. What would help: calibrating "
            f"the thermocouples in place, more sensors near the {face} face, or following changes with "
            "`heatsight trend`, where fixed offsets cancel.")
