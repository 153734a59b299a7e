"""The modes the basis leaves out, marginalized into the noise.

The unknown face's basis keeps `harmonics` x `terms` eigenfunctions; a sensor a few
millimetres from the face also sees the higher modes of any sharp feature (a heater edge),
and a fit that assumes those modes are zero explains their signal with the kept ones:
biased zone means and power with confident bands, and healthy sensors that look broken.
Under the prior family of the fit (hyperprior.py) the left-out modes k are independent,

    c_k ~ N(0, 1 / (alpha P_k(l, s, rho, s0))),   P_k = (N_k / A) (1 + l^2 ev_k)^s_k / rho_k^2,

so their signal at the sensors is Gaussian with covariance

    S_tail = G_tail diag(v) G_tail^T,   v_k = E[1 / (alpha P_k(l, s, rho, s0))]  [K^2],

the expectation over the hyperparameters' posterior. The fit adds S_tail to the noise.
G_tail: the fields of an enlarged basis's eigenfunctions that the fit's basis does not keep,
up to the modes that decay below TAIL_DECAY between the face and the nearest sensor.
"""

from __future__ import annotations

import math

import numpy as np

from ..forward.geometry import is_wall

from .hyperprior import matern_precision

#: left-out modes are kept in S_tail down to exp(-kappa d_min) = TAIL_DECAY at the nearest sensor
#: (a mode's variance then counts 1e-4 of its face value at that sensor)
TAIL_DECAY = 1e-2
#: caps of the enlarged basis (harmonics, terms): every root of the enlarged basis is found
#: anew in each process, and 24 x 64 keeps that near 0.5 s; a sensor closer than about
#: radius / 15 to the face sees modes beyond the caps, which S_tail then leaves out
MAX_HARMONICS, MAX_TERMS = 24, 64


def nearest_distance(design, r, z) -> float:
    """Distance [m] from the unknown face to the nearest of the points (r, z) [m]."""
    return float(np.min(design.cylinder.depth(design.face_name, r, z)))


def enlarged_size(design, nearest, decay, harmonics=True, caps=(MAX_HARMONICS, MAX_TERMS)):
    """(harmonics, terms) of a basis holding every mode with exp(-kappa d_min) >= decay,
    kappa = the mode's decay rate into the part [1/m]; at least the design's own size,
    at most caps = (harmonics, terms). harmonics=False keeps m = 0 only."""
    cyl = design.cylinder
    span = cyl.axial_length if is_wall(design.face_name) else cyl.thickness
    if not math.isfinite(span):
        span = cyl.radius
    d = max(float(nearest), 1e-3 * cyl.thickness)
    kappa = -math.log(decay) / d
    terms = int(min(caps[1], max(design.terms, math.ceil(kappa * span / math.pi) + 2)))
    h = int(min(caps[0], max(design.harmonics, math.ceil(kappa * cyl.radius)))) if harmonics else 0
    return h, terms


def left_out(design, big) -> np.ndarray:
    """Mask over `big`'s eigenfunction columns of the modes `design.basis` does not hold."""
    ne = big.n_eigen
    return (big.m[:ne] > design.harmonics) | (big.n_index[:ne] >= design.terms)


def _tail_variances(big, mask, prior) -> np.ndarray:
    """v_k = E[1 / (alpha P_k)] (T,) [unit^2] of `big`'s modes in `mask`, averaged over the
    hyperparameter posterior of `prior`."""
    v = np.zeros(int(mask.sum()))
    for (length, order, rho, axis_order), alphas, w in prior.hyperparameters():
        v += float(w @ (1.0 / alphas)) / matern_precision(big, length, order, rho, axis_order)[:big.n_eigen][mask]
    return v


def _masked_variances(big, mask, prior) -> np.ndarray:
    """_tail_variances over every eigenfunction of `big` (n_eigen,), 0 outside `mask`: the
    kept modes then drop out of a product with all of big's columns, which are not copied."""
    v = np.zeros(big.n_eigen)
    v[mask] = _tail_variances(big, mask, prior)
    return v


