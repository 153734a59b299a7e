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


# ------------------------------------------------------------------ hollow parts (tubes)
from scipy.special import iv as _iv, kv as _kv  # noqa: E402

from fem_tube import solve_long_field, solve_long_tube  # noqa: E402

AI, AO, LT, KT = 0.05, 0.08, 0.10, 45.0  # bore [m], outer radius [m], length [m], k [W/(m K)]
RT = np.linspace(AI, AO, 31)
INSULATED_ENDS = {"bottom": ("N", 0.0), "top": ("N", 0.0)}
RADIAL = "Incropera, Fundamentals of Heat and Mass Transfer, sec. 3.3, radial systems (from memory)"


SPAN_FRACTION = 1e-5  # reference FEM an order tighter than the 1e-4-of-span cross-check goal


def _near(actual, exact, frac=SPAN_FRACTION):
    """max |actual - exact| <= frac * span of the exact values."""
    err = np.abs(np.asarray(actual) - np.asarray(exact)).max()
    assert err <= frac * np.ptp(exact), f"error {err:.3g} = {err / np.ptp(exact):.3g} of the span"


def _radial(ti, to):
    """Tube wall with both wall temperatures: T(r) and heat per length into the bore [W/m]."""
    # T(r) = T_i + (T_o - T_i) ln(r/a) / ln(b/a); q' = 2 pi k (T_i - T_o) / ln(b/a)  (RADIAL)
    return ti + (to - ti) * np.log(RT / AI) / np.log(AO / AI), 2 * np.pi * KT * (ti - to) / np.log(AO / AI)


def _rm_coeffs(m, rows, rhs):
    """A, B of u = A r^m + B r^-m from two linear conditions (rows of [coef_A, coef_B])."""
    return np.linalg.solve(np.array(rows, float), np.array(rhs, float))


def test_tube_wall_long_both_temperatures():
    ti, to = 500.0, 400.0
    exact, q_len = _radial(ti, to)
    sol = solve_long_tube(AI, AO, KT, 0, {"bore": ("D", ti), "side": ("D", to)}, n=16)
    _near(sol.temperature(RT), exact)                                            # RADIAL
    assert sol.heat_in("bore") == pytest.approx(q_len, rel=1e-7)                # RADIAL
    assert sol.heat_in("side") == pytest.approx(-q_len, rel=1e-7)               # RADIAL
    # Fourier's law: dT/dr = (T_o - T_i) / (r ln(b/a))  (RADIAL)
    np.testing.assert_allclose(sol.gradient(RT), (to - ti) / (RT * np.log(AO / AI)), rtol=2e-3)


def test_tube_wall_rz_insulated_ends_both_temperatures():
    ti, to = 500.0, 400.0
    exact, q_len = _radial(ti, to)
    faces = dict(INSULATED_ENDS, bore=("D", ti), side=("D", to))
    sol = solve_harmonic(AO, LT, KT, 0, faces, nr=16, nz=8, inner_radius=AI)
    for z in (0.0, 0.037, LT):
        _near(sol.temperature(RT, np.full_like(RT, z)), exact)  # RADIAL
    assert sol.heat_in("bore") == pytest.approx(q_len * LT, rel=1e-7)           # RADIAL
    total = sum(sol.heat_in(f) for f in sol.face_names)
    assert abs(total) < 1e-10 * q_len * LT  # steady state: heat in = heat out (energy conservation)


@pytest.mark.parametrize("solver", ["long", "rz"])
def test_tube_wall_convection_outside(solver):
    ti, h, tinf = 520.0, 40.0, 295.0
    # overall resistance per length: ln(b/a)/(2 pi k) + 1/(2 pi b h)  (RADIAL)
    r_tot = np.log(AO / AI) / (2 * np.pi * KT) + 1.0 / (2 * np.pi * AO * h)
    q_len = (ti - tinf) / r_tot
    exact = ti - q_len * np.log(RT / AI) / (2 * np.pi * KT)
    walls = {"bore": ("D", ti), "side": ("R", h, tinf)}
    if solver == "long":
        sol = solve_long_tube(AI, AO, KT, 0, walls, n=16)
        T, heat = sol.temperature(RT), sol.heat_in("bore")
        balance = heat + sol.heat_in("side")
    else:
        sol = solve_harmonic(AO, LT, KT, 0, dict(INSULATED_ENDS, **walls), nr=16, nz=8, inner_radius=AI)
        T = sol.temperature(RT, np.full_like(RT, 0.5 * LT))
        heat = sol.heat_in("bore") / LT
        balance = sum(sol.heat_in(f) for f in sol.face_names) / LT
    _near(T, exact)                                                              # RADIAL
    assert heat == pytest.approx(q_len, rel=1e-7)                                # RADIAL
    assert abs(balance) < 1e-10 * q_len  # energy conservation


