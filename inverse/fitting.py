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

The steps, each a small function below: design and prior, gross faults, noise (with
placement), calibration, screening, posterior, model choice, warnings, derived figures
(result.py).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
from scipy.special import logsumexp

from .calibration import calibrate, learned_calibration
from .design import NOMINAL_PRECISION_FACTOR, Design, smooth_prior
from .diagnostics import screen_outliers, sensor_table, unchecked_warnings
from .functionals import face_functionals
from .hyperprior import LearnedPrior, face_size, learn_prior
from .layout import FAR_FRACTION, angular_note, edge_gap_note
from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem
from .marginal_columns import MarginalColumns
from .pinned_edges import pinned_edge_notes
from .lmfit_solver import fit_linear_lmfit
from .model_choice import MIXED_MODELS, ModelMixture, embedded_mixture, log_evidence_on_all, model_weights
from .monte_carlo import placement_draws
from .noise import Whitener, noise_covariance
from .problem import Problem
from .readings import as_readings
from .resolution import unresolved_warning
from .robust import gross_faults, nominal_level
from .face_grid import display_grid, face_interval
from ..forward.geometry import is_wall
from .result import FitResult, Posterior, valid_zones
from .strength import choose_strength, default_alphas
from .strength_average import StrengthAverage
from .threads import few_threads
from .stretch import step_level, stretch_steps
from .marginal_sets import MarginalSets
from .truncation import (conditional, face_tail, face_tail_variance, left_out_columns, nearest_distance,
                         tail_covariance)
from .zones import (MAX_CHOSEN_ZONES, ZONE_LEVEL_FACTORS, ZONE_PRIOR_FACTOR, ZoneDesign, ZoneModel, edge_rooms,
                    edge_widths, level_sets, with_edge)

