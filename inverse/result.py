"""FitResult: the reconstructed face with bands, derived figures and sensor health (SI)."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .face_grid import display_grid, quadrature
from .functionals import face_functionals

Z95 = 1.959963984540054  # standard normal 97.5 % quantile


@dataclass
class Posterior:
    """Posterior of the coefficients: mean c (K,), covariance C (K, K), the alpha used and,
    when the strength was averaged over alpha, the StrengthAverage behind it."""

    c: np.ndarray
    C: np.ndarray
    alpha: float
    averaged: object = None

    def band(self, B, offset=None, level=0.95):
        """Mean, sd, lower, upper of offset + B c (equal-tailed `level` band)."""
        B = np.atleast_2d(B)
        offset = np.zeros(B.shape[0]) if offset is None else np.asarray(offset, float)
        if self.averaged is not None:
            return self.averaged.band(B, level=level, offset=offset)
        mean = offset + B @ self.c
        sd = np.sqrt(np.maximum(np.einsum("qk,kl,ql->q", B, self.C, B), 0.0))
        from scipy.stats import norm
        zq = norm.ppf(0.5 * (1 + level))
        return mean, sd, mean - zq * sd, mean + zq * sd

    def linear(self, f, offset=0.0):
        """Mean and sd of offset + f . c for one functional f (K,)."""
        mean, sd, _, _ = self.band(np.asarray(f, float)[None, :], np.array([offset]))
        return float(mean[0]), float(sd[0])

    def samples(self, n, seed=0):
        rng = np.random.default_rng(seed)
        C = 0.5 * (self.C + self.C.T)
        w, V = np.linalg.eigh(C)
        L = V * np.sqrt(np.maximum(w, 0.0))
        return self.c[None, :] + rng.standard_normal((n, self.c.size)) @ L.T


def _zone_area(zone, face, radius, height, n=1024):
    """Area [m^2] of a zone by the midpoint rule on n x n cells of the face (theta x r with
    weight r on end faces, theta x z on the side)."""
    th = 2.0 * np.pi * (np.arange(n) + 0.5) / n
    span = height if face == "side" else radius
    s = span * (np.arange(n) + 0.5) / n
    S, TH = np.meshgrid(s, th, indexing="ij")
    if face == "side":
        mask = np.asarray(zone.contains(TH.ravel(), S.ravel()), dtype=bool)
        return float(mask.sum()) * (2.0 * np.pi / n) * (span / n) * radius
    mask = np.asarray(zone.contains(S.ravel(), TH.ravel()), dtype=bool)
    return float(S.ravel() @ mask) * (2.0 * np.pi / n) * (span / n)


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

    # ------------------------------------------------------------------ construction
    @classmethod
    def build(cls, *, case, design, face, readings, kept, problem, choice, posterior, sensors,
              set_aside, warnings, grid_size, nonlinear, monte_carlo, smoothing,
              strength_request):
        basis, cyl = design.basis, design.cylinder
        quantity = basis.quantity
        unit = "K" if quantity == "temperature" else "W/m^2"
        pts = display_grid(face, cyl.radius, cyl.height, *grid_size)
        B = basis.face_values(pts.u, pts.v)
        known = basis.known_face_values(pts.u, pts.v)
        mean, sd, lower, upper = posterior.band(B, known)
        if monte_carlo is not None:
            s = monte_carlo["samples"]
            mean, sd = s.mean(axis=0), s.std(axis=0, ddof=1)
            lower, upper = np.quantile(s, 0.025, axis=0), np.quantile(s, 0.975, axis=0)
        grid = pd.DataFrame({"r_m": pts.r, "theta_rad": pts.theta, "z_m": pts.z,
                             "estimate": mean, "std": sd, "lower": lower, "upper": upper})

        # linear functionals over the face (quadrature rule); zones on another face or
        # covering nothing are reported and skipped
        quad_mask = quadrature(face, cyl.radius, cyl.height)
        valid = []
        for zone in getattr(case, "zones", None) or []:
            zface = getattr(zone, "face", None) or face
            if zface != face:
                warnings.append(f"zone {zone.name} is on the {zface} face, not the estimated {face} face; skipped")
            elif not np.asarray(zone.contains(quad_mask.u, quad_mask.v), dtype=bool).any():
                warnings.append(f"zone {zone.name} covers no part of the {face} face; skipped")
            else:
                valid.append(zone)
        funcs = face_functionals(design, valid)
        mean_v, mean_sd = posterior.linear(funcs[0][1], funcs[0][2])
        power, power_sd = posterior.linear(funcs[1][1], funcs[1][2])

        # extremes and non-uniformity from posterior draws on the display grid
        draws = posterior.samples(400, seed=1)
        prof = known[None, :] + draws @ B.T
        mins, maxs = prof.min(axis=1), prof.max(axis=1)
        i_min, i_max = int(np.argmin(mean)), int(np.argmax(mean))

        def where(i):
            return {"r_m": float(pts.r[i]), "theta_rad": float(pts.theta[i]), "z_m": float(pts.z[i])}

        zones = []
        for zone, (_, f_zone, k_zone) in zip(valid, funcs[2:]):
            zm, zsd = posterior.linear(f_zone, k_zone)
            # The masked rule's zone edge is as coarse as its nodes (several % of the area of
            # a small zone); the area, and with it the power, comes from a fine midpoint rule.
            za = _zone_area(zone, face, cyl.radius, cyl.height)
            entry = {"name": zone.name, "mean": zm, "sd": zsd, "lower": zm - Z95 * zsd,
                     "upper": zm + Z95 * zsd, "area_m2": za}
            if quantity == "heat_flux":
                entry.update(power_W=zm * za, power_sd_W=zsd * za)
            zones.append(entry)
        if zones:
            ref = mean_v
            for z in zones:
                z["deviation_from_face_mean"] = z["mean"] - ref

        sens = sensors.copy()
        sens.insert(1, "r_m", readings.r)
        sens.insert(2, "theta_rad", readings.theta)
        sens.insert(3, "z_m", readings.z)
        curve = pd.DataFrame({"alpha": choice.alphas, choice.criterion: choice.values,
                              "residual_norm": choice.residual_norm, "seminorm": choice.seminorm})
        alpha = float(choice.alpha)
        summary = {
            "face": face, "quantity": quantity, "unit": unit,
            "mean": mean_v, "mean_sd": mean_sd,
            "min": float(mean[i_min]), "min_sd": float(mins.std(ddof=1)), "min_at": where(i_min),
            "max": float(mean[i_max]), "max_sd": float(maxs.std(ddof=1)), "max_at": where(i_max),
            "nonuniformity": float(mean[i_max] - mean[i_min]),
            "nonuniformity_sd": float((maxs - mins).std(ddof=1)),
            "total_power_W": power, "total_power_sd_W": power_sd,
            "strength": alpha, "strength_method": choice.method,
            "strength_averaged": posterior.averaged is not None,
            "smoothing": smoothing,
            "chi2": float(problem.chi2(alpha)), "n_sensors_used": int(problem.n),
            "effective_parameters": float(problem.effective_parameters(alpha)),
            "basis_size": int(basis.size), "harmonics": int(basis.m.max()),
            "terms": int(basis.n_index.max() + 1),
            "set_aside": [s.sensor for s in set_aside],
            "zones": zones, "warnings": list(warnings),
        }
        if nonlinear:
            summary["calibrated"] = {k: v for k, v in nonlinear.items() if not k.startswith("_")}
        return cls(face, quantity, unit, cyl, grid, pts.shape, summary, sens, curve, list(warnings),
                   posterior, design, problem, readings, kept, zones, nonlinear, monte_carlo)

    # ------------------------------------------------------------------ queries
    def face_profile(self, u, v, level=0.95):
        """Estimate, sd, lower, upper of the face quantity at face coordinates (u, v)."""
        basis = self.design.basis
        B = basis.face_values(u, v)
        return self.posterior.band(B, basis.known_face_values(u, v), level)

    def predict(self, r, theta, z, level=0.95):
        """Temperature [K] with sd and band anywhere inside the part: (mean, sd, lower, upper)."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)) for x in (r, theta, z))
        G, t0, _, _ = self.design.at(r, theta, z)
        return self.posterior.band(G, t0, level)

    def predict_flux(self, r, theta, z):
        """Heat-flux vector -k grad T [W/m^2] (3, P) at points (posterior mean)."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)) for x in (r, theta, z))
        _, _, ev, dG = self.design.at(r, theta, z, gradient=True)
        k = self.design.model.k
        return -k * (ev.gradient + np.einsum("dpk,k->dp", dG, self.posterior.c))