@pytest.mark.parametrize("solver", ["long", "rz"])
def test_tube_wall_convection_both_walls(solver):
    # fluid inside (h_i, T_fi) and outside (h_o, T_fo): resistances in series
    # 1/(2 pi a h_i) + ln(b/a)/(2 pi k) + 1/(2 pi b h_o) per length  (RADIAL)
    hi, tfi, ho, tfo = 900.0, 470.0, 25.0, 300.0
    r_tot = 1 / (2 * np.pi * AI * hi) + np.log(AO / AI) / (2 * np.pi * KT) + 1 / (2 * np.pi * AO * ho)
    q_len = (tfi - tfo) / r_tot
    t_bore = tfi - q_len / (2 * np.pi * AI * hi)
    exact = t_bore - q_len * np.log(RT / AI) / (2 * np.pi * KT)
    walls = {"bore": ("R", hi, tfi), "side": ("R", ho, tfo)}
    if solver == "long":
        sol = solve_long_tube(AI, AO, KT, 0, walls, n=16, grade={"bore": 2.0})
        T, heat = sol.temperature(RT), sol.heat_in("bore")
    else:
        sol = solve_harmonic(AO, LT, KT, 0, dict(INSULATED_ENDS, **walls), nr=16, nz=8,
                             inner_radius=AI, grade={"bore": 2.0})
        T, heat = sol.temperature(RT, np.full_like(RT, 0.02)), sol.heat_in("bore") / LT
    _near(T, exact)                                                              # RADIAL
    assert heat == pytest.approx(q_len, rel=1e-7)                                # RADIAL


@pytest.mark.parametrize("m", [1, 3, 8])
def test_long_tube_harmonic_flux_bore_convection_side(m):
    q, h, tinf = 2000.0, 300.0, 1.0
    # u = A r^m + B r^-m solves u'' + u'/r - m^2 u/r^2 = 0 (Carslaw & Jaeger, steady
    # conduction in a hollow cylinder, from memory); conditions: -k u'(a) = q, k u'(b) = h (Tinf - u(b))
    A_, B_ = _rm_coeffs(m, [[KT * m * AO ** (m - 1) + h * AO ** m, -KT * m * AO ** (-m - 1) + h * AO ** -m],
                            [-KT * m * AI ** (m - 1), KT * m * AI ** (-m - 1)]], [h * tinf, q])
    sol = solve_long_tube(AI, AO, KT, m, {"bore": ("N", q), "side": ("R", h, tinf)}, n=32,
                          grade={"bore": 2.0})
    exact = A_ * RT ** m + B_ * RT ** -m
    _near(sol.temperature(RT), exact)  # r^m, r^-m closed form
    assert sol.heat_in("bore") == 0.0  # a cos(m theta) field carries no net heat