#: reduced chi-square above which the readings scatter more than stated (common practice, no source)
CHI2_WARNING = 4.0

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
    step = _Steps(stage, opts, spec)
    face = spec.unknown_face
    rd = as_readings(readings)
    if rd.n < 2:
        raise InverseError(f"at least 2 usable sensors are needed, got {rd.n}")
    if opts.calibrate and opts.model == "zones" and not _learned(opts):
        raise InverseError("the zone model with calibrated face parameters needs the learned prior "
                           "(strength = \"evidence\", prior = \"learned\", no Monte Carlo); "
                           "use model = \"smooth\" or drop calibrate")

    step("series of the part at the sensors")
    design = Design(spec.cylinder, spec.faces, opts.tolerance, *opts.basis_size)
    P, u = smooth_prior(design.basis, spec.cylinder.radius, opts.smoothing)
    warnings: list[str] = []
    G, t0, ev, dG = design.at(rd.r, rd.theta, rd.z, gradient=True)
    warnings += _truncation_warnings(ev, rd)
    # Gross faults (overflow codes and the like) go before anything the readings feed: the
    # nominal level, the placement variance, the strength.
    noise = _noise(rd, opts)
    gross = [] if opts.keep_all_sensors else gross_faults(rd.temperature - t0, G @ u, noise, rd.names)
    ok = np.ones(rd.n, dtype=bool)
    ok[[g.index for g in gross]] = False
    base = _with_placement(_linear_problem(G, t0, noise, rd, P, u, ok), rd, ev, dG, P, u, ok, opts)
    if opts.calibrate:
        step("calibrating " + ", ".join(f"{face}.{what}" for face, what in opts.calibrate))
        design = _calibrated_design(design, rd, base, P, opts, gross)
        base = _linear_problem(*design.sensors(rd.r, rd.theta, rd.z), base.noise, rd, P, u, ok)
    step("screening the sensors, learning the prior")
    # the left-out modes' variance is learned without the sensors a first screening (without
    # it) suspects: a broken sensor would otherwise widen it and hide itself; with calibrated
    # parameters, at the calibrated ones
    problem, tail_prior, steps = (_with_tail(base, design, rd, P, u, _screen(base, rd, opts, gross).kept,
                                             stretch=not opts.calibrate)
                                  if _learned(opts) else (base, None, None))

    smooth = _screen(problem, rd, opts, gross)
    post = _posterior(design, rd, smooth, P, u, opts, warnings)
    shift = None
    if post.calibration is not None and post.calibration.step_columns is not None:
        # the learned prior's calibration: the zone model shares the parameters' step
        base, problem, shift, smooth, post = _step_screening(post, rd, P, u, ok, base, problem, smooth, opts,
                                                             gross, warnings)
    if post.calibration is not None:
        design = post.calibration.design
    # each model screens the sensors itself: a sensor one model cannot explain may be
    # healthy under the other (model_choice.py compares them on all the readings)
    if step.zones:
        step("the heater-zone model")
    zone_models = _zone_models(spec, design, rd, base, warnings, post, shift)
    learned_prior = post.averaged if isinstance(post.averaged, LearnedPrior) else None
    leading = learned_prior.leading() if learned_prior is not None and zone_models else None
    if zone_models and _learned(opts):
        # the zone levels' scale is chosen before the remainder's tail is learned (a scale too
        # small leaves the zones' structure to the tail, whose variance then widens every
        # band), the tail on the sensors that pass at that scale
        first = zone_models[0]
        if leading is not None:
            first.choose_level_scale(_screen(first.marginal, rd, opts, gross).kept, leading)
        # the zone models' learned priors take the smooth model's length scales (widened or
        # not, hyperprior.learn_prior): both models are compared on one grid of length scales
        # and one amplitude hyperprior
        first.add_tail(design, rd, u > 0, _screen(first.marginal, rd, opts, gross).kept, like=learned_prior,
                       extra=0.0 if steps is None else steps.covariance)
        for other in zone_models[1:]:
            other.share_tail(first)
    zscreens = [_settled_screen(zm, rd, opts, gross, leading) for zm in zone_models]
    columns, post, screen, model_info, zone_model = _choose_model(opts, design, zone_models, zscreens, smooth, steps,
                                                                  post, u, problem, warnings)
    # the chosen model's screening notes lead; a learned prior's answer drops the fixed
    # prior's strength-grid notes
    learned = hasattr(post.averaged, "description") or "prior" in model_info
    warnings[:0] = [w for w in screen.warnings if not (learned and w in screen.choice.warnings)]

    warnings += _layout_warnings(face, spec.cylinder, rd.subset(screen.kept), steps, design.quantity)
    warnings += pinned_edge_notes(design)
    warnings += _unresolved_warnings(post, screen, columns, design, spec, rd)
    warnings += _misfit_warnings(screen)
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
    figure_tails = map_tail = marginal = None
    if tail_prior is not None and post.calibration is None and mc is None:
        figure_tails, map_tail, marginal = _tails(model_info["model"], columns, design, rd, screen.kept, problem, tail_prior,
                                       zone_model, valid_zones(spec.zones, face, spec.cylinder, []), steps)
    elif tail_prior is not None and mc is None:     # calibrated: the left-out modes' prior variance
        lead_prior = _lead_tail_prior(model_info["model"], tail_prior, zone_model)

        def map_tail(points):
            return None, None, face_tail_variance(design, points, lead_prior, rd.subset(screen.kept), steps)
    step("bands, zones and power of the answer")
    sensors = _answer_residuals(screen.table, post, columns, rd, problem, zone_model, model_info["model"] == "zones",
                                steps, screen.kept)
    return FitResult.build(spec=spec, design=columns, readings=rd, kept=screen.kept, problem=screen.problem,
                           choice=screen.choice, posterior=post, sensors=sensors,
                           set_aside=screen.set_aside, warnings=list(dict.fromkeys(warnings)),
                           monte_carlo=mc, extra=model_info, figure_tails=figure_tails, map_tail=map_tail,
                           marginal=marginal)


class _Steps:
    """stage(k, n, text) as each step of a fit begins (fit's `stage`; None: silent).  n counts
    the steps this fit takes: the series, the screening with the prior, the answer's bands,
    and the calibration, the zone model and the Monte Carlo draws where they apply."""

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


def _answer_residuals(table, post, columns, rd, problem, zone_model, zones_lead=False, steps=None, kept=None):
    """The sensor table with `fitted` the answer's own posterior mean at each sensor (every
    model it averages, its zone levels and calibrated parameters; the left-out modes are not
    in it), `residual` = measured - fitted and `standardized` = residual / the reading's sd
    (noise, offsets, placement and the left-out modes: the leading model's).  The
    screening's own problem may hold part of the model as noise (the zone model's levels,
    integrated out), whose fit alone left residuals of several kelvin at healthy sensors.
    The columns at the sensors are the ones already formed (`problem.G` and the zone columns
    of `zone_model`, (model, columns) or None): a hollow part's enlarged basis takes ~1 s to
    evaluate again.  The unseen stretches' steps (`steps`, marginalized into the noise) add
    their conditional mean given the residual at the sensors `kept`, G_s V G_s,k^T S_kk^-1 r_k;
    the reading's sd is its own (Whitener.own_sd), without the steps' shared variance."""
    if post.calibration is None:
        X = problem.G if zone_model is None else np.hstack([problem.G, zone_model[1]])
        mean = problem.t0 + X @ post.c
    else:
        mean = post.figure_mean(lambda d: d.sensors(rd.r, rd.theta, rd.z), columns)
    # the readings' sd: the leading model's noise (its own left-out modes)
    lin = zone_model[0].smooth if zones_lead else problem
    reading_sd = lin.noise.own_sd
    if steps is not None and kept is not None and post.calibration is None:
        m, v = _steps_given_kept(steps, lin, kept, np.asarray(rd.temperature, float) - mean)
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


