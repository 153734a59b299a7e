"""inverse.fit: reconstruct the unknown face from a snapshot of readings.

Model (design notes §5): d = t0 + G c + b + e, G = unknown-face basis fields at the
sensors (forward.UnknownBasis), t0 = known field, b ~ N(0, diag(tau^2)) thermocouple
offsets (marginalized: S = diag(sigma^2 + tau^2 + placement variance)), prior
c ~ N(c0, (alpha P)^-1) with P_k = (N_k / A) (1 + a^2 ev_k)^s (design.prior_diagonal).
c0 = gamma u, u = the nominal profile's shape (design.nominal_direction), gamma its
generalized-least-squares level over the readings that pass the gross-fault screen
(robust.py: an overflow code must not move anything the readings feed).  Strength alpha:
evidence (then, by default, the posterior is averaged over strength, length scale and
order of a Whittle-Matern prior: hyperprior.py), GCV, L-curve, discrepancy or fixed.  Optional: convection
parameters calibrated jointly (calibration.py) and the heater-zone model (zones.py).

The steps, each a function of its own module: the readings' problem with its noise, placement,
left-out modes and unseen-stretch steps (fit_problem.py), calibration (fit_calibration.py),
screening (fit_screening.py), the smooth model's posterior (fit_posterior.py), the zone models
and the choice of model (fit_models.py), warnings (fit_warnings.py), derived figures (result.py),
a doubtful sensor weighed (sensor_doubt.py).
"""

from __future__ import annotations

from dataclasses import replace
from types import SimpleNamespace

import numpy as np

from .design import Design, smooth_prior
from .diagnostics import SetAside
from .errors import InverseError
from .fit_models import build_zone_models, choose_model
from .fit_posterior import smooth_posterior
from .fit_problem import (answer_tails, calibrated_tails, lead_tail_prior, linear_problem, reading_noise,
                          steps_given_kept, with_placement, with_tail)
from .fit_calibration import calibrated_design, step_screening
from .fit_screening import screen_sensors, settled_screen
from .fit_warnings import layout_warnings, misfit_warnings, truncation_warnings, unresolved_warnings
from .hyperprior import LearnedPrior
from .marginal_sets import prior_at_points
from .monte_carlo import placement_draws
from .pinned_edges import pinned_edge_notes
from .problem import Problem
from .readings import as_readings
from .result import FitResult, valid_zones
from .robust import gross_faults
from .sensor_doubt import weigh_doubtful
from .threads import few_threads


@few_threads
def fit(problem, readings, *, progress=None, stage=None, **overrides) -> FitResult:
    """Fit the unknown face of `problem` (an inverse.Problem, or anything with .cylinder,
    .faces and optionally .zones and .fit; see Problem.from_case) to `readings`
    (SensorReadings or a table with r, theta, z, temperature, sigma, offset_sd,
    position_tolerance in SI).  Keyword overrides are FitOptions fields; strength may be
    'evidence' | 'auto' | 'gcv' | 'lcurve' | 'discrepancy' | a number, and calibrate a
    {(face, 'h' | 'ambient'): (prior mean, prior sd) or None}.  progress(done, total) is
    called during Monte Carlo draws, stage(k, n, text) as each of the fit's n steps begins
    (k = 1..n; a step that does not apply is skipped).  BLAS runs on one thread inside
    (inverse.threads)."""
    spec = Problem.from_case(problem, **overrides)
    opts = spec.options
    rd = as_readings(readings)
    if rd.n < 2:
        raise InverseError(f"at least 2 usable sensors are needed, got {rd.n}")
    if opts.calibrate and opts.model == "zones" and not opts.learned_prior:
        raise InverseError("the zone model with calibrated face parameters needs the learned prior "
                           "(strength = \"evidence\", prior = \"learned\", no Monte Carlo); "
                           "use model = \"smooth\" or drop calibrate")
    steps = _Steps(stage, opts, spec)
    unknown = [n for n in opts.keep_sensors if n not in set(rd.names)]
    if unknown:
        raise InverseError(f"keep_sensors names {', '.join(unknown)}, not a sensor with a usable reading")
    result = _fit(spec, rd, steps, progress)

    def without(j):
        steps.extra(f"weighing sensor {rd.names[j]}: the fit without it")
        return _fit(spec, rd, _Steps(None, opts, spec), None, aside=j)

    def keeping(name):
        steps.extra(f"weighing sensor {name}: the fit that keeps it")
        kept = replace(spec, options=replace(opts, keep_sensors=opts.keep_sensors + (name,)))
        return _fit(kept, rd, _Steps(None, kept.options, kept), None)
    # a sensor the screening passed whose fault the readings make likely, or one it set aside
    # whose fault they leave in doubt, is weighed: the answer mixes this fit with the one
    # that sets it aside or keeps it (sensor_doubt.py)
    return weigh_doubtful(result, without, opts.loss, keeping)


