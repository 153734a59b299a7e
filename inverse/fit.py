"""inverse.fit: reconstruct the unknown face from a snapshot of readings.

Model (design notes §5): d = t0 + G c + b + e, G = unknown-face basis fields at the
sensors (forward.UnknownBasis), t0 = known field, b ~ N(0, diag(tau^2)) thermocouple
offsets (marginalized: S = diag(sigma^2 + tau^2 + placement variance)), prior
c ~ N(c0, (alpha P)^-1) with P_k = (N_k / A) (1 + a^2 ev_k)^s (design.prior_diagonal).
c0 = gamma u, u = the nominal profile's shape (design.nominal_direction), gamma its
generalized-least-squares level.  Strength alpha: evidence (then the posterior is averaged
over alpha, see strength_average), GCV, L-curve, discrepancy or fixed.  Optional: convection
parameters calibrated jointly (calibration.py) and the heater-zone model (zones.py).

The steps, each a small function below: design and prior, noise (with placement),
calibration, screening, posterior, model choice, warnings, derived figures (result.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .calibration import calibrate
from .design import Design, nominal_direction, prior_diagonal, smooth_prior  # noqa: F401
from .diagnostics import screen_outliers, sensor_table
from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem
from .lmfit_solver import fit_linear_lmfit
from .monte_carlo import placement_draws
from .noise import noise_covariance
from .problem import Problem
from .readings import as_readings
from .face_grid import display_grid
from .result import FitResult, Posterior, valid_zones, zone_area
from .strength import choose_strength, default_alphas
from .strength_average import StrengthAverage
from .zones import AUTO_THRESHOLD, ZoneModel

#: sensors farther from the unknown face than this fraction of the radius see little detail
FAR_FRACTION = 0.25  # common practice, no source
#: reduced chi-square above which the readings scatter more than stated (common practice, no source)
CHI2_WARNING = 4.0

_nominal_direction = nominal_direction   # the name batch.py imports


def fit(problem, readings, *, progress=None, **overrides) -> FitResult:
    """Fit the unknown face of `problem` (an inverse.Problem, or anything with .cylinder,
    .faces and optionally .zones and .fit; see Problem.from_case) to `readings`
    (SensorReadings or a table with r, theta, z, temperature, sigma, offset_sd,
    position_tolerance in SI).  Keyword overrides are FitOptions fields; strength may be
    'evidence' | 'auto' | 'gcv' | 'lcurve' | 'discrepancy' | a number, and calibrate a
    {(face, 'h' | 'ambient'): (prior mean, prior sd) or None}.  progress(done, total) is
    called during Monte Carlo draws."""
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
    problem = _with_placement(_linear_problem(G, t0, _noise(rd, opts), rd, P, u), rd, ev, dG, P, u, opts)
    if opts.calibrate:
        design = _calibrated_design(design, rd, problem, P, opts)
        problem = _linear_problem(*design.sensors(rd.r, rd.theta, rd.z), problem.noise, rd, P, u)

    zone_model = _zone_model(spec, design, rd, problem, warnings)
    screen = _screen(zone_model.marginal if zone_model else problem, rd, opts)
    warnings += screen.warnings
    smooth = screen if zone_model is None else _smooth_on_kept(problem, screen, opts, warnings)
    post = _posterior(design, rd, smooth, P, opts, warnings)
    if post.calibration is not None:
        design = post.calibration.design
    columns, post, screen, model_info = _choose_model(opts, design, zone_model, screen, smooth, post, warnings)

    warnings += _layout_warnings(face, spec.cylinder, rd.subset(screen.kept))
    warnings += _misfit_warnings(screen)
    mc = None
    if opts.monte_carlo and columns is design:
        alphas = post.averaged.alpha_mixture() if post.averaged is not None else \
            (np.array([screen.choice.alpha]), np.ones(1))
        mc = placement_draws(design, rd, screen.kept, P, screen.problem, alphas, int(opts.monte_carlo),
                             opts.seed, opts.grid, progress)
    elif opts.monte_carlo:
        warnings.append("Monte Carlo draws of sensor positions are not available with the zone model; "
                        "the bands are the zone model's posterior")
    return FitResult.build(spec=spec, design=columns, readings=rd, kept=screen.kept, problem=screen.problem,
                           choice=screen.choice, posterior=post, sensors=screen.table,
                           set_aside=screen.set_aside, warnings=list(dict.fromkeys(warnings)),
                           monte_carlo=mc, extra=model_info)


# ------------------------------------------------------------------------ design, prior, noise
def _linear_problem(G, t0, noise, rd, P, u):
    """The linear Gaussian problem with prior mean gamma u, gamma the GLS level of u."""
    pb = LinearGaussianProblem(G, rd.temperature, t0, noise, P)
    gu = pb.noise.whiten(G @ u)
    denom = float(gu @ gu)
    gamma = float(gu @ pb.noise.whiten(rd.temperature - pb.t0)) / denom if denom > 0 else 0.0
    return LinearGaussianProblem(G, rd.temperature, t0, pb.noise, P, c0=gamma * u)


def _noise(rd, opts):
    return noise_covariance(rd.sigma, rd.offset_sd, opts.common_offset_sd)


def _with_placement(problem, rd, ev, dG, P, u, opts):
    """Placement tolerance: effective variance (grad T . delta x)^2 with delta x uniform in +-tol."""
    if not np.any(rd.position_tolerance > 0):
        return problem
    request = opts.strength_request
    first = choose_strength(problem, request if not isinstance(request, str) else "evidence")
    grad = ev.gradient + np.einsum("dpk,k->dp", dG, problem.coefficients(first.alpha))
    pos_var = (grad ** 2).sum(axis=0) * rd.position_tolerance ** 2 / 3.0
    base = _noise(rd, opts)
    var = base + (np.diag(pos_var) if base.ndim == 2 else pos_var)
    return _linear_problem(problem.G, problem.t0, var, rd, P, u)


def _truncation_warnings(ev, rd):
    trunc = ev.truncation_error
    if not np.any(trunc > 0.1 * rd.sigma):
        return []
    worst = int(np.argmax(trunc / rd.sigma))
    return [f"series truncation error at sensor {rd.names[worst]} is {trunc[worst]:.2g} K, "
            "more than a tenth of its sigma; the sensor may sit very close to a face with data"]


def _calibrated_design(design, rd, problem, P, opts):
    """The design at calibrated face parameters, calibrated on the sensors that pass a first
    screening at the nominal ones (a faulty sensor cannot drag h with it); screening and the
    sensor table then use the calibrated parameters, not nominal ones that may be off."""
    request = opts.strength_request
    if opts.keep_all_sensors:
        kept, alpha = np.ones(rd.n, dtype=bool), choose_strength(problem, request).alpha
    else:
        pre = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names)
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


def _screen(problem, rd, opts) -> _Screen:
    """Screen the sensors (unless keep_all_sensors) and choose the strength."""
    request = opts.strength_request
    if opts.keep_all_sensors:
        choice = choose_strength(problem, request)
        return _Screen(choice, problem, np.ones(rd.n, dtype=bool),
                       sensor_table(problem, choice.alpha, names=rd.names), [], list(choice.warnings))
    s = screen_outliers(problem, strength=request, threshold=opts.threshold, names=rd.names)
    warnings = list(s.warnings) + [f"sensor {x.sensor} set aside: {x.reason}" for x in s.set_aside]
    return _Screen(s.strength, s.problem, s.kept, s.table, list(s.set_aside),
                   warnings + list(s.strength.warnings))


# ------------------------------------------------------------------------ posterior
def _posterior(design, rd, screen, P, opts, warnings) -> Posterior:
    """Posterior of c: joint with calibrated parameters, averaged over alpha (evidence),
    at one alpha, or from the robust lmfit path."""
    final, alpha = screen.problem, screen.choice.alpha
    if opts.calibrate:
        cal = calibrate(design, rd, screen.kept, final, alpha, P, opts.calibration)
        K = P.size
        return Posterior(cal.coefficients, cal.covariance[:K, :K], alpha, None, cal)
    if opts.strength_method == "evidence":
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
    if not zones:
        warnings.append(f"model = {opts.model!r} needs zones declared on the {design.face_name} face "
                        "(with r/theta or theta/z ranges); the smooth model is used")
        return None
    if opts.calibrate:
        warnings.append("the zone model is not combined with calibrated face parameters; the smooth "
                        "model is used")
        return None
    areas = [zone_area(z, design.face_name, cyl.radius, cyl.height) for z in zones]
    pts = display_grid(design.face_name, cyl.radius, cyl.height, 11, 24)
    B, known = design.face(pts.u, pts.v)
    scale = float(np.sqrt(np.mean((known + B @ problem.c0) ** 2)))
    remainder = prior_diagonal(design.basis, cyl.radius, opts.smoothing)
    return ZoneModel(design, rd, problem, zones, areas, scale, remainder)


def _smooth_on_kept(problem, screen, opts, warnings) -> _Screen:
    """The smooth model on the sensors the zone model's screening kept."""
    final = problem.subset(np.flatnonzero(screen.kept))
    choice = choose_strength(final, opts.strength_request)
    warnings.extend(w for w in choice.warnings if w not in warnings)
    return _Screen(choice, final, screen.kept, screen.table, screen.set_aside, [])


