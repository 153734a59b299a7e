"""Exact limits of the forward model: closed-form solutions of Laplace's equation.

Each closed form is a textbook separated solution or a harmonic polynomial, named beside
the check.  Temperatures are absolute kelvin throughout.
"""

import math

import numpy as np
import pytest
from scipy import optimize, special

from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature)

A, L, K = 0.05, 0.08, 20.0  # radius [m], height [m], conductivity [W/(m K)]
LAM01 = special.jn_zeros(0, 1)[0]  # first zero of J_0 (scipy.special.jn_zeros, reference library)


def _grid(a, length, n=9, z_lo=0.0, z_hi=1.0, r_lo=0.0, r_hi=1.0):
    r = np.linspace(r_lo * a, r_hi * a, n)
    z = np.linspace(z_lo * length, z_hi * length, n)
    R, Z = np.meshgrid(r, z, indexing="ij")
    TH = np.linspace(0.0, 2.0 * np.pi, R.size).reshape(R.shape)
    return R.ravel(), TH.ravel(), Z.ravel()


# ------------------------------------------------------------------- 1-D plane wall


@pytest.mark.parametrize("q, h, tamb", [(5.0e4, 250.0, 300.0), (-3.0e3, 12.0, 290.0), (1.0e6, 5.0e3, 350.0)])
def test_plane_wall_flux_bottom_convection_top(q, h, tamb):
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Flux(q), "side": Insulated(),
                                              "top": Convection(h, tamb)})
    r, th, z = _grid(A, L)
    fv = model.evaluate(r, th, z)
    exact = tamb + q / h + q * (L - z) / K
    # plane wall, flux in at one face, convection at the other: textbook closed form
    # (Incropera, Fundamentals of Heat and Mass Transfer, ch. 3, from memory)
    np.testing.assert_allclose(fv.temperature, exact, rtol=1e-9)
    np.testing.assert_allclose(fv.heat_flux[2], q, rtol=1e-9, atol=1e-9 * abs(q))  # Fourier's law
    np.testing.assert_allclose(fv.heat_flux[:2], 0.0, atol=1e-9 * abs(q))
    assert model.face_power("bottom") == pytest.approx(q * math.pi * A * A, rel=1e-9)
    assert model.face_power("top") == pytest.approx(-q * math.pi * A * A, rel=1e-9)
    assert abs(model.face_power("side")) < 1e-9 * abs(q) * math.pi * A * A
    assert [s.face for s in model.series] == ["bottom"]


def test_faces_the_lifting_meets_are_not_sampled(monkeypatch):
    """An insulated side and a top at the reference ambient have no data beyond the constant
    lifting: the model does not sample them for a series (a speed rule; the field is the
    closed form above either way)."""
    sampled = []
    real = CylinderModel._residual_data
    monkeypatch.setattr(CylinderModel, "_residual_data",
                        lambda self, face, cond: sampled.append(face) or real(self, face, cond))
    CylinderModel(Cylinder(A, L, K), {"bottom": Flux(5e4), "side": Insulated(), "top": Convection(250.0, 300.0)})
    assert sampled == ["bottom"]
    sampled.clear()
    CylinderModel(Cylinder(A, L, K), {"bottom": Flux(5e4), "side": Insulated(), "top": Convection(250.0, lambda r, t: 300.0 + r)})
    # a profile ambient: no reference lifting, the top sampled; the insulated side still not
    assert sorted(sampled) == ["bottom", "top"]


def test_plane_wall_two_temperatures_and_semi_infinite_constant():
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Temperature(420.0), "side": Insulated(),
                                              "top": Temperature(300.0)})
    r, th, z = _grid(A, L)
    # plane wall between two temperatures: linear profile (textbook closed form)
    np.testing.assert_allclose(model.temperature(r, th, z), 420.0 - 120.0 * z / L, rtol=1e-11)
    assert model.face_power("bottom") == pytest.approx(K * 120.0 / L * math.pi * A * A, rel=1e-9)
    semi = CylinderModel(Cylinder(A, math.inf, K), {"bottom": Temperature(333.0), "side": Insulated()})
    r, th, z = _grid(A, 10 * A)
    np.testing.assert_allclose(semi.temperature(r, th, z), 333.0, rtol=1e-11)  # uniform: trivially harmonic


# ---------------------------------------------------------------- separated solutions