def test_long_tube_vs_rz_harmonics_and_field():
    # nothing varies along z with insulated ends: the (r, z) solver must reproduce the
    # plane solution, harmonic by harmonic, including the r^m / r^-m closed form
    walls = {(0, "cos"): {"bore": ("R", 600.0, 450.0), "side": ("N", 1.5e4)},
             (2, "cos"): {"bore": ("R", 600.0, 0.0), "side": ("N", 3.0e3)},
             (5, "sin"): {"bore": ("D", 4.0), "side": ("N", 0.0)}}
    tube = solve_long_field(AI, AO, KT, walls, n=32)
    rz = {key: dict(INSULATED_ENDS, **w) for key, w in walls.items()}
    from fem_cylinder import solve_field
    fld = solve_field(AO, LT, KT, rz, nr=32, nz=8, inner_radius=AI)
    rng = np.random.default_rng(3)
    r = rng.uniform(AI, AO, 25)
    th = rng.uniform(0, 2 * np.pi, 25)
    z = rng.uniform(0, LT, 25)
    T1 = tube.temperature(r, th)
    _near(fld.temperature(r, th, z), T1)
    # m = 5 closed form with u(a) = 4, u'(b) = 0 (Carslaw & Jaeger, hollow cylinder, from memory)
    A_, B_ = _rm_coeffs(5, [[AI ** 5, AI ** -5], [5 * AO ** 4, -5 * AO ** -6]], [4.0, 0.0])
    _near(tube.harmonics[(5, "sin")].temperature(RT), A_ * RT ** 5 + B_ * RT ** -5)
    g1 = tube.gradient(r, th)
    g2 = fld.gradient(r, th, z)
    np.testing.assert_allclose(g2[0], g1[0], atol=2e-3 * np.abs(g1[0]).max())
    np.testing.assert_allclose(g2[1], g1[1], atol=2e-3 * np.abs(g1[1]).max())
    np.testing.assert_allclose(g2[2], 0.0, atol=2e-3 * np.abs(g1[0]).max())  # FE gradients: one order lower
    # heat: all of the side's heater power leaves through the bore (energy conservation)
    q_side = 1.5e4 * 2 * np.pi * AO
    assert tube.heat_in("side") == pytest.approx(q_side, rel=1e-12)
    assert tube.heat_in("bore") == pytest.approx(-q_side, rel=1e-8)
    assert fld.heat_in("bore") == pytest.approx(-q_side * LT, rel=1e-8)


@pytest.mark.parametrize("m", [0, 1])
def test_annulus_modified_bessel_cross_product(m):
    # u = [I_m(beta r) K_m(beta a) - I_m(beta a) K_m(beta r)] sin(beta z), beta = pi/L:
    # separation of variables for the hollow cylinder (Carslaw & Jaeger, from memory;
    # scipy.special.iv/kv); u = 0 on the bore and both ends, given on the side.
    beta = np.pi / LT

    def f(r):
        return _iv(m, beta * r) * _kv(m, beta * AI) - _iv(m, beta * AI) * _kv(m, beta * r)
    faces = {"bottom": ("D", 0.0), "top": ("D", 0.0), "bore": ("D", 0.0),
             "side": ("D", lambda s: f(AO) * np.sin(beta * s))}
    sol = solve_harmonic(AO, LT, KT, m, faces, nr=16, nz=48, inner_radius=AI)
    R, Z = np.meshgrid(RT, np.linspace(0, LT, 21), indexing="ij")
    exact = f(R) * np.sin(beta * Z)
    _near(sol.temperature(R, Z), exact)
    total = sum(sol.heat_in(f_) for f_ in sol.face_names)
    if m == 0:
        # heat into the side: 2 pi b k f'(b) int sin(beta z) dz = 2 pi b k f'(b) 2/beta (same closed form)
        dfb = beta * (_iv(1, beta * AO) * _kv(0, beta * AI) + _iv(0, beta * AI) * _kv(1, beta * AO))
        q_side = 2 * np.pi * AO * KT * dfb * 2 / beta
        assert sol.heat_in("side") == pytest.approx(q_side, rel=1e-5)
        assert abs(total) < 1e-9 * q_side  # energy conservation, the D faces split by residual
    else:
        assert total == 0.0


def test_tube_mesh_convergence_p2():
    # a priori P2 error O(h^3) for smooth solutions (Brenner & Scott, The Mathematical Theory
    # of Finite Element Methods, from memory); checked on the radial closed form (RADIAL)
    ti, to = 500.0, 400.0
    r = np.linspace(AI, AO, 2001)  # fine sampling: the largest error lies between nodes
    exact = ti + (to - ti) * np.log(r / AI) / np.log(AO / AI)
    long_err, rz_err = [], []
    for n in (4, 8, 16):
        s = solve_long_tube(AI, AO, KT, 0, {"bore": ("D", ti), "side": ("D", to)}, n=n)
        long_err.append(np.abs(s.temperature(r) - exact).max())
        s = solve_harmonic(AO, LT, KT, 0, dict(INSULATED_ENDS, bore=("D", ti), side=("D", to)),
                           nr=n, nz=n, inner_radius=AI)
        rz_err.append(np.abs(s.temperature(r, np.full_like(r, 0.05)) - exact).max())
    for errs in (long_err, rz_err):
        orders = np.log2(np.array(errs[:-1]) / np.array(errs[1:]))
        assert np.all(orders > 2.7), orders