def _fit(spec, rd, step, progress, aside=None) -> FitResult:
    """One fit of the readings rd (inverse.fit's steps); aside: the index of a reading set
    aside from the start (the doubtful sensor's alternative, sensor_doubt.py)."""
    opts = spec.options
    face = spec.unknown_face
    step("series of the part at the sensors")
    design = Design(spec.cylinder, spec.faces, opts.tolerance, *opts.basis_size)
    P, u = smooth_prior(design.basis, spec.cylinder.radius, opts.smoothing)
    warnings: list[str] = []
    G, t0, ev, dG = design.at(rd.r, rd.theta, rd.z, gradient=True)
    warnings += truncation_warnings(ev, rd)
    # Gross faults (overflow codes and the like) go before anything the readings feed: the
    # nominal level, the placement variance, the strength.
    noise = reading_noise(rd, opts)
    gross = [] if opts.keep_all_sensors else gross_faults(rd.temperature - t0, G @ u, noise, rd.names, rd.temperature)
    if aside is not None:
        gross.append(SetAside(rd.names[aside], aside, float("nan"), float("nan"),
                              "weighed as possibly broken: this fit is the answer without it"))
    ok = np.ones(rd.n, dtype=bool)
    ok[[g.index for g in gross]] = False
    base = with_placement(linear_problem(G, t0, noise, rd, P, u, ok), rd, ev, dG, P, u, ok, opts)
    if opts.calibrate:
        step("calibrating " + ", ".join(f"{face}.{what}" for face, what in opts.calibrate))
        design = calibrated_design(design, rd, base, P, opts, gross)
        base = linear_problem(*design.sensors(rd.r, rd.theta, rd.z), base.noise, rd, P, u, ok)
    step("screening the sensors, learning the prior")
    # the left-out modes' variance is learned without the sensors a first screening (without
    # it) suspects: a broken sensor would otherwise widen it and hide itself; with calibrated
    # parameters, at the calibrated ones
    first_screen = screen_sensors(base, rd, opts, gross) if opts.learned_prior else None
    problem, tail_prior, steps = (with_tail(base, design, rd, P, u, first_screen.kept,
                                             stretch=not opts.calibrate,
                                             zones=valid_zones(spec.zones, design.face_name, spec.cylinder, []))
                                  if opts.learned_prior else (base, None, None))

    smooth = screen_sensors(problem, rd, opts, gross)
    post = smooth_posterior(design, rd, smooth, P, u, opts, warnings)
    shift = None
    if post.calibration is not None and post.calibration.step_columns is not None:
        # the learned prior's calibration: the zone model shares the parameters' step
        base, problem, shift, smooth, post = step_screening(post, rd, P, u, ok, base, problem, smooth, opts,
                                                             gross, warnings)
    if post.calibration is not None:
        design = post.calibration.design
    # each model screens the sensors itself: a sensor one model cannot explain may be
    # healthy under the other (model_choice.py compares them on all the readings); the zone
    # model never sets aside a sensor the smooth model finds unremarkable (`spare`): a reading
    # only the zone model fails on says the zones are not heater footprints
    # (tests/scenario_holdout.py, lamp_spot and vessel_hotspot: two healthy sensors set aside
    # in every seed before)
    spare = unremarkable(smooth, first_screen)
    if step.zones:
        step("the heater-zone model")
    zone_models = build_zone_models(spec, design, rd, base, warnings, post, shift)
    learned_prior = post.averaged if isinstance(post.averaged, LearnedPrior) else None
    leading = learned_prior.leading() if learned_prior is not None and zone_models else None
    if zone_models and opts.learned_prior:
        # the zone levels' scale is chosen before the remainder's tail is learned (a scale too
        # small leaves the zones' structure to the tail, whose variance then widens every
        # band), the tail on the sensors that pass at that scale
        first = zone_models[0]
        if leading is not None:
            first.choose_level_scale(screen_sensors(first.marginal, rd, opts, gross, spare).kept, leading)
        # the zone models' learned priors take the smooth model's length scales (widened or
        # not, hyperprior.learn_prior): both models are compared on one grid of length scales
        # and one amplitude hyperprior
        first.add_tail(design, rd, u > 0, screen_sensors(first.marginal, rd, opts, gross, spare).kept,
                       like=learned_prior,
                       extra=0.0 if steps is None else steps.covariance)
        for other in zone_models[1:]:
            other.share_tail(first)
    zscreens = [settled_screen(zm, rd, opts, gross, leading, spare=spare) for zm in zone_models]
    columns, post, screen, model_info, zone_model = choose_model(opts, design, zone_models, zscreens, smooth, steps,
                                                                  post, u, problem, warnings, spare)
    # the chosen model's screening notes lead; a learned prior's answer drops the fixed
    # prior's strength-grid notes
    learned = hasattr(post.averaged, "description") or "prior" in model_info
    warnings[:0] = [w for w in screen.warnings if not (learned and w in screen.choice.warnings)]

    warnings += layout_warnings(face, spec.cylinder, rd.subset(screen.kept), steps, design.quantity)
    warnings += pinned_edge_notes(design)
    warnings += unresolved_warnings(post, screen, columns, design, spec, rd)
    warnings += misfit_warnings(screen)
    if steps is not None:
        model_info = {**model_info, **steps.summary()}
    if hasattr(post.averaged, "description") and "prior" not in model_info:
        model_info = {**model_info, "prior": post.averaged.description()}
    mc = None
    if opts.monte_carlo and columns is design:
        step("Monte Carlo draws of the sensor positions")
        alphas = post.averaged.alpha_mixture() if post.averaged is not None else \
            (np.array([screen.choice.alpha]), np.ones(1))
        mc = placement_draws(design, rd, screen.kept, P, screen.problem, alphas, int(opts.monte_carlo),
                             opts.seed, opts.grid, progress)
    elif opts.monte_carlo:
        step.skip()
        warnings.append("Monte Carlo draws of sensor positions are not available with the zone model; "
                        "the bands are the zone model's posterior")
    figure_tails = map_tail = point_tail = marginal = gradient_tail = None
    if tail_prior is not None and post.calibration is None and mc is None:
        figure_tails, map_tail, point_tail, marginal, gradient_tail = answer_tails(
            model_info["model"], columns, design, rd, screen.kept, problem, tail_prior, zone_model,
            valid_zones(spec.zones, face, spec.cylinder, []), steps)
    elif tail_prior is not None and mc is None:     # calibrated: the left-out modes' prior variance
        map_tail, point_tail = calibrated_tails(design, rd, screen.kept,
                                                lead_tail_prior(model_info["model"], tail_prior, zone_model), steps)
    step("bands, zones and power of the answer")
    sensors = _answer_residuals(screen.table, post, columns, rd, problem, zone_model, model_info["model"] == "zones",
                                steps, screen.kept, point_tail, marginal)
    return FitResult.build(spec=spec, design=columns, readings=rd, kept=screen.kept, problem=screen.problem,
                           choice=screen.choice, posterior=post, sensors=sensors,
                           set_aside=screen.set_aside, warnings=list(dict.fromkeys(warnings)),
                           monte_carlo=mc, extra=model_info, figure_tails=figure_tails, map_tail=map_tail,
                           point_tail=point_tail, gradient_tail=gradient_tail,
                           marginal=marginal)