def test_j0_sinh_profile_all_temperature_faces():
    t0, dt = 300.0, 50.0
    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Temperature(lambda r, t: t0 + dt * special.j0(LAM01 * r / A)),
        "side": Temperature(t0), "top": Temperature(t0)})
    r, th, z = _grid(A, L)
    fv = model.evaluate(r, th, z)
    s = np.sinh(LAM01 * (L - z) / A) / np.sinh(LAM01 * L / A)
    # T = t0 + dt J0(lam r/a) sinh(lam (L - z)/a) / sinh(lam L/a): separation of variables (textbook)
    np.testing.assert_allclose(fv.temperature, t0 + dt * special.j0(LAM01 * r / A) * s, atol=1e-10 * dt)
    dtdr = -dt * (LAM01 / A) * special.j1(LAM01 * r / A) * s
    dtdz = -dt * (LAM01 / A) * special.j0(LAM01 * r / A) * np.cosh(LAM01 * (L - z) / A) / np.sinh(LAM01 * L / A)
    np.testing.assert_allclose(fv.gradient[0], dtdr, atol=1e-9 * dt / A)  # same closed form, differentiated
    np.testing.assert_allclose(fv.gradient[2], dtdz, atol=1e-9 * dt / A)
    # heat in at z = 0: 2 pi k a dt J1(lam) coth(lam L / a) (same closed form)
    q_in = 2 * math.pi * K * A * dt * special.j1(LAM01) / math.tanh(LAM01 * L / A)
    assert model.face_power("bottom") == pytest.approx(q_in, rel=1e-8)


def test_j0_cosh_flux_profile_insulated_top():
    t0, q0 = 300.0, 2.0e4
    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Flux(lambda r, t: q0 * special.j0(LAM01 * r / A)),
        "side": Temperature(t0), "top": Insulated()})
    r, th, z = _grid(A, L)
    kap = LAM01 / A
    # T = t0 + q0/(k kappa) J0(kappa r) cosh(kappa (L - z)) / sinh(kappa L): separation of variables (textbook)
    exact = t0 + q0 / (K * kap) * special.j0(kap * r) * np.cosh(kap * (L - z)) / np.sinh(kap * L)
    np.testing.assert_allclose(model.temperature(r, th, z), exact, atol=1e-10 * q0 / (K * kap))


def test_i1_sin_side_profile():
    t0, dt = 300.0, 40.0
    beta = math.pi / L
    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Temperature(t0), "top": Temperature(t0),
        "side": Temperature(lambda t, z: t0 + dt * np.sin(math.pi * z / L) * np.cos(t))})
    r, th, z = _grid(A, L)
    fv = model.evaluate(r, th, z)
    rad = special.iv(1, beta * r) / special.iv(1, beta * A)
    # T = t0 + dt I1(beta r)/I1(beta a) sin(beta z) cos(theta): separation of variables (textbook)
    np.testing.assert_allclose(fv.temperature, t0 + dt * rad * np.sin(beta * z) * np.cos(th), atol=1e-10 * dt)
    drad = beta * special.ivp(1, beta * r) / special.iv(1, beta * A)
    np.testing.assert_allclose(fv.gradient[0], dt * drad * np.sin(beta * z) * np.cos(th), atol=1e-9 * dt / A)
    # (1/r) dT/dtheta = -dt I1(beta r)/(r I1(beta a)) sin(beta z) sin(theta); finite on the axis
    with np.errstate(invalid="ignore", divide="ignore"):
        i1_over_r = np.where(r > 0, special.iv(1, beta * r) / r, beta / 2)
    np.testing.assert_allclose(fv.gradient[1], -dt * i1_over_r / special.iv(1, beta * A) * np.sin(beta * z) * np.sin(th),
                               atol=1e-9 * dt / A)


def test_side_convection_cosh_profile():
    """Side convection with a Robin radial eigenvalue: T = Ta + dT J0(lam r/a) cosh(lam z/a)/cosh(lam L/a)
    with insulated bottom, i.e. lam J1(lam) = Bi J0(lam) (textbook separated solution); lam from
    scipy.optimize.brentq (reference library), independent of the model's root finder."""
    h, ta, dt = 400.0, 300.0, 30.0
    bi = h * A / K
    lam = optimize.brentq(lambda x: x * special.j1(x) - bi * special.j0(x), 1e-6, LAM01, xtol=1e-15)
    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Insulated(), "side": Convection(h, ta),
        "top": Temperature(lambda r, t: ta + dt * special.j0(lam * r / A))})
    # interior points: the side series expands h * Tamb (absolute kelvin) in axial functions
    # that vanish at the top edge, so on the faces it converges only slowly (see the report)
    r, th, z = _grid(A, L, z_hi=0.95, r_hi=0.95)
    exact = ta + dt * special.j0(lam * r / A) * np.cosh(lam * z / A) / np.cosh(lam * L / A)
    np.testing.assert_allclose(model.temperature(r, th, z), exact, atol=1e-10 * dt)


# ------------------------------------------------------------------ harmonic polynomials


C1, C2, C3, C4 = 2.0e4, 3.0e3, 4.0e3, 1.5e5


