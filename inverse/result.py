"""FitResult: the reconstructed face with bands, derived figures and sensor health (SI).

Every figure is linear in the coefficients, value = k + F c, from a builder
builder(design) -> (F, k); `Posterior.figures` gives its mean and sd, including the
calibrated face parameters' uncertainty through the joint linearization when there are any.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from types import SimpleNamespace

import numpy as np
import pandas as pd

from .bands import Z95, z_factor
from ..forward.geometry import is_wall
from .face_grid import display_grid, face_interval, face_on, quadrature
from .functionals import functional_matrix
from .model_choice import ModelMixture, gaussian_draws
from .pinned_edges import estimated_points
from .strength_average import answers_mixture

__all__ = ["Posterior", "FitResult", "Z95"]


@dataclass
class Posterior:
    """Posterior of the coefficients: mean c (K,), covariance C (K, K), the alpha used and,
    when the strength was averaged over alpha, the StrengthAverage behind it; calibration:
    the Calibration whose joint covariance of (c, theta) carries the face parameters."""

    c: np.ndarray
    C: np.ndarray
    alpha: float
    averaged: object = None
    calibration: object = None

    def band(self, B, offset=None, level=0.95, extra_variance=None):
        """Mean, sd, lower, upper of offset + B c (equal-tailed `level` band), c alone (+ an
        independent term of variance extra_variance (Q,), the left-out modes' at the face)."""
        B = np.atleast_2d(B)
        offset = np.zeros(B.shape[0]) if offset is None else np.asarray(offset, float)
        if self.averaged is not None:
            return self.averaged.band(B, level=level, offset=offset, extra_variance=extra_variance)
        mean = offset + B @ self.c
        sd = np.sqrt(np.maximum(np.einsum("qk,kl,ql->q", B, self.C, B), 0.0)
                     + (0.0 if extra_variance is None else extra_variance))
        zq = z_factor(level)
        return mean, sd, mean - zq * sd, mean + zq * sd

    def linear(self, f, offset=0.0):
        """Mean and sd of offset + f . c for one functional f (K,), c alone."""
        mean, sd, _, _ = self.band(np.asarray(f, float)[None, :], np.array([offset]))
        return float(mean[0]), float(sd[0])

    def _joint(self, builder, design):
        """(mean (Q,), J (Q, K + p)) of the figure, J = [F, d figure / d theta]."""
        F, k = builder(design)
        F = np.atleast_2d(F)
        cal = self.calibration
        S = cal.sensitivity(builder, self.c).reshape(F.shape[0], -1)
        mean = np.asarray(k, float) + F @ self.c + S @ cal.mean_step
        return mean, np.hstack([F, S])

    def figure_mean(self, builder, design):
        """Posterior mean of the figure builder(design) -> (F, k): k + F c, with the calibrated
        parameters' step when there are any (no bands: the mean is linear in c)."""
        if self.calibration is None:
            F, k = builder(design)
            return np.asarray(k, float) + np.atleast_2d(F) @ self.c
        return self._joint(builder, design)[0]

    def figures(self, builder, design, level=0.95, extra_variance=None):
        """Mean, sd, lower, upper of the figure builder(design) -> (F, k): k + F c, with the
        joint uncertainty of calibrated parameters, var = J C_joint J^T (+ extra_variance)."""
        if self.calibration is None:
            F, k = builder(design)
            return self.band(F, k, level, extra_variance)
        mean, J = self._joint(builder, design)
        sd = np.sqrt(np.maximum(np.einsum("qk,kl,ql->q", J, self.calibration.covariance, J), 0.0)
                     + (0.0 if extra_variance is None else extra_variance))
        zq = z_factor(level)
        return mean, sd, mean - zq * sd, mean + zq * sd

    def draws(self, builder, design, n, seed=0):
        """n posterior draws (n, Q) of the figure (linearized in theta when calibrated); from
        the models' mixture where the answer averages models (ModelMixture.samples)."""
        if self.calibration is None:
            F, k = builder(design)
            return np.asarray(k, float)[None, :] + self.samples(n, seed) @ np.atleast_2d(F).T
        mean, J = self._joint(builder, design)
        cal = self.calibration
        centre = np.concatenate([self.c, cal.mean_step])
        x = cal.mixture.samples(n, seed) if cal.mixture is not None else \
            gaussian_draws(centre, cal.covariance, n, seed)
        return mean[None, :] + (x - centre) @ J.T

    def samples(self, n, seed=0):
        """n draws (n, K) of c: from the models' mixture when the answer has one, else from
        N(c, C)."""
        if isinstance(self.averaged, ModelMixture):
            return self.averaged.samples(n, seed)
        return gaussian_draws(self.c, self.C, n, seed)


def zone_area(zone, face, cylinder, n=1024):
    """Area [m^2] of a zone (per metre on a long part's walls): exact for a window in theta and
    r (end face) or z (wall), span x (b^2 - a^2) / 2 or span x R x (b - a) with the window
    clipped to the face; other regions (anything with `contains`) by the midpoint rule on n x n
    cells of the face (theta x r with weight r, theta x z), whose cells cut a narrow zone's edge
    (a 2 deg zone came out 5.5 % large)."""
    lo, hi = face_interval(face, cylinder)
    theta = getattr(zone, "theta", None)
    if theta is not None and hasattr(zone, "r") and hasattr(zone, "z"):
        span = min(float(theta[1]) - float(theta[0]), 2.0 * np.pi)
        window = zone.z if is_wall(face) else zone.r
        a, b = (lo, hi) if window is None else (max(float(window[0]), lo), min(float(window[1]), hi))
        if b <= a:
            return 0.0
        if is_wall(face):
            return span * cylinder.wall_radius(face) * (b - a)
        return span * 0.5 * (b * b - a * a)
    th = 2.0 * np.pi * (np.arange(n) + 0.5) / n
    span = hi - lo
    s = lo + span * (np.arange(n) + 0.5) / n
    S, TH = np.meshgrid(s, th, indexing="ij")
    if is_wall(face):
        mask = np.asarray(zone.contains(TH.ravel(), S.ravel()), dtype=bool)
        return float(mask.sum()) * (2.0 * np.pi / n) * (span / n) * cylinder.wall_radius(face)
    mask = np.asarray(zone.contains(S.ravel(), TH.ravel()), dtype=bool)
    return float(S.ravel() @ mask) * (2.0 * np.pi / n) * (span / n)


def grid_position(grid, i) -> dict:
    """{"r_m", "theta_rad", "z_m"} of row i of a face grid table (FitResult.grid) [m, rad]."""
    return {key: float(grid[key].iat[i]) for key in ("r_m", "theta_rad", "z_m")}


def _evaluated_once(builder, design, value=None):
    """The figure builder, its (F, k) at the fitted `design` computed once (or `value`) and
    reused; designs rebuilt at other calibrated parameters are evaluated afresh."""
    at_design = builder(design) if value is None else value
    return lambda d: at_design if d is design else builder(d)


def _with_tail(rows, design, points, tail):
    """(builder, extra variance (Q,) or None) of a figure at `points` (rows(d) -> (F, k)), the
    rows evaluated once at the fitted `design` with the left-out modes' and steps' part
    (tail(points) -> (dF, dk, variance), dF None: variance only) added where the fit has one:
    the face map (FitResult.build) and face_profile with map_tail, predict with point_tail."""
    F, k = rows(design)
    extra = None
    if tail is not None:
        dF, dk, extra = tail(points)
        if dF is not None:
            F, k = F + dF, k + dk
    return _evaluated_once(rows, design, (F, k)), extra


def valid_zones(zones, face, cyl, warnings) -> list:
    """The zones on the estimated face that cover part of it; the others are reported."""
    quad = quadrature(face, cyl)
    out = []
    for zone in zones or ():
        zface = getattr(zone, "face", None) or face
        if zface != face:
            warnings.append(f"zone {zone.name} is on the {zface} face, not the estimated {face} face; skipped")
        elif not np.asarray(zone.contains(quad.u, quad.v), dtype=bool).any():
            warnings.append(f"zone {zone.name} covers no part of the {face} face; skipped")
        else:
            out.append(zone)
    return out


def zone_entry(name, mean, sd, area, nominal, quantity) -> dict:
    """A zone's figures in the summary: its mean [face unit] with sd and 95 % band, area
    [m^2], and on a heat-flux face its power [W] and, with a nominal power [W], the
    delivered fraction, each with its sd."""
    zm, zsd = float(mean), float(sd)
    entry = {"name": name, "mean": zm, "sd": zsd, "lower": zm - Z95 * zsd, "upper": zm + Z95 * zsd,
             "area_m2": area}
    if quantity == "heat_flux":
        entry.update(power_W=zm * area, power_sd_W=zsd * area)
        if nominal:
            entry.update(nominal_W=float(nominal), delivered_fraction=zm * area / nominal,
                         delivered_fraction_sd=zsd * area / abs(nominal))
    return entry


def _zone_entries(zones, names, mean, sd, face, cyl, quantity, warnings):
    out = []
    for zone in zones:
        i = names.index(zone.name)
        # The masked rule's zone edge is as coarse as its nodes (several % of the area of
        # a small zone); the area, and with it the power, comes from a fine midpoint rule.
        nominal = getattr(zone, "nominal", None)
        if nominal and quantity != "heat_flux":
            warnings.append(f"zone {zone.name}: a nominal power needs a heat-flux face; not compared")
        out.append(zone_entry(zone.name, mean[i], sd[i], zone_area(zone, face, cyl), nominal, quantity))
    return out


@dataclass
class FitResult:
    """Outcome of inverse.fit.  Quantities in SI: temperature [K], heat flux [W/m^2] (into
    the part), power [W], positions [m] and angles [rad]."""

    face: str
    quantity: str  # 'temperature' | 'heat_flux'
    unit: str  # 'K' | 'W/m^2'
    cylinder: object
    grid: pd.DataFrame
    grid_shape: tuple
    summary: dict
    sensors: pd.DataFrame
    strength_curve: pd.DataFrame
    warnings: list
    posterior: Posterior
    design: object = field(repr=False, default=None)
    problem: object = field(repr=False, default=None)
    readings: object = field(repr=False, default=None)
    kept: np.ndarray = field(repr=False, default=None)
    zones: list = field(default_factory=list)
    nonlinear: dict | None = None
    monte_carlo: dict | None = field(repr=False, default=None)
    calibration: object = field(repr=False, default=None)
    options: object = field(repr=False, default=None)
    #: (X, residual, {name: (h, variance)}): the left-out modes' share of the face mean, the
    #: power and the zone means (build's figure_tails), or None
    functional_tails: object = field(repr=False, default=None)
    #: the sets marginalized into the kept readings' noise (marginal_sets.MarginalSets), or None
    marginal: object = field(repr=False, default=None)
    #: points -> (dF, dk, variance): the left-out modes' and steps' part of the face at points
    #: with u, v (and lines or None), as the face map takes it (build's map_tail), or None
    map_tail: object = field(repr=False, default=None)
    #: points with r, theta, z -> (dG, dt0, variance): their part of the temperature inside the
    #: part (build's point_tail), or None
    point_tail: object = field(repr=False, default=None)
    #: (the fit with one doubtful sensor set aside (a FitResult), its weight): the answer is the
    #: mixture of this fit and that one (sensor_doubt.py), or None
    doubt: tuple | None = field(repr=False, default=None)
    #: points with r, theta, z -> (dGg (3, Q, K), dg0 (3, Q)): the left-out modes' and steps'
    #: part of the temperature gradient (build's gradient_tail; predict_flux), or None
    gradient_tail: object = field(repr=False, default=None)

    @property
    def smooth_only(self) -> bool:
        """Is the answer the smooth model's alone (no zone columns, no average with the zone
        model)?  Only then is it the posterior of `problem`'s columns, which planning's exact
        updates and the batch inversion of logs build on."""
        return self.summary.get("model", "smooth") == "smooth" and not self.summary.get("model_averaged")

    # ------------------------------------------------------------------ construction
    @classmethod
    def build(cls, *, spec, design, readings, kept, problem, choice, posterior, sensors,
              set_aside, warnings, monte_carlo, extra=None, figure_tails=None, map_tail=None, marginal=None,
              point_tail=None, gradient_tail=None):
        """Derived figures of a fit.  spec: the inverse.problem.Problem; design: the model
        columns (design.Design or the zone model's); problem: the LinearGaussianProblem of
        the kept sensors; extra: further summary keys; figure_tails: (X, residual, {name: (h,
        variance)}), the left-out modes' share of the total power, the face mean and the zone
        means (marginal_sets.MarginalSets.shares: each becomes f . c + k + h . (residual - X c)
        with the variance added); map_tail: points ->
        (dF, dk, variance), the left-out modes' part of the face map: k + dk + (F + dF) c with
        the variance (Q,) added to its bands (dF, dk None: variance only; truncation.face_tail);
        point_tail: the same for temperatures inside the part (predict; points with r, theta, z);
        gradient_tail: their part of the temperature gradient there (predict_flux);
        marginal: the marginal_sets.MarginalSets behind them (kept for planning)."""
        cyl, opts = design.cylinder, spec.options
        face, quantity = design.face_name, design.quantity
        unit = "K" if quantity == "temperature" else "W/m^2"
        pts = display_grid(face, cyl, *opts.grid)
        on_grid, tail_variance = _with_tail(lambda d: face_on(d, pts), design, pts, map_tail)

        mean, sd, lower, upper = posterior.figures(on_grid, design, extra_variance=tail_variance)
        if monte_carlo is not None:
            s = monte_carlo["samples"]
            mean, sd = s.mean(axis=0), s.std(axis=0, ddof=1)
            lower, upper = np.quantile(s, 0.025, axis=0), np.quantile(s, 0.975, axis=0)
        grid = pd.DataFrame({"r_m": pts.r, "theta_rad": pts.theta, "z_m": pts.z,
                             "estimate": mean, "std": sd, "lower": lower, "upper": upper})

        # linear functionals over the face (quadrature rule): mean, power, zones, jointly
        valid = valid_zones(spec.zones, face, cyl, warnings)
        names, F, k = functional_matrix(design, valid)
        extra_var = None
        if figure_tails is not None:
            X, resid, rows = figure_tails
            F, k, extra_var = F.copy(), np.array(k, float), np.zeros(len(names))
            for i, name in enumerate(names):
                if name in rows:
                    h, extra_var[i] = rows[name]
                    F[i] -= h @ X
                    k[i] += h @ resid
        on_quadrature = _evaluated_once(lambda d: functional_matrix(d, valid)[1:], design, (F, k))
        f_mean, f_sd, _, _ = posterior.figures(on_quadrature, design, extra_variance=extra_var)

        # extremes and non-uniformity from posterior draws on the display grid, over the
        # points the fit estimates (not a pinned edge's, fixed at zero flux: pinned_edges)
        prof = posterior.draws(on_grid, design, 400, seed=1)
        free = estimated_points(on_grid(design)[0], quantity)
        mins, maxs = prof[:, free].min(axis=1), prof[:, free].max(axis=1)
        where = np.flatnonzero(free)
        i_min, i_max = int(where[np.argmin(mean[free])]), int(where[np.argmax(mean[free])])

        zones = _zone_entries(valid, names, f_mean, f_sd, face, cyl, quantity, warnings)
        for z in zones:
            z["deviation_from_face_mean"] = z["mean"] - float(f_mean[0])

        sens = sensors.copy()
        sens.insert(1, "r_m", readings.r)
        sens.insert(2, "theta_rad", readings.theta)
        sens.insert(3, "z_m", readings.z)
        curve = pd.DataFrame({"alpha": choice.alphas, choice.criterion: choice.values,
                              "residual_norm": choice.residual_norm, "seminorm": choice.seminorm})
        alpha = float(choice.alpha)
        summary = {
            "face": face, "quantity": quantity, "unit": unit,
            "mean": float(f_mean[0]), "mean_sd": float(f_sd[0]),
            "min": float(mean[i_min]), "min_sd": float(mins.std(ddof=1)), "min_at": grid_position(grid, i_min),
            "max": float(mean[i_max]), "max_sd": float(maxs.std(ddof=1)), "max_at": grid_position(grid, i_max),
            "nonuniformity": float(mean[i_max] - mean[i_min]),
            "nonuniformity_sd": float((maxs - mins).std(ddof=1)),
            "total_power_W": float(f_mean[1]), "total_power_sd_W": float(f_sd[1]),
            "strength": alpha, "strength_method": choice.method,
            "strength_averaged": posterior.averaged is not None,
            "smoothing": opts.smoothing,
            "chi2": float(problem.chi2(alpha)), "n_sensors_used": int(problem.n),
            "effective_parameters": float(problem.effective_parameters(alpha)),
            "basis_size": int(design.basis.size), "harmonics": int(design.basis.m.max()),
            "terms": int(design.basis.n_index.max() + 1),
            "set_aside": [s.sensor for s in set_aside],
            "zones": zones, "warnings": list(warnings), "loss": opts.loss,
        }
        cal = posterior.calibration
        if cal is not None:
            summary["calibrated"] = cal.info()
        summary.update(extra or {})
        return cls(face, quantity, unit, cyl, grid, pts.shape, summary, sens, curve, list(warnings),
                   posterior, design, problem, readings, kept, zones,
                   cal.info() if cal is not None else None, monte_carlo, cal, opts, figure_tails, marginal,
                   map_tail, point_tail, gradient_tail=gradient_tail)

    # ------------------------------------------------------------------ queries
    def face_profile(self, u, v, level=0.95):
        """Estimate, sd, lower, upper of the face quantity at face coordinates (u, v), as the
        face map gives them: with the left-out modes' and the unseen stretches' part
        (map_tail) where the fit has one (a Monte Carlo fit's map comes from its draws; this
        is its posterior's)."""
        u, v = (np.ravel(np.asarray(x, float)) for x in (u, v))
        builder, extra = _with_tail(lambda d: d.face(u, v), self.design, SimpleNamespace(u=u, v=v, lines=None),
                                         self.map_tail)
        own = self.posterior.figures(builder, self.design, level, extra_variance=extra)
        return self._with_doubt(own, lambda other: other.face_profile(u, v, level), level)

    def predict(self, r, theta, z, level=0.95):
        """Temperature [K] with sd and band anywhere inside the part: (mean, sd, lower, upper),
        with the marginalized sets' part (point_tail) as the face map has it on the face: given
        the kept readings, t0 + G c + H (residual - X c) and its variance
        (MarginalSets.at_points); with calibrated face parameters their prior variance alone,
        as that map adds it."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)) for x in (r, theta, z))
        builder, extra = _with_tail(lambda d: d.sensors(r, theta, z), self.design,
                                    SimpleNamespace(r=r, theta=theta, z=z), self.point_tail)
        own = self.posterior.figures(builder, self.design, level, extra_variance=extra)
        return self._with_doubt(own, lambda other: other.predict(r, theta, z, level), level)

    def _with_doubt(self, own, query, level):
        """own (mean, sd, lower, upper), mixed with the same query of the fit without the
        doubtful sensor where the answer weighs one (strength_average.answers_mixture)."""
        if self.doubt is None:
            return own
        other, p = self.doubt
        return answers_mixture(np.array([1.0 - p, p]), [own, query(other)], level)

    def predict_flux(self, r, theta, z):
        """Heat-flux vector -k grad T [W/m^2] (3, P) at points (posterior mean), with the
        marginalized sets' part given the kept readings (gradient_tail) where predict has theirs."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)) for x in (r, theta, z))
        _, _, ev, dG = self.design.at(r, theta, z, gradient=True)
        k = self.design.model.k
        c = self.posterior.c
        grad = ev.gradient + np.einsum("dpk,k->dp", dG, c)
        if self.gradient_tail is not None:
            dGg, dg0 = self.gradient_tail(SimpleNamespace(r=r, theta=theta, z=z))
            grad = grad + np.einsum("dpk,k->dp", dGg, c) + dg0
        own = -k * grad
        if self.doubt is None:
            return own
        other, p = self.doubt          # linear in the answer: the mixture's mean is the weighted sum
        return (1.0 - p) * own + p * other.predict_flux(r, theta, z)
