"""Honest bands through inverse.fit itself: coverage by simulation, truth drawn from the prior.

This test is about the statistics, not the physics, so the readings are generated with
the fit's own basis (forward.CylinderModel(...).basis, the same harmonics/terms and
tolerance as the fit) and the fit's own prior (inverse.prior_diagonal, fixed alpha):
here that is the model being checked, not an inverse crime.  Recovery from readings of
an independent solver is tested in test_fit_recovery.py.
"""

import types

import numpy as np
from threadpoolctl import threadpool_limits

import heatsight.forward as fw
from heatsight import inverse

A, L, K, H, TAMB = 0.10, 0.04, 20.0, 100.0, 300.0
HARMONICS, TERMS = 2, 4
ALPHA = 1e-6            # prior sd of the uniform mode: 1 / sqrt(ALPHA) = 1 kW/m^2
LEVEL = 1.0e4           # prior mean: uniform 10 kW/m^2
SIGMA = 0.3
N_SENSORS = 12
REPLICATES = 200


def test_band_coverage_through_fit():
    cyl = fw.Cylinder(A, L, K)
    faces = {"bottom": fw.UnknownFlux(), "top": fw.Convection(H, TAMB), "side": fw.Insulated()}
    case = types.SimpleNamespace(cylinder=cyl, faces=faces)
    model = fw.CylinderModel(cyl, faces, tolerance=1e-8)      # fit's default tolerance
    basis = model.basis(HARMONICS, TERMS)
    P = inverse.prior_diagonal(basis, A, "gradient")          # the fit's own prior (default smoothing)
    rng = np.random.default_rng(5)
    r = A * np.sqrt(rng.uniform(0.0, 0.9, N_SENSORS))
    theta = rng.uniform(0.0, 2 * np.pi, N_SENSORS)
    z = rng.uniform(0.003, 0.02, N_SENSORS)
    G, _ = basis.fields(r, theta, z)
    t0 = model.evaluate(r, theta, z).temperature
    c0 = np.zeros(basis.size)
    c0[(basis.m == 0) & (basis.n_index == 0)] = LEVEL         # the fundamental (uniform) mode
    names = [f"s{i}" for i in range(N_SENSORS)]

    hits = total = 0
    with threadpool_limits(1):
        for _ in range(REPLICATES):
            c = c0 + rng.standard_normal(basis.size) / np.sqrt(ALPHA * P)   # truth from the prior
            d = t0 + G @ c + SIGMA * rng.standard_normal(N_SENSORS)
            rd = inverse.SensorReadings(names, r, theta, z, d, SIGMA, 0.0, 0.0)
            res = inverse.fit(case, rd, strength=ALPHA, harmonics=HARMONICS, terms=TERMS,
                              keep_all_sensors=True, grid=(7, 12))
            g = res.grid
            u, v = g.r_m.to_numpy(), g.theta_rad.to_numpy()
            truth = basis.known_face_values(u, v) + basis.face_values(u, v) @ c
            hits += int(np.sum((truth >= g.lower) & (truth <= g.upper)))
            total += truth.size
    coverage = hits / total
    print(f"\ncoverage of 95 % bands through inverse.fit: {coverage:.4f} "
          f"({REPLICATES} replicates x {total // REPLICATES} face points)")
    # nominal 0.95; [0.90, 0.98] allows for the Monte Carlo error of 200 replicates of
    # correlated grid indicators (issue requirement)
    assert 0.90 <= coverage <= 0.98  # nominal level of a 95 % band (definition); window: issue requirement