class _Steps:
    """stage(k, n, text) as each step of a fit begins (fit's `stage`; None: silent).  n counts
    the steps this fit takes: the series, the screening with the prior, the answer's bands,
    and the calibration, the zone model and the Monte Carlo draws where they apply; a
    doubtful sensor's weighing, found at the end, adds one (`extra`)."""

    def __init__(self, stage, opts, spec):
        self.stage, self.done = stage, 0
        self.zones = bool(spec.zones) and opts.model != "smooth"
        self.total = 3 + bool(opts.calibrate) + self.zones + bool(opts.monte_carlo)

    def __call__(self, text):
        self.done = min(self.done + 1, self.total)
        if self.stage is not None:
            self.stage(self.done, self.total, text)

    def skip(self):
        """A counted step that does not run after all (the Monte Carlo draws under the zone model)."""
        self.total -= 1

    def extra(self, text):
        """A step found only at the end (weighing a doubtful sensor): counted as it begins."""
        self.total += 1
        self(text)


def unremarkable(smooth, first=None) -> np.ndarray:
    """Indices of the readings the smooth model finds unremarkable: flagged 'ok' by its
    screening and, with the learned prior, by the first screening, before the left-out modes
    and the unseen stretches' steps widen every reading's variance.  That screening vouches
    for a reading; the widened one alone does not: it explains a +6 K fault away (the suite's
    tube bore, TC07: score 1.8 with the widened variance, 4.5 without; the zone model's 3.6)."""
    ok = np.asarray(smooth.table["flag"]) == "ok"
    if first is not None:
        ok &= np.asarray(first.table["flag"]) == "ok"
    return np.flatnonzero(ok)


