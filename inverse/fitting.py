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

from dataclasses import dataclass, replace

import numpy as np

from .calibration import calibrate
from .design import NOMINAL_PRECISION_FACTOR, Design, smooth_prior
from .diagnostics import screen_outliers, sensor_table
from .functionals import face_functionals
from .hyperprior import learn_prior
from .layout import FAR_FRACTION, angular_note
from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem
from .lmfit_solver import fit_linear_lmfit
from .model_choice import MIXED_MODELS, averaged_models, log_evidence_on_all, model_weights
from .monte_carlo import placement_draws
from .noise import Whitener, noise_covariance
from .problem import Problem
from .readings import as_readings
from .resolution import unresolved_warning
from .robust import gross_faults, nominal_level
from .face_grid import display_grid
from .result import FitResult, Posterior, valid_zones, zone_area
from .strength import choose_strength, default_alphas
from .strength_average import StrengthAverage
from .threads import few_threads
from .truncation import tail_covariance, tail_power
from .zones import ZoneModel

#: reduced chi-square above which the readings scatter more than stated (common practice, no source)
CHI2_WARNING = 4.0

@few_threads
def fit(problem, readings, *, progress=None, **overrides) -> FitResult:
    """Fit the unknown face of `problem` (an inverse.Problem, or anything with .cylinder,
    .faces and optionally .zones and .fit; see Problem.from_case) to `readings`
    (SensorReadings or a table with r, theta, z, temperature, sigma, offset_sd,
    position_tolerance in SI).  Keyword overrides are FitOptions fields; strength may be
    'evidence' | 'auto' | 'gcv' | 'lcurve' | 'discrepancy' | a number, and calibrate a
    {(face, 'h' | 'ambient'): (prior mean, prior sd) or None}.  progress(done, total) is
    called during Monte Carlo draws.  BLAS runs on one thread inside (inverse.threads)."""
    spec = Problem.from_case(problem, **overrides)
    opts = spec.options
    face = spec.unknown_face
    rd = as_readings(readings)
    if rd.n < 2:
        raise InverseError(f"at least 2 usable sensors are needed, got {rd.n}")
    if opts.calibrate and opts.model == "zones":
        raise InverseError("the zone model cannot be combined with calibrated face parameters yet; "
                           "use model = \"smooth\" or drop calibrate")

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
    # the left-out modes' variance is learned without the sensors a first screening (without
    # it) suspects: a broken sensor would otherwise widen it and hide itself
    problem, tail_prior = (_with_tail(base, design, rd, P, u, _screen(base, rd, opts, gross).kept)
                           if _learned(opts) else (base, None))
    if opts.calibrate:
        design = _calibrated_design(design, rd, problem, P, opts, gross)
        problem = _linear_problem(*design.sensors(rd.r, rd.theta, rd.z), problem.noise, rd, P, u, ok)

    # each model screens the sensors itself: a sensor one model cannot explain may be
    # healthy under the other (model_choice.py compares them on all the readings)
    zone_model = _zone_model(spec, design, rd, base, warnings)
    if zone_model is not None and _learned(opts):
        zone_model.add_tail(design, rd, u > 0, _screen(zone_model.marginal, rd, opts, gross).kept)
    smooth = _screen(problem, rd, opts, gross)
    zscreen = None if zone_model is None else _screen(zone_model.marginal, rd, opts, gross)
    post = _posterior(design, rd, smooth, P, u, opts, warnings)
    if post.calibration is not None:
        design = post.calibration.design
    columns, post, screen, model_info = _choose_model(opts, design, zone_model, zscreen, smooth, post, u,
                                                      problem, warnings)
    # the chosen model's screening notes lead; a learned prior's answer drops the fixed
    # prior's strength-grid notes
    learned = hasattr(post.averaged, "description") or "prior" in model_info
    warnings[:0] = [w for w in screen.warnings if not (learned and w in screen.choice.warnings)]

    warnings += _layout_warnings(face, spec.cylinder, rd.subset(screen.kept))
    warnings += _unresolved_warnings(post, screen, columns, design, spec, rd)
    warnings += _misfit_warnings(screen)
    if hasattr(post.averaged, "description") and "prior" not in model_info:
        model_info = {**model_info, "prior": post.averaged.description()}
    mc = None
    if opts.monte_carlo and columns is design:
        alphas = post.averaged.alpha_mixture() if post.averaged is not None else \
            (np.array([screen.choice.alpha]), np.ones(1))
        mc = placement_draws(design, rd, screen.kept, P, screen.problem, alphas, int(opts.monte_carlo),
                             opts.seed, opts.grid, progress)
    elif opts.monte_carlo:
        warnings.append("Monte Carlo draws of sensor positions are not available with the zone model; "
                        "the bands are the zone model's posterior")
    power_tail = None
    if tail_prior is not None and post.calibration is None and mc is None:
        power_tail = _power_tail(model_info["model"], columns, design, rd, screen.kept, problem, tail_prior,
                                 zone_model)
    return FitResult.build(spec=spec, design=columns, readings=rd, kept=screen.kept, problem=screen.problem,
                           choice=screen.choice, posterior=post, sensors=screen.table,
                           set_aside=screen.set_aside, warnings=list(dict.fromkeys(warnings)),
                           monte_carlo=mc, extra=model_info, power_tail=power_tail)