def _poly(r, th, z):
    """A sum of harmonic polynomials (each solves Laplace's equation; textbook, e.g. the solid
    harmonics r^m cos(m theta) P(z)): z^2 - r^2/2, r z cos(theta), r^2 sin(2 theta), z^3 - 3 r^2 z / 2."""
    return (350.0 + C1 * (z * z - r * r / 2) + C2 * r * z * np.cos(th) + C3 * r * r * np.sin(2 * th)
            + C4 * (z ** 3 - 1.5 * r * r * z))


def _poly_grad(r, th, z):
    dr = -C1 * r + C2 * z * np.cos(th) + 2 * C3 * r * np.sin(2 * th) - 3 * C4 * r * z
    dth = -C2 * z * np.sin(th) + 2 * C3 * r * np.cos(2 * th)  # (1/r) dT/dtheta
    dz = 2 * C1 * z + C2 * r * np.cos(th) + C4 * (3 * z * z - 1.5 * r * r)
    return np.stack([dr, dth, dz])


def test_harmonic_polynomial_r_z_cos_all_temperature_faces_exact():
    c = 1.0e4
    exact = lambda r, t, z: 300.0 + c * r * z * np.cos(t)  # noqa: E731  (harmonic: textbook)
    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Temperature(lambda r, t: exact(r, t, 0.0)), "top": Temperature(lambda r, t: exact(r, t, L)),
        "side": Temperature(lambda t, z: exact(A, t, z))})
    r, th, z = _grid(A, L)  # includes the faces and the edges
    np.testing.assert_allclose(model.temperature(r, th, z), exact(r, th, z), rtol=1e-12)


def test_harmonic_polynomial_all_temperature_faces():
    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Temperature(lambda r, t: _poly(r, t, 0.0)), "top": Temperature(lambda r, t: _poly(r, t, L)),
        "side": Temperature(lambda t, z: _poly(A, t, z))})
    r, th, z = _grid(A, L, z_lo=0.05, z_hi=0.95, r_hi=0.95)
    fv = model.evaluate(r, th, z)
    span = np.ptp(_poly(r, th, z))
    # harmonic polynomial data on every face: the solution is the polynomial itself (textbook)
    np.testing.assert_allclose(fv.temperature, _poly(r, th, z), atol=1e-9 * span)
    np.testing.assert_allclose(fv.gradient, _poly_grad(r, th, z), atol=1e-7 * span / A)


def test_harmonic_polynomial_mixed_faces():
    """Flux bottom, convection top, temperature side, all taken from the same polynomial."""
    h = 150.0

    def qin_bottom(r, t):  # heat INTO the part at z = 0: k dT/dn = -k dT/dz
        return -K * _poly_grad(r, t, 0.0)[2]

    def tamb_top(r, t):  # -k dT/dz = h (T - Tamb) at z = L
        return _poly(r, t, L) + K * _poly_grad(r, t, L)[2] / h

    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Flux(qin_bottom), "top": Convection(h, tamb_top),
        "side": Temperature(lambda t, z: _poly(A, t, z))})
    r, th, z = _grid(A, L, z_lo=0.05, z_hi=0.95, r_hi=0.95)
    span = np.ptp(_poly(r, th, z))
    np.testing.assert_allclose(model.temperature(r, th, z), _poly(r, th, z), atol=1e-9 * span)  # textbook


def test_harmonic_polynomial_flux_side_convection_bottom():
    h = 800.0

    def qin_side(t, z):  # heat INTO the part at r = a: k dT/dr
        return K * _poly_grad(A, t, z)[0]

    def tamb_bottom(r, t):  # -k (-dT/dz) = h (T - Tamb) at z = 0
        return _poly(r, t, 0.0) - K * _poly_grad(r, t, 0.0)[2] / h

    model = CylinderModel(Cylinder(A, L, K), {
        "bottom": Convection(h, tamb_bottom), "top": Temperature(lambda r, t: _poly(r, t, L)),
        "side": Flux(qin_side)})
    r, th, z = _grid(A, L, z_lo=0.05, z_hi=0.95, r_hi=0.95)
    span = np.ptp(_poly(r, th, z))
    np.testing.assert_allclose(model.temperature(r, th, z), _poly(r, th, z), atol=1e-8 * span)  # textbook


# ---------------------------------------------------------------- semi-infinite parts


