"""An unknown side beside its ends: the wall's corner columns (forward/corner_columns.py),
checked against the independent finite-element solver (scikit-fem, tests/fem_cylinder.py)
and against the textbook rate of an eigenfunction series at an end where the profile
breaks the end's homogeneous condition."""

import math

import numpy as np
import pytest

from fem_cylinder import solve_harmonic
from heatsight.forward import (Convection, Cylinder, CylinderModel, Insulated, Temperature,
                               UnknownFlux, UnknownTemperature)
from heatsight.forward.corners import PolynomialLifting

A, L, K = 0.08, 0.10, 25.0  # a steel die: radius, height [m], conductivity [W/(m K)]
H_BASE, H_TOP, T_AMB = 1500.0, 15.0, 298.15
GRADE = {"bottom": 6.0, "side": 6.0, "top": 6.0}  # cells clustered into the corners

COOLED = {"bottom": Convection(H_BASE, T_AMB), "top": Convection(H_TOP, T_AMB), "side": UnknownTemperature()}
CASES = {
    # case: (faces, the FEM's homogeneous ends, the FEM's side kind, corner columns for m = 0..1)
    "temperature wall, water-cooled base, air-cooled top": (
        COOLED, {"bottom": ("R", H_BASE, 0.0), "top": ("R", H_TOP, 0.0)}, "D", 6),
    "temperature wall, insulated base, temperature top": (  # no column at the temperature end
        {"bottom": Insulated(), "top": Temperature(350.0), "side": UnknownTemperature()},
        {"bottom": ("N", 0.0), "top": ("D", 0.0)}, "D", 3),
    "flux wall, temperature base, convection top": (
        {"bottom": Temperature(300.0), "top": Convection(20.0, T_AMB), "side": UnknownFlux()},
        {"bottom": ("D", 0.0), "top": ("R", 20.0, 0.0)}, "N", 6),
}


@pytest.mark.parametrize("name", list(CASES))
def test_wall_corner_columns_match_fem(name):
    faces, fem_ends, side_kind, n_columns = CASES[name]
    basis = CylinderModel(Cylinder(A, L, K), faces).basis(1, 10)
    assert len(basis.rim) == n_columns and np.all(basis.n_index[basis.n_eigen:] == -1)
    rng = np.random.default_rng(0)  # interior points, not on the corner circles themselves
    r, z = rng.uniform(0, 0.98 * A, 120), rng.uniform(0.02 * L, 0.98 * L, 120)
    G, _ = basis.fields(r, np.zeros_like(r), z)
    powers = basis.powers()
    for j in range(basis.n_eigen, basis.size):
        if basis.is_sin[j]:
            continue
        m = int(basis.m[j])

        def profile(s, j=j):  # the column's face function along z at theta = 0
            s = np.asarray(s, float)
            return basis.face_values(np.zeros(s.size), s.ravel())[:, j].reshape(s.shape)

        fem = solve_harmonic(A, L, K, m, dict(fem_ends, side=(side_kind, profile)), nr=50, nz=80,
                             grade=GRADE)  # scikit-fem (reference library)
        ref = fem.temperature(r, z)
        assert np.abs(G[:, j] - ref).max() < 1e-3 * np.ptp(ref), (name, j)
        if m == 0:
            # heat into the part through the wall, against the FEM's discrete heat balance
            assert powers[j] == pytest.approx(fem.heat_in("side"), rel=1e-2), (name, j)


def test_uniform_wall_column_and_its_power():
    basis = CylinderModel(Cylinder(A, L, K), COOLED).basis(2, 8)
    j = basis.uniform_column
    assert j is not None and basis.n_index[j] == -1 and basis.m[j] == 0
    z = np.linspace(0.0, L, 11)
    assert basis.face_values(np.full(z.size, 0.3), z)[:, j] == pytest.approx(np.ones(z.size), abs=1e-12)
    fem = solve_harmonic(A, L, K, 0, {"bottom": ("R", H_BASE, 0.0), "top": ("R", H_TOP, 0.0), "side": ("D", 1.0)},
                         nr=80, nz=120, grade=GRADE)  # scikit-fem (reference library)
    assert basis.powers()[j] == pytest.approx(fem.heat_in("side"), rel=2e-3)
    # the norm and surface eigenvalue describe the face function: 2 pi a L and 0 for Phi = 1
    assert basis.norms()[j] == pytest.approx(2 * math.pi * A * L, rel=1e-12)
    assert basis.surface_eigenvalues()[j] == pytest.approx(0.0, abs=1e-9)


def _hot_wall(z):
    """A heater zone down to the base with a smooth upper edge [K] (its value at the cooled
    end is far from what the base's Robin condition would give)."""
    return 273.15 + 120.0 + 90.0 * (np.tanh((z + 0.3 * L) / (0.15 * L)) - np.tanh((z - 0.8 * L) / (0.15 * L)))


