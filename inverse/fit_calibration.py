"""Calibrated face parameters in inverse.fit: the design at the parameters calibrated on the
sensors a first screening keeps, and the screening again at the parameters calibrated under
the learned prior, with their step integrated out (marginal_columns.py)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .calibration import calibrate
from .diagnostics import screen_outliers
from .fit_posterior import smooth_posterior
from .fit_problem import linear_problem
from .fit_screening import protected, screen_sensors
from .marginal_columns import MarginalColumns
from .strength import choose_strength


def calibrated_design(design, rd, problem, P, opts, gross):
    """The design at calibrated face parameters, calibrated on the sensors that pass a first
    screening at the nominal ones (a faulty sensor cannot drag h with it); screening and the
    sensor table then use the calibrated parameters, not nominal ones that may be off."""
    request = opts.strength_request
    if opts.keep_all_sensors:
        kept, alpha = np.ones(rd.n, dtype=bool), choose_strength(problem, request).alpha
    else:
        # at the nominal parameters the model is known to be off: no model-first rule here
        pre = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names,
                              preset=gross, protect=protected(rd, opts))
        kept, alpha = pre.kept, pre.strength.alpha
    cal = calibrate(design, rd, kept, problem.subset(np.flatnonzero(kept)), alpha, P, opts.calibration)
    return cal.design


def step_screening(post, rd, P, u, ok, base, problem, screen, opts, gross, warnings):
    """(base, problem, shift, screening, posterior) at the parameters calibrated under the
    learned prior: the problems rebuilt there, shift = (step columns, step prior mean, sd) for
    the zone model, and the smooth model's screening again with the parameters' step
    integrated out (marginal_columns.py), so that a sensor's leave-one-out prediction carries
    the calibration's uncertainty (at fixed h the demo platen's healthy TC18, 8 mm under the
    calibrated top, was set aside: score -3.5 against 3.28); the calibration again when the
    kept sensors change (at most twice)."""
    for attempt in range(3):
        cal = post.calibration
        G, t0 = cal.design.sensors(rd.r, rd.theta, rd.z)
        base = linear_problem(G, t0, base.noise, rd, P, u, ok)
        problem = linear_problem(G, t0, problem.noise, rd, P, u, ok)
        shift = (cal.step_columns, cal.step_prior[0] - cal.values, cal.step_prior[1])
        marginal = screen_sensors(MarginalColumns(problem, *shift).marginal, rd, opts, gross)
        if np.array_equal(marginal.kept, screen.kept) or attempt == 2:
            return base, problem, shift, marginal, post
        screen = replace(marginal, problem=problem.subset(np.flatnonzero(marginal.kept)))
        post = smooth_posterior(cal.design, rd, screen, P, u, opts, warnings)