# ------------------------------------------------------------------------ design, prior, noise
def _steps_given_kept(steps, lin, kept, residual):
    """(m (n,) [K], v (n,) [K^2]): the unseen stretches' steps (stretch.StretchSteps) at every
    reading given the residual (n,) [K] at the readings `kept`, under lin's noise S (which
    holds them): m = G V G_k^T S_kk^-1 r_k, v = diag(G V G^T - G V G_k^T S_kk^-1 G_k V G^T)
    (truncation.conditional, each reading's step fields as a functional's row)."""
    k = np.flatnonzero(kept)
    G = steps.at_readings
    H, v = conditional([(G[k], steps.v, G)], lin.noise.covariance[np.ix_(k, k)])
    return H.T @ residual[k], v


def _with_steps_given_kept(steps, problem, lin, kept, fitted):
    """(t0 (n,), noise variance (n,)) of every reading for log_evidence_on_all: the readings'
    own variance (Whitener.own_sd), and with the unseen stretches' steps their conditional
    mean added to t0 and their conditional variance to the noise (_steps_given_kept), so that
    a set-aside reading over the stretch is judged with them.  fitted (n,) [K]: X c."""
    var = lin.noise.own_sd ** 2
    if steps is None:
        return problem.t0, var
    m, v = _steps_given_kept(steps, lin, kept, problem.d - problem.t0 - fitted)
    return problem.t0 + m, var + v


def _linear_problem(G, t0, noise, rd, P, u, ok):
    """The linear Gaussian problem with prior mean gamma u, gamma the GLS level of u over the
    readings `ok` (those that passed the gross-fault screen)."""
    var = noise.variance if isinstance(noise, Whitener) else noise
    gamma = nominal_level(rd.temperature - t0, G @ u, var, ok)
    return LinearGaussianProblem(G, rd.temperature, t0, noise, P, c0=gamma * u)


def _noise(rd, opts):
    return noise_covariance(rd.sigma, rd.offset_sd, opts.common_offset_sd)


def _with_placement(problem, rd, ev, dG, P, u, ok, opts):
    """Placement tolerance: effective variance (grad T . delta x)^2 with delta x uniform in
    +-tol, the gradient from a first fit on the readings that passed the gross-fault screen."""
    if not np.any(rd.position_tolerance > 0):
        return problem
    request = opts.strength_request
    first = problem.subset(np.flatnonzero(ok))
    c_first = first.coefficients(choose_strength(first, request if not isinstance(request, str)
                                                 else "evidence").alpha)
    grad = ev.gradient + np.einsum("dpk,k->dp", dG, c_first)
    pos_var = (grad ** 2).sum(axis=0) * rd.position_tolerance ** 2 / 3.0
    base = _noise(rd, opts)
    var = base + (np.diag(pos_var) if base.ndim == 2 else pos_var)
    return _linear_problem(problem.G, problem.t0, var, rd, P, u, ok)


def _learned(opts) -> bool:
    """Is the answer the learned prior's (hyperprior.py)?"""
    return opts.strength_method == "evidence" and opts.prior == "learned" and not opts.monte_carlo


def _with_tail(problem, design, rd, P, u, ok, stretch=True):
    """(problem, prior, steps): the modes the basis leaves out and the steps (ramps on a
    temperature face) over an unseen edge stretch (stretch.py), marginalized into the noise
    (truncation.py), the modes' variance from a first learned prior on the readings `ok` (those
    a first screening kept), the steps' from its face map (stretch.step_level); that prior; the StretchSteps or None
    (always None without `stretch`: with calibrated face parameters, whose answer would not
    carry the steps' share).  The steps' variance at each reading is marked as shared
    (Whitener's shared_variance), so that a reading's own sd leaves it out."""
    first = learn_prior(problem.subset(np.flatnonzero(ok)), design.basis, nominal=u > 0,
                        nominal_factor=NOMINAL_PRECISION_FACTOR)
    steps = (stretch_steps(design, rd.subset(np.flatnonzero(ok)), step_level(design, first.coefficients()))
             if stretch else None)
    S = problem.noise.covariance + tail_covariance(design, rd, first)
    shared = None
    if steps is not None:
        shared = steps.attach(rd).covariance
        S = S + shared
    noise = Whitener(S, shared_variance=None if shared is None else np.diag(shared))
    return _linear_problem(problem.G, problem.t0, noise, rd, P, u, ok), first, steps


