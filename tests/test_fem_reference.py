"""Checks of the finite-element reference solver (tests/fem_cylinder.py) against closed forms.

All closed forms are exact solutions of Laplace's equation in cylindrical coordinates
obtained by separation of variables (textbook results, named beside each check).
"""

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import iv, j0, j1, jn_zeros

from fem_cylinder import solve_field, solve_harmonic

A, L, K = 0.05, 0.08, 20.0  # radius [m], height [m], conductivity [W/(m K)]


def _grid(nr=23, nz=29):
    r = np.linspace(0.0, A, nr)
    z = np.linspace(0.0, L, nz)
    return np.meshgrid(r, z, indexing="ij")


def test_plane_wall_flux_bottom_convection_top():
    q, h, tamb = 5.0e4, 250.0, 300.0
    faces = {"bottom": ("N", q), "side": ("N", 0.0), "top": ("R", h, tamb)}
    sol = solve_harmonic(A, L, K, 0, faces, nr=6, nz=10)
    R, Z = _grid()
    exact = tamb + q / h + q * (L - Z) / K
    # plane wall with flux and convection: Incropera, Fundamentals of Heat and Mass Transfer, ch. 3
    np.testing.assert_allclose(sol.temperature(R, Z), exact, rtol=1e-8)
    # heat through the bottom is the applied flux times the area (pi a^2 q)
    assert sol.heat_in("bottom") == pytest.approx(q * np.pi * A**2, rel=1e-10)
    assert sol.heat_in("top") == pytest.approx(-q * np.pi * A**2, rel=1e-8)


def test_plane_wall_p1():
    q, h, tamb = 1.0e4, 50.0, 290.0
    faces = {"bottom": ("N", q), "side": ("N", 0.0), "top": ("R", h, tamb)}
    sol = solve_harmonic(A, L, K, 0, faces, order=1, nr=4, nz=8)
    R, Z = _grid()
    # plane wall, linear profile: Incropera, Fundamentals of Heat and Mass Transfer, ch. 3
    np.testing.assert_allclose(sol.temperature(R, Z), tamb + q / h + q * (L - Z) / K, rtol=1e-8)


def test_axisymmetric_j0_sinh():
    lam = jn_zeros(0, 1)[0]  # first zero of J0, scipy.special.jn_zeros
    faces = {"bottom": ("D", lambda s: j0(lam * s / A)), "top": ("D", 0.0),
             "side": ("D", 0.0)}
    sol = solve_harmonic(A, L, K, 0, faces, nr=40, nz=40)
    R, Z = _grid()
    exact = j0(lam * R / A) * np.sinh(lam * (L - Z) / A) / np.sinh(lam * L / A)
    # separation of variables, J0(lam r/a) sinh(lam (L-z)/a): Carslaw & Jaeger, Conduction of Heat in Solids, finite cylinder (from memory)
    np.testing.assert_allclose(sol.temperature(R, Z), exact, atol=1e-5)
    # heat in at z=0: 2 pi k a J1(lam) coth(lam L/a), same closed form differentiated
    q_exact = 2 * np.pi * K * A * j1(lam) / np.tanh(lam * L / A)
    assert sol.heat_in("bottom") == pytest.approx(q_exact, rel=1e-4)
    assert sol.heat_in("bottom", method="gradient") == pytest.approx(q_exact, rel=3e-3)
    total = sum(sol.heat_in(f) for f in ("bottom", "top", "side"))
    assert abs(total) < 1e-10 * abs(q_exact)


