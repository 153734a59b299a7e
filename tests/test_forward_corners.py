"""Corners between an end face and a temperature side: the corner lifting and the rim-flux
columns, checked against the independent finite-element solver (scikit-fem)."""

import numpy as np
import pytest

from fem_cylinder import solve_harmonic
from heatsight.forward import Convection, Cylinder, CylinderModel, Flux, Temperature, UnknownFlux

A, L, K = 0.10, 0.03, 20.0


def q(r):
    return 8000.0 * (1.0 + 0.5 * (r / A) ** 2)


@pytest.fixture(scope="module")
def fem():
    # reference: scikit-fem P2 on a mesh graded toward the heated face (reference library)
    return solve_harmonic(A, L, K, 0, {"bottom": ("N", q), "top": ("R", 100.0, 300.0), "side": ("D", 300.0)},
                          nr=160, nz=80, grade={"bottom": 4.0, "side": 4.0})  # graded into the corner


def test_flux_face_beside_temperature_side_converges_at_the_face(fem):
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Flux(lambda r, t: q(r)), "top": Convection(100.0, 300.0),
                                              "side": Temperature(300.0)})
    r = np.array([0.2, 0.6, 0.9, 0.97, 0.995]) * A
    z = np.array([0.0, 0.0, 0.0, 5e-4, 0.0])
    ev = model.evaluate(r, np.zeros_like(r), z)
    span = np.ptp(fem.temperature(np.linspace(0, A, 50), np.zeros(50)))
    # agreement with scikit-fem at the face itself, right up to the rim
    assert np.abs(ev.temperature - fem.temperature(r, z)).max() < 1e-4 * span
    assert ev.truncation_error.max() < 1e-6 * span
    # the flux condition holds on the face, also near the rim: q_z = -k dT/dz = q (into the part)
    on_face = z == 0.0
    assert ev.heat_flux[2][on_face] == pytest.approx(q(r[on_face]), rel=1e-6)


def test_rim_flux_column_matches_fem():
    model = CylinderModel(Cylinder(A, L, K), {"bottom": UnknownFlux(), "top": Convection(100.0, 300.0),
                                              "side": Temperature(300.0)})
    basis = model.basis(2, 6)
    assert len(basis.rim) == 5  # m = 0 cos, m = 1, 2 cos and sin
    i = basis.n_eigen  # the m = 0 rim column: unit flux into the whole bottom face
    ref = solve_harmonic(A, L, K, 0, {"bottom": ("N", 1.0), "top": ("R", 100.0, 0.0), "side": ("D", 0.0)},
                         nr=60, nz=30)  # scikit-fem (reference library)
    rng = np.random.default_rng(0)
    r, z = rng.uniform(0, A, 30), rng.uniform(0, L, 30)
    G, _ = basis.fields(r, np.zeros(30), z)
    span = np.ptp(ref.temperature(r, z))
    assert np.abs(G[:, i] - ref.temperature(r, z)).max() < 1e-5 * span
    # its face function is uniform, so the rim flux is no longer forced to zero
    fv = basis.face_values(np.array([0.0, A]), np.zeros(2))
    assert fv[:, i] == pytest.approx([1.0, 1.0])
    assert basis.powers()[i] == pytest.approx(np.pi * A * A)