def enlarged_basis(design, r, z):
    """The enlarged basis of the left-out modes for sensors at (r, z) [m]: every mode down to
    TAIL_DECAY at the nearest of them (enlarged_size), eigenfunctions only (no corner columns)."""
    return design.model.basis(*enlarged_size(design, nearest_distance(design, r, z), TAIL_DECAY), corners=False)


def _tail_parts(design, r, theta, z, prior):
    """(G_tail (n, T) [K per unit coefficient], v (T,) [unit^2]) at points, for `prior`."""
    big = enlarged_basis(design, r, z)
    mask = left_out(design, big)
    if not mask.any():
        return np.zeros((np.size(r), 0)), np.zeros(0)
    G = big.fields(r, theta, z)[0][:, :big.n_eigen][:, mask]
    return G, _tail_variances(big, mask, prior)


def face_tail(left, points, prior, rd, noise_covariance=None, steps=None):
    """The left-out modes' part of the unknown face at `points` (face_grid.display_grid's,
    with u, v and lines): (H (Q, n) [face unit / K], variance (Q,) [face unit^2]); left: the
    LeftOutColumns of the sensors `rd` (left_out_columns), None when no mode is left out;
    steps: the unseen stretches' steps (stretch.StretchSteps, marginalized alike), or None.

    As for a figure (functional_tails), given the residual r = d - t0 - X c of the kept columns
    at the sensors `rd` (noise S = noise_covariance, the tail's own signal included):
    face value = B c + k + H r + e,  H = Phi_t V G_t^T S^-1,
    var e = diag(Phi_t V Phi_t^T) - diag(H G_t V Phi_t^T),  V = diag(v_k) (_tail_variances).
    Without noise_covariance H = 0 and var e = sum_k Phi_k(x)^2 v_k, the prior's.  Finite
    because the family's exponent exceeds half the face's dimension
    (hyperprior.matern_exponent), so the bands no longer depend on the basis size."""
    def rows_of(cols):
        return (cols.face_grid(*points.lines) if points.lines is not None else cols.face(points.u, points.v))[0]
    cols = [c for c in (left, steps) if c is not None]
    q = np.size(points.u)
    if noise_covariance is None:
        variance = np.zeros(q)
        for c in cols:
            variance += (rows_of(c) ** 2) @ c.variances(prior)
        return np.zeros((q, 0)), variance
    if not cols:
        return np.zeros((q, rd.n)), np.zeros(q)
    H, variance = conditional(_parts(cols, [rows_of(c) for c in cols], rd, prior), noise_covariance)
    return H.T, variance


class LeftOutColumns:
    """The left-out modes of `big` (mask) as model columns for functionals.face_functionals:
    face values on the face (no known part), so zone and face means of the tail come from
    the same quadrature rule as the fit's own.  The columns are all of big's eigenfunctions
    (a view, not a copy of ~all of them): the modes the fit keeps carry zero variance in
    conditional (_masked_variances), so they drop out."""

    def __init__(self, design, big, mask):
        self.big, self.mask = big, mask
        self.face_name, self.quantity, self.cylinder = design.face_name, design.quantity, design.cylinder

    def _pick(self, phi):
        phi = phi[:, :self.big.n_eigen]
        return phi, np.zeros(phi.shape[0])

    def face(self, u, v):
        return self._pick(self.big.face_values(u, v))

    def face_grid(self, along, around):
        return self._pick(self.big.face_values_lines(along, around)[0])

    def powers(self):
        return self.big.powers()[:self.big.n_eigen], 0.0

    def fields(self, r, theta, z) -> np.ndarray:
        """G_t (n, T) [K per unit coefficient]: every eigenfunction's field at the points."""
        return self.big.fields(r, theta, z)[0][:, :self.big.n_eigen]

    def gradients(self, r, theta, z) -> np.ndarray:
        """grad G_t (3, n, T) [K/m per unit coefficient] (r, theta / r, z components)."""
        return self.big.fields(r, theta, z, gradient=True)[1][:, :, :self.big.n_eigen]

    def variances(self, prior) -> np.ndarray:
        """v (T,) [unit^2] under the learned prior `prior`, 0 on the kept modes."""
        return _masked_variances(self.big, self.mask, prior)