# ------------------------------------------------------------------------ design, prior, noise
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


def _with_tail(problem, design, rd, P, u, ok):
    """(problem, prior): the modes the basis leaves out, marginalized into the noise
    (truncation.py), their variance from a first learned prior on the readings `ok` (those a
    first screening kept), and that prior."""
    first = learn_prior(problem.subset(np.flatnonzero(ok)), design.basis, nominal=u > 0,
                        nominal_factor=NOMINAL_PRECISION_FACTOR)
    S = problem.noise.covariance + tail_covariance(design, rd, first)
    return _linear_problem(problem.G, problem.t0, S, rd, P, u, ok), first


def _power_tail(model, columns, design, rd, kept, problem, tail_prior, zone_model):
    """(h, X, residual, variance) for FitResult.build: the left-out modes' share of the total
    power (truncation.tail_power) under the model that leads, on the kept sensors."""
    idx = np.flatnonzero(kept)
    lin = problem if model == "smooth" else zone_model.smooth      # its readings, noise and columns
    prior = tail_prior if model == "smooth" else zone_model.tail_prior
    X = lin.G[idx] if columns is design else np.hstack([lin.G[idx], zone_model.Gz[idx]])
    S = lin.noise.covariance[np.ix_(idx, idx)]
    h, var = tail_power(design, rd.subset(idx), prior, S)
    return h, X, lin.d[idx] - lin.t0[idx], var


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
        return _Screen(choice, problem, np.ones(rd.n, dtype=bool),
                       sensor_table(problem, choice.alpha, names=rd.names), [], list(choice.warnings))
    s = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names,
                        preset=list(gross), model_first=True)
    warnings = list(s.warnings) + [f"sensor {x.sensor} set aside: {x.reason}" for x in s.set_aside]
    return _Screen(s.strength, s.problem, s.kept, s.table, list(s.set_aside),
                   warnings + list(s.strength.warnings))


# ------------------------------------------------------------------------ posterior
def _posterior(design, rd, screen, P, u, opts, warnings) -> Posterior:
    """Posterior of c: joint with calibrated parameters; with the evidence, averaged over
    strength, length scale and order of the learned prior (prior "learned", hyperprior.py)
    or over alpha alone (prior "fixed"); at one alpha; or from the robust lmfit path."""
    final, alpha = screen.problem, screen.choice.alpha
    if opts.calibrate:
        cal = calibrate(design, rd, screen.kept, final, alpha, P, opts.calibration)
        K = P.size
        return Posterior(cal.coefficients, cal.covariance[:K, :K], alpha, None, cal)
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


def _zone_model(spec, design, rd, problem, warnings):
    """The zone model (zones.ZoneModel on all sensors) when asked for (model "zones" or
    "auto") and zones with ranges are declared on the unknown face, else None."""
    opts = spec.options
    if opts.model == "smooth":
        return None
    cyl = spec.cylinder
    zones = [z for z in valid_zones(spec.zones, design.face_name, cyl, []) if hasattr(z, "indicator")]
    # "auto" (the default) quietly stays smooth where the zone model cannot be asked
    if not zones:
        if opts.model == "zones":
            warnings.append(f"model = 'zones' needs zones declared on the {design.face_name} face "
                            "(with r/theta or theta/z ranges); the smooth model is used")
        return None
    if opts.calibrate:
        return None
    areas = [zone_area(z, design.face_name, cyl) for z in zones]
    pts = display_grid(design.face_name, cyl, 11, 24)
    B, known = design.face(pts.u, pts.v)
    scale = float(np.sqrt(np.mean((known + B @ problem.c0) ** 2)))
    # The remainder keeps the smooth prior's nearly flat nominal direction: the face between
    # and around the zones has a level of its own (a background), which zone levels alone
    # cannot carry without biasing every zone.
    remainder, _ = smooth_prior(design.basis, cyl.radius, opts.smoothing)
    return ZoneModel(design, rd, problem, zones, areas, scale, remainder)