def test_wall_profile_beside_a_cooled_end_converges_up_to_the_ends():
    model = CylinderModel(Cylinder(A, L, K), COOLED)
    zs = np.linspace(0.0, L, 801)
    span = np.ptp(_hot_wall(zs))
    worst, worst_eigen = [], []
    for terms in (10, 20, 40):
        basis = model.basis(0, terms)
        F = basis.face_values(np.zeros_like(zs), zs)
        target = _hot_wall(zs) - basis.known_face_values(np.zeros_like(zs), zs)
        c = np.linalg.lstsq(F, target, rcond=None)[0]
        worst.append(np.abs(F @ c - target).max() / span)
        eig = np.arange(basis.n_eigen)
        ce = np.linalg.lstsq(F[:, eig], target, rcond=None)[0]
        worst_eigen.append(np.abs(F[:, eig] @ ce - target).max() / span)
    # with the corner columns: ~1e-3 of the span with 10 terms, falling fast with more
    assert worst[0] < 1e-3 and worst[1] < 2e-4 and worst[2] < 2e-5
    # the eigenfunctions alone meet a Robin defect only like 1/n (textbook rate of a
    # Sturm-Liouville series whose function breaks the boundary condition)
    assert worst_eigen[2] > 0.3 * worst_eigen[0] * 10 / 40 and worst_eigen[2] > 1e-2
    # and the field of the fitted wall is the field of that wall (scikit-fem)
    basis = model.basis(0, 20)
    F = basis.face_values(np.zeros_like(zs), zs)
    c = np.linalg.lstsq(F, _hot_wall(zs) - basis.known_face_values(np.zeros_like(zs), zs), rcond=None)[0]
    fem = solve_harmonic(A, L, K, 0, {"bottom": ("R", H_BASE, T_AMB), "top": ("R", H_TOP, T_AMB),
                                      "side": ("D", _hot_wall)}, nr=80, nz=120, grade=GRADE)
    rng = np.random.default_rng(1)
    r, z = rng.uniform(0, 0.98 * A, 150), rng.uniform(0.02 * L, 0.98 * L, 150)
    G, _ = basis.fields(r, np.zeros_like(r), z)
    T = G @ c + model.evaluate(r, np.zeros_like(r), z).temperature
    assert np.abs(T - fem.temperature(r, z)).max() < 1e-4 * span  # scikit-fem (reference library)


def _wall_fit_errors(model, profile, terms_list):
    """Max error / span of least-squares fits of the basis' face functions (m = 0) to a wall
    profile, with and without the corner columns, for each number of terms."""
    zs = np.linspace(0.0, L, 801)
    span = np.ptp(profile(zs))
    out = []
    for terms in terms_list:
        basis = model.basis(0, terms)
        F = basis.face_values(np.zeros_like(zs), zs)
        target = profile(zs) - basis.known_face_values(np.zeros_like(zs), zs)
        row = []
        for cols in (np.arange(basis.size), np.arange(basis.n_eigen)):
            c = np.linalg.lstsq(F[:, cols], target, rcond=None)[0]
            row.append(np.abs(F[:, cols] @ c - target).max() / span)
        out.append(row)
    return np.array(out)


def test_flux_wall_beside_a_temperature_end_converges_up_to_the_ends():
    """A band-heater flux reaching down to a temperature-held base: every axial
    eigenfunction of the flux wall vanishes at that end, so without the corner columns the
    fit is pinned to zero there (the flux's full size); with them it converges."""
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Temperature(300.0), "top": Convection(15.0, T_AMB),
                                              "side": UnknownFlux()})
    err = _wall_fit_errors(model, lambda z: 1e4 * (np.tanh((z + 0.3 * L) / (0.15 * L))
                                                   - np.tanh((z - 0.8 * L) / (0.15 * L))), (10, 20, 40))
    assert err[0, 0] < 2e-3 and err[1, 0] < 5e-4 and err[2, 0] < 1.2e-4
    assert err[:, 1].min() > 0.5


def test_cubic_corner_term_is_harmonic_and_balanced():
    """The cubic term rho^m Theta (zeta^3 - 3 c zeta rho^2): Laplacian zero (central
    differences of the cylindrical Laplacian, textbook form) and face powers that match
    Gauss-Legendre quadrature of k dw/dn and sum to zero (no sources inside)."""
    for m in (0, 2):
        w = PolynomialLifting.from_terms(A, L, [(m, False, (0.3, -0.2, 0.5, 1.0))])
        r0, t0, z0, h = 0.6 * A, 0.4, 0.3 * L, 1e-4 * A
        T = lambda r, t, z: w.temperature(np.atleast_1d(r), np.atleast_1d(t), np.atleast_1d(z))[0]  # noqa: E731
        lap = ((T(r0 + h, t0, z0) - 2 * T(r0, t0, z0) + T(r0 - h, t0, z0)) / h ** 2
               + (T(r0 + h, t0, z0) - T(r0 - h, t0, z0)) / (2 * h * r0)
               + (T(r0, t0 + h / r0, z0) - 2 * T(r0, t0, z0) + T(r0, t0 - h / r0, z0)) / h ** 2
               + (T(r0, t0, z0 + h) - 2 * T(r0, t0, z0) + T(r0, t0, z0 - h)) / h ** 2)
        assert abs(lap) < 1e-4 * abs(T(r0, t0, z0)) / (h / A)
    w = PolynomialLifting.from_terms(A, L, [(0, False, (0.3, -0.2, 0.5, 1.0))])
    x, wq = np.polynomial.legendre.leggauss(16)
    s, ws = 0.5 * (x + 1.0), 0.5 * wq
    zero = np.zeros_like(s)
    quad = {
        "bottom": -K * w.gradient(s * A, zero, zero)[2] @ (ws * s * A) * 2 * math.pi * A,
        "top": K * w.gradient(s * A, zero, zero + L)[2] @ (ws * s * A) * 2 * math.pi * A,
        "side": K * w.gradient(zero + A, zero, s * L)[0] @ ws * 2 * math.pi * A * L,
    }
    for face, ref in quad.items():
        assert w.power(face, K) == pytest.approx(ref, rel=1e-12), face
    assert abs(sum(w.power(f, K) for f in quad)) < 1e-12 * max(abs(v) for v in quad.values())