def _lead_tail_prior(model, tail_prior, zone_model):
    """The left-out modes' prior under the model that leads: the smooth model's, or the zone
    models' shared one."""
    return tail_prior if model == "smooth" else zone_model[0].tail_prior


def _tails(model, columns, design, rd, kept, problem, tail_prior, zone_model, zones, steps=None):
    """The left-out modes and the unseen stretches' steps under the model that leads, given the
    kept sensors' residual, for FitResult.build: (figure_tails, map_tail, marginal).
    figure_tails = (X, residual, {name: (h, variance)}): their share of the total power, the
    face mean and each zone mean (marginal_sets.MarginalSets.shares), value = k + f . c + h .
    (residual - X c) with the variance added; map_tail: points -> (dF, dk, variance), their
    part of the face map, k + dk + (F + dF) c with the variance added (truncation.face_tail);
    marginal: the marginal_sets.MarginalSets (planning carries the steps in its state).
    zone_model: (the leading ZoneModel, the zone columns' field at the sensors (n, J'))."""
    idx = np.flatnonzero(kept)
    lin = problem if model == "smooth" else zone_model[0].smooth      # its readings, noise and columns
    prior = _lead_tail_prior(model, tail_prior, zone_model)
    X = lin.G[idx] if columns is design else np.hstack([lin.G[idx], zone_model[1][idx]])
    S = lin.noise.covariance[np.ix_(idx, idx)]
    kept_rd, residual = rd.subset(idx), lin.d[idx] - lin.t0[idx]
    left = left_out_columns(design, kept_rd)        # one enlarged basis for every share below
    marginal = MarginalSets(left, prior, steps, kept_rd, S, X, None if steps is None else steps.at_readings[idx])

    def on_face(points):
        H, variance = face_tail(left, points, prior, kept_rd, S, steps)
        return -H @ X, H @ residual, variance
    return (X, residual, marginal.shares(zones)), on_face, marginal


def _truncation_warnings(ev, rd):
    trunc = ev.truncation_error
    if not np.any(trunc > 0.1 * rd.sigma):
        return []
    worst = int(np.argmax(trunc / rd.sigma))
    return [f"series truncation error at sensor {rd.names[worst]} is {trunc[worst]:.2g} K, "
            "more than a tenth of its sigma; the sensor may sit very close to a face with data"]


def _calibrated_design(design, rd, problem, P, opts, gross):
    """The design at calibrated face parameters, calibrated on the sensors that pass a first
    screening at the nominal ones (a faulty sensor cannot drag h with it); screening and the
    sensor table then use the calibrated parameters, not nominal ones that may be off."""
    request = opts.strength_request
    if opts.keep_all_sensors:
        kept, alpha = np.ones(rd.n, dtype=bool), choose_strength(problem, request).alpha
    else:
        # at the nominal parameters the model is known to be off: no model-first rule here
        pre = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names,
                              preset=gross)
        kept, alpha = pre.kept, pre.strength.alpha
    cal = calibrate(design, rd, kept, problem.subset(np.flatnonzero(kept)), alpha, P, opts.calibration)
    return cal.design


def _step_screening(post, rd, P, u, ok, base, problem, screen, opts, gross, warnings):
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
        base = _linear_problem(G, t0, base.noise, rd, P, u, ok)
        problem = _linear_problem(G, t0, problem.noise, rd, P, u, ok)
        shift = (cal.step_columns, cal.step_prior[0] - cal.values, cal.step_prior[1])
        marginal = _screen(MarginalColumns(problem, *shift).marginal, rd, opts, gross)
        if np.array_equal(marginal.kept, screen.kept) or attempt == 2:
            return base, problem, shift, marginal, post
        screen = replace(marginal, problem=problem.subset(np.flatnonzero(marginal.kept)))
        post = _posterior(cal.design, rd, screen, P, u, opts, warnings)


# ------------------------------------------------------------------------ screening
@dataclass
class _Screen:
    choice: object
    problem: LinearGaussianProblem
    kept: np.ndarray
    table: object
    set_aside: list
    warnings: list