def _choose_model(opts, design, zone_model, zscreen, smooth, post, u, problem, warnings):
    """(model columns, posterior, screening, summary keys): the smooth model, the zone model
    when asked (model = "zones"), or with "auto" both averaged with their posterior
    probabilities (model_choice.averaged_models; a model below MIXED_MODELS is dropped). With
    the learned prior each model keeps its own screening and the evidences cover all the
    readings (model_choice.py); with the fixed prior both are compared on the zone model's
    kept sensors over one log-alpha grid."""
    if zone_model is None:
        return design, post, smooth, {"model": "smooth"}
    if hasattr(post.averaged, "log_marginal"):
        zf = zone_model.learned_fit(zscreen.kept, design.basis, u > 0, NOMINAL_PRECISION_FACTOR)
        var_s, var_z = (pb.noise.sd ** 2 for pb in (problem, zone_model.smooth))
        X = np.hstack([problem.G, zone_model.Gz])
        logz = {"smooth": log_evidence_on_all(post.averaged.log_marginal, smooth.kept, problem.G, problem.t0,
                                              problem.d, var_s, post.c, post.C),
                "zones": log_evidence_on_all(zf.log_evidence["zones"], zscreen.kept, X, problem.t0, problem.d,
                                             var_z, zf.c, zf.C)}
        zf = replace(zf, log_evidence=logz, weights=model_weights(logz))
    else:
        marginal = zone_model.marginal.subset(np.flatnonzero(zscreen.kept))
        alphas = default_alphas(marginal) if opts.strength_method == "evidence" else np.array([zscreen.choice.alpha])
        zf = zone_model.fit(zscreen.kept, alphas)
    info = {"model_evidence": zf.log_evidence, "model_weights": zf.weights}
    if zf.edge:
        warnings.append("the zone model's evidence-weighted strength reaches the edge of its grid")
    p_zones = float(zf.weights["zones"])
    if opts.model == "auto" and p_zones <= MIXED_MODELS:
        return design, post, smooth, {"model": "smooth", **info}
    if opts.model == "auto" and p_zones < 1.0 - MIXED_MODELS:
        # neither model is clearly preferred: the answer averages both with their probabilities;
        # the more probable one's screening, name and prior lead
        c, C = averaged_models(post.c, post.C, zf.c, zf.C, p_zones)
        info["model_averaged"] = True
        if p_zones < 0.5:
            if hasattr(post.averaged, "description"):
                info["prior"] = post.averaged.description()
            return zone_model.columns, Posterior(c, C, post.alpha, None), smooth, {"model": "smooth", **info}
        zf = replace(zf, c=c, C=C)
    if design.quantity == "temperature" and any(z.edge <= 0 for z in zone_model.columns.zones):
        warnings.append("sharp zone edges on a temperature face: the heat flux is singular at a "
                        "temperature step, so the total power is not defined; give the zones an edge width")
    if zf.prior is not None:
        warnings[:] = [w for w in warnings if w not in post.averaged.warnings] + list(zf.prior.warnings)
        info["prior"] = zf.prior.description()
    return zone_model.columns, Posterior(zf.c, zf.C, zf.alpha, None), zscreen, {"model": "zones", **info}


# ------------------------------------------------------------------------ warnings
def _misfit_warnings(screen):
    alpha = screen.choice.alpha
    chi2 = float(screen.problem.chi2(alpha))
    dof = int(screen.kept.sum()) - float(screen.problem.effective_parameters(alpha))
    if dof > 2 and chi2 / max(dof, 1.0) > CHI2_WARNING:
        return [f"the readings scatter more than their stated uncertainty allows (chi2 = {chi2:.3g} "
                f"for {dof:.1f} degrees of freedom): check sigma, the face conditions or the sensor positions"]
    return []


def _layout_warnings(face, cyl, rd):
    out = []
    angular = angular_note(face, cyl.radius, rd.r, rd.theta)
    if angular:
        out.append(angular)
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