def test_tube_graded_toward_bore():
    # steep r^-m decay from the bore (m = 12): grading toward the bore cuts the error there
    m = 12
    A_, B_ = _rm_coeffs(m, [[AI ** m, AI ** -m], [AO ** m, AO ** -m]], [1.0, 0.0])  # r^m, r^-m closed form (Carslaw & Jaeger, from memory)
    faces = dict(INSULATED_ENDS, bore=("D", 1.0), side=("D", 0.0))
    r = np.linspace(AI, AI + 0.006, 13)
    errs = {}
    for name, grade in (("uniform", None), ("graded", {"bore": 4.0})):
        sol = solve_harmonic(AO, LT, KT, m, faces, nr=8, nz=2, grade=grade, inner_radius=AI)
        errs[name] = np.abs(sol.temperature(r, np.full_like(r, 0.05)) - (A_ * r ** m + B_ * r ** -m)).max()
    dr = np.diff(sol.r_nodes)
    assert sol.r_nodes[0] == AI and sol.r_nodes[-1] == pytest.approx(AO)
    assert dr[-1] / dr[0] == pytest.approx(4.0)
    assert errs["graded"] < 0.5 * errs["uniform"]
    assert errs["graded"] < 2e-3


def test_hollow_errors():
    walls = dict(INSULATED_ENDS, bore=("D", 1.0), side=("D", 0.0))
    with pytest.raises(ValueError):
        solve_harmonic(AO, LT, KT, 0, walls, inner_radius=AO)            # bore as large as the part
    with pytest.raises(ValueError):
        solve_harmonic(AO, LT, KT, 0, dict(INSULATED_ENDS, side=("D", 0.0)), inner_radius=AI)  # bore missing
    with pytest.raises(ValueError):
        solve_harmonic(AO, LT, KT, 0, walls, inner_radius=AI, grade={"axis": 2.0})
    with pytest.raises(ValueError):
        solve_harmonic(AO, LT, KT, 0, {f: ("N", 0.0) for f in walls}, inner_radius=AI)  # level not fixed
    sol = solve_harmonic(AO, LT, KT, 0, walls, nr=3, nz=3, inner_radius=AI)
    with pytest.raises(ValueError):
        sol.temperature(0.5 * AI, 0.05)                                  # inside the bore
    with pytest.raises(ValueError):
        solve_long_tube(AI, AO, KT, 0, {"bore": ("N", 1.0), "side": ("N", -1.0)})
    with pytest.raises(ValueError):
        solve_long_tube(AO, AI, KT, 0, {"bore": ("D", 1.0), "side": ("N", 0.0)})


# ------------------------------------------------------------------ hollow scenarios
import scenario_fem as sf  # noqa: E402
import scenario_hollow as sh  # noqa: E402
from scipy.integrate import quad  # noqa: E402


@pytest.mark.parametrize("name", sh.NAMES)
def test_hollow_scenario_heat_balance_and_data(name):
    scn = sh.make(name, scale=0.5)
    truth, phys, _ = sh._PHYSICS[name]
    assert phys.inner_radius == sh.A_IN and scn.face == "bore"
    assert len(scn.readings.names) == 20 and np.all(np.isfinite(scn.readings.temperature))
    # sensors inside the wall, at the two drilled depths
    assert set(np.round(sh.B_OUT - scn.readings.r, 6)) == {0.010, 0.020}
    # m = 0 problem of the scenario: heaters in through the side, out through bore and ends
    faces = dict(phys.known)
    faces["bore"] = ("D" if phys.kind == "temperature" else "N", sf.amplitude(truth, "bore", 0, "cos"))
    sol = solve_harmonic(phys.radius, phys.height, phys.conductivity, 0, faces, nr=8, nz=60,
                         inner_radius=phys.inner_radius)
    heater = 2 * np.pi * sh.B_OUT * quad(sh.heater_flux, 0.0, phys.height, points=[0.06, 0.16, 0.24, 0.34],
                                         limit=200)[0]  # scipy.integrate.quad of the heater profile
    assert sol.heat_in("side") == pytest.approx(heater, rel=1e-7)
    total = sum(sol.heat_in(f) for f in sol.face_names)
    assert abs(total) < 1e-9 * heater  # energy conservation
    assert scn.fem["fem_heat_in"] == pytest.approx(sol.heat_in("bore"), rel=1e-6)
    if phys.kind == "flux":
        # the truth's area integral (midpoint rule) equals the FEM's bore heat in (data of an N face)
        assert scn.power == pytest.approx(sol.heat_in("bore"), rel=1e-4)
    assert scn.power < 0  # the wall heats the fluid: heat into the part through the bore is negative


