"""Sensor placement tolerance: the linearized effective variance and the seeded Monte Carlo
option that moves the sensors within their tolerance."""

import types

import numpy as np
import pytest

import heatsight.forward as fw
from heatsight import inverse

A, L, K, H, TAMB, Q = 0.10, 0.04, 20.0, 50.0, 300.0, 5000.0


def _case():
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
    return types.SimpleNamespace(cylinder=fw.Cylinder(A, L, K), faces=faces, zones=[])


def _readings(tol, n=12, sigma=0.1, seed=0):
    rng = np.random.default_rng(seed)
    r, th, z = rng.uniform(0, 0.9 * A, n), rng.uniform(0, 2 * np.pi, n), rng.uniform(0.005, 0.03, n)
    r[0] = 0.95 * A         # a sensor near the rim: no unseen edge stretch (inverse/stretch.py)
    # plane wall, uniform flux q in, convection out (textbook closed form):
    # T(z) = T_amb + q/h + q (L - z)/k
    t = TAMB + Q / H + Q * (L - z) / K + rng.normal(0, sigma, n)
    return inverse.SensorReadings([f"S{i}" for i in range(n)], r, th, z, t, sigma, 0.0, tol)


def test_effective_variance_of_placement_tolerance():
    tol = 1e-3
    res = inverse.fit(_case(), _readings(tol), keep_all_sensors=True)
    assert not any("edge stretch" in w for w in res.warnings)    # else its steps share the noise
    var = res.problem.noise.sd ** 2
    # gradient of the plane-wall field is q/k along z; a +-tol placement error is a
    # rectangular distribution with variance tol^2 / 3 (GUM, JCGM 100:2008 4.3.7)
    expected = 0.1 ** 2 + (Q / K) ** 2 * tol ** 2 / 3.0
    assert var == pytest.approx(expected, rel=0.05)
    plain = inverse.fit(_case(), _readings(0.0), keep_all_sensors=True)
    assert res.summary["mean_sd"] > plain.summary["mean_sd"]


def test_monte_carlo_is_seeded_reports_progress_and_widens_bands():
    calls = []
    rd = _readings(2e-3)
    one = inverse.fit(_case(), rd, monte_carlo=100, seed=7, keep_all_sensors=True,
                      progress=lambda done, total: calls.append((done, total)))
    two = inverse.fit(_case(), rd, monte_carlo=100, seed=7, keep_all_sensors=True)
    assert calls[-1] == (100, 100) and len(calls) == 100
    assert np.array_equal(one.grid["estimate"], two.grid["estimate"])  # same seed, same draws
    g = one.grid
    assert np.all(g["upper"] >= g["lower"]) and np.all(np.isfinite(g["std"]))
    # the truth (uniform flux Q) lies inside the Monte Carlo band over most of the face
    inside = (g["lower"] <= Q) & (Q <= g["upper"])
    assert inside.mean() > 0.9
