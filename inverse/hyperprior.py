"""Prior with learned hyperparameters: strength, length scale, Matern smoothness, the
axisymmetric amplitude ratio and the axisymmetric profile's dimension.

Family (a Whittle-Matern form in the face eigenbasis):

    c ~ N(c0, (alpha P(l, s, rho, s0))^-1),   P_k(l, s, rho, s0) = (N_k / A) (1 + l^2 ev_k)^s_k / rho_k^2,

N_k = integral Phi_k^2 dA [m^2], A = face area [m^2], ev_k = surface eigenvalue [1/m^2],
l = length scale [m], s = nu + d / 2 the exponent of Matern smoothness nu, rho_k = rho for the axisymmetric modes (m = 0)
and 1 for the others: rho is the axisymmetric amplitude ratio, the sd of the face's
axisymmetric part (its radial profile on an end face, its axial profile on a wall) relative
to a stationary field's; s_k = s0 = nu + d0 / 2 for the axisymmetric modes and s for the
others, d0 the axisymmetric part's dimension: with d0 = 2 it is the angular mean of the
face's field, a profile of smoothness nu + 1/2; with d0 = 1 a profile of its own along the
radius (or height), as rough as the field (smoothness nu). The nominal direction (the fitted level of the
nominal profile) keeps its nearly flat prior: its P_k is multiplied by `nominal_factor`.
The strength is written through the amplitude sigma_f [face unit]:

    sigma_f^2 = (1 / alpha) sum_k' 1 / w_k,   w_k = (1 + l^2 ev_k)^s_k / rho_k^2,

(k' = all but the nominal direction) = the prior mean square of the face's deviation from
the nominal profile over the face, so that sigma_f means the same thing for every (l, s, rho, s0).

Hyperpriors (proper, weakly informative):
- log sigma_f ~ N(log sigma_ref(l, s, rho, s0), LOG_AMPLITUDE_SD^2), LOG_AMPLITUDE_SD = ln(10) / 4
  (95 % of the mass within a factor 3 of sigma_ref). sigma_ref is the amplitude whose
  prior-predictive whitened signal variance, averaged over the sensors, equals
  max(mean(y^2) - 1, 1): the readings' whitened spread about the nominal profile beyond the
  noise, and at least the noise itself (y = L^-1 (d - t0 - G c0)). Proper at both ends: with
  a flat prior on log alpha the evidence tends to a constant as alpha -> inf, so the mass
  would pile up at the largest alpha of any grid (the answer then collapses onto the prior
  mean with tight bands); here the integral converges and, when the readings cannot fix the
  amplitude, the bands keep the size the readings' spread allows. The width is a measured
  choice: when offsets swamp the signal the evidence only says "no larger than the noise",
  and a wider hyperprior (ln 10 / 2, ln 10) lets that one-sided Occam pull shrink the bands
  until a weak heater sector sits 3-13 sd from its band (bench/strength_choice.py 'chuck');
  ln 10 / 4 keeps it within 2 sd, and on informative data the evidence dominates either way
  (same figures on the platen and wall scenarios).
- log l uniform on [D / 20, 4 D], D = the face's size (the radius for an end face, the
  larger of radius and height for the side): from well below the sensor spacing of any
  practical layout to smoother than the face itself. At the long end a point whose
  axisymmetric modes share the others' exponent (s0 = s: d0 = 2, or a long part's wall)
  converges: with sigma_f fixed, rho_k^2 (1 + l^2 ev_k)^-s over its sum tends to
  rho_k^2 ev_k^-s over its sum, every term within (1 + 1 / (l^2 ev_min))^s (ev_min: the
  smallest eigenvalue of a free mode); where the longest l gives l^2 ev_min >= SMOOTH_LIMIT
  such a point is the family's smooth limit, not an edge, and its weight reads "the smoothest
  profiles the family holds" (summary's `smooth_limit_weight`), with no warning.  Whether a
  face gets there depends on its lowest mode: an end face with an insulated rim has m = 1 at
  about (1.84 / a)^2, so 16 x 3.39 = 54 (there); a convective rim or end has a lower m = 0 mode
  (5-14); a wall with insulated ends has m = 1 at 1 / r_w^2, so 16 (D / r_w)^2: walls taller
  than 1.77 r_w get there.  A point
  with d0 = 1 (s0 = s - 1/2) never converges: a longer l raises its axisymmetric part like a
  larger rho.  When the points short of the limit (these, and any on a face whose lowest
  mode keeps l^2 ev_min below SMOOTH_LIMIT) hold more than LONG_END_MASS of the weight at the
  two longest values, learn_prior widens the range (two more points of its log step at a
  time, the top at most MAX_LENGTH x D) and the summary says so
  (`length_scale_range_widened_from_m`); a warning remains only if the cap stops it still
  pressed.  A fit decides this on the smooth model's learned prior, and the zone models'
  remainders take the same grid (`like`): the models are compared on one grid of length
  scales and orders.
- log2 rho ~ N(1, 1) on the points rho = 2^-2 ... 2^4 (AXISYMMETRIC_RATIOS, weights
  normalized over the points; the outer points lie 3 sd out). Heaters are mostly rings and
  bands, so a face's profile along its radius (or its height) usually varies more than it
  does around the axis; one stationary amplitude learned from both is too large for the
  angular part and too small for the axisymmetric one. Measured on the one-sector platen
  with four sensors added under the cooled top (bench/plan.py, seed 0): with rho = 1 the
  total power was 624.3 +- 6.5 W against 604.7 W (3.0 sd), the fit carrying the ring
  heater's radial edge out to the insulated rim in every direction; the evidence rises with
  rho (log p(d) -38.4, -37.4, -36.6, -36.1 at rho = 1, 2, 3, 5) and at rho = 5 the power is
  606.3 +- 5.4 W (0.3 sd). Skipped where the face has no free axisymmetric mode (a long tube).
- d0 uniform on {1, 2} (PROFILE_DIMENSIONS) where the face has free axisymmetric modes and
  d = 2. Ring heaters, contact rings and band heaters are one-dimensional features with edges
  of their own, as sharp as anything else on the face, while the angular mean of a
  two-dimensional field is half an order smoother than the field: with d0 = 2 alone the
  axisymmetric profile's bands were too narrow at a band heater's edge or a contact ring
  between sensor rings (the modes of m >= 1 padded them). The evidence prefers d0 = 1 on most
  finite-element scenarios and weighs the two per fit; figures in DEVELOPERS.md ("The
  axisymmetric profile's dimension").
- s = nu + d / 2, d = the face's dimension (2; 1 on a long part's wall, a circle), with the
  Matern smoothness nu uniform on {0.25, 0.5, 1, 1.5, 2} (SMOOTHNESS): the field's pointwise
  variance sum_k Phi_k(x)^2 / P_k converges only for s > d / 2, so with s <= d / 2 a band at a
  point of the face is set by how many modes the basis keeps (measured on the platen
  scenario with s = 0.5 .. 2 directly: the half band at the centre 16,500, 43,800 and 55,500
  W/m^2 with the default, 40 and 60 radial terms; now 22,100 and 22,100 with the default and
  40). With nu > 0 the modes the basis leaves out have a finite variance at the face, and the
  bands carry it (truncation.face_tail). Measured choices of the range: with nu from 0.5 the
  roughest value carried the most weight on several scenarios and the wall beside a cooled
  end set aside two healthy sensors in each of three seeds (their leave-one-out predictions
  too sure); 0.25 mends that, and its modes beyond the enlarged basis's caps still move the
  bands by under 5 % (tests/test_fit_face_tail.py, 3x the terms). Orders up to 5 sharpen the bands on smooth
  finite-element truths further, but the data then prefer the smoothest orders and zone
  means become overconfident where the truth has a slope the basis cannot carry (an
  insulated rim: every eigenfunction is flat there).

The evidence p(d | alpha, l, s, rho, s0) comes from one thin SVD per point (evidence_spectrum;
the full SVD of LinearGaussianProblem only where the posterior has weight); the
amplitude is integrated on a grid in log sigma_f that is extended until both edges carry a
negligible weight, so no answer depends on where that grid ends. The posterior of c is the
mixture sum_i w_i N(c_i, C_i) over (sigma_f, l, s, rho, s0) with weights evidence x hyperprior.
"""