def test_hollow_scenario_zone_means_and_truth():
    scn = sh.make("tube_bore_temperature", scale=0.5)
    zm = scn.zone_means
    # the cooler streak sits below the rest of the band, the warm end above it (by construction)
    assert zm["cool streak"] < zm["bore 0-90 deg"] - 4.0
    assert zm["warm end"] > zm["bore 0-90 deg"] + 10.0
    # a full-turn window's mean by scipy.integrate.dblquad of the truth (the face is a cylinder)
    from scipy.integrate import dblquad
    exact = dblquad(lambda z, th: scn.truth(th, z), 0, 2 * np.pi, 0.32, 0.40)[0] / (2 * np.pi * 0.08)
    assert zm["warm end"] == pytest.approx(exact, abs=1e-3)
    grid = {"r_m": _Col(np.full(3, sh.A_IN)), "theta_rad": _Col(np.array([0.0, 4.36, 1.0])),
            "z_m": _Col(np.array([0.2, 0.2, 0.39]))}
    on = scn.truth_on(grid)  # (theta, z) columns read on the bore: streak 8.5 K below the far side
    assert on[0] - on[1] > 8.5 and on[2] > on[0] + 10.0
    with pytest.raises(KeyError):
        sh.make("no_such_tube")


class _Col:
    def __init__(self, values):
        self._v = values

    def to_numpy(self):
        return self._v


# ------------------------------------------------------------------ the tube demo's files
def test_tube_demo_files_consistent():
    import json
    import tomllib
    from pathlib import Path
    here = Path(__file__).resolve().parent.parent / "demo_data" / "tube"
    case = tomllib.loads((here / "tube.toml").read_text())
    assert case["part"] == {"radius": "80 mm", "inner_radius": "50 mm", "height": "600 mm",
                            "conductivity": "45 W/(m*K)"}
    assert case["faces"]["bore"]["condition"] == "unknown-temperature"
    assert all(set(z) == {"name", "theta", "z"} for z in case["zones"])
    lay = np.genfromtxt(here / "layout.csv", delimiter=",", skip_header=1, usecols=(1, 2, 3, 4))
    assert lay.shape == (20, 4) and np.all((lay[:, 0] > 50) & (lay[:, 0] < 80))
    assert set(80 - lay[:, 0]) == {10.0, 20.0}                    # two drilled depths [mm]
    prof = np.genfromtxt(here / "side_heaters.csv", delimiter=",", skip_header=1)
    truth = json.loads((here / "truth.json").read_text())
    # heater power: 2 pi b int q dz of the piecewise linear profile (trapezoidal rule, exact here)
    z, q = prof[:, 1] * 1e-3, prof[:, 2]
    heaters = 2 * np.pi * 0.080 * float(np.sum(0.5 * (q[1:] + q[:-1]) * np.diff(z)))
    assert heaters == pytest.approx(2 * np.pi * 0.080 * 0.180 * (11e3 + 9e3), rel=1e-12)  # two 180 mm bands
    assert truth["heater_power_W"] == pytest.approx(heaters, rel=1e-9)
    # steady state: heaters = heat into the fluid + flange losses (energy conservation)
    assert truth["heat_into_fluid_W"] + truth["flange_loss_W"] == pytest.approx(heaters, rel=1e-9)
    assert truth["total_power_W"] == pytest.approx(-truth["heat_into_fluid_W"])
    # the fouled side runs warmer and passes less heat to the liquid than the other sectors
    tz, qz = truth["zone_mean_degC"], truth["zone_mean_flux_into_fluid_W_m2"]
    others = ("sector 240-340", "sector 340-60", "sector 60-160")
    assert all(tz["fouled side 160-240"] > tz[o] + 4.0 for o in others)
    assert all(qz["fouled side 160-240"] < 0.7 * qz[o] for o in others)