def test_axisymmetric_j0_graded_mesh():
    lam = jn_zeros(0, 1)[0]  # scipy.special.jn_zeros
    faces = {"bottom": ("D", lambda s: j0(lam * s / A)), "top": ("D", 0.0),
             "side": ("D", 0.0)}
    R, Z = np.meshgrid(np.linspace(0, A, 13), np.linspace(1e-4, 2e-3, 9), indexing="ij")
    exact = j0(lam * R / A) * np.sinh(lam * (L - Z) / A) / np.sinh(lam * L / A)
    errs = {}
    for name, grade in (("uniform", None), ("graded", {"bottom": 3.0})):
        sol = solve_harmonic(A, L, K, 0, faces, nr=24, nz=24, grade=grade)
        errs[name] = np.abs(sol.temperature(R, Z) - exact).max()
    dz = np.diff(sol.z_nodes)
    assert dz[-1] / dz[0] == pytest.approx(3.0)  # largest / smallest cell = grade
    assert np.all(np.diff(dz) > 0)
    # separation of variables: Carslaw & Jaeger, Conduction of Heat in Solids, finite cylinder (from memory)
    assert errs["graded"] < 2e-5
    assert errs["graded"] < 0.5 * errs["uniform"]


def test_m1_polynomial_dirichlet_exact():
    # r cos(theta) z = x z is harmonic in 3-D, so u = r z solves the m = 1 problem
    faces = {"bottom": ("D", 0.0), "top": ("D", lambda s: s * L),
             "side": ("D", lambda s: A * s)}
    sol = solve_harmonic(A, L, K, 1, faces, nr=6, nz=6)
    R, Z = _grid()
    # exact harmonic polynomial x z (lies in the P2 space)
    np.testing.assert_allclose(sol.temperature(R, Z), R * Z, atol=1e-8 * A * L)
    gr, gz = sol.gradient(R, Z)
    np.testing.assert_allclose(gr, Z, atol=1e-8 * L)
    np.testing.assert_allclose(gz, R, atol=1e-8 * A)


def test_m1_polynomial_flux_and_robin_data():
    # same u = r z, now with flux on the bottom and convection (profile ambient) on top
    h = 400.0
    faces = {"bottom": ("N", lambda s: -K * s),              # k du/dn = -k du/dz = -k r
             "top": ("R", h, lambda s: s * L + K * s / h),    # Tamb = u + (k/h) du/dz
             "side": ("R", h, lambda s: A * s + K * s / h)}   # Tamb = u + (k/h) du/dr
    sol = solve_harmonic(A, L, K, 1, faces, nr=5, nz=7)
    R, Z = _grid()
    # exact harmonic polynomial x z (lies in the P2 space)
    np.testing.assert_allclose(sol.temperature(R, Z), R * Z, atol=1e-8 * A * L)


def test_m1_modified_bessel_side():
    beta = np.pi / L
    faces = {"bottom": ("D", 0.0), "top": ("D", 0.0),
             "side": ("D", lambda s: np.sin(beta * s))}
    sol = solve_harmonic(A, L, K, 1, faces, nr=40, nz=40)
    R, Z = _grid()
    exact = iv(1, beta * R) * np.sin(beta * Z) / iv(1, beta * A)
    # separation of variables, I1(beta r) sin(beta z) (scipy.special.iv): Carslaw & Jaeger, Conduction of Heat in Solids, finite cylinder (from memory)
    np.testing.assert_allclose(sol.temperature(R, Z), exact, atol=1e-5)


def test_m2_modified_bessel_sin_harmonic_field():
    beta = np.pi / L
    side = ("D", lambda s: np.sin(beta * s))
    faces = {"bottom": ("D", 0.0), "top": ("D", 0.0), "side": side}
    field = solve_field(A, L, K, {(2, "sin"): faces}, nr=30, nz=30)
    r = np.array([0.01, 0.03, 0.045])
    th = np.array([0.3, 1.1, 2.5])
    z = np.array([0.02, 0.04, 0.07])
    exact = iv(2, beta * r) / iv(2, beta * A) * np.sin(beta * z) * np.sin(2 * th)
    # separation of variables, I2(beta r) sin(beta z) sin(2 theta): Carslaw & Jaeger, Conduction of Heat in Solids, finite cylinder (from memory)
    np.testing.assert_allclose(field.temperature(r, th, z), exact, atol=2e-5)