def _answer_residuals(table, post, columns, rd, problem, zone_model, zones_lead=False, steps=None, kept=None,
                      point_tail=None, marginal=None):
    """The sensor table with `fitted` the answer's own posterior mean at each sensor (every
    model it averages, its zone levels and calibrated parameters; the left-out modes' part
    as below), `residual` = measured - fitted and `standardized` = residual / the reading's sd
    (noise, offsets, placement and the left-out modes: the leading model's).  The
    screening's own problem may hold part of the model as noise (the zone model's levels,
    integrated out), whose fit alone left residuals of several kelvin at healthy sensors.
    The columns at the sensors are the ones already formed (`problem.G` and the zone columns
    of `zone_model`, (model, columns) or None): a hollow part's enlarged basis takes ~1 s to
    evaluate again.  Without `point_tail` (Monte Carlo draws) the unseen stretches' steps
    (`steps`, marginalized into the noise) add their conditional mean given the residual at the
    sensors `kept`, G_s V G_s,k^T S_kk^-1 r_k, and the reading's sd is its own
    (Whitener.own_sd), without the steps' shared variance.  With `point_tail` (answer_tails: the left-out modes' and the steps' part at points given the
    kept residual) the fitted value is the one predict gives there, t0 + G c + H (r - X c)
    (the tube demo's sensors were 0.07-0.48 K above predict's value at their own places with
    the steps' part alone), and the reading's sd takes their conditional variance in place of
    the left-out modes' prior variance, which the noise held (`marginal`: the sets,
    marginal_sets.prior_at_points)."""
    if post.calibration is None:
        X = problem.G if zone_model is None else np.hstack([problem.G, zone_model[1]])
        mean = problem.t0 + X @ post.c
    else:
        mean = post.figure_mean(lambda d: d.sensors(rd.r, rd.theta, rd.z), columns)
    # the readings' sd: the leading model's noise (its own left-out modes)
    lin = zone_model[0].smooth if zones_lead else problem
    reading_sd = lin.noise.own_sd
    if point_tail is not None and post.calibration is None:
        dG, dt0, v = point_tail(SimpleNamespace(r=rd.r, theta=rd.theta, z=rd.z))
        if dG is not None:
            left = 0.0 if marginal is None else prior_at_points((marginal.left,), marginal.prior, rd.r, rd.theta, rd.z)
            mean, reading_sd = mean + dG @ post.c + dt0, np.sqrt(np.maximum(reading_sd ** 2 - left, 0.0) + v)
    elif steps is not None and kept is not None and post.calibration is None:
        m, v = steps_given_kept(steps, lin, kept, np.asarray(rd.temperature, float) - mean)
        mean, reading_sd = mean + m, np.sqrt(reading_sd ** 2 + v)
    row = {name: i for i, name in enumerate(rd.names)}
    i = np.array([row[str(name)] for name in table["sensor"]], dtype=int)
    out = table.copy()
    # the screening's readings may be shifted (calibrated parameters' prior centre moved to
    # their value: marginal_columns), its leave-one-out predictions with them
    measured = np.asarray(rd.temperature, float)[i]
    out["loo_predicted"] = out["loo_predicted"].to_numpy(float) + (measured - out["measured"].to_numpy(float))
    out["measured"] = measured
    out["fitted"] = mean[i]
    out["residual"] = measured - mean[i]
    out["standardized"] = out["residual"].to_numpy() / np.asarray(reading_sd, float)[i]
    return out


