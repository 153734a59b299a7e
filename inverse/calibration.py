"""Calibration of convection-face parameters (h, ambient) jointly with the face.

lmfit (lmfit_solver.fit_lmfit) fits x = (c, theta) at a fixed strength; its joint
covariance C_x = (J^T J)^-1 is kept whole, so that any derived figure
f(c, theta) = k(theta) + F(theta) c gets var f = J_f C_x J_f^T with
J_f = [F, df/dtheta], df/dtheta by central differences of the figure on designs rebuilt
at theta +- h (`Calibration.sensitivity`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..forward import Convection

from .design import nominal_direction
from .errors import InverseError
from .lmfit_solver import fit_lmfit

#: central-difference step of a calibrated parameter, relative to its sd (common practice, no source)
STEP_IN_SD = 0.05
#: the nominal level's prior precision during calibration, at most this share of what the
#: readings themselves say about it (so a large strength cannot pin the level)
NOMINAL_SHARE = 1e-6


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

    keys: ((face, parameter), ...) in the order of theta; values (p,) and sd (p,) in SI
    (h [W/(m^2 K)], ambient [K]); coefficients (K,); covariance (K + p, K + p) of
    (c, theta); design: the Design at the fitted values; rebuild(values) -> Design.
    """

    keys: tuple
    values: np.ndarray
    sd: np.ndarray
    coefficients: np.ndarray
    covariance: np.ndarray
    design: object
    rebuild: object = field(repr=False)
    _designs: dict = field(default_factory=dict, repr=False)

    @property
    def names(self) -> list[str]:
        return [f"{face}_{what}" for face, what in self.keys]

    def info(self) -> dict:
        """{name: {face, parameter, value, sd}} for the summary."""
        return {n: {"face": f, "parameter": w, "value": float(v), "sd": float(s)}
                for n, (f, w), v, s in zip(self.names, self.keys, self.values, self.sd)}

    def _design_at(self, values):
        key = tuple(np.round(values, 14))
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


def calibrated_faces(faces, keys, values):
    """The face conditions with the calibrated parameters set to `values`."""
    out = dict(faces)
    for (face, what), v in zip(keys, values):
        cond = out[face]
        out[face] = Convection(v if what == "h" else cond.h, v if what == "ambient" else cond.ambient)
    return out


def calibrate(design, rd, kept, problem, alpha, P, spec) -> Calibration:
    """Joint fit of c and the convection parameters in `spec` {(face, parameter): prior
    (mean, sd) or None} through lmfit at the fixed strength alpha, on the kept sensors."""
    import lmfit

    params = lmfit.Parameters()
    priors, keys = {}, []
    for (face, what), prior in dict(spec).items():
        cond = design.faces.get(face)
        if not isinstance(cond, Convection):
            raise InverseError(f"can only calibrate h or ambient of a convection face, not {face}.{what}")
        if what not in ("h", "ambient"):
            raise InverseError(f"calibration parameter must be 'h' or 'ambient', got {what!r}")
        if what == "ambient" and callable(cond.ambient):
            raise InverseError(f"face {face}: an ambient profile cannot be calibrated")
        name = f"{face}_{what}"
        start = cond.h if what == "h" else float(cond.ambient)
        params.add(name, value=start, min=1e-6 if what == "h" else 1.0)
        keys.append((face, what))
        if prior is not None:
            priors[name] = tuple(prior)
    keys = tuple(keys)
    names = [f"{f}_{w}" for f, w in keys]
    sub = rd.subset(kept)

    def rebuild(values):
        return design.with_faces(calibrated_faces(design.faces, keys, values))

    def design_fn(values):
        return rebuild([values[n] for n in names]).sensors(sub.r, sub.theta, sub.z)

    P = flat_nominal(P, nominal_direction(design.basis), problem, alpha)
    lf = fit_lmfit(design_fn, params, problem.d, problem.noise, P, alpha, c0=problem.c0,
                   priors=priors or None)
    values = np.array([lf.values[n] for n in names], float)
    sd = np.array([lf.sd.get(n, np.nan) for n in names], float)
    return Calibration(keys, values, sd, lf.coefficients, lf.covariance, rebuild(values), rebuild)
