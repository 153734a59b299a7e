"""Batch inversion: many rows of readings through one fit's model at a fixed strength.

A trend inverts the same part with the same sensors thousands or millions of times.  The
model of every row is the one of `inverse.fit` (design notes §5) with alpha fixed (chosen
once, on a reference row, by the caller):

    d = t0 + G c + b + e,   c ~ N(gamma u, (alpha P)^-1),   noise S = diag(v_rand + v_shared)

with u the fundamental eigenfunction and gamma its generalized-least-squares level from the
row itself, exactly as `fit` sets its prior mean.  Every answer is then linear in the
readings, c = A (d - t0), and a face functional f (face mean, power, zone mean, the value
at a grid point) is  k_f + e_f . (d - t0)  with a row vector e_f = f^T A.

Rows are grouped by their set of valid sensors (missing-value pattern) and, inside a
group, by their noise vector.  Each distinct (pattern, noise) gets one thin SVD of the
whitened, prior-scaled design A = S^-1/2 G P^-1/2 = U s V^T (the distinct noises of a group
as one stacked SVD); from it, for all functionals at once,

    e_f  = a_f + (f.u - a_f . G u) g,   a_f = sum_j (f P^-1/2 V_j) s_j / (s_j^2 + alpha) U_j^T S^-1/2,
    g    = S^-1 G u / (u^T G^T S^-1 G u)                            (the GLS level of u),
    var_f = sum_j (f P^-1/2 V_j)^2 / (s_j^2 + alpha) + |P^-1/2 f|^2_null / alpha,

the posterior variance of `fit` (its prior mean held fixed; the null-space part is the prior
variance of what the sensors do not see).  Values of every row of a group then come from
one matrix product; no Python loop runs over rows, sensors or terms.  Rows logged at one
noise level (every N-th sample) share one factorization per pattern; steady windows carry
their own noise from their scatter, and their factorizations are stacked.

Extremes: the minimum and maximum of the posterior-mean profile on a display grid (searched
in single precision, then evaluated in double at the grid point found); their sd is the
pointwise posterior sd at that point and the sd of max - min uses the covariance of the two
points (an approximation: `fit` draws profiles, which also lets the location move).

Changes from a reference row: `changes()` gives a solver of the same model for the
difference of the readings d_row - d_ref (sensors valid in both).  The shared part -- the
thermocouple offsets and placement errors, the same at every time -- cancels exactly in
that difference, so the change is estimated against the random noise only
(S_row + S_ref), with its own smoothing strength (a prior N(gamma u, (alpha P)^-1) on the
change of the coefficients) and, where zones with ranges are declared on the face, a step of
its own level over each zone (`zone_steps`: the zone model's columns, zone_columns.ZoneDesign,
with one of its edge widths; its prior variance at strength alpha step_factor times that of
the zone's mean under the smooth prior, the nominal direction left out), so a heater zone's
loss keeps its sharp edges instead of being rounded off (a sector's loss came out 8-13 %
small, 4 sd).  The caller weighs the edge widths and step factors (inverse.trend), by the
joint evidence of the changed rows (`solve_weighted`) or by each row's own (`solve_mixture`).
Estimating it from the difference of two absolute estimates instead would shrink it with the
offsets' variance, which dominates each row's noise.  Its
sd ("change" sds) is the posterior sd at a fixed level plus the spread of the row's own
level, (f.u - a_f . G u)^2 / (u^T G^T S^-1 G u): what the noise and the unseen part of the
change leave open, so a change that spills into a neighbouring zone through the smoothing
stays within that zone's band.  With nothing changing, change / sd is at most N(0, 1); the
estimator's noise alone ("noise" sds: sqrt(e_f^2 . S)), which the flags used until session
33, flagged such neighbours.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .diagnostics import default_threshold
from .errors import InverseError
from .threads import few_threads
from .face_grid import display_grid
from .design import nominal_direction as _nominal_direction
from .functionals import face_functionals  # noqa: F401  (also exported from here)

#: grid (radial or axial x angular points) on which a trend searches the extremes; coarser
#: than fit's 41 x 72 so that millions of rows stay quick (the MAP extremes move by a small
#: fraction of their sd for the default basis)
TREND_GRID = (21, 48)
#: family-wise false-alarm level of the change flags (Bonferroni over rows x zones)
TREND_FAMILY_LEVEL = 0.02
#: fewest valid sensors for a row to be inverted
MIN_SENSORS = 3
#: 1 - H_ii at or below which a reading cannot be checked by its row's others (leave_one_out)
LOO_MIN_FREEDOM = 1e-9
#: tail probability beyond which a row departs from the prior mean (departing_rows)
DEPARTURE_LEVEL = 1e-3
#: default number of strengths of `strength_grid` (a row's change averaged over them by its own
#: evidence: solve_averaged, solve_mixture)
ROW_STRENGTHS = 17
#: a pair of a mixture (solve_mixture) whose weight stays below this in every row of a block is
#: left out of that block's products (a weight, not a share of the mean)
MIXTURE_CUT = 1e-12
#: bound on the size of stacked intermediate arrays (elements)
_BLOCK_ELEMENTS = 4_000_000


def change_threshold(n_comparisons: int, family_level: float = TREND_FAMILY_LEVEL) -> float:
    """|change| / change_sd beyond which a change is flagged: Phi^-1(1 - level / (2 m)), m
    comparisons (rows x zones), so that with nothing changing P(any flag) <= level."""
    return default_threshold(max(int(n_comparisons), 1), family_level)


@dataclass
class BatchEstimates:
    """Per-row answers (SI): values and sds of the functionals (R, nf) in the order of
    `names` (posterior sds; for a change solver with the row's level's spread); extremes of the MAP
    profile (R,) with sds (NaN for a change solver); n_used (R,) valid sensors (rows with
    fewer than MIN_SENSORS are NaN)."""

    names: list
    values: np.ndarray
    sd: np.ndarray
    min: np.ndarray
    min_sd: np.ndarray
    max: np.ndarray
    max_sd: np.ndarray
    nonuniformity: np.ndarray
    nonuniformity_sd: np.ndarray
    n_used: np.ndarray

    def value(self, name):
        return self.values[:, self.names.index(name)]

    def sd_of(self, name):
        return self.sd[:, self.names.index(name)]


class BatchSolver:
    """Solver for rows of readings of n sensors.

    G (n, K), t0 (n,) [K]: design and known field at the sensors; prior_diag P (K,); alpha
    the fixed strength; functionals: list of (name, f, k); grid_B (Q, K) and grid_known (Q,)
    the face on the extreme-search grid; shared_var (n,) [K^2] the variance of what is the
    same at every time (offsets, placement); prior_direction u (K,) for the prior mean gamma u
    (None: prior mean 0); change_names: functionals whose changes are tracked (default:
    every zone, i.e. all but mean and total_power).
    """

    def __init__(self, G, t0, prior_diag, alpha, functionals, grid_B, grid_known, shared_var,
                 prior_direction=None, change_names=None, sd_kind="posterior"):
        G = np.asarray(G, float)
        if G.ndim != 2:
            raise InverseError("G must be (sensors x coefficients)")
        self.n, self.K = G.shape
        self.G, self.t0 = G, np.broadcast_to(np.asarray(t0, float), (self.n,)).copy()
        p = np.asarray(prior_diag, float)
        if p.shape != (self.K,) or np.any(~(p > 0)):
            raise InverseError(f"prior_diag must be {self.K} positive values")
        if not (np.isfinite(alpha) and alpha > 0):
            raise InverseError("alpha must be positive and finite")
        self.alpha = float(alpha)
        self.p_isqrt = 1.0 / np.sqrt(p)
        self.u = np.zeros(self.K) if prior_direction is None else np.asarray(prior_direction, float)
        self.names = [str(f[0]) for f in functionals]
        F = np.array([np.asarray(f[1], float) for f in functionals]).reshape(len(functionals), self.K)
        B = np.asarray(grid_B, float).reshape(-1, self.K)
        self.nf, self.Q = F.shape[0], B.shape[0]
        if sd_kind not in ("posterior", "noise", "change"):
            raise InverseError("sd_kind must be 'posterior', 'noise' or 'change'")
        self.sd_kind = sd_kind
        self.Fq = np.vstack([F, B])
        self.kq = np.concatenate([[float(f[2]) for f in functionals], np.asarray(grid_known, float)])
        self.Fn = self.Fq * self.p_isqrt[None, :]
        self.fn2 = np.sum(self.Fn ** 2, axis=1)
        self.fu = self.Fq @ self.u
        Bn = self.Fn[self.nf:]
        self._gram = Bn @ Bn.T if self.Q <= 1500 else None     # P^-1/2-weighted products of grid rows
        self.shared_var = np.broadcast_to(np.asarray(shared_var, float), (self.n,)).copy()
        if np.any(self.shared_var < 0) or not np.all(np.isfinite(self.shared_var)):
            raise InverseError("shared_var must be non-negative finite variances")
        if change_names is None:
            change_names = [n for n in self.names if n not in ("mean", "total_power")]
        self.change_names = list(change_names)
        self._functionals = [(n, F[i], float(self.kq[i])) for i, n in enumerate(self.names)]
        # what a fit carries beyond this solver's single prior (with_fit_uncertainty): the
        # functionals' (nf,) and the extremes' (min, max, max - min) variances
        self.model_var = np.zeros(self.nf)
        self.model_var_extremes = np.zeros(3)
        # (design, r, theta, z, zones) for a change solver with a step level per zone, and the
        # columns once built (zone_steps)
        self._step_source, self._steps = None, None

    # ------------------------------------------------------------------ construction
    @classmethod
    def from_fit(cls, result, r, theta, z, offset_sd=0.0, position_tolerance=0.0, zones=(),
                 grid=TREND_GRID, alpha=None, like=None):
        """Solver for sensors at (r, theta, z) [m, rad, m] with the model, smoothing and
        strength of a FitResult (alpha: override).  Shared variance: offset_sd^2 plus the
        placement variance (grad T . dx)^2 with dx uniform in +-position_tolerance, grad T from
        the result's posterior mean (fixed at the reference, like the model).  like: a solver
        from another fit of the same case; its zones' steps are shared when its sensors and
        their design columns are these to rounding (the steps depend on nothing else)."""
        if not result.smooth_only:
            raise InverseError("logs are inverted with the smooth model; set [fit] model = \"smooth\" "
                               "for trend (the zone model serves single snapshots)")
        design = result.design
        basis, cyl = design.basis, design.cylinder
        r, theta, z = (np.atleast_1d(np.asarray(x, float)) for x in (r, theta, z))
        G, t0, ev, dG = design.at(r, theta, z, gradient=True)
        P = result.problem.prior_diag  # the fit's own prior (with its nearly flat nominal level)
        shared = np.broadcast_to(np.asarray(offset_sd, float), r.shape) ** 2
        tol = np.broadcast_to(np.asarray(position_tolerance, float), r.shape)
        if np.any(tol > 0):
            grad = ev.gradient + np.einsum("dpk,k->dp", dG, result.posterior.c)
            shared = shared + (grad ** 2).sum(axis=0) * tol ** 2 / 3.0
        pts = display_grid(basis.face, cyl, *grid)
        out = cls(G, t0, P, result.posterior.alpha if alpha is None else alpha,
                  face_functionals(design, zones), basis.face_values(pts.u, pts.v),
                  basis.known_face_values(pts.u, pts.v), shared, _nominal_direction(basis))
        steps = [zn for zn in zones or () if hasattr(zn, "indicator") and (zn.face or basis.face) == basis.face]
        if steps:
            out._step_source = (design, r, theta, z, steps)
            if like is not None and like._step_source is not None and like.G.shape == G.shape:
                _, r0, th0, z0, steps0 = like._step_source
                if (steps0 == steps and np.allclose(like.G, G, rtol=1e-12, atol=1e-12 * float(np.abs(G).max()))
                        and all(np.array_equal(a, b) for a, b in ((r0, r), (th0, theta), (z0, z)))):
                    out._step_source, out._steps = like._step_source, like._steps
        return out

    def zone_steps(self, edge: int = 0):
        """(Gz (n, Z) [K per unit level], rows {zone name: f (K + Z,)}, names (Z,) the zone of each
        step) of a step of unit level over each zone with ranges on the face (its
        indicator projected on the enlarged basis, zone_columns.ZoneDesign: the zone model's
        columns) with the edges of setting `edge` (an index into step_edges, the edge widths
        the zone model averages over, narrowest first: zone_columns.edge_settings), or None;
        built once for every setting."""
        if self._steps is None and self._step_source is not None:
            from .truncation import nearest_distance
            from .zone_columns import designs_by_edge, edge_settings

            design, r, theta, z, zones = self._step_source
            widths = edge_settings(design, zones)
            self._steps = []
            for w, zd in zip(widths, designs_by_edge(design, zones, nearest_distance(design, r, z), widths)):
                Gz = zd.at(r, theta, z)[0][:, self.K:]
                rows = {name: f for name, f, _ in face_functionals(zd, zd.zones)}
                has = np.array([zn.name in rows for zn in zones])     # a zone covering nothing has none
                if not has.any():
                    self._steps = []
                    break
                keep = np.concatenate([np.ones(self.K, bool), has])
                widest = max(w) if w is not None else max(getattr(zn, "edge", 0.0) for zn in zones)
                self._steps.append((Gz[:, has], {n: f[keep] for n, f in rows.items()},
                                    [zn.name for zn, h in zip(zones, has) if h], float(widest)))
        return self._steps[edge][:3] if self._steps else None

    def step_edge_width(self, edge: int) -> float:
        """The widest edge [m] among the zones' steps of edge setting `edge`."""
        return self._steps[edge][3] if self.zone_steps(edge) is not None else 0.0

    @property
    def step_edges(self) -> int:
        """How many edge settings the zones' steps come in (0: no steps)."""
        return len(self._steps or []) if self.zone_steps() is not None else 0

    def _copy(self) -> "BatchSolver":
        """A shallow copy sharing the arrays (the variants below change a few attributes)."""
        new = object.__new__(BatchSolver)
        new.__dict__.update(self.__dict__)
        return new

    def with_fit_uncertainty(self, result, d_ref, rv_ref) -> "BatchSolver":
        """The same solver, its absolute figures also carrying what the fit `result` of the
        reference row (readings d_ref (n,) [K], random variances rv_ref (n,) [K^2]) holds
        beyond this solver's single prior at one strength -- the learned prior's left-out
        modes, the unseen stretch's steps, the spread over its hyperparameters -- held the
        same in every row, as the offsets are (a property of the layout and the prior, not of
        a row's noise):
            var += max(var(fit) - var(this solver, reference row), 0)
        for each functional (mean, power, zone means) and each extreme (min, max, max - min;
        the fit's from its posterior draws), so that the reference row's sds are at least the
        fit's (equal where the fit's are the wider).  Changes (`changes`) carry none of it:
        it cancels in them."""
        S = result.summary
        fit_sd = {"mean": S["mean_sd"], "total_power": S["total_power_sd_W"],
                  **{z["name"]: z["sd"] for z in S.get("zones", [])}}
        own = self.solve(np.asarray(d_ref, float)[None, :], np.asarray(rv_ref, float))

        def extra(fit, mine):
            return max(float(fit) ** 2 - float(mine) ** 2, 0.0) if np.isfinite(mine) else 0.0
        new = self._copy()
        new.model_var = np.array([extra(fit_sd[name], own.sd[0, i]) if name in fit_sd else 0.0
                                  for i, name in enumerate(self.names)])
        new.model_var_extremes = np.array([extra(S[key], getattr(own, key)[0]) if self.Q else 0.0
                                           for key in ("min_sd", "max_sd", "nonuniformity_sd")])
        return new

    # ------------------------------------------------------------------ estimators
    def _estimators(self, v, noise, rows=None):
        """For pattern v (n,) bool and U noise vectors (U, n_v) of total variance: estimator
        rows e (U, q, n_v), posterior variances (U, q), phi (U, Q, r) and 1/(s^2+alpha) (U, r)
        for the grid covariances, at this solver's strength (_estimator_core).  rows: the
        quantities' rows (q, K) instead of the functionals' and the grid's (the sensors' own,
        G_v: e is then the hat matrix)."""
        Gv = self.G[v]
        sd = np.sqrt(noise)
        Uu, s, Vt = np.linalg.svd((Gv[None, :, :] / sd[:, :, None]) * self.p_isqrt[None, None, :],
                                  full_matrices=False)
        Fq = self.Fq if rows is None else np.asarray(rows, float)
        if rows is None:
            Fn, fu, fn2 = self.Fn, self.fu, self.fn2
        else:
            Fn = Fq * self.p_isqrt[None, :]
            fu, fn2 = Fq @ self.u, np.sum(Fn ** 2, axis=1)
        e, var, phi, inv = self._estimator_core(Uu, s, Vt, noise, Gv @ self.u, Fn, fu, fn2,
                                                np.array([self.alpha]))
        return e[:, 0], var[:, 0], phi[:, self.nf:, :], inv[:, 0]

    def _estimator_core(self, Uu, s, Vt, noise, gu, Fn, fu, fn2, alphas):
        """The one rule of the row estimators, for U noise vectors (U, n_v) [K^2] and A
        strengths `alphas` (A,): from the whitened design's SVD A_u = diag(1/sd_u) G_v P^-1/2 =
        U_u diag(s_u) V_u^T, with phi = F P^-1/2 V (the quantities' rows F (q, K), Fn = F P^-1/2),
        the estimator at a fixed level a = phi diag(s / (s^2 + alpha)) U^T diag(1/sd), the
        nominal level the row's own (GLS over the readings, g = W G u / (u^T G^T W G u), W =
        diag(1/noise)): e = a + (f.u - a G u) g^T, and the posterior variance
            var = sum_r phi^2 / (s^2 + alpha) + (|Fn|^2 - sum_r phi^2) / alpha
        (the second part: the directions the readings do not see), plus (f.u - a G u)^2 /
        (u^T G^T W G u) for a change (sd_kind "change").  Returns e (U, A, q, n_v), var (U, A, q),
        phi (U, q, r) and 1/(s^2 + alpha) (U, A, r)."""
        sd = np.sqrt(noise)
        phi = np.matmul(Fn[None], np.swapaxes(Vt, 1, 2))                     # (U, q, r)
        inv = 1.0 / (s[:, None, :] ** 2 + alphas[None, :, None])
        a = np.matmul(phi[:, None, :, :] * (s[:, None, :] * inv)[:, :, None, :], np.swapaxes(Uu, 1, 2)[:, None]) \
            / sd[:, None, None, :]
        W = 1.0 / noise
        den = np.sum(W * gu ** 2, axis=1)
        g = np.where(den[:, None] > 0, W * gu / np.where(den > 0, den, 1.0)[:, None], 0.0)
        lead = fu[None, None, :] - a @ gu
        e = a + lead[..., None] * g[:, None, None, :]
        phi2 = phi ** 2
        var = np.matmul(inv, np.swapaxes(phi2, 1, 2)) + np.maximum(fn2[None, :] - np.sum(phi2, axis=2),
                                                                   0.0)[:, None, :] / alphas[None, :, None]
        if self.sd_kind == "change":
            # the nominal profile's level is the row's own (GLS, variance 1/den): its spread
            # adds (f.u - a_f . G u)^2 / den to the posterior variance at a fixed level
            var = var + np.where(den[:, None, None] > 0, lead ** 2 / np.where(den > 0, den, 1.0)[:, None, None], 0.0)
        return e, var, phi, inv

    @few_threads
    def leave_one_out(self, d, random_var) -> np.ndarray:
        """z (R, n): each reading's check against the other readings of its row, (d_i - E[d_i |
        the row's others]) / its predictive sd, under this solver's model (NaN where missing,
        and in rows with fewer than MIN_SENSORS + 1 readings); random_var (n,) for every row or
        (R, n) per row [K^2].  The answer is linear in the readings, fitted = t0 + H (d - t0)
        with H the hat matrix of the row's pattern and noise; for such a Gaussian posterior
        mean the leave-one-out residual is r_i / (1 - H_ii), r = d - fitted, with predictive
        variance S_ii / (1 - H_ii), so
            z_i = r_i / sqrt(S_ii (1 - H_ii)),
        S the row's noise variance (random_var + the shared variance): exact for a fixed prior
        mean, and close to it here, where the level of the nominal profile is the row's own
        (its prior is nearly free; with a stiff one the others' level is not refitted).  NaN
        where 1 - H_ii <= LOO_MIN_FREEDOM (the model fits that reading by itself).  Rows of one pattern
        and noise share one hat matrix and one product (a million rows logged at one noise
        level cost one factorization per missing-value pattern, as in solve)."""
        d = np.atleast_2d(np.asarray(d, float))
        rv = np.asarray(random_var, float)
        per_row = rv.ndim == 2
        valid = np.isfinite(d) & ((np.isfinite(rv) & (rv > 0)) if per_row else
                                  np.broadcast_to(np.isfinite(rv) & (rv > 0), d.shape))
        z = np.full(d.shape, np.nan)
        for rows in _pattern_groups(valid):
            v = valid[rows[0]]
            if v.sum() < MIN_SENSORS + 1:
                continue
            cols = np.flatnonzero(v)
            whole = rows.size == d.shape[0] and cols.size == d.shape[1]
            x = (d if whole else d[np.ix_(rows, cols)]) - self.t0[v]
            rvs, which = _noise_groups(rv, rows, cols, per_row)
            out = np.empty(x.shape)
            step = max(1, _BLOCK_ELEMENTS // (cols.size * max(cols.size, self.K)))     # the SVD stack
            for lo in range(0, rvs.shape[0], step):
                noise = rvs[lo:lo + step] + self.shared_var[v][None, :]
                H = self._estimators(v, noise, rows=self.G[v])[0]           # (U, n_v, n_v)
                # a reading the model fits by itself (1 - H_ii at round-off) cannot be checked by
                # the others: NaN, not a score blown up from round-off
                one_minus = 1.0 - np.diagonal(H, axis1=1, axis2=2)
                scale = np.where(one_minus > LOO_MIN_FREEDOM, 1.0 / np.sqrt(noise * np.maximum(one_minus, 1e-300)),
                                 np.nan)
                # z = x (I - H)^T diag(scale): one product per distinct noise
                M = (np.eye(cols.size)[None, :, :] - np.swapaxes(H, 1, 2)) * scale[:, None, :]
                if rvs.shape[0] == 1:
                    np.matmul(x, M[0], out=out)
                    continue
                sel = np.flatnonzero((which >= lo) & (which < lo + step))
                order = sel[np.argsort(which[sel], kind="stable")]
                for part in np.split(order, np.flatnonzero(np.diff(which[order])) + 1):
                    out[part] = x[part] @ M[int(which[part[0]]) - lo]
            if whole:
                z = out
            else:
                z[np.ix_(rows, cols)] = out
        return z

    def with_alpha(self, alpha) -> "BatchSolver":
        """The same solver at another strength (without a fit's further uncertainty, which
        with_fit_uncertainty sets for one strength)."""
        new = self._copy()
        if not (np.isfinite(alpha) and alpha > 0):
            raise InverseError("alpha must be positive and finite")
        new.alpha = float(alpha)
        new.model_var, new.model_var_extremes = np.zeros(self.nf), np.zeros(3)
        return new

    def changes(self, alpha=None, step_factor: float = 1.0, edge: int = 0) -> "BatchSolver":
        """Solver for changes: rows are differences of readings d_row - d_ref, random_var
        their variances (S_row + S_ref); t0, the known part of the face and the shared
        variance cancel; the functionals are those of `change_names`; sds are the changes' own
        (sd_kind "change": posterior, with the spread of the row's level of the nominal profile).
        alpha: its strength (default half this solver's: the prior of the difference of two
        independent profiles); step_factor: the zones' steps' prior variance in units of their
        zone mean's under the smooth prior (1: the same; large: the steps carry the change,
        the smooth part stiffened at the strength the evidence then prefers; small: none);
        edge: the steps' edge setting (zone_steps)."""
        funcs = [(n, f, 0.0) for n, f, _ in self._functionals if n in self.change_names]
        G, P, u = self.G, 1.0 / self.p_isqrt ** 2, self.u
        steps = self.zone_steps(edge)
        if steps is not None:
            # a step level per zone, its prior variance at strength alpha step_factor times that
            # of its zone's mean under the smooth prior (the nominal direction left out):
            # step_factor v_j / alpha
            Gz, rows, names = steps
            free = u > 0
            v = step_factor * np.array([np.sum(rows[n][:self.K][~free] ** 2 / P[~free]) for n in names])
            keep = v > 1e-12 * max(float(np.max(v)), 1e-300)   # a zone whose mean is all nominal level: none
            G, P = np.hstack([G, Gz[:, keep]]), np.concatenate([P, 1.0 / v[keep]])
            u = np.concatenate([u, np.zeros(int(keep.sum()))])
            funcs = [(n, np.concatenate([rows[n][:self.K], rows[n][self.K:][keep]]) if n in rows else
                      np.concatenate([f, np.zeros(int(keep.sum()))]), 0.0) for n, f, _ in funcs]
        return BatchSolver(G, np.zeros(self.n), P, self.alpha / 2 if alpha is None else alpha, funcs,
                           np.zeros((0, G.shape[1])), np.zeros(0), np.zeros(self.n), u,
                           change_names=[f[0] for f in funcs], sd_kind="change")

    # ------------------------------------------------------------------ strength
    @few_threads
    def _evidence_terms(self, d, random_var):
        """Per row: squared singular values s^2 (R, n) of its whitened design (NaN-padded),
        beta^2 = (U^T y)^2 (R, n), the rest of ||y||^2 beyond the rank, the number of
        readings and log det S, with y the whitened readings minus the GLS prior mean."""
        d = np.atleast_2d(np.asarray(d, float))
        shared = np.ndim(random_var) == 1         # one noise for every row: one SVD per pattern
        rv = np.broadcast_to(np.asarray(random_var, float), d.shape)
        valid = np.isfinite(d) & np.isfinite(rv) & (rv > 0)
        R = d.shape[0]
        s2, b2 = np.full((R, self.n), np.nan), np.full((R, self.n), np.nan)
        rest, count, logdet = np.zeros(R), valid.sum(axis=1), np.zeros(R)
        for rows in _pattern_groups(valid):
            v = valid[rows[0]]
            if v.sum() < MIN_SENSORS:
                count[rows] = 0
                continue
            Gv, cols = self.G[v], np.flatnonzero(v)
            gu = Gv @ self.u
            if shared:
                noise1 = rv[rows[0], cols] + self.shared_var[v]
                Us, svs, _ = np.linalg.svd(Gv / np.sqrt(noise1)[:, None] * self.p_isqrt[None, :],
                                           full_matrices=False)
            step = max(1, _BLOCK_ELEMENTS // (Gv.size + 1))
            for lo in range(0, rows.size, step):
                part = rows[lo:lo + step]
                noise = rv[np.ix_(part, cols)] + self.shared_var[v][None, :]
                y = _level_removed(d[np.ix_(part, cols)] - self.t0[v], gu, noise)
                if shared:
                    sv, beta = np.broadcast_to(svs, (part.size, svs.size)), y @ Us
                else:
                    A = (Gv[None, :, :] / np.sqrt(noise)[:, :, None]) * self.p_isqrt[None, None, :]
                    Uu, sv, _ = np.linalg.svd(A, full_matrices=False)
                    beta = np.einsum("unr,un->ur", Uu, y)
                r = sv.shape[1]
                s2[part, :r], b2[part, :r] = sv ** 2, beta ** 2
                rest[part] = np.maximum(np.sum(y ** 2, axis=1) - np.sum(beta ** 2, axis=1), 0.0)
                logdet[part] = np.sum(np.log(noise), axis=1)
        return s2, b2, rest, count, logdet

    def departing_rows(self, d, random_var, level: float = DEPARTURE_LEVEL) -> np.ndarray:
        """(R,) bool: rows whose readings depart from this solver's prior mean (its known field
        and gamma times the nominal profile, gamma the row's own GLS level) by more than their
        noise allows: the whitened rest |y|^2 beyond chi^2 with (readings - 1) degrees of
        freedom at tail probability `level`.  For a change solver: rows that changed other than
        by a scaling of the nominal profile."""
        from scipy.stats import chi2

        s2, b2, rest, count, _ = self._evidence_terms(d, random_var)
        total = np.nansum(b2, axis=1) + rest
        dof = np.maximum(count - 1, 1)
        return (count > MIN_SENSORS) & (chi2.sf(total, dof) < level)

    def joint_log_evidence(self, d, random_var, alphas) -> np.ndarray:
        """sum over rows of log p(d_row | alpha) for each alpha of `alphas`: the rows' profiles
        drawn independently from the one prior (rows with too few sensors left out)."""
        return _joint(self._evidence_terms(d, random_var), np.atleast_1d(np.asarray(alphas, float)))

    def joint_strength(self, d, random_var, num: int = 200, margin: float = 1e2):
        """alpha maximizing `joint_log_evidence` on a log grid spanning the rows' squared
        singular values (times 1/margin .. margin), refined between the grid neighbours of the
        best point.  Returns (alpha, warnings)."""
        alpha, _, notes = self.joint_best(d, random_var, num, margin)
        return alpha, notes

    def joint_best(self, d, random_var, num: int = 200, margin: float = 1e2):
        """joint_strength with the joint log evidence there: (alpha, log evidence, warnings)."""
        from scipy.optimize import minimize_scalar

        terms = self._evidence_terms(d, random_var)
        grid = _strength_grid(terms[0], num, margin)
        le = _joint(terms, grid)
        i = int(np.argmax(le))
        if i in (0, grid.size - 1):
            side = "smallest" if i == 0 else "largest"
            return float(grid[i]), float(le[i]), [
                f"the joint evidence of the rows is best at the {side} smoothing strength "
                f"of its grid [{grid[0]:.3g}, {grid[-1]:.3g}]"]
        res = minimize_scalar(lambda t: -_joint(terms, np.array([np.exp(t)]))[0],
                              bounds=(np.log(grid[i - 1]), np.log(grid[i + 1])), method="bounded",
                              options={"xatol": 1e-7})
        if -res.fun >= le[i]:
            return float(np.exp(res.x)), float(-res.fun), []
        return float(grid[i]), float(le[i]), []

    def strength_grid(self, random_var, num: int = ROW_STRENGTHS, margin: float = 1e2) -> np.ndarray:
        """Strengths alpha, log-spaced over the squared singular values of the whitened,
        prior-scaled design of all sensors at noise random_var (n,) or at each of several
        (k, n) [K^2] (times 1/margin .. margin), the nominal direction's column left out: the
        range over which the evidence moves.  (That column's prior is nearly flat, so its
        singular value is far above the rest; with it, 7 of 17 strengths lay where every other
        direction is shrunk to nothing, and a small local change read every Nth row came out
        uniform over the zones.)"""
        free = self.u == 0
        s2 = []
        for row in np.atleast_2d(np.asarray(random_var, float)):
            noise = row + self.shared_var
            ok = np.isfinite(noise) & (noise > 0)
            A = self.G[np.ix_(ok, free)] / np.sqrt(noise[ok])[:, None] * self.p_isqrt[free][None, :]
            s2.append(np.linalg.svd(A, compute_uv=False) ** 2)
        return _strength_grid(np.concatenate(s2), num, margin)

    def row_log_evidence(self, d, random_var, alphas) -> np.ndarray:
        """(R, A): log p(d_row | alpha) for each row and each alpha of `alphas` (NaN for rows
        with too few sensors)."""
        return _row_evidence(self._evidence_terms(d, random_var), np.atleast_1d(np.asarray(alphas, float)))

    def solve_averaged(self, d, random_var, alphas) -> BatchEstimates:
        """The functionals of each row averaged over the strengths `alphas` (a uniform prior
        over that log-spaced grid), weighted by the row's own evidence: `solve_mixture` with
        this solver alone."""
        return solve_mixture([(self, alphas)], d, random_var)

    def _averaging_terms(self, v, noise, alphas):
        """For pattern v at one noise vector (n_v,) [K^2]: the whitened design's left singular
        vectors Uu and singular values s, the functionals' estimators E (A nf, n_v) and
        variances V (A, nf) at every strength of `alphas` (_estimator_core, from the one SVD),
        and G u (n_v,)."""
        Gv, nf = self.G[v], self.nf
        Uu, s, Vt = np.linalg.svd(Gv / np.sqrt(noise)[:, None] * self.p_isqrt[None, :], full_matrices=False)
        gu = Gv @ self.u
        E, V, _, _ = self._estimator_core(Uu[None], s[None], Vt[None], noise[None], gu, self.Fn[:nf],
                                          self.fu[:nf], self.fn2[:nf], alphas)
        E, V = E[0], V[0]
        if self.sd_kind == "noise":
            V = np.einsum("aqn,n->aq", E ** 2, noise)
        return Uu, s, E.reshape(-1, Gv.shape[0]), V, gu

    # ------------------------------------------------------------------ solving
    @few_threads
    def solve(self, d, random_var) -> BatchEstimates:
        """Answers for rows d (R, n) [K] (NaN = missing) with random noise variances (n,) for
        every row or (R, n) per row [K^2]."""
        d = np.atleast_2d(np.asarray(d, float))
        R, n = d.shape
        if n != self.n:
            raise InverseError(f"rows must have {self.n} readings, got {n}")
        rv = np.asarray(random_var, float)
        per_row = rv.ndim == 2
        if rv.shape not in ((self.n,), (R, self.n)):
            raise InverseError(f"random_var must have shape ({self.n},) or ({R}, {self.n})")
        valid = np.isfinite(d)
        if per_row:
            valid &= np.isfinite(rv) & (rv > 0)
        elif np.any(~(rv > 0)):
            raise InverseError("random noise variances must be positive")
        nan = lambda *shape: np.full(shape, np.nan)  # noqa: E731
        est = BatchEstimates(self.names, nan(R, self.nf), nan(R, self.nf), nan(R), nan(R), nan(R), nan(R),
                             nan(R), nan(R), valid.sum(axis=1))
        for rows in _pattern_groups(valid):
            v = valid[rows[0]]
            if v.sum() < MIN_SENSORS:
                continue
            cols = np.flatnonzero(v)
            x = d[np.ix_(rows, cols)] - self.t0[v]
            self._solve_group(v, rows, x, *_noise_groups(rv, rows, cols, per_row), est)
        return est

    def _solve_group(self, v, rows, x, rvs, which, est):
        """Rows `rows` (their readings minus t0: x) of pattern v; distinct random variances
        rvs (U, n_v), row r uses rvs[which[r]]."""
        n_v = int(v.sum())
        q = self.nf + self.Q
        if q == 0:            # nothing to estimate (changes of a case without zones)
            return
        per_noise = max(1, _BLOCK_ELEMENTS // (q * max(n_v, 1)))
        by_noise = np.argsort(which, kind="stable")
        cuts = np.searchsorted(which[by_noise], np.arange(0, rvs.shape[0] + per_noise, per_noise))
        for b in range(cuts.size - 1):
            lo_u, hi_u = b * per_noise, min((b + 1) * per_noise, rvs.shape[0])
            if lo_u >= hi_u:
                break
            noise = rvs[lo_u:hi_u] + self.shared_var[v][None, :]
            e, var, phi, inv = self._estimators(v, noise)
            if self.sd_kind == "noise":
                var = np.einsum("uqn,un->uq", e ** 2, noise)
            sel = by_noise[cuts[b]:cuts[b + 1]]
            j = which[sel] - lo_u
            step = max(1, _BLOCK_ELEMENTS // q) if e.shape[0] == 1 else max(1, _BLOCK_ELEMENTS // (q * n_v))
            for lo in range(0, sel.size, step):
                part = sel[lo:lo + step]
                self._fill(rows[part], x[part], j[lo:lo + step], e, var, phi, inv, est)

    def _fill(self, rows, x, j, e, var, phi, inv, est):
        nf = self.nf
        eg, kg = e[:, nf:, :], self.kq[nf:]
        vals = x @ e[0, :nf, :].T if e.shape[0] == 1 else np.einsum("rqn,rn->rq", e[j, :nf, :], x)
        est.values[rows] = vals + self.kq[None, :nf]
        est.sd[rows] = np.sqrt(np.maximum(var[j, :nf], 0.0) + self.model_var[None, :])
        if self.Q == 0:
            return
        if e.shape[0] == 1:
            imin, imax = _extremes(eg[0], kg, x)
        else:
            prof = np.einsum("rqn,rn->rq", eg[j], x) + kg[None, :]
            imin, imax = np.argmin(prof, axis=1), np.argmax(prof, axis=1)
        vmin = np.einsum("rn,rn->r", eg[j, imin], x) + kg[imin]
        vmax = np.einsum("rn,rn->r", eg[j, imax], x) + kg[imax]
        vg = var[:, nf:]
        s_min, s_max = vg[j, imin], vg[j, imax]
        pa, pb = phi[j, imax], phi[j, imin]
        seen = np.einsum("rk,rk,rk->r", pa, pb, inv[j])
        if self._gram is not None:
            total = self._gram[imax, imin]
        else:
            total = np.einsum("rk,rk->r", self.Fn[nf + imax], self.Fn[nf + imin])
        cov = seen + (total - np.einsum("rk,rk->r", pa, pb)) / self.alpha
        est.min[rows], est.max[rows] = vmin, vmax
        mv = self.model_var_extremes
        est.min_sd[rows] = np.sqrt(np.maximum(s_min, 0) + mv[0])
        est.max_sd[rows] = np.sqrt(np.maximum(s_max, 0) + mv[1])
        est.nonuniformity[rows] = vmax - vmin
        est.nonuniformity_sd[rows] = np.sqrt(np.maximum(s_min + s_max - 2 * cov, 0.0) + mv[2])


@few_threads
def solve_mixture(parts, d, random_var) -> BatchEstimates:
    """The functionals of each row averaged over hyperparameters by the row's own evidence.

    parts: [(solver, alphas)], solvers of the same sensors and functionals that differ in
    their prior (e.g. the zones' steps' scale, BatchSolver.changes' step_factor), each with
    a log-spaced grid of strengths; the prior is uniform over the parts and, within a part,
    over its grid.  With p_ra the row's evidence at pair a (part and strength),

        w_ra = p_ra / sum_b p_rb,  mean_r = sum_a w_ra m_ra,
        var_r = sum_a w_ra (sd_ra^2 + m_ra^2) - mean_r^2   (a Gaussian mixture's moments).

    The parts' evidences are compared whole: log det S is the same for every part, and the
    readings' part outside each design's span is added (the parts' columns may differ: the
    zones' steps' edges).  With one noise
    for every row (random_var (n,)), per missing-value pattern and part one SVD gives every
    row's evidence (log p(d | alpha) up to a term free of alpha and of the part: -1/2 [sum_j
    log(1 + s_j^2/alpha) + sum_j beta_j^2 alpha / (s_j^2 + alpha)]) and the estimators at
    every strength one product; with a noise per row (random_var (R, n)), the same per
    distinct noise.  Only the functionals: a solver with an extremes grid is refused."""
    first = parts[0][0]
    for solver, _ in parts:
        if solver.Q:
            raise InverseError("solve_mixture averages the functionals only (a solver without a grid)")
        if solver.names != first.names or solver.n != first.n:
            raise InverseError("the parts of a mixture must share their sensors and functionals")
    parts = [(solver, np.atleast_1d(np.asarray(alphas, float))) for solver, alphas in parts]
    d = np.atleast_2d(np.asarray(d, float))
    rv = np.asarray(random_var, float)
    if d.shape[1] != first.n:
        raise InverseError(f"rows must have {first.n} readings, got {d.shape[1]}")
    per_row = rv.ndim == 2
    if per_row and rv.shape != d.shape:
        raise InverseError(f"random_var must have shape ({first.n},) or {d.shape}")
    if not per_row and (rv.shape != (first.n,) or np.any(~(rv > 0))):
        raise InverseError(f"random_var must be {first.n} positive variances")
    R, nf = d.shape[0], first.nf
    valid = np.isfinite(d) & ((np.isfinite(rv) & (rv > 0)) if per_row else True)
    nan = lambda *shape: np.full(shape, np.nan)  # noqa: E731
    est = BatchEstimates(first.names, nan(R, nf), nan(R, nf), nan(R), nan(R), nan(R), nan(R),
                         nan(R), nan(R), valid.sum(axis=1))
    if not nf:
        return est
    same = all(np.array_equal(solver.t0, first.t0) and np.array_equal(solver.shared_var, first.shared_var)
               and np.allclose(solver.G @ solver.u, first.G @ first.u, rtol=1e-12, atol=0.0)
               and np.array_equal(solver.kq[:nf], first.kq[:nf]) for solver, _ in parts)
    if not same:
        raise InverseError("the parts of a mixture must share their known field, shared variance and nominal level")
    for group in _pattern_groups(valid):
        v = valid[group[0]]
        if v.sum() < MIN_SENSORS:
            continue
        cols = np.flatnonzero(v)
        # rows of one noise together: one SVD per noise and prior
        rvs, which = _noise_groups(rv, group, cols, per_row)
        order = np.argsort(which, kind="stable")
        for run in np.split(order, np.flatnonzero(np.diff(which[order])) + 1):
            _mixture_rows(parts, est, group[run], v, rvs[which[run[0]]], d)
    return est


def _mixture_rows(parts, est, rows, v, rv, d):
    """solve_mixture for `rows` of d, all of pattern v and random variances rv (n_v,) [K^2]:
    the estimates written into est."""
    first, nf, cols = parts[0][0], parts[0][0].nf, np.flatnonzero(v)
    A = sum(alphas.size for _, alphas in parts)
    ends = np.cumsum([alphas.size for _, alphas in parts])
    noise = rv + first.shared_var[v]
    terms = [solver._averaging_terms(v, noise, alphas) for solver, alphas in parts]
    U = np.hstack([t[0] for t in terms])                             # (n_v, sum r)
    cuts = np.cumsum([t[0].shape[1] for t in terms])
    E3 = np.concatenate([t[2] for t in terms]).reshape(A, nf, -1)   # (A, nf, n_v)
    V = np.concatenate([t[3] for t in terms])                       # (A, nf)
    gu = terms[0][4]
    x = d[np.ix_(rows, cols)] - first.t0[v]
    step = max(1, _BLOCK_ELEMENTS // (A * nf + int(cuts[-1]) + cols.size))
    for lo in range(0, rows.size, step):
        xb = x[lo:lo + step]
        y = _level_removed(xb, gu, noise)
        beta2 = (y @ U) ** 2
        yy = np.sum(y ** 2, axis=1)
        logw = np.empty((xb.shape[0], A))
        for i, ((_, alphas), (_, sv, _, _, _)) in enumerate(zip(parts, terms)):
            b = beta2[:, (cuts[i - 1] if i else 0):cuts[i]]
            # the readings' part outside the design's span (zero where the design spans every
            # reading; parts whose columns differ may differ in it)
            rest = np.maximum(yy - np.sum(b, axis=1), 0.0)
            logw[:, (ends[i - 1] if i else 0):ends[i]] = (-0.5 * (_alpha_terms(sv ** 2, b, alphas) + rest[:, None])
                                                          - np.log(alphas.size))
        w = _weights(logw)
        # pairs of negligible weight (below MIXTURE_CUT) in every row of the block are left out
        keep = np.flatnonzero(w.max(axis=0) > MIXTURE_CUT)
        vals = (xb @ E3[keep].reshape(-1, E3.shape[2]).T).reshape(-1, keep.size, nf)
        mean, sd = _mixture(w[:, keep], vals, V[keep])
        part = rows[lo:lo + step]
        est.values[part] = mean + first.kq[None, :nf]
        est.sd[part] = np.sqrt(sd ** 2 + first.model_var[None, :])


def solve_weighted(parts, d, random_var) -> BatchEstimates:
    """The functionals of rows d averaged over solvers with fixed weights: parts [(solver,
    log weight)] (solvers of the same sensors and functionals; weights normalized here),
    each row's mean and sd the Gaussian mixture's moments (as solve_mixture's)."""
    logw = np.array([lw for _, lw in parts], float)
    w = np.exp(logw - logw.max())
    w /= w.sum()
    solved = [solver.solve(d, random_var) for solver, _ in parts]
    m = np.stack([p.values for p in solved], axis=1)                  # (R, parts, nf)
    v2 = np.stack([p.sd for p in solved], axis=1) ** 2
    mean, sd = _mixture(np.broadcast_to(w, (m.shape[0], w.size)), m, v2)
    out = solved[0]
    out.values, out.sd = mean, sd
    return out


def _joint(terms, alphas):
    """sum over the rows with readings of `_row_evidence` (A,)."""
    ev = _row_evidence(terms, alphas)
    return np.sum(ev[terms[3] > 0], axis=0)


def _row_evidence(terms, alphas):
    """(R, A): -1/2 [n log 2 pi + log det S + sum_j log(1 + s_j^2/alpha) + sum_j beta_j^2
    alpha / (s_j^2 + alpha) + rest] for each row and alpha (the log evidence of
    LinearGaussianProblem, row by row; NaN for rows with no readings), in blocks of rows."""
    s2, b2, rest, count, logdet = terms
    s2, b2 = np.nan_to_num(s2), np.nan_to_num(b2)
    out = np.full((s2.shape[0], alphas.size), np.nan)
    step = max(1, _BLOCK_ELEMENTS // max(1, alphas.size * s2.shape[1]))
    for lo in range(0, s2.shape[0], step):
        sl = slice(lo, lo + step)
        per = (_alpha_terms(s2[sl], b2[sl], alphas)
               + (rest[sl] + count[sl] * np.log(2 * np.pi) + logdet[sl])[:, None])
        out[sl] = -0.5 * per
    out[count == 0] = np.nan
    return out


def _alpha_terms(s2, b2, alphas):
    """(R, A): sum_j log(1 + s_j^2/alpha) + sum_j beta_j^2 alpha / (s_j^2 + alpha), the part of
    -2 log p(d | alpha) that moves with alpha; s2 (R, r) per row, or (r,) shared by the rows
    (then one product), b2 (R, r)."""
    if s2.ndim == 1:
        occam = np.sum(np.log1p(s2[None, :] / alphas[:, None]), axis=1)
        return occam[None, :] + b2 @ (alphas[None, :] / (s2[:, None] + alphas[None, :]))
    s, a = s2[:, None, :], alphas[None, :, None]
    return np.sum(np.log1p(s / a), axis=2) + np.sum(b2[:, None, :] * a / (s + a), axis=2)


def _weights(logev):
    """(R, A): p(d_r | alpha_a) / sum_b p(d_r | alpha_b) from the log evidences (R, A)."""
    w = np.exp(logev - logev.max(axis=1, keepdims=True))
    return w / w.sum(axis=1, keepdims=True)


def _mixture(w, m, v):
    """Mean and sd (R, q) of the Gaussian mixtures sum_a w_ra N(m_raq, v_raq) (w (R, A); m
    (R, A, q); v (R, A, q), or (A, q) shared by the rows): mean sum w m, variance
    sum w (v + m^2) - mean^2."""
    mean = np.matmul(w[:, None, :], m)[:, 0]
    spread = w @ v if v.ndim == 2 else np.matmul(w[:, None, :], v)[:, 0]
    second = spread + np.matmul(w[:, None, :], m * m)[:, 0]
    return mean, np.sqrt(np.maximum(second - mean ** 2, 0.0))


def _level_removed(x, gu, noise):
    """(x - gamma G u) / sqrt(noise) for rows x (B, n): gamma each row's GLS level of the
    nominal profile's field G u under the noise variances (n,) or (B, n) [K^2]."""
    W = 1.0 / noise
    den = np.sum(W * gu ** 2, axis=-1)
    num = np.sum(W * gu * x, axis=1)
    gamma = np.where(den > 0, num / np.where(den > 0, den, 1.0), 0.0)
    return (x - gamma[:, None] * gu[None, :]) / np.sqrt(noise)


def _strength_grid(s2, num, margin):
    """num strengths log-spaced from the smallest squared singular value above 1e-12 of the
    largest, / margin, to the largest x margin (s2: squared singular values, NaN-padded)."""
    top = float(np.nanmax(s2)) if np.any(np.isfinite(s2)) else 0.0
    if not top > 0:
        raise InverseError("no row has enough sensors to choose the smoothing strength")
    low = float(np.nanmin(np.where(s2 > 1e-12 * top, s2, np.nan)))
    return np.geomspace(low / margin, top * margin, int(num))


def _extremes(E, k, x):
    """Grid indices of the minimum and maximum of the profiles k + E x_r (rows of x).

    Exact pruning first: with m the rows' mean and delta = max_r ||x_r - m||, point i can only
    be a row's maximum if k_i + E_i m + ||E_i|| delta reaches max_j (k_j + E_j m - ||E_j|| delta)
    (Cauchy-Schwarz), and alike for the minimum.  Rows of a trend are close to each other, so
    only a few per cent of the grid is evaluated; otherwise the whole grid is searched in
    single precision (the values at the points found are recomputed in double by the caller).
    """
    m = x.mean(axis=0)
    centre = E @ m + k
    reach = np.linalg.norm(E, axis=1) * float(np.sqrt(np.max(np.sum((x - m) ** 2, axis=1))))
    can_max = np.flatnonzero(centre + reach >= np.max(centre - reach))
    can_min = np.flatnonzero(centre - reach <= np.min(centre + reach))
    if can_max.size + can_min.size <= 0.5 * k.size:
        imax = can_max[np.argmax(x @ E[can_max].T + k[can_max], axis=1)]
        imin = can_min[np.argmin(x @ E[can_min].T + k[can_min], axis=1)]
        return imin, imax
    if len(x) > 64:      # try again on halves: closer rows prune better
        h = len(x) // 2
        a, b = _extremes(E, k, x[:h]), _extremes(E, k, x[h:])
        return np.concatenate([a[0], b[0]]), np.concatenate([a[1], b[1]])
    prof = x.astype(np.float32) @ E.T.astype(np.float32) + k.astype(np.float32)[None, :]
    # single precision finds the neighbourhood; points within its rounding of a row's extreme
    # are compared again in double precision, so the choice does not depend on the batch
    slack = 1e-5 * (np.max(np.abs(prof), axis=1) + 1.0)
    out = []
    for sign in (-1.0, 1.0):
        best = np.max(sign * prof, axis=1)
        near = np.flatnonzero(np.any(sign * prof >= (best - slack)[:, None], axis=0))
        out.append(near[np.argmax(sign * (x @ E[near].T + k[near]), axis=1)])
    return out[0], out[1]


def _noise_groups(rv, rows, cols, per_row):
    """(rvs (U, n_v), which (rows.size,)): the distinct random variances [K^2] of `rows` at
    the readings `cols` and the one each row uses; one for every row when rv (n,) is shared
    (per_row False) or a single row asks."""
    if per_row and rows.size > 1:
        rvs, which = np.unique(rv[np.ix_(rows, cols)], axis=0, return_inverse=True)
        return rvs, which.ravel()
    return (rv[rows[0], cols] if per_row else rv[cols])[None, :], np.zeros(rows.size, dtype=int)


def _pattern_groups(valid):
    """Row indices of each distinct missing-value pattern of valid (R, n) bool."""
    R = valid.shape[0]
    if R == 0:
        return []
    if valid.all():
        return [np.arange(R)]
    codes = np.packbits(valid, axis=1, bitorder="little")
    if codes.shape[1] <= 8:          # one integer key per row: a fast 1-D sort
        padded = np.zeros((R, 8), np.uint8)
        padded[:, :codes.shape[1]] = codes
        keys = padded.view("<u8").ravel()
    else:
        keys = np.unique(codes, axis=0, return_inverse=True)[1].ravel()
    order = np.argsort(keys, kind="stable")
    bounds = np.flatnonzero(np.r_[True, keys[order][1:] != keys[order][:-1], True])
    return [order[bounds[i]:bounds[i + 1]] for i in range(bounds.size - 1)]