def _screen(problem, rd, opts, gross=()) -> _Screen:
    """Screen the sensors (unless keep_all_sensors) and choose the strength: gross faults
    found first stay set aside; several sensors failing together blame the model
    (diagnostics.screen_outliers, model_first)."""
    request = opts.strength_request
    if opts.keep_all_sensors:
        choice = choose_strength(problem, request)
        table = sensor_table(problem, choice.alpha, names=rd.names, threshold=opts.threshold)
        return _Screen(choice, problem, np.ones(rd.n, dtype=bool), table, [],
                       list(choice.warnings) + unchecked_warnings(table))
    s = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names,
                        preset=list(gross), model_first=True)
    warnings = list(s.warnings) + [f"sensor {x.sensor} set aside: {x.reason}" for x in s.set_aside]
    return _Screen(s.strength, s.problem, s.kept, s.table, list(s.set_aside),
                   warnings + list(s.strength.warnings) + unchecked_warnings(s.table))


# ------------------------------------------------------------------------ posterior
def _posterior(design, rd, screen, P, u, opts, warnings) -> Posterior:
    """Posterior of c: joint with calibrated parameters (under the learned prior, when it
    answers: calibration.learned_calibration); with the evidence, averaged over strength,
    length scale and order of the learned prior (prior "learned", hyperprior.py) or over
    alpha alone (prior "fixed"); at one alpha; or from the robust lmfit path."""
    final, alpha = screen.problem, screen.choice.alpha
    if opts.calibrate:
        cal = calibrate(design, rd, screen.kept, final, alpha, P, opts.calibration)
        K = P.size
        if not _learned(opts):
            return Posterior(cal.coefficients, cal.covariance[:K, :K], alpha, None, cal)
        cal, avg, notes = learned_calibration(cal, rd, screen.kept, final, u > 0, NOMINAL_PRECISION_FACTOR,
                                              opts.calibration)
        warnings[:] = [w for w in warnings if w not in screen.choice.warnings] + list(avg.warnings) + notes
        return Posterior(cal.coefficients, cal.covariance[:K, :K], alpha, avg, cal)
    if _learned(opts):
        avg = learn_prior(final, design.basis, nominal=u > 0, nominal_factor=NOMINAL_PRECISION_FACTOR)
        # the fixed prior's strength-grid notes do not apply to the learned prior's answer
        warnings[:] = [w for w in warnings if w not in screen.choice.warnings] + list(avg.warnings)
        post = Posterior(avg.coefficients(), avg.posterior_covariance(), alpha, avg)
    elif opts.strength_method == "evidence":
        avg = StrengthAverage(final)
        warnings.extend(avg.warnings)
        post = Posterior(avg.coefficients(), avg.posterior_covariance(), alpha, avg)
    else:
        post = Posterior(final.coefficients(alpha), final.posterior_covariance(alpha), alpha, None)
    if opts.loss != "linear":
        lf = fit_linear_lmfit(final.G, final.d, final.t0, final.noise, P, alpha, c0=final.c0, loss=opts.loss)
        warnings.append(f"robust {opts.loss} misfit: bands come from the linearized robust fit at a "
                        "single smoothing strength")
        return Posterior(lf.coefficients, lf.coefficient_covariance, alpha, None)
    if opts.solver == "lmfit":
        lf = fit_linear_lmfit(final.G, final.d, final.t0, final.noise, P, alpha, c0=final.c0)
        if post.averaged is None:
            return Posterior(lf.coefficients, lf.coefficient_covariance, alpha, None)
    return post