def _choose_model(opts, design, zone_model, screen, smooth, post, warnings):
    """(model columns, posterior, screening, summary keys): the smooth model, or the zone
    model when asked (model = "zones") or clearly preferred by the evidence ("auto")."""
    if zone_model is None:
        return design, post, smooth, {"model": "smooth"}
    marginal = zone_model.marginal.subset(np.flatnonzero(screen.kept))
    alphas = default_alphas(marginal) if opts.strength_method == "evidence" else np.array([screen.choice.alpha])
    zf = zone_model.fit(screen.kept, alphas)
    info = {"model_evidence": zf.log_evidence, "model_weights": zf.weights}
    if zf.edge:
        warnings.append("the zone model's evidence-weighted strength reaches the edge of its grid")
    use_zones = opts.model == "zones" or zf.weights["zones"] >= AUTO_THRESHOLD
    if opts.model == "auto" and not use_zones:
        warnings.append(f"the evidence does not clearly prefer the zone model (probability "
                        f"{zf.weights['zones']:.2f}); the smooth model is used")
    if not use_zones:
        return design, post, smooth, {"model": "smooth", **info}
    if design.quantity == "temperature" and any(z.edge <= 0 for z in zone_model.columns.zones):
        warnings.append("sharp zone edges on a temperature face: the heat flux is singular at a "
                        "temperature step, so the total power is not defined; give the zones an edge width")
    return zone_model.columns, Posterior(zf.c, zf.C, zf.alpha, None), screen, {"model": "zones", **info}


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
    a = cyl.radius
    if face != "side":
        off_axis = rd.r > 1e-3 * a
        angles = np.round(np.mod(rd.theta[off_axis], 2 * np.pi), 6)
        if np.unique(angles).size <= 1:
            out.append("all sensors lie at one angle (or on the axis): the layout sees no azimuthal "
                       "variation; sin/cos harmonics of the profile are prior only")
        dist = np.abs(rd.z - (0.0 if face == "bottom" else cyl.height))
    else:
        if np.unique(np.round(np.mod(rd.theta, 2 * np.pi), 6)).size <= 1:
            out.append("all sensors lie at one angle: the layout sees no azimuthal variation of the wall")
        dist = a - rd.r
    if dist.size and dist.min() > FAR_FRACTION * a:
        out.append(f"the nearest sensor is {dist.min() * 1e3:.3g} mm from the unknown face "
                   f"(over {FAR_FRACTION:.0%} of the radius): fine detail of the profile is unresolved")
    return out