from __future__ import annotations

import math

import numpy as np

from ..forward.geometry import is_wall

from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem, evidence_spectrum, log_evidence_from_spectrum
from .strength_average import mixture_summary

LOG_AMPLITUDE_SD = math.log(10.0) / 4.0
LENGTH_RANGE = (1.0 / 20.0, 4.0)      # times the face size D
N_LENGTHS = 9
#: l^2 ev_min at which a hyperparameter point with s0 = s has reached the family's smooth
#: limit: with the amplitude normalized (T), every free mode's prior variance is then within
#: (1 + 1 / SMOOTH_LIMIT)^s of its value as l -> infinity (2 % for each unit of the
#: exponent), so longer length scales hold no other prior for it
SMOOTH_LIMIT = 50.0
#: learn_prior widens the length scales' range while the points short of the smooth limit hold
#: more than this share of the weight at its two longest values ...
LONG_END_MASS = 0.6
#: ... with its top at most this many times the face size D (from 4 D with the default grid:
#: 12, 36 and 108 D; d0 = 1 points: a longer l raises the axisymmetric part's share like a
#: larger rho, its variance over the angular part's growing like l, 27x from 4 D to 108 D)
MAX_LENGTH = 128.0
#: the Matern smoothness nu of the family; the precision's exponent is s = nu + d / 2
SMOOTHNESS = (0.25, 0.5, 1.0, 1.5, 2.0)
#: grid of the axisymmetric ratio rho (powers of 2) and its hyperprior: log2 rho ~ N(centre, sd^2)
AXISYMMETRIC_RATIOS = tuple(2.0 ** k for k in range(-2, 5))
RATIO_LOG2_CENTRE, RATIO_LOG2_SD = 1.0, 1.0
#: the axisymmetric part's dimension d0 (its exponent nu + d0 / 2), uniform over the values
PROFILE_DIMENSIONS = (1, 2)
#: array elements (points x amplitudes x readings) of one block of the evidence's array
#: operation: bounds its memory (a few arrays of this many doubles, 8 MB each)
EVIDENCE_BLOCK = 2 ** 20
#: grid step in units of LOG_AMPLITUDE_SD, starting half-width, and the weight (relative to
#: the largest) below which an edge of the amplitude grid counts as negligible
STEP, HALF_WIDTH, EDGE = 0.1, 5.0, 1e-9
#: bytes of the thin SVDs the evidence computes that are kept for building the weighted
#: points' problems (above it each such point computes its SVD again)
SVD_MEMORY = 64 * 2 ** 20
#: components whose weights sum to less than this are dropped from the mixture
TAIL = 1e-3
#: for pointwise bands over many points, neighbouring amplitudes of one (l, s, rho, s0) are
#: merged (moment-matched) until about this many components remain: the 95 % limits move by
#: about 1 % of the sd (demo, 2952 points, against 1024 components, before the profile
#: dimension: 0.46 % at 256, 1.0 % at 128; tests/test_inverse_hyperprior.py's prior-dominated
#: case, 4383 components with it: 3.4 % at 256, 1.0 % at 384, 1.4 % at 512 - the figure
#: depends on where the groups fall, so read it as 1-1.5 %)
BAND_COMPONENTS = 384
#: posterior sd / prior sd of log sigma_f above which the hyperprior, not the data, sets the amplitude
PRIOR_DOMINATED = 0.55  # a one-sided bound leaves ~0.6 (half-normal sd 0.60); informative data give 0.1-0.3