def _zone_models(spec, design, rd, problem, warnings, post, shift=None):
    """The zone models (zones.ZoneModel on all sensors), one per edge width
    (zones.edge_widths; the declared zones alone with the fixed prior), when asked for (model
    "zones" or "auto") and zones with ranges are declared on the unknown face, else [].
    The zone levels' prior sd: with the learned prior (post.averaged a LearnedPrior) on the
    scale of the smooth model's amplitude (its median; the factor is chosen later,
    ZoneModel.choose_level_scale), else ZONE_PRIOR_FACTOR x the face's level scale.
    shift: the calibrated parameters' step columns and prior (calibration.learned_calibration),
    integrated out with the zone levels; calibration with the fixed prior has no zone model."""
    opts = spec.options
    if opts.model == "smooth":
        return []
    cyl = spec.cylinder
    zones = [z for z in valid_zones(spec.zones, design.face_name, cyl, []) if hasattr(z, "indicator")]
    # "auto" (the default) quietly stays smooth where the zone model cannot be asked
    if not zones:
        if opts.model == "zones":
            warnings.append(f"model = 'zones' needs zones declared on the {design.face_name} face "
                            "(with r/theta or theta/z ranges); the smooth model is used")
        return []
    if opts.calibrate and shift is None:
        return []
    learned = _learned(opts)
    if isinstance(post.averaged, LearnedPrior):
        scale, factor = float(post.averaged.amplitude_quantiles(0.5)), ZONE_LEVEL_FACTORS[1]
    else:
        pts = display_grid(design.face_name, cyl, 11, 24)
        B, known = design.face(pts.u, pts.v)
        scale, factor = float(np.sqrt(np.mean((known + B @ problem.c0) ** 2))), ZONE_PRIOR_FACTOR
    if not scale > 0:
        warnings.append("the zone model needs a scale for its levels, and the face's is zero; "
                        "the smooth model is used")
        return []
    if isinstance(post.averaged, LearnedPrior) and len(zones) > MAX_CHOSEN_ZONES:
        warnings.append(f"{len(zones)} zones declared on the {design.face_name} face: beyond {MAX_CHOSEN_ZONES}, "
                        "heatsight does not test which zones really differ from the face around them and treats "
                        "each as a heater of its own, so zones declared only for reporting make the zone-by-zone "
                        "answer look less likely than it is; declare only zones that match separately "
                        "powered heaters")
    # The remainder keeps the smooth prior's nearly flat nominal direction: the face between
    # and around the zones has a level of its own (a background), which zone levels alone
    # cannot carry without biasing every zone.
    remainder, _ = smooth_prior(design.basis, cyl.radius, opts.smoothing)
    side = is_wall(design.face_name)
    rooms = edge_rooms(zones, side, cyl.wall_radius(design.face_name), face_interval(design.face_name, cyl))
    widths = edge_widths(zones, face_size(design.basis), rooms, design.quantity) if learned else (None,)
    # every width's zones projected in one go (one rule split at all their breaks)
    sets = [with_edge(zones, width) for width in widths]
    every = ZoneDesign(design, [z for zs in sets for z in zs], nearest_distance(design, rd.r, rd.z))
    models, J = [], len(zones)
    for i, (width, zs) in enumerate(zip(widths, sets)):
        models.append(ZoneModel(design, rd, problem, zs, scale, remainder, every.big,
                                every.A[i * J:(i + 1) * J], edge_width=width, shift=shift,
                                level_factor=factor))
    return models


def _settled_screen(zone_model, rd, opts, gross, leading, rounds=3):
    """The zone model's own screening, its levels' prior chosen (ZoneModel.choose_level_scale,
    when `leading` is given: the smooth model's leading hyperparameters) on the sensors that
    screening keeps: chosen, screened again, until the kept sensors stop changing; after
    `rounds` screenings that still move (a sensor at the threshold, in and out with the
    choice) it is chosen once more on the last screening's sensors and the screening at that
    choice is returned.  The answer's prior is chosen once more at the learned remainder's
    own point (ZoneModel.learned_fit) without screening again: on the tube bore (seed 2) the
    choice there gave the cool streak's level an sd of 44 K, which explained the broken
    TC07's +6 K away, and screening again at it kept the sensor (zone 4.3 sd off)."""
    screen = _screen(zone_model.marginal, rd, opts, gross)
    if leading is None:
        return screen
    for _ in range(rounds):
        kept = screen.kept
        zone_model.choose_level_scale(kept, leading)
        screen = _screen(zone_model.marginal, rd, opts, gross)
        if np.array_equal(screen.kept, kept):
            return screen
    zone_model.choose_level_scale(screen.kept, leading)
    return _screen(zone_model.marginal, rd, opts, gross)


def _zone_fit(opts, design, zone_model, zscreen, post, u, problem, steps=None):
    """One zone model's posterior (ZoneFit) with its evidence on all the readings (learned
    prior) or against the smooth model on its kept sensors (fixed prior)."""
    if hasattr(post.averaged, "log_marginal"):
        zf = zone_model.learned_fit(zscreen.kept, design.basis, u > 0, NOMINAL_PRECISION_FACTOR,
                                    like=post.averaged)
        X = np.hstack([problem.G, zone_model.level_columns])
        t0, var = _with_steps_given_kept(steps, problem, zone_model.smooth, zscreen.kept, X @ zf.c)
        logz = log_evidence_on_all(zf.log_evidence["zones"], zscreen.kept, X, t0, problem.d, var, zf.c, zf.C)
        return replace(zf, log_evidence={"zones": logz + zone_model.level_choice_correction})
    marginal = zone_model.marginal.subset(np.flatnonzero(zscreen.kept))
    alphas = default_alphas(marginal) if opts.strength_method == "evidence" else np.array([zscreen.choice.alpha])
    return zone_model.fit(zscreen.kept, alphas)