def test_robin_side_j0_cosh():
    h = 800.0
    bi = h * A / K
    lam = brentq(lambda x: x * j1(x) - bi * j0(x), 1e-9, jn_zeros(0, 1)[0] - 1e-12)
    # the root satisfies lam J1(lam) = Bi J0(lam); cross-check with scipy.special.j0/j1 residual
    assert abs(lam * j1(lam) - bi * j0(lam)) < 1e-12
    faces = {"bottom": ("D", lambda s: j0(lam * s / A)), "top": ("N", 0.0),
             "side": ("R", h, 0.0)}
    sol = solve_harmonic(A, L, K, 0, faces, nr=30, nz=30)
    R, Z = _grid()
    exact = j0(lam * R / A) * np.cosh(lam * (L - Z) / A) / np.cosh(lam * L / A)
    # separation of variables with convective side: Carslaw & Jaeger, Conduction of Heat in Solids, finite cylinder (from memory)
    np.testing.assert_allclose(sol.temperature(R, Z), exact, atol=3e-5)
    q_exact = 2 * np.pi * K * A * j1(lam) * np.tanh(lam * L / A)  # same closed form
    assert sol.heat_in("bottom") == pytest.approx(q_exact, rel=1e-4)
    assert sol.heat_in("side") == pytest.approx(-q_exact, rel=1e-4)


def test_heat_balance_convection_side():
    q, h_side, h_top, tamb = 2.0e4, 150.0, 60.0, 295.0
    faces = {"bottom": ("N", lambda s: q * (1.0 + (s / A) ** 2)),
             "side": ("R", h_side, tamb), "top": ("R", h_top, tamb)}
    sol = solve_harmonic(A, L, K, 0, faces, nr=20, nz=20, grade={"bottom": 2.0})
    heat_in = sol.heat_in("bottom")
    # int_0^a q (1 + r^2/a^2) 2 pi r dr = 1.5 q pi a^2 (elementary integral)
    assert heat_in == pytest.approx(1.5 * q * np.pi * A**2, rel=1e-10)
    out = -(sol.heat_in("side") + sol.heat_in("top"))
    # steady state: heat in = heat out (energy conservation)
    assert out == pytest.approx(heat_in, rel=1e-8)


def test_field_sum_of_harmonics():
    q, h, tamb = 5.0e4, 250.0, 300.0
    wall = {"bottom": ("N", q), "side": ("N", 0.0), "top": ("R", h, tamb)}
    rz = {"bottom": ("D", 0.0), "top": ("D", lambda s: s * L), "side": ("D", lambda s: A * s)}
    field = solve_field(A, L, K, {(0, "cos"): wall, (1, "cos"): rz, (1, "sin"): rz},
                        nr=6, nz=6)
    rng = np.random.default_rng(0)
    r = rng.uniform(0, A, 20)
    th = rng.uniform(0, 2 * np.pi, 20)
    z = rng.uniform(0, L, 20)
    exact = tamb + q / h + q * (L - z) / K + r * z * (np.cos(th) + np.sin(th))
    # plane wall (Incropera ch. 3) plus the harmonic polynomials x z and y z
    np.testing.assert_allclose(field.temperature(r, th, z), exact, rtol=1e-8)
    assert field.heat_in("bottom") == pytest.approx(q * np.pi * A**2, rel=1e-10)


def test_errors():
    faces = {"bottom": ("N", 1.0), "side": ("N", 0.0), "top": ("N", -1.0)}
    with pytest.raises(ValueError):
        solve_harmonic(A, L, K, 0, faces)
    ok = {"bottom": ("D", 1.0), "side": ("N", 0.0), "top": ("D", 0.0)}
    sol = solve_harmonic(A, L, K, 0, ok, nr=3, nz=3)
    with pytest.raises(ValueError):
        sol.temperature(1.1 * A, 0.5 * L)
    with pytest.raises(ValueError):
        solve_harmonic(A, L, K, 0, {"bottom": ("X", 1.0), "side": ("N", 0.0), "top": ("D", 0.0)})