def readings_spread(problem) -> float:
    """mean(y^2) - 1, y = L^-1 (d - t0 - G c0): the readings' whitened mean square about the
    prior mean beyond the noise (the amplitude scale of LearnedPrior's hyperprior)."""
    return float(np.mean(problem.y ** 2)) - 1.0


def merge_limit(B):
    """BAND_COMPONENTS for pointwise bands over many points (B with over 64 rows), else None."""
    return BAND_COMPONENTS if np.ndim(B) == 2 and np.shape(B)[0] > 64 else None


def face_area(basis) -> float:
    """Area of the unknown face [m^2]: 2 pi r_w L (a wall of radius r_w; per metre on a long
    part) or pi (a^2 - a_i^2) (end faces)."""
    return basis.model.cylinder.face_area(basis.face)


def face_dimension(basis) -> int:
    """d: 1 for a long part's wall (a circle in theta), else 2."""
    return 1 if is_wall(basis.face) and basis.model.cylinder.long else 2


def matern_exponent(basis, smoothness: float) -> float:
    """s = nu + d / 2: the precision exponent of Matern smoothness nu on the face (d = face_dimension)."""
    return float(smoothness) + 0.5 * face_dimension(basis)


def face_size(basis) -> float:
    """D [m]: the radius for an end face; max(wall radius, height) for a wall (the wall
    radius on a long part)."""
    cyl = basis.model.cylinder
    if is_wall(basis.face):
        r_w = cyl.wall_radius(basis.face)
        return r_w if cyl.long else max(r_w, cyl.height)
    return cyl.radius