def _at_answer_prior(zscreen, zone_model, opts):
    """The zone model's screening with its problem and strength at the levels' prior the
    answer uses, where ZoneModel.learned_fit chose it again at the learned remainder's point:
    the same sensors; the table's leave-one-out columns stay the screening's."""
    if not zone_model.refined:
        return zscreen
    problem = zone_model.marginal.subset(np.flatnonzero(zscreen.kept))
    return replace(zscreen, problem=problem, choice=choose_strength(problem, opts.strength_request))


def _choose_model(opts, design, zone_models, zscreens, smooth, steps, post, u, problem, warnings):
    """(model columns, posterior, screening, summary keys, (leading zone model, zone columns
    at the sensors) or None): the smooth model, the zone model when asked (model = "zones"),
    or with "auto" both averaged with their posterior probabilities
    (model_choice.embedded_mixture; a model below MIXED_MODELS is dropped).  The zone model
    is itself an average over its edge widths (zones.edge_widths, equal prior mass each;
    with the learned prior): its evidence is the widths' mean, each width weighs by its own.
    With the learned prior each model keeps its own screening and the evidences cover all
    the readings (model_choice.py); with the fixed prior both are compared on the zone
    model's kept sensors over one log-alpha grid.  Calibrated parameters (learned prior) are
    shared by both models: their step from the linearization point is the last block of
    every component, and the answer's Calibration carries the mixture's joint posterior."""
    if not zone_models:
        return design, post, smooth, {"model": "smooth"}, None
    fits = [_zone_fit(opts, design, zm, zs, post, u, problem, steps) for zm, zs in zip(zone_models, zscreens)]
    zscreens = [_at_answer_prior(zs, zm, opts) for zs, zm in zip(zscreens, zone_models)]
    le = np.array([f.log_evidence["zones"] for f in fits])
    cal = post.calibration
    p = 0 if cal is None else cal.values.size
    # the smooth model's columns at the sensors, mean and covariance, with the parameters' step
    Xs, cs, Cs = (problem.G, post.c, post.C) if cal is None else \
        (np.hstack([problem.G, cal.step_columns]), np.concatenate([post.c, cal.mean_step]), cal.covariance)
    if hasattr(post.averaged, "log_marginal"):
        t0, var = _with_steps_given_kept(steps, problem, problem, smooth.kept, Xs @ cs)
        logz = {"smooth": log_evidence_on_all(post.averaged.log_marginal, smooth.kept, Xs, t0,
                                              problem.d, var, cs, Cs),
                "zones": float(logsumexp(le) - math.log(le.size))}
    else:
        logz = dict(fits[0].log_evidence)
    weights = model_weights(logz)
    info = {"model_evidence": logz, "model_weights": weights}
    w_edge = np.exp(le - le.max())
    w_edge /= w_edge.sum()
    if any(f.edge for f in fits):
        warnings.append("the zone model's evidence-weighted strength reaches the edge of its grid")
    p_zones = float(weights["zones"])
    if opts.model == "auto" and p_zones <= MIXED_MODELS:
        return design, post, smooth, {"model": "smooth", **info}, None
    if len(fits) > 1:      # the zone model's edge widths [m] (the widest zone's) and their posterior weights
        info["zone_edge_widths_m"] = [float(zm.edge_width) for zm in zone_models]
        info["zone_edge_weights"] = [float(w) for w in w_edge]
    if hasattr(post.averaged, "log_marginal"):
        # the zone levels' prior sd [face unit] the evidence chose (per edge width;
        # zones.ZoneModel.choose_level_scale)
        info["zone_level_prior_sd"] = [zm.level_scale for zm in zone_models]
    # the widths that carry weight; their zone columns side by side after the smooth ones
    use = [i for i in range(len(fits)) if w_edge[i] > MIXED_MODELS]
    lead = max(use, key=lambda i: w_edge[i])
    if hasattr(post.averaged, "log_marginal") and len(level_sets(len(zone_models[lead].columns.zones))) > 1:
        # each zone's probability of a level of its own under the zone model, departing from
        # the background (ZoneModel.choose_level_scale), over the edge widths that carry weight
        inclusion = sum(w_edge[i] * zone_models[i].inclusion for i in use) / w_edge[use].sum()
        info["zone_level_probability"] = {z.name: float(pz) for z, pz in zip(zone_models[lead].columns.zones,
                                                                             inclusion)}
    K, J = design.size, len(zone_models[0].columns.zones)
    all_zones = [z for i in use for z in zone_models[i].columns.zones]
    columns = ZoneDesign(design, all_zones, None, zone_models[lead].columns.big,
                         np.vstack([zone_models[i].columns.A for i in use])) if len(use) > 1 \
        else zone_models[lead].columns
    Gz = np.hstack([zone_models[i].Gz for i in use])
    p_smooth = 0.0 if opts.model == "zones" or p_zones >= 1.0 - MIXED_MODELS else 1.0 - p_zones
    share = w_edge[use] / w_edge[use].sum()
    n = K + J * len(use)
    step = n + np.arange(p)
    parts = [(np.concatenate([np.arange(K), K + j * J + np.arange(J), step]), fits[i].c, fits[i].C,
              (1.0 - p_smooth) * share[j]) for j, i in enumerate(use)]
    if p_smooth > 0:
        parts.append((np.concatenate([np.arange(K), step]), cs, Cs, p_smooth))
        info["model_averaged"] = True
    c, C = embedded_mixture(parts, n + p)
    zone_model = (zone_models[lead], Gz)
    # bands: exact mixture quantiles, over the learned prior's own components where it has
    # them; with calibrated parameters the joint Gaussian's (Posterior.figures)
    learned = isinstance(post.averaged, LearnedPrior) and p_smooth > 0
    mixture = None if len(parts) == 1 or p else \
        ModelMixture(parts[:len(use)], n, post.averaged, p_smooth) if learned else ModelMixture(parts, n)
    calibrated = None if cal is None else cal.with_columns(
        columns, c[:n], c[n:], C, ModelMixture(parts, n + p) if len(parts) > 1 else None)
    c, C = c[:n], C[:n, :n]
    if p_smooth > 0.5:
        if hasattr(post.averaged, "description"):
            info["prior"] = post.averaged.description()
        return (columns, Posterior(c, C, post.alpha, mixture, calibrated), smooth, {"model": "smooth", **info},
                zone_model)
    zf = fits[lead]
    if design.quantity == "temperature" and any(z.edge <= 0 for z in columns.zones):
        warnings.append("sharp zone edges on a temperature face: the heat flux is singular at a "
                        "temperature step, so the total power is not defined; give the zones an edge width")
    if zf.prior is not None:
        warnings[:] = [w for w in warnings if w not in post.averaged.warnings] + list(zf.prior.warnings)
        info["prior"] = zf.prior.description()
    return (columns, Posterior(c, C, zf.alpha, mixture, calibrated), zscreens[lead], {"model": "zones", **info},
            zone_model)