def test_lifting_on_a_face_gives_the_value_and_the_outward_normal_derivative():
    """PolynomialLifting.on_face (what a face's boundary operator uses, without the full
    gradient) against central differences of the temperature along each face's outward
    normal (bottom -z, top +z, side +r, bore -r) and against the full gradient."""
    rng = np.random.default_rng(5)
    terms = [(m, s, tuple(rng.normal(size=4))) for m in range(4) for s in (False, True) if not (m == 0 and s)]
    w = PolynomialLifting.from_terms(A, L, terms)
    n, h = 9, 1e-6
    th = rng.uniform(0.0, 2 * math.pi, n)
    r_in = rng.uniform(0.1 * A, 0.9 * A, n)
    points = {"bottom": (r_in, np.zeros(n), (0.0, 0.0, 1.0)), "top": (r_in, np.full(n, L), (0.0, 0.0, -1.0)),
              "side": (np.full(n, A), rng.uniform(0, L, n), (-1.0, 0.0, 0.0)),
              "bore": (np.full(n, 0.3 * A), rng.uniform(0, L, n), (1.0, 0.0, 0.0))}
    for face, (r, z, inward) in points.items():
        value, dn = w.on_face(face, r, th, z)
        dr, dz = inward[0] * h, inward[2] * h
        fd = -(w.temperature(r + dr, th, z + dz) - w.temperature(r - dr, th, z - dz)) / (2 * h)
        assert np.allclose(value, w.temperature(r, th, z), rtol=0, atol=1e-13), face
        assert np.allclose(dn, fd, rtol=1e-6, atol=1e-6 * np.abs(fd).max()), face
        g = w.gradient(r, th, z)
        outward = {"bottom": -g[2], "top": g[2], "side": g[0], "bore": -g[0]}[face]
        assert np.allclose(dn, outward, rtol=1e-12, atol=1e-12 * np.abs(outward).max()), face
        only_normal = w.on_face(face, r, th, z, value=False)
        assert only_normal[0] is None and np.array_equal(only_normal[1], dn)


def test_face_data_on_grid_lines_equals_the_pointwise_data():
    """OperatorData.grid (the lifting's operator once per grid line, what a known face's series
    samples) against the same data point by point, on every face of a solid and a hollow part,
    for each kind of condition."""
    from heatsight.forward import Flux
    from heatsight.forward.face_data import OperatorData

    rng = np.random.default_rng(11)
    terms = [(m, s, tuple(rng.normal(size=4))) for m in range(4) for s in (False, True) if not (m == 0 and s)]
    given = lambda u, v: 3.0 + np.cos(u) * v  # noqa: E731
    for inner in (0.0, 0.3 * A):
        cyl = Cylinder(A, L, K, inner_radius=inner)
        faces = {"bottom": Flux(500.0), "top": Convection(20.0, 300.0), "side": Temperature(350.0)}
        if inner:
            faces["bore"] = Insulated()
        model = CylinderModel(cyl, faces)
        w = PolynomialLifting.from_terms(A, L, terms)
        for face, cond in faces.items():
            wall = face in ("side", "bore")
            s = rng.uniform(0.0, L, 5) if wall else rng.uniform(inner, A, 5)
            th = rng.uniform(0.0, 2 * math.pi, 7)
            for g in (None, given):
                data = OperatorData(model, w, face, cond, given=g)
                S, TH = np.meshgrid(s, th, indexing="ij")
                pointwise = data(TH, S) if wall else data(S, TH)
                assert np.allclose(data.grid(s, th), pointwise, rtol=1e-12, atol=1e-12 * np.abs(pointwise).max()), face
            # a constant field's operator is one number per face (T, 0 or h T): the same values
            const = PolynomialLifting.from_terms(A, L, [(0, False, (310.0, 0.0, 0.0))])
            S, TH = np.meshgrid(s, th, indexing="ij")
            u, v = (TH, S) if wall else (S, TH)
            direct = given(u, v) - model.face_operator(const, face, cond, u, v)
            assert np.allclose(OperatorData(model, const, face, cond, given=given).grid(s, th), direct,
                               rtol=1e-14, atol=1e-12), face