def _weights(ev, axis, length, order, axisymmetric, axis_order=None):
    if axis_order is not None and axis_order != order:
        order = np.where(axis, axis_order, order)
    w = (1.0 + length ** 2 * ev) ** order
    return w if axisymmetric == 1.0 else w / np.where(axis, axisymmetric ** 2, 1.0)


def profile_order(basis, order, dimension) -> float:
    """s0 = nu + d0 / 2 for the precision exponent s = nu + d / 2 of the face (d = face_dimension)."""
    return float(order) - 0.5 * (face_dimension(basis) - dimension)


def axisymmetric_modes(basis) -> np.ndarray:
    """Mask (K,) of the axisymmetric eigenfunctions (m = 0; corner columns excluded)."""
    return (basis.m == 0) & (np.arange(basis.m.size) < basis.n_eigen)


def matern_weights(basis, length, order, axisymmetric=1.0, axis_order=None) -> np.ndarray:
    """w_k = (1 + l^2 ev_k)^s_k / rho_k^2 (dimensionless), rho_k = rho and s_k = axis_order (s0;
    default s) on the axisymmetric eigenfunctions, else 1 and s."""
    return _weights(basis.surface_eigenvalues(), axisymmetric_modes(basis), length, order, axisymmetric,
                    axis_order)


def matern_precision(basis, length, order, axisymmetric=1.0, axis_order=None) -> np.ndarray:
    """P_k = (N_k / A) w_k (dimensionless), l [m], s >= 0, rho > 0, s0 > 0 (matern_weights)."""
    return basis.norms() / face_area(basis) * matern_weights(basis, length, order, axisymmetric, axis_order)


def _weighted_quantiles(x, w, q):
    """Quantiles q of a discrete distribution (values x, weights w), interpolated in the cdf."""
    order = np.argsort(x)
    x, w = np.asarray(x, float)[order], np.asarray(w, float)[order]
    cdf = np.cumsum(w) - 0.5 * w
    return np.interp(np.asarray(q, float), cdf / w.sum(), x)


