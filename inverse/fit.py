"""inverse.fit: reconstruct the unknown face from a snapshot of readings.

Model (design notes §5): d = t0 + G c + b + e, G = unknown-face basis fields at the
sensors (forward.UnknownBasis), t0 = known field, b ~ N(0, diag(tau^2)) thermocouple
offsets (marginalized: S = diag(sigma^2 + tau^2 + placement variance)), prior
c ~ N(c0, (alpha P)^-1) with P_k = (N_k / A) (1 + a^2 ev_k)^s, N_k = integral Phi_k^2 dA,
ev_k the face-Laplacian eigenvalue, s = 0 (size), 1 (gradient), 2 (curvature).
c0 = gamma u, u = the fundamental eigenfunction (m = 0, first term: uniform where the
face's edges are free, a smooth bump where a temperature neighbour pins the rim; a plain
uniform profile would put a Gibbs step at such a rim) or, where the basis holds it
exactly (`basis.uniform_column`), the uniform profile; gamma is its generalized-least-squares level.  Strength alpha: evidence (then the posterior is
averaged over alpha, see strength_average), GCV, L-curve, discrepancy or fixed.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..forward import Convection, CylinderModel

from .diagnostics import screen_outliers, sensor_table
from .errors import InverseError
from .face_grid import display_grid
from .functionals import face_functionals
from .hyperprior import learn_prior, matern_precision
from .layout import FAR_FRACTION, angular_note
from .linear_gaussian import LinearGaussianProblem
from .lmfit_solver import fit_lmfit
from .noise import noise_covariance
from .readings import SensorReadings, as_readings
from .resolution import unresolved_warning
from .result import FitResult, Posterior
from .robust import gross_faults, nominal_level
from .strength import choose_strength
from .strength_average import StrengthAverage

SMOOTHING_ORDER = {"size": 0, "gradient": 1, "curvature": 2}
DEFAULT_HARMONICS = 6
#: prior precision of the nominal direction relative to its smoothness prior (nearly flat)
NOMINAL_PRECISION_FACTOR = 1e-4
DEFAULT_TERMS = 10
DEFAULT_PRIOR = "learned"


def _option(case, name, given, default):
    if given is not None:
        return given
    opts = getattr(case, "fit", None)
    value = getattr(opts, name, None) if opts is not None else None
    return default if value is None else value


def prior_diagonal(basis, radius, smoothing):
    """P_k = (N_k / A) (1 + a^2 ev_k)^s (dimensionless)."""
    return matern_precision(basis, radius, SMOOTHING_ORDER[smoothing])


class _Design:
    """G and t0 at the sensors for a case, rebuilt when nonlinear parameters change."""

    def __init__(self, cylinder, faces, tolerance, harmonics, terms):
        self.cylinder, self.faces, self.tolerance = cylinder, dict(faces), tolerance
        self.harmonics, self.terms = harmonics, terms
        self.model = CylinderModel(cylinder, self.faces, tolerance=tolerance)
        self.basis = self.model.basis(harmonics, terms)

    def with_faces(self, faces):
        return _Design(self.cylinder, faces, self.tolerance, self.harmonics, self.terms)

    def at(self, r, theta, z, gradient=False):
        ev = self.model.evaluate(r, theta, z)
        G, dG = self.basis.fields(r, theta, z, gradient=gradient)
        return G, ev.temperature, ev, dG


def _nominal_direction(basis):
    """Unit coefficients of the nominal profile's shape: the uniform profile where the basis
    holds it exactly (`basis.uniform_column`: the m = 0 rim column of an unknown-flux face
    beside a temperature side, or the uniform wall column of an unknown side whose ends
    allow it: forward/corner_columns.py), else the fundamental eigenfunction (m = 0 cos,
    first term)."""
    u = np.zeros(basis.size)
    axisym = (basis.m == 0) & ~basis.is_sin
    j = basis.uniform_column
    u[j if j is not None else np.flatnonzero(axisym & (basis.n_index == 0))[0]] = 1.0
    return u


def fit(case, readings, *, strength=None, smoothing=None, harmonics=None, terms=None,
        keep_all_sensors=None, threshold=None, tolerance: float = 1e-8, grid=(41, 72),
        calibrate=None, solver: str = "auto", loss=None, common_offset_sd=None,
        monte_carlo: int = 0, seed: int = 0, progress=None, prior=None) -> FitResult:
    """Fit the unknown face of `case` (anything with .cylinder, .faces and optionally .zones
    and .fit options) to `readings` (SensorReadings or a table with r, theta, z,
    temperature, sigma, offset_sd, position_tolerance in SI).

    strength: 'evidence' (default) | 'gcv' | 'lcurve' | 'discrepancy' | a number.
    calibrate: {(face, 'h' | 'ambient'): (prior mean, prior sd) or None} nonlinear
    parameters of convection faces, fitted jointly through lmfit.
    solver: 'auto' (closed form unless calibrating) or 'lmfit'.
    loss: 'linear' (Gaussian) or a robust 'soft_l1' / 'huber' sensor misfit (lmfit path).
    common_offset_sd: prior sd [K] of an offset shared by all sensors (marginalized).
    monte_carlo: number of seeded draws that also perturb sensor positions within their
    placement tolerance (0 = off); progress(done, total) is called while drawing.
    prior: 'learned' (default: strength, length scale and order averaged over with the
    evidence, inverse.hyperprior; used with strength 'evidence') or 'fixed' (length scale =
    radius, order from `smoothing`, average over alpha only).
    """
    cyl, faces = case.cylinder, case.faces
    unknown = [f for f, c in faces.items() if c.unknown]
    if len(unknown) != 1:
        raise InverseError("fit needs exactly one unknown face (unknown-temperature or unknown-flux)")
    face = unknown[0]
    rd = as_readings(readings)
    if strength is None:
        method = _option(case, "strength_method", None, "evidence")
        strength = _option(case, "strength", None, 1.0) if method == "fixed" else method
    if isinstance(strength, str) and strength == "auto":
        strength = "evidence"
    smoothing = _option(case, "smoothing", smoothing, "gradient")
    if smoothing not in SMOOTHING_ORDER:
        raise InverseError(f"smoothing must be one of {sorted(SMOOTHING_ORDER)}, got {smoothing!r}")
    harmonics = int(_option(case, "harmonics", harmonics, DEFAULT_HARMONICS))
    terms = int(_option(case, "terms", terms, DEFAULT_TERMS))
    keep_all = bool(_option(case, "keep_all_sensors", keep_all_sensors, False))
    prior_mode = _option(case, "prior", prior, DEFAULT_PRIOR)
    if prior_mode not in ("learned", "fixed"):
        raise InverseError(f"prior must be 'learned' or 'fixed', got {prior_mode!r}")
    loss = _option(case, "loss", loss, "linear")
    common_offset_sd = _option(case, "common_offset_sd", common_offset_sd, None)
    if calibrate is None:
        calibrate = {key: None for key in (_option(case, "calibrate", None, ()) or ())}
    if rd.n < 2:
        raise InverseError(f"at least 2 usable sensors are needed, got {rd.n}")

    design = _Design(cyl, faces, tolerance, harmonics, terms)
    basis = design.basis
    P = prior_diagonal(basis, cyl.radius, smoothing)
    u_uniform = _nominal_direction(basis)
    # The level gamma of the nominal profile is fitted from the readings; a nearly flat prior
    # in that one (coordinate) direction keeps its uncertainty in the bands instead of
    # treating the fitted level as known.
    P = P.copy()
    P[u_uniform > 0] *= NOMINAL_PRECISION_FACTOR
    warnings: list[str] = []

    G, t0, ev, dG = design.at(rd.r, rd.theta, rd.z, gradient=True)
    base_var = noise_covariance(rd.sigma, rd.offset_sd, common_offset_sd)
    trunc = ev.truncation_error
    if np.any(trunc > 0.1 * rd.sigma):
        worst = int(np.argmax(trunc / rd.sigma))
        warnings.append(f"series truncation error at sensor {rd.names[worst]} is {trunc[worst]:.2g} K, "
                        "more than a tenth of its sigma; the sensor may sit very close to a face with data")

    # Screening order: gross faults (overflow codes and the like) go before anything the
    # readings feed -- the nominal level, the placement variance, the strength.
    gross = [] if keep_all else gross_faults(rd.temperature - t0, G @ u_uniform, base_var, rd.names)
    ok = np.ones(rd.n, dtype=bool)
    ok[[g.index for g in gross]] = False

    def build(G, t0, var):
        gamma = nominal_level(rd.temperature - t0, G @ u_uniform, var, ok)
        return LinearGaussianProblem(G, rd.temperature, t0, var, P, c0=gamma * u_uniform)

    var = base_var
    problem = build(G, t0, var)
    # Placement tolerance: effective variance (grad T . delta x)^2 with delta x uniform in +-tol.
    if np.any(rd.position_tolerance > 0):
        first = problem.subset(ok)
        c_first = choose_strength(first, strength if not isinstance(strength, str) else "evidence")
        c_hat = first.coefficients(c_first.alpha)
        grad = ev.gradient + np.einsum("dpk,k->dp", dG, c_hat)
        pos_var = (grad ** 2).sum(axis=0) * rd.position_tolerance ** 2 / 3.0
        var = base_var + (np.diag(pos_var) if base_var.ndim == 2 else pos_var)
        problem = build(G, t0, var)
    if calibrate:
        # Screen and tabulate the sensors at calibrated face parameters, not the nominal
        # ones: a nominal h that is off makes healthy sensors near that face look faulty.
        # The calibration itself uses the sensors that pass a first screening at the
        # nominal parameters, so a faulty sensor cannot drag h with it.
        if keep_all:
            pre_kept, pre_alpha = np.ones(rd.n, dtype=bool), choose_strength(problem, strength).alpha
        else:
            # at the nominal parameters the model is known to be off: no model-first rule here
            pre = screen_outliers(problem, strength=strength, threshold=threshold, names=rd.names,
                                  preset=gross)
            pre_kept, pre_alpha = pre.kept, pre.strength.alpha
        _, _, design = _calibrate(design, rd, pre_kept, problem.subset(np.flatnonzero(pre_kept)),
                                  pre_alpha, P, calibrate)
        G, t0, _, _ = design.at(rd.r, rd.theta, rd.z)
        problem = build(G, t0, var)

    screening = None
    if keep_all:
        choice = choose_strength(problem, strength)
        final = problem
        kept = np.ones(rd.n, dtype=bool)
        table = sensor_table(problem, choice.alpha, names=rd.names)
        set_aside = []
    else:
        screening = screen_outliers(problem, strength=strength, threshold=threshold, names=rd.names,
                                    preset=gross, model_first=True)
        choice, final, kept = screening.strength, screening.problem, screening.kept
        table, set_aside = screening.table, screening.set_aside
        warnings.extend(screening.warnings)
        for s in set_aside:
            warnings.append(f"sensor {s.sensor} set aside: {s.reason}")
    warnings.extend(choice.warnings)

    nonlinear = None
    if calibrate:
        post, nonlinear, design = _calibrate(design, rd, kept, final, choice.alpha, P, calibrate)
    elif strength == "evidence" and prior_mode == "learned" and not monte_carlo:
        avg = learn_prior(final, basis, nominal=u_uniform > 0, nominal_factor=NOMINAL_PRECISION_FACTOR)
        # the fixed prior's strength-grid notes do not apply to the learned prior's answer
        warnings = [w for w in dict.fromkeys(warnings) if w not in choice.warnings] + list(avg.warnings)
        post = Posterior(avg.coefficients(), avg.posterior_covariance(), choice.alpha, avg)
    elif strength == "evidence" or (isinstance(strength, str) and strength == "auto"):
        avg = StrengthAverage(final)
        warnings.extend(avg.warnings)
        post = Posterior(avg.coefficients(), avg.posterior_covariance(), choice.alpha, avg)
    else:
        post = Posterior(final.coefficients(choice.alpha), final.posterior_covariance(choice.alpha),
                         choice.alpha, None)
    if loss != "linear" and not calibrate:
        from .lmfit_solver import fit_linear_lmfit
        lf = fit_linear_lmfit(final.G, final.d, final.t0, final.noise, P, choice.alpha, c0=final.c0,
                              loss=loss)
        post = Posterior(lf.coefficients, lf.coefficient_covariance, choice.alpha, None)
        warnings.append(f"robust {loss} misfit: bands come from the linearized robust fit at a "
                        "single smoothing strength")
    elif solver == "lmfit" and not calibrate:
        from .lmfit_solver import fit_linear_lmfit
        lf = fit_linear_lmfit(final.G, final.d, final.t0, final.noise, P, choice.alpha, c0=final.c0)
        if post.averaged is None:
            post = Posterior(lf.coefficients, lf.coefficient_covariance, choice.alpha, None)

    warnings.extend(_layout_warnings(face, cyl, rd.subset(kept), post, final, P, choice.alpha))
    unresolved = unresolved_warning(post, final, face_functionals(design, getattr(case, "zones", None) or []),
                                    face, rd.offset_sd[kept], common_offset_sd)
    if unresolved:
        warnings.append(unresolved)
    chi2 = float(final.chi2(choice.alpha))
    n_kept = int(kept.sum())
    edf = float(final.effective_parameters(choice.alpha))
    if n_kept - edf > 2 and chi2 / max(n_kept - edf, 1.0) > 4.0:
        warnings.append(f"the readings scatter more than their stated uncertainty allows (chi2 = {chi2:.3g} "
                        f"for {n_kept - edf:.1f} degrees of freedom): check sigma, the face conditions or "
                        "the sensor positions")

    mc = None
    if monte_carlo:
        avg = post.averaged
        alphas = (avg._a, avg._w) if avg is not None else (np.array([choice.alpha]), np.ones(1))
        mc = _monte_carlo(design, rd, kept, P, final, alphas, int(monte_carlo), seed, grid, progress)

    result = FitResult.build(case=case, design=design, face=face, readings=rd, kept=kept, problem=final,
                           choice=choice, posterior=post, sensors=table, set_aside=set_aside,
                           warnings=warnings, grid_size=grid, nonlinear=nonlinear,
                           monte_carlo=mc, smoothing=smoothing, strength_request=strength)
    result.summary["loss"] = loss
    if hasattr(post.averaged, "description"):
        result.summary["prior"] = post.averaged.description()
    return result


def _layout_warnings(face, cyl, rd, post, problem, P, alpha):
    out = []
    a = cyl.radius
    angular = angular_note(face, a, rd.r, rd.theta)
    if angular:
        out.append(angular)
    dist = a - rd.r if face == "side" else np.abs(rd.z - (0.0 if face == "bottom" else cyl.height))
    if dist.size and dist.min() > FAR_FRACTION * a:
        out.append(f"the nearest sensor is {dist.min() * 1e3:.3g} mm from the unknown face "
                   f"(over {FAR_FRACTION:.0%} of the radius): fine detail of the profile is unresolved")
    return out


def _calibrate(design, rd, kept, problem, alpha, P, calibrate):
    """Joint fit of c and convection-face parameters through lmfit (fixed alpha)."""
    import lmfit

    params = lmfit.Parameters()
    priors = {}
    names = {}
    for (face, what), prior in dict(calibrate).items():
        cond = design.faces.get(face)
        if not isinstance(cond, Convection):
            raise InverseError(f"can only calibrate h or ambient of a convection face, not {face}.{what}")
        if what not in ("h", "ambient"):
            raise InverseError(f"calibration parameter must be 'h' or 'ambient', got {what!r}")
        if what == "ambient" and callable(cond.ambient):
            raise InverseError(f"face {face}: an ambient profile cannot be calibrated")
        key = f"{face}_{what}"
        start = cond.h if what == "h" else float(cond.ambient)
        params.add(key, value=start, min=1e-6 if what == "h" else 1.0)
        names[key] = (face, what)
        if prior is not None:
            priors[key] = tuple(prior)
    idx = np.flatnonzero(kept)
    sub = rd.subset(kept)
    cache = {}

    def faces_for(values):
        faces = dict(design.faces)
        for key, (face, what) in names.items():
            cond = faces[face]
            faces[face] = Convection(values[key] if what == "h" else cond.h,
                                     values[key] if what == "ambient" else cond.ambient)
        return faces

    def design_fn(values):
        key = tuple(round(values[k], 12) for k in names)
        if key not in cache:
            d = design.with_faces(faces_for(values))
            G, t0, _, _ = d.at(sub.r, sub.theta, sub.z)
            cache[key] = (G, t0)
        return cache[key]

    lf = fit_lmfit(design_fn, params, problem.d, problem.noise, P, alpha, c0=problem.c0,
                   priors=priors or None)
    values = {k: float(v) for k, v in lf.values.items()}
    sds = lf.sd
    new_design = design.with_faces(faces_for(values))
    K = P.size
    cov = lf.covariance
    post = Posterior(lf.coefficients, cov[:K, :K], alpha, None)
    info = {k: {"face": names[k][0], "parameter": names[k][1], "value": values[k],
                "sd": float(sds.get(k, np.nan))} for k in names}
    info["_covariance"] = cov
    return post, info, new_design


def _monte_carlo(design, rd, kept, P, problem, alphas, draws, seed, grid, progress):
    """Draws of the face profile with sensor positions perturbed within their tolerance
    (uniform in +-tol), the strength alpha drawn from its evidence weights (alphas =
    (grid, weights); one value for a fixed strength) and c from its posterior given both."""
    rng = np.random.default_rng(seed)
    sub = rd.subset(kept)
    face = design.basis.face
    cyl = design.cylinder
    pts = display_grid(face, cyl.radius, cyl.height, *grid)
    B = design.basis.face_values(pts.u, pts.v)
    known = design.basis.known_face_values(pts.u, pts.v)
    samples = np.empty((draws, pts.u.size))
    tol = sub.position_tolerance
    a, L = cyl.radius, cyl.height
    for j in range(draws):
        r = np.clip(sub.r + rng.uniform(-1, 1, sub.n) * tol, 0.0, a)
        th = sub.theta + rng.uniform(-1, 1, sub.n) * tol / np.maximum(sub.r, tol + 1e-12)
        z = sub.z + rng.uniform(-1, 1, sub.n) * tol
        z = np.clip(z, 0.0, L) if math.isfinite(L) else np.maximum(z, 0.0)
        G, t0, _, _ = design.at(r, th, z)
        pb = LinearGaussianProblem(G, sub.temperature, t0, problem.noise, P, c0=problem.c0)
        alpha = float(rng.choice(alphas[0], p=alphas[1]))
        c = pb.coefficients(alpha)
        C = pb.posterior_covariance(alpha)
        Lc = np.linalg.cholesky(C + 1e-12 * np.trace(C) / C.shape[0] * np.eye(C.shape[0]))
        draw = c + Lc @ rng.standard_normal(c.size)
        samples[j] = known + B @ draw
        if progress is not None:
            progress(j + 1, draws)
    return {"samples": samples, "points": pts}