def test_semi_infinite_j0_decay_temperature_side():
    t0, dt = 300.0, 60.0
    model = CylinderModel(Cylinder(A, math.inf, K), {
        "bottom": Temperature(lambda r, t: t0 + dt * special.j0(LAM01 * r / A)), "side": Temperature(t0)})
    r, th, z = _grid(A, 6 * A)
    fv = model.evaluate(r, th, z)
    decay = np.exp(-LAM01 * z / A)
    # T = t0 + dt J0(lam r/a) exp(-lam z/a): separation of variables on a semi-infinite rod (textbook)
    np.testing.assert_allclose(fv.temperature, t0 + dt * special.j0(LAM01 * r / A) * decay, atol=1e-10 * dt)
    np.testing.assert_allclose(fv.gradient[2], -dt * LAM01 / A * special.j0(LAM01 * r / A) * decay,
                               atol=1e-9 * dt / A)
    far = model.temperature(0.0, 0.0, 1e4 * A)
    assert far == pytest.approx(t0, abs=1e-12 * t0)


def test_semi_infinite_convection_side_fin():
    """Semi-infinite rod (a fin) with a bottom profile on the first Robin mode:
    T = Ta + dT J0(lam r/a) exp(-lam z/a), lam J1 = Bi J0 (textbook); lam by scipy brentq."""
    h, ta, dt = 60.0, 295.0, 25.0
    bi = h * A / K
    lam = optimize.brentq(lambda x: x * special.j1(x) - bi * special.j0(x), 1e-6, LAM01, xtol=1e-15)
    model = CylinderModel(Cylinder(A, math.inf, K), {
        "bottom": Temperature(lambda r, t: ta + dt * special.j0(lam * r / A)), "side": Convection(h, ta)})
    r, th, z = _grid(A, 20 * A)
    exact = ta + dt * special.j0(lam * r / A) * np.exp(-lam * z / A)
    np.testing.assert_allclose(model.temperature(r, th, z), exact, atol=1e-10 * dt)


def test_semi_infinite_theta_profile_side_carried_exactly():
    """Side T0 + c cos(2 theta), insulated bottom: T = T0 + c (r/a)^2 cos(2 theta) for all z
    (a harmonic polynomial, textbook)."""
    model = CylinderModel(Cylinder(A, math.inf, K), {
        "bottom": Insulated(), "side": Temperature(lambda t, z: 310.0 + 7.0 * np.cos(2 * t))})
    r, th, z = _grid(A, 5 * A)
    np.testing.assert_allclose(model.temperature(r, th, z), 310.0 + 7.0 * (r / A) ** 2 * np.cos(2 * th),
                               rtol=1e-12)


# ------------------------------------------------------------ extreme aspect ratios


@pytest.mark.parametrize("ratio", [400.0, 2000.0])
def test_long_part_no_overflow(ratio):
    """kappa L = lam L / a ~ 1e3 .. 5e3: the decaying-exponential form must neither overflow nor
    lose digits; far from the top the field is the semi-infinite closed form (textbook)."""
    t0, dt = 300.0, 50.0
    length = ratio * A
    model = CylinderModel(Cylinder(A, length, K), {
        "bottom": Temperature(lambda r, t: t0 + dt * special.j0(LAM01 * r / A)), "side": Temperature(t0),
        "top": Convection(10.0, t0)})
    r, th, z = _grid(A, 8 * A)
    fv = model.evaluate(np.r_[r, 0.0, 0.5 * A], np.r_[th, 0.0, 0.0], np.r_[z, length, 0.99 * length])
    assert np.all(np.isfinite(fv.temperature)) and np.all(np.isfinite(fv.gradient))
    exact = t0 + dt * special.j0(LAM01 * r / A) * np.exp(-LAM01 * z / A)
    np.testing.assert_allclose(fv.temperature[:-2], exact, atol=1e-10 * dt)
    np.testing.assert_allclose(fv.temperature[-2:], t0, atol=1e-10 * dt)


def test_thin_disk_side_data_large_beta_a():
    """L = a / 200: beta a = pi a / L ~ 630; I_m(beta r)/I_m(beta a) must come from scaled values."""
    t0, dt, length = 300.0, 20.0, A / 200.0
    beta = math.pi / length
    model = CylinderModel(Cylinder(A, length, K), {
        "bottom": Temperature(t0), "top": Temperature(t0),
        "side": Temperature(lambda t, z: t0 + dt * np.sin(beta * z) * np.cos(2 * t))})
    r = A - np.array([0.0, 0.2, 1.0, 3.0, 10.0]) / beta
    r = np.r_[r, 0.5 * A]
    z = np.full(r.size, 0.3 * length)
    th = np.full(r.size, 0.2)
    fv = model.evaluate(r, th, z)
    # T = t0 + dt I2(beta r)/I2(beta a) sin(beta z) cos(2 theta) (textbook); ratio from scipy.special.ive
    ratio = special.ive(2, beta * r) / special.ive(2, beta * A) * np.exp(beta * (r - A))
    np.testing.assert_allclose(fv.temperature, t0 + dt * ratio * np.sin(beta * z) * np.cos(2 * th), atol=1e-10 * dt)
    assert np.all(np.isfinite(fv.gradient))