class LearnedPrior:
    """Posterior averaged over (sigma_f, l, s, rho, d0); same interface as StrengthAverage.

    problem: the LinearGaussianProblem of the fit (its prior mean c0, readings and noise are
    kept; its prior precision is replaced by the family). basis: the unknown-face basis
    (norms, surface_eigenvalues, model.cylinder). nominal: boolean mask (K,) of the nominal
    direction, whose precision is scaled by nominal_factor.
    """

    def __init__(self, problem: LinearGaussianProblem, basis, nominal=None, nominal_factor: float = 1.0,
                 lengths=None, smoothness=None, spread=None, ratios=None, dimensions=None):
        a = face_size(basis)
        self.length_range = (LENGTH_RANGE[0] * a, LENGTH_RANGE[1] * a)
        self.lengths = (np.geomspace(*self.length_range, N_LENGTHS) if lengths is None
                        else np.asarray(lengths, dtype=float).ravel())
        self.smoothness = tuple(float(x) for x in (SMOOTHNESS if smoothness is None else smoothness))
        if self.lengths.size < 1 or len(self.smoothness) < 1 or np.any(self.lengths <= 0) \
                or min(self.smoothness) <= 0:
            raise InverseError("the prior family needs positive length scales and smoothness values")
        self.length_range = (float(self.lengths.min()), float(self.lengths.max()))
        self.widened_from = None        # learn_prior: the range before it was widened
        self.orders = tuple(matern_exponent(basis, nu) for nu in self.smoothness)
        K = problem.K
        nominal = np.zeros(K, dtype=bool) if nominal is None else np.asarray(nominal, dtype=bool)
        free = ~nominal
        if not free.any():
            raise InverseError("the unknown face's basis holds no mode beside its nominal level (as with "
                               "fit.harmonics = 0 and fit.terms = 1), so the learned prior has no shape to weigh: "
                               "give more fit.terms, or prior = \"fixed\" for the level alone")
        ratios = AXISYMMETRIC_RATIOS if ratios is None else ratios
        dimensions = PROFILE_DIMENSIONS if dimensions is None else dimensions
        axis = axisymmetric_modes(basis)
        # the axisymmetric part's own hyperparameters exist only where it has free modes, and
        # its dimension only on a two-dimensional face
        has_axis, d = bool(np.any(free & axis)), face_dimension(basis)
        self.ratios = tuple(float(x) for x in ratios) if has_axis else (1.0,)
        self.dimensions = tuple(int(x) for x in dimensions) if has_axis and d == 2 else (d,)
        Gw = problem.whitened_design
        spread = max(float(readings_spread(problem) if spread is None else spread), 1.0)
        self.problem = problem
        ev, scale = basis.surface_eigenvalues(), basis.norms() / face_area(basis)
        ev_free = ev[free]
        converged = bool(ev_free.size and np.all(ev_free > 0)
                         and self.lengths.max() ** 2 * ev_free.min() >= SMOOTH_LIMIT)
        combos, precisions, log_ref, T = [], [], [], []
        for rho in self.ratios:
            for d0 in self.dimensions:
                for s in self.orders:
                    s0 = profile_order(basis, s, d0)
                    for l in self.lengths:
                        w = _weights(ev, axis, l, s, rho, s0)
                        t = float(np.sum(1.0 / w[free]))
                        P = scale * w                   # matern_precision(basis, l, s, rho, s0)
                        P[nominal] *= nominal_factor
                        unit_signal = float(np.mean((Gw[:, free] ** 2) @ (1.0 / (P[free] * t))))
                        combos.append((l, s, rho, s0))
                        precisions.append(P)
                        log_ref.append(0.5 * math.log(spread / unit_signal))
                        T.append(t)
        self.combos, self._precisions, self._problems = combos, precisions, {}
        # the points whose longest length scale is the family's smooth limit (SMOOTH_LIMIT)
        self._at_limit = np.array([converged and math.isclose(s, s0) for (_, s, _, s0) in combos])
        # (s^2, beta) of every point, (combos, n) each; the SVDs kept for the points that carry
        # weight (problem_for) while they fit in SVD_MEMORY
        n, K = Gw.shape
        keep = n <= K and 8 * len(precisions) * n * (n + K + 1) <= SVD_MEMORY
        spectra = [evidence_spectrum(Gw, problem.y, P, keep) for P in precisions]
        self._S2, self._Beta = np.array([x[0] for x in spectra]), np.array([x[1] for x in spectra])
        self._svds = [x[2] for x in spectra] if keep else None
        # log hyperprior mass of each (l, s, rho, d0) point: uniform over (l, s, d0), log2 rho normal
        lr = -0.5 * ((np.log2(self.ratios) - RATIO_LOG2_CENTRE) / RATIO_LOG2_SD) ** 2
        lr -= math.log(np.sum(np.exp(lr)))
        n_rest = len(self.dimensions) * len(self.orders) * self.lengths.size
        self.combo_log_prior = np.repeat(lr, n_rest) - math.log(n_rest)
        self._log_ref, self._T = np.array(log_ref), np.array(T)
        self._integrate()
        self._prune()
        self._svds = None          # the weighted points' problems hold theirs

    # ------------------------------------------------------------------ hyperparameter posterior
    def _log_weights(self, zgrid):
        """log of evidence x hyperprior on the grid z = (log sigma_f - log sigma_ref) / LOG_AMPLITUDE_SD.

        Shape (combos, z). The hyperprior density of log sigma_f is N(z; 0, 1) / LOG_AMPLITUDE_SD
        (the same Jacobian for every combo); (l, s, rho, d0) carry combo_log_prior.
        """
        out = np.empty((len(self.combos), zgrid.size))
        logdet = self.problem.noise.logdet
        block = max(1, EVIDENCE_BLOCK // (zgrid.size * self._S2.shape[1]))
        for j in range(0, len(self.combos), block):
            rows = slice(j, j + block)
            out[rows] = log_evidence_from_spectrum(self._S2[rows], self._Beta[rows], self.alphas_for(rows, zgrid),
                                                   logdet)
        return out - 0.5 * zgrid ** 2 + self.combo_log_prior[:, None]

    def problem_for(self, j) -> LinearGaussianProblem:
        """The LinearGaussianProblem of hyperparameter point j (combos[j]), built on first use:
        the evidence of every point needs only its spectrum (evidence_spectrum), the
        posterior only the points that carry weight."""
        if j not in self._problems:
            svd = self._svds[j] if self._svds is not None else None
            self._problems[j] = self.problem.with_prior(self._precisions[j], svd)
        return self._problems[j]

    def alphas_for(self, j, z):
        """alpha = T / sigma_f^2 for combo j at grid values z: (z,) for one combo, (combos, z)
        for a slice or index array j."""
        T, ref = self._T[j], self._log_ref[j]
        if np.ndim(T):
            T, ref = T[:, None], ref[:, None]
        log_sf = ref + LOG_AMPLITUDE_SD * np.asarray(z, float)
        return T * np.exp(-2.0 * log_sf)

    def _integrate(self):
        lo, hi = -HALF_WIDTH, HALF_WIDTH
        while True:
            z = np.arange(lo, hi + 0.5 * STEP, STEP)
            lw = self._log_weights(z)
            top = lw.max()
            grow_lo = lw[:, 0].max() - top > math.log(EDGE)
            grow_hi = lw[:, -1].max() - top > math.log(EDGE)
            if not (grow_lo or grow_hi) or hi - lo > 200:
                break
            lo -= 2.0 if grow_lo else 0.0
            hi += 2.0 if grow_hi else 0.0
        self.z = z
        self.log_weights = lw
        # log of the marginal likelihood p(d) integrated over the hyperpriors (trapezoid in z)
        self.log_marginal = float(top + math.log(np.sum(np.exp(lw - top)) * STEP) - 0.5 * math.log(2 * math.pi))
        w = np.exp(lw - top)
        self.weights = w / w.sum()
        self.edge_weight = float(max(self.weights[:, 0].sum(), self.weights[:, -1].sum()))

    def _prune(self):
        flat = self.weights.ravel()
        order = np.argsort(flat)
        drop = np.cumsum(flat[order]) < TAIL
        keep = np.ones(flat.size, dtype=bool)
        keep[order[drop]] = False
        keep = keep.reshape(self.weights.shape)
        total = self.weights[keep].sum()
        self._parts, self._part_combos = [], []
        for j in range(len(self.combos)):
            idx = np.flatnonzero(keep[j])
            if idx.size:
                self._parts.append((self.problem_for(j), self.alphas_for(j, self.z[idx]),
                                    self.weights[j, idx] / total))
                self._part_combos.append(self.combos[j])

    # ------------------------------------------------------------------ posterior mixture
    def coefficients(self) -> np.ndarray:
        """Mixture mean of c, (K,)."""
        return sum(w @ pb.coefficients(a) for pb, a, w in self._parts)

    def components(self):
        """The mixture's components: [(prior precision P_i (K,), alphas (n_i,), weights (n_i,))]."""
        return [(pb.prior_diag, a, w) for pb, a, w in self._parts]

    def hyperparameters(self):
        """[((length [m], order, axisymmetric ratio, axisymmetric order), alphas (n_i,), weights (n_i,))] of the
        mixture's components."""
        return [(ls, a, w) for ls, (_, a, w) in zip(self._part_combos, self._parts)]

    def posterior_covariance(self) -> np.ndarray:
        """Mixture covariance (K, K): each point's scatter about its own mean
        (LinearGaussianProblem.weighted_moments) plus the scatter of those means,
        sum_p W_p (d_p - e)(d_p - e)^T, d_p the point's mean offset from the shared prior mean
        c0 and e = sum_p W_p d_p / sum_p W_p."""
        moments = [pb.weighted_moments(a, w) for pb, a, w in self._parts]
        W = np.array([m[0] for m in moments])
        D = np.array([m[1] for m in moments])
        e = W @ D / W.sum()
        spread = (D - e) * np.sqrt(W / W.sum())[:, None]
        out = sum(m[2] for m in moments) / W.sum() + spread.T @ spread
        return 0.5 * (out + out.T)

    def posterior_sd(self) -> np.ndarray:
        return np.sqrt(np.maximum(np.diag(self.posterior_covariance()), 0.0))

    def band_components(self, B, offset, limit=None):
        """Weights (m,), means and sds (m, q) of the mixture's components for offset + B c;
        with `limit`, neighbouring amplitudes of one (l, s, rho, s0) are merged
        (LinearGaussianProblem.predict_merged)."""
        means, sds, ws = [], [], []
        n_total = sum(a.size for _, a, _ in self._parts)
        group = 1 if limit is None else max(1, math.ceil(n_total / limit))
        B2 = np.square(np.asarray(B, dtype=float)) if group > 1 else None      # shared by every point's projection
        for pb, a, w in self._parts:
            if group > 1:
                w, mi, si = pb.predict_merged(B, a, w, group, offset, B2)
            else:
                mi, si = pb.predict(B, a, offset)
                mi, si = np.reshape(mi, (a.size, -1)), np.reshape(si, (a.size, -1))
            means.append(mi)
            sds.append(si)
            ws.append(w)
        return np.concatenate(ws), np.vstack(means), np.vstack(sds)

    def predict(self, B, offset=None):
        """Mixture mean and sd of offset + B c; shapes (q,) (scalars for B of shape (K,))."""
        w, mi, si = self.band_components(B, offset)
        mean = w @ mi
        sd = np.sqrt(w @ (si ** 2 + (mi - mean) ** 2))
        if np.ndim(B) == 1:
            return float(mean[0]), float(sd[0])
        return mean, sd

    def band(self, B, level: float = 0.95, offset=None, extra_variance=None):
        """Mean, sd and the equal-tailed `level` band (lower, upper) of offset + B c (mixture
        quantiles; + an independent term of variance extra_variance)."""
        w, mi, si = self.band_components(B, offset, merge_limit(B))
        return mixture_summary(w, mi, si, level, scalar=np.ndim(B) == 1, extra_variance=extra_variance)

    def prior_sd(self, B) -> np.ndarray:
        """sd of B c under the prior averaged over the hyperparameter posterior:
        sqrt(sum_i w_i diag(B (alpha_i P_i)^-1 B^T))."""
        B = np.atleast_2d(np.asarray(B, dtype=float))
        var = sum(((B ** 2) @ (1.0 / pb.prior_diag)) * float(w @ (1.0 / a)) for pb, a, w in self._parts)
        return np.sqrt(var)

    # ------------------------------------------------------------------ what the data chose
    def _marginals(self):
        """Posterior weights of the length scales, orders, axisymmetric ratios and profile dimensions."""
        by_combo = self.weights.sum(axis=1).reshape(len(self.ratios), len(self.dimensions), len(self.orders),
                                                    self.lengths.size)
        return (by_combo.sum(axis=(0, 1, 2)), by_combo.sum(axis=(0, 1, 3)), by_combo.sum(axis=(1, 2, 3)),
                by_combo.sum(axis=(0, 2, 3)))

    def amplitude_quantiles(self, q):
        """Posterior quantiles q of the amplitude sigma_f [face unit]."""
        log_sf = (self._log_ref[:, None] + LOG_AMPLITUDE_SD * self.z[None, :]).ravel()
        return np.exp(_weighted_quantiles(log_sf, self.weights.ravel(), q))

    def leading(self):
        """(precision P (K,), strengths alpha (z,), log hyperprior weights of the amplitude
        grid (z,)) of the hyperparameter point (l, s, rho, d0) with the most posterior weight."""
        j = int(np.argmax(self.weights.sum(axis=1)))
        log_w = -0.5 * self.z ** 2
        return self._precisions[j], self.alphas_for(j, self.z), log_w - np.logaddexp.reduce(log_w)

    def amplitude_posterior(self):
        """(posterior mean, sd) of z = (log sigma_f - log sigma_ref) / LOG_AMPLITUDE_SD; prior N(0, 1)."""
        wz = self.weights.sum(axis=0)
        m = float(wz @ self.z)
        return m, float(np.sqrt(wz @ (self.z - m) ** 2))

    @property
    def warnings(self) -> tuple[str, ...]:
        """Notes on hyperparameters set by their hyperprior rather than the data: the length
        scale pressed against an end of its range, the longest one counting only the points
        short of the family's smooth limit (SMOOTH_LIMIT: beyond it no other prior remains).
        (An amplitude the data cannot fix is `description()['hyperprior_dominated']`, reported
        by inverse.resolution.)"""
        out = []
        w_l = self._marginals()[0]
        if self.lengths.size >= 4:
            longest, _ = self._long_end()
            for end, mass in (("shortest", w_l[:2].sum()), ("longest", longest)):
                if mass > LONG_END_MASS:
                    out.append(f"the prior's length scale is pressed against the {end} value its hyperprior "
                               f"allows ({self.length_range[0] * 1e3:.3g}-{self.length_range[1] * 1e3:.3g} mm, "
                               f"{100 * mass:.0f} % of the weight in the outer two points)")
        return tuple(out)

    @property
    def reaches_smooth_limit(self) -> bool:
        """Is the longest length scale the smooth limit of any hyperparameter point?"""
        return bool(self._at_limit.any())

    def _long_end(self):
        """(weight at the two longest length scales of the points short of the smooth limit,
        that of the points at it)."""
        by_combo = self.weights.sum(axis=1)
        outer = np.arange(by_combo.size) % self.lengths.size >= self.lengths.size - 2
        return float(by_combo[outer & ~self._at_limit].sum()), float(by_combo[outer & self._at_limit].sum())

    def description(self) -> dict:
        """What the data chose, for summary.json: length scale mode and 90 % range [m], order,
        axisymmetric-ratio and (where averaged) profile-dimension weights, 90 % ranges of alpha and
        of the amplitude sigma_f [face unit], and how far the amplitude's posterior narrowed its prior."""
        w_l, w_s, w_r, w_d = self._marginals()
        ll = np.log(self.lengths)
        l90 = np.exp(_weighted_quantiles(ll, w_l, (0.05, 0.95))) if self.lengths.size > 1 else \
            np.repeat(self.lengths, 2)
        alph = np.concatenate([self.alphas_for(j, self.z) for j in range(len(self.combos))])
        a90 = np.exp(_weighted_quantiles(np.log(alph), self.weights.ravel(), (0.05, 0.95)))
        s90 = self.amplitude_quantiles((0.05, 0.5, 0.95))
        _, zsd = self.amplitude_posterior()
        out = {
            "family": "whittle-matern", "length_scale_m": float(self.lengths[int(np.argmax(w_l))]),
            "length_scale_90_m": [float(l90[0]), float(l90[1])],
            "length_scale_hyperprior_m": [float(self.length_range[0]), float(self.length_range[1])],
            "length_scale_range_reaches_smooth_limit": self.reaches_smooth_limit,
            "length_scale_range_widened_from_m": (None if self.widened_from is None
                                                  else [float(x) for x in self.widened_from]),
            "smooth_limit_weight": self._long_end()[1],
            "smoothness_weights": {f"{nu:g}": float(w) for nu, w in zip(self.smoothness, w_s)},
            "axisymmetric_ratio_weights": {f"{x:g}": float(w) for x, w in zip(self.ratios, w_r)},
            "strength_90": [float(a90[0]), float(a90[1])],
            "amplitude_median": float(s90[1]), "amplitude_90": [float(s90[0]), float(s90[2])],
            "amplitude_posterior_over_prior_spread": zsd,
            "hyperprior_dominated": bool(zsd > PRIOR_DOMINATED),
            "log_marginal_likelihood": self.log_marginal,
        }
        if len(self.dimensions) > 1:
            out["axisymmetric_dimension_weights"] = {f"{d}": float(w) for d, w in zip(self.dimensions, w_d)}
        return out


def learn_prior(problem: LinearGaussianProblem, basis, nominal=None, nominal_factor: float = 1.0,
                spread=None, like=None) -> LearnedPrior:
    """Posterior of the unknown face averaged over strength, length scale, order, axisymmetric
    ratio and profile dimension (see module doc).  like: an earlier LearnedPrior of the same
    fit whose length scales (and their widening) this one shares, so that every model of a fit
    is compared on one grid of length scales; without it the range is widened at its long end, two
    points of its own log step at a time, while the points short of the smooth limit hold more
    than LONG_END_MASS of the weight at its two longest values (the top at most MAX_LENGTH x D;
    the description says so)."""
    if like is not None:
        lp = LearnedPrior(problem, basis, nominal, nominal_factor, lengths=like.lengths, spread=spread)
        lp.widened_from = like.widened_from
        return lp
    lp = LearnedPrior(problem, basis, nominal, nominal_factor, spread=spread)
    start, top = lp.length_range, MAX_LENGTH * face_size(basis) * (1.0 + 1e-9)
    while lp.lengths.size >= 4 and lp._long_end()[0] > LONG_END_MASS:
        step = lp.lengths[-1] / lp.lengths[-2]
        more = lp.lengths[-1] * step ** np.arange(1.0, 3.0)
        if more[-1] > top:
            break
        lp = LearnedPrior(problem, basis, nominal, nominal_factor, lengths=np.append(lp.lengths, more),
                          spread=spread)
    lp.widened_from = start if lp.length_range != start else None
    return lp
