"""Calibration of convection-face parameters (h, ambient) jointly with the face.

lmfit (lmfit_solver.fit_lmfit) fits x = (c, theta) at a fixed strength; its joint
covariance C_x = (J^T J)^-1 is kept whole, so that any derived figure
f(c, theta) = k(theta) + F(theta) c gets var f = J_f C_x J_f^T with
J_f = [F, df/dtheta], df/dtheta by central differences of the figure on designs rebuilt
at theta +- h (`Calibration.sensitivity`).  Under the learned prior (hyperprior.py, the
default) `learned_calibration` then takes the parameters and the face to the learned prior's
answer: linearized in theta, the parameters' step integrated out exactly
(marginal_columns.py), Gauss-Newton steps until the step is a small share of its sd.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from ..forward import Convection

from .design import nominal_direction
from .errors import InverseError
from .hyperprior import learn_prior
from .linear_gaussian import LinearGaussianProblem
from .lmfit_solver import fit_lmfit
from .marginal_columns import MarginalColumns
from .problem import CALIBRATABLE

#: central-difference step of a calibrated parameter, relative to its sd (common practice, no source)
STEP_IN_SD = 0.05
#: the nominal level's prior precision during calibration, at most this share of what the
#: readings themselves say about it (so a large strength cannot pin the level)
NOMINAL_SHARE = 1e-6
#: lower bounds of the calibrated parameters: h [W/(m^2 K)], ambient [K]
LOWER = {"h": 1e-6, "ambient": 1.0}
#: lmfit's ftol, xtol and gtol for the joint fit: its parameters' sd are ~1e-2 of their value,
#: so a relative step of 1e-9 is far below anything the answer shows, while the last
#: iterations to 1e-12 cost three design builds each (~0.5 s on a wall with corners)
CALIBRATION_TOLERANCE = 1e-9
#: under the learned prior, a parameter without a declared prior gets a weak Gaussian one:
#: centred on the joint fit's value, this many of its sd wide (common practice, no source)
WEAK_PRIOR_FACTOR = 10.0
#: Gauss-Newton steps under the learned prior stop when every parameter moves less than this
#: share of its sd, or after MAX_STEPS (common practice, no source)
STEP_TOLERANCE, MAX_STEPS = 0.05, 5


def flat_nominal(P, u, problem, alpha):
    """P with the nominal direction u's precision capped at NOMINAL_SHARE x the readings'
    information on it, u^T G^T S^-1 G u / alpha: its level stays set by the readings at any
    strength.  A calibrated h and the face's level can be nearly degenerate (an unknown
    heater flux and the fluid-side h of a tube): a prior that holds the level holds h with it,
    and both sd come out as if the other were known."""
    g = problem.noise.whiten(problem.G @ u)
    cap = NOMINAL_SHARE * float(g @ g) / max(alpha, 1e-300)
    out = np.array(P, float)
    out[u > 0] = np.minimum(out[u > 0], cap)
    return out


@dataclass
class Calibration:
    """Fitted face parameters and the joint posterior of (c, theta).

    keys: ((face, parameter), ...) in the order of theta; values (p,): where the model is
    linearized (the fitted values; `mean` adds a model mixture's `step`), sd (p,), in SI
    (h [W/(m^2 K)], ambient [K]); coefficients (K,); covariance (K + p, K + p) of
    (c, theta); design: the model columns at the fitted values (design.Design, or the zone
    model's ZoneDesign), `rebuild(values)` the same columns at other values.  Under the
    learned prior (learned_calibration) also step_prior: (mean, sd) (p,) of theta's Gaussian
    prior and step_columns: d(t0 + G c)/d theta (n, p) [K per unit] at every reading, the
    columns through which the parameters' step enters the readings.
    """

    keys: tuple
    values: np.ndarray
    sd: np.ndarray
    coefficients: np.ndarray
    covariance: np.ndarray
    design: object
    step_prior: tuple = field(default=None, repr=False)
    step_columns: np.ndarray = field(default=None, repr=False)
    step: np.ndarray = None         # posterior mean of theta - values where it is not 0 (a model mixture)
    mixture: object = None          # the models' mixture over (coefficients, theta - values), for draws
    _designs: dict = field(default_factory=dict, repr=False)

    @property
    def mean(self) -> np.ndarray:
        """Posterior mean of theta (p,): the linearization point `values` plus `step`."""
        return self.values + self.mean_step

    @property
    def mean_step(self) -> np.ndarray:
        """Posterior mean of theta - values (p,): `step`, or 0 where none is kept."""
        return np.zeros(self.values.size) if self.step is None else np.asarray(self.step, float)

    @property
    def names(self) -> list[str]:
        return [f"{face}_{what}" for face, what in self.keys]

    def info(self) -> dict:
        """{name: {face, parameter, value, sd}} for the summary."""
        return {n: {"face": f, "parameter": w, "value": float(v), "sd": float(s)}
                for n, (f, w), v, s in zip(self.names, self.keys, self.mean, self.sd)}

    def rebuild(self, values):
        """The model columns with the calibrated parameters set to `values`."""
        return calibrated_design(self.design, self.keys, values)

    def with_columns(self, design, coefficients, step, covariance, mixture=None) -> "Calibration":
        """The same parameters with other model columns (the zone model's) and the joint
        posterior of (their coefficients, theta - values): mean (coefficients, step), the
        models' mixture (model_choice.ModelMixture) when several models share it."""
        sd = np.sqrt(np.diag(covariance)[-self.values.size:])
        return replace(self, design=design, coefficients=coefficients, step=np.asarray(step, float),
                       covariance=covariance, sd=sd, mixture=mixture, _designs={})

    def _design_at(self, values):
        key = _design_key(values)
        if key not in self._designs:
            self._designs[key] = self.rebuild(values)
        return self._designs[key]

    def sensitivity(self, builder, c) -> np.ndarray:
        """d(k + F c)/d theta (Q, p) at the fitted values for builder(design) -> (F, k)."""
        cols = []
        for j in range(self.values.size):
            h = STEP_IN_SD * self.sd[j] if self.sd[j] > 0 else 1e-6 * max(abs(self.values[j]), 1.0)
            up, dn = self.values.copy(), self.values.copy()
            up[j] += h
            dn[j] -= h
            Fu, ku = builder(self._design_at(up))
            Fd, kd = builder(self._design_at(dn))
            cols.append((np.asarray(ku) + np.asarray(Fu) @ c - np.asarray(kd) - np.asarray(Fd) @ c) / (2 * h))
        return np.stack(cols, axis=-1)


def _design_key(values) -> tuple:
    """Key of the designs built at parameter values (p,)."""
    return tuple(np.round(np.asarray(values, float), 14))


def calibrated_faces(faces, keys, values):
    """The face conditions with the calibrated parameters set to `values`."""
    out = dict(faces)
    for (face, what), v in zip(keys, values):
        cond = out[face]
        out[face] = Convection(v if what == "h" else cond.h, v if what == "ambient" else cond.ambient)
    return out


def calibrated_design(design, keys, values):
    """The model columns `design` (Design or ZoneDesign) rebuilt with the calibrated
    parameters set to `values`."""
    return design.with_faces(calibrated_faces(design.faces, keys, values))


def calibration_refusal(faces, face: str, what: str) -> str | None:
    """Why the parameter `what` of `face` cannot be calibrated (faces: name -> FaceCondition), or
    None: only h or a single ambient temperature of a convection face (the one rule, for the
    fit and for the case file's check at load)."""
    cond = faces.get(face)
    if not isinstance(cond, Convection):
        now = "absent" if cond is None else f"'{cond.condition}'"
        return (f"'{face}.{what}': only h or ambient of a convection face can be calibrated, and "
                f"faces.{face} is {now}")
    if what not in CALIBRATABLE:
        return f"'{face}.{what}': a calibrated parameter is {' or '.join(repr(w) for w in CALIBRATABLE)}"
    if what == "ambient" and callable(cond.ambient):
        return (f"'{face}.{what}': faces.{face} has an ambient profile, which cannot be calibrated; give one "
                "ambient temperature")
    return None


def calibrate(design, rd, kept, problem, alpha, P, spec) -> Calibration:
    """Joint fit of c and the convection parameters in `spec` {(face, parameter): prior
    (mean, sd) or None} through lmfit at the fixed strength alpha, on the kept sensors."""
    import lmfit

    params = lmfit.Parameters()
    priors, keys, starts = {}, [], []
    for (face, what), prior in dict(spec).items():
        cond = design.faces.get(face)
        refusal = calibration_refusal(design.faces, face, what)
        if refusal:
            raise InverseError(refusal)
        name = f"{face}_{what}"
        start = cond.h if what == "h" else float(cond.ambient)
        params.add(name, value=start, min=LOWER[what])
        keys.append((face, what))
        starts.append(start)
        if prior is not None:
            priors[name] = tuple(prior)
    keys = tuple(keys)
    names = [f"{f}_{w}" for f, w in keys]
    sub = rd.subset(kept)

    # the last designs lmfit asked for (the answer's is among them), and `design` itself at
    # its own values (lmfit starts there unless a bound moved the start)
    built = {_design_key(starts): design}

    def design_fn(values):
        key = _design_key([values[n] for n in names])
        if key not in built:
            while len(built) >= 3:
                built.pop(next(iter(built)))
            built[key] = calibrated_design(design, keys, [values[n] for n in names])
        return built[key].sensors(sub.r, sub.theta, sub.z)

    P = flat_nominal(P, nominal_direction(design.basis), problem, alpha)
    lf = fit_lmfit(design_fn, params, problem.d, problem.noise, P, alpha, c0=problem.c0,
                   priors=priors or None, tol=CALIBRATION_TOLERANCE)
    values = np.array([lf.values[n] for n in names], float)
    sd = np.array([lf.sd.get(n, np.nan) for n in names], float)
    key = _design_key(values)
    final = built[key] if key in built else calibrated_design(design, keys, values)
    return Calibration(keys, values, sd, lf.coefficients, lf.covariance, final, _designs={key: final})


def learned_calibration(cal, rd, kept, problem, nominal, nominal_factor, spec):
    """(Calibration, LearnedPrior, warnings): the calibrated parameters and the face under the
    learned prior (hyperprior.learn_prior: strength, length scale and order averaged) instead
    of the joint fit's fixed strength.  At the linearization point theta_l,
        d = t0(theta_l) + G(theta_l) c + J delta + e,   J = d(t0 + G c_l) / d theta
    (central differences, Calibration.sensitivity), delta = theta - theta_l with the declared
    prior of theta, else a weak one (WEAK_PRIOR_FACTOR x the joint fit's sd about its value),
    integrated out exactly (marginal_columns.py); the learned prior of c on that marginal
    problem; (c, delta) jointly from it, moment-matched over the hyperparameters.  Steps
    theta_l += E delta until |E delta| <= STEP_TOLERANCE sd; the answer is at that theta_l.
    cal: the joint fit (`calibrate`); rd: all readings, kept: the mask of those the fit uses,
    problem: the kept readings' LinearGaussianProblem (noise, prior mean c0) at cal.values;
    nominal: the basis's nominal direction (mask); spec: the {(face, parameter): prior or
    None} of `calibrate`.  The answer carries step_prior and step_columns (at every reading),
    for other models of the face on the same parameters (the zone model)."""
    spec = dict(spec)
    declared = [spec.get(key) for key in cal.keys]
    centre = np.array([p[0] if p else v for p, v in zip(declared, cal.values)], float)
    width = np.array([p[1] if p else WEAK_PRIOR_FACTOR * s for p, s in zip(declared, cal.sd)], float)
    floor = np.array([LOWER[what] for _, what in cal.keys])
    at, c, K, idx = cal.values.copy(), cal.coefficients, cal.coefficients.size, np.flatnonzero(kept)
    at_sensors = lambda d: d.sensors(rd.r, rd.theta, rd.z)  # noqa: E731
    warnings = []
    for step_no in range(MAX_STEPS):
        lin = replace(cal, values=at, design=cal._design_at(at))
        G, t0 = at_sensors(lin.design)
        J = lin.sensitivity(at_sensors, c).reshape(rd.n, -1)
        base = LinearGaussianProblem(G[idx], problem.d, t0[idx], problem.noise, problem.prior_diag, problem.c0)
        cols = MarginalColumns(base, J[idx], centre - at, width)
        prior = learn_prior(cols.marginal, lin.design.basis, nominal=nominal, nominal_factor=nominal_factor)
        mean, cov = cols.joint(prior.coefficients(), prior.posterior_covariance(), np.arange(idx.size))
        c, step, sd = mean[:K], mean[K:], np.sqrt(np.diag(cov)[K:])
        if np.all(np.abs(step) <= STEP_TOLERANCE * sd):
            break
        if step_no == MAX_STEPS - 1:
            warnings.append(f"calibration under the learned prior stopped after {MAX_STEPS} steps with "
                            f"the parameters still moving ({np.max(np.abs(step) / sd):.2g} sd); "
                            "the figures are linearized where it stopped")
            break
        at = np.maximum(at + step, floor)
    # the parameters and the figures at the last linearization point (its design): the mean
    # step left is below STEP_TOLERANCE of the sd
    return (replace(lin, sd=sd, coefficients=c, covariance=cov, step_prior=(centre, width), step_columns=J),
            prior, warnings)