# ------------------------------------------------------------------------ warnings
def _misfit_warnings(screen):
    alpha = screen.choice.alpha
    chi2 = float(screen.problem.chi2(alpha))
    dof = int(screen.kept.sum()) - float(screen.problem.effective_parameters(alpha))
    if dof > 2 and chi2 / max(dof, 1.0) > CHI2_WARNING:
        return [f"the readings scatter more than their stated uncertainty allows (chi2 = {chi2:.3g} "
                f"for {dof:.1f} degrees of freedom): check sigma, the face conditions or the sensor positions"]
    return []


def _layout_warnings(face, cyl, rd, steps=None, quantity="heat_flux"):
    """Layout notes for the kept sensors `rd`; steps: the fit's StretchSteps or None (the
    edge-stretch note says whether this fit lets the stretch depart)."""
    out = []
    out += [note for note in (angular_note(face, cyl.radius, rd.r, rd.theta),
                              edge_gap_note(face, cyl, rd.r, rd.z, steps is not None, quantity)) if note]
    dist = cyl.depth(face, rd.r, rd.z)
    size, what = (cyl.thickness, "wall thickness") if cyl.hollow else (cyl.radius, "radius")
    if dist.size and dist.min() > FAR_FRACTION * size:
        out.append(f"the nearest sensor is {dist.min() * 1e3:.3g} mm from the unknown face "
                   f"(over {FAR_FRACTION:.0%} of the {what}): fine detail of the profile is unresolved")
    return out


def _unresolved_warnings(post, screen, columns, design, spec, rd):
    """The one "cannot resolve" warning (resolution.py) for the smooth model's answer."""
    if columns is not design:
        return []
    text = unresolved_warning(post, screen.problem, face_functionals(design, spec.zones or []),
                              spec.unknown_face, rd.offset_sd[screen.kept], spec.options.common_offset_sd)
    return [text] if text else []