def left_out_columns(design, rd):
    """The modes `design` leaves out, over the enlarged basis of the sensors `rd`
    (enlarged_basis), as LeftOutColumns (None when it leaves none out)."""
    big = enlarged_basis(design, rd.r, rd.z)
    mask = left_out(design, big)
    return LeftOutColumns(design, big, mask) if mask.any() else None


def functional_tails(columns, rows, rd, prior, noise_covariance, steps=None, step_rows=None) -> list:
    """[(h (n,), variance)] for linear functionals of the face whose weights on the left-out
    modes `columns` (LeftOutColumns, or None) are `rows` (q, T), e.g. the total power (the
    modes' powers) and the face and zone means from the fit's quadrature rule
    (functionals.functional_matrix; marginal_sets.functional_rows names both), and on the
    unseen stretches' `steps` (stretch.StretchSteps) `step_rows` (q, J): their share given the
    readings.  With the tail c_t ~ N(0, V) marginalized into the noise S (tail_covariance),
    the residual r = d - t0 - X c of the kept columns at the sensors `rd` carries it:
    c_t | c, d ~ N(V G_t^T S^-1 r, V - V G_t^T S^-1 G_t V), so
    value = k + f . c + h . r + e,  h = S^-1 G_t V f_t,  var e = f_t V f_t - h . (G_t V f_t).
    (The total power's share is zero on a flux face beside an insulated rim, where only the
    uniform mode carries heat; on a temperature face the power weights a mode by its
    wavenumber, so the modes the basis leaves out count.)"""
    pairs = [(c, np.atleast_2d(f)) for c, f in ((columns, rows), (steps, step_rows)) if c is not None]
    if not pairs:
        return []
    H, var = conditional(_parts([c for c, _ in pairs], [f for _, f in pairs], rd, prior), noise_covariance)
    return [(H[:, j], float(var[j])) for j in range(var.size)]


def _parts(columns, rows, rd, prior) -> list:
    """[(G, v, f)] of each marginalized column set (LeftOutColumns, stretch.StretchSteps: both
    give fields and variances) at the sensors `rd`, with the functionals' rows f on it."""
    return [(c.fields(rd.r, rd.theta, rd.z), c.variances(prior), f) for c, f in zip(columns, rows)]


def conditional(parts, noise_covariance):
    """(h (n, q), var e (q,)) of q functionals of columns marginalized into the readings'
    noise S (n, n) [K^2], given the residual r at the readings: parts = [(G (n, T), v (T,),
    f (q, T))], each set's fields at the readings, independent prior variances and the
    functionals' rows on it; the functionals' conditional mean is h . r with variance
    a = sum G V f^T, h = S^-1 a, var e = sum f V f - h . a (functional_tails, face_tail;
    fit_problem.steps_given_kept)."""
    a, prior_var = 0.0, 0.0
    for G, v, rows in parts:
        a = a + (G * v) @ rows.T                                                   # G V f^T (n, q)
        prior_var = prior_var + np.einsum("qt,t,qt->q", rows, v, rows)
    H = np.linalg.solve(noise_covariance, a)
    return H, np.maximum(prior_var - np.einsum("nq,nq->q", H, a), 0.0)


def tail_variance(design, r, theta, z, prior) -> np.ndarray:
    """diag(S_tail) (n,) [K^2] at points (r, theta, z) [m, rad, m] (see tail_covariance)."""
    G, v = _tail_parts(design, np.asarray(r, float), np.asarray(theta, float), np.asarray(z, float), prior)
    return (G ** 2) @ v


def tail_covariance(design, rd, prior) -> np.ndarray:
    """S_tail (n, n) [K^2] at the sensors of `rd` for the learned prior `prior`
    (hyperprior.LearnedPrior): the left-out modes' variance averaged over its components."""
    G, v = _tail_parts(design, rd.r, rd.theta, rd.z, prior)
    return (G * v) @ G.T
