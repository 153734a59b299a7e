"""The hollow part's exact series against textbook closed forms, heat balance and the
field's own equations.

Closed forms (steady one-dimensional radial conduction through a tube wall, any heat-transfer
textbook): T(r) = T_i + (T_o - T_i) ln(r / a) / ln(b / a); heat per length
Q' = 2 pi k (T_i - T_o) / ln(b / a); with convection outside, Q' = (T_i - T_inf) / R',
R' = ln(b / a) / (2 pi k) + 1 / (2 pi b h).  A single harmonic in a long tube is
A r^m + B r^-m (separation of variables of Laplace's equation in polar coordinates).
"""

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, ForwardModelError,
                               IllPosedError, Insulated, Temperature, UnknownFlux,
                               UnknownTemperature)

A, B, L, K = 0.05, 0.08, 0.6, 45.0


def _tube(**kw):
    return Cylinder(B, L, K, inner_radius=A, **kw)


def _long():
    return Cylinder(B, math.inf, K, inner_radius=A, long=True)


@pytest.mark.parametrize("ratio", [1.01, 1.6, 100.0])
def test_radial_wall_log_profile_and_heat_per_length(ratio):
    """T(r) and Q' through a tube wall, both wall temperatures given (textbook closed form),
    from a thin wall (b/a = 1.01) to a small bore in a thick block (b/a = 100)."""
    a = B / ratio
    ti, to = 500.0, 300.0
    faces = {"bore": Temperature(ti), "side": Temperature(to), "bottom": Insulated(), "top": Insulated()}
    model = CylinderModel(Cylinder(B, L, K, inner_radius=a), faces)
    r = np.linspace(a, B, 9)
    exact = ti + (to - ti) * np.log(r / a) / math.log(B / a)
    got = model.temperature(r, np.linspace(0, 6, 9), np.linspace(0, L, 9))
    assert np.all(np.isfinite(got))
    assert np.abs(got - exact).max() < 1e-8 * (ti - to)
    q_per_length = 2 * math.pi * K * (ti - to) / math.log(B / a)
    assert model.face_power("bore") == pytest.approx(q_per_length * L, rel=1e-9)
    assert model.face_power("side") == pytest.approx(-q_per_length * L, rel=1e-9)


@pytest.mark.parametrize("long", [False, True])
def test_convection_outside_overall_resistance(long):
    """Q' = (T_i - T_inf) / (ln(b/a) / (2 pi k) + 1 / (2 pi b h)) (textbook closed form);
    the long tube gives it per metre, the finite tube with insulated ends times L."""
    ti, tinf, h = 480.0, 295.0, 25.0
    faces = {"bore": Temperature(ti), "side": Convection(h, tinf)}
    cyl = _long() if long else _tube()
    if not long:
        faces.update(bottom=Insulated(), top=Insulated())
    model = CylinderModel(cyl, faces)
    resistance = math.log(B / A) / (2 * math.pi * K) + 1 / (2 * math.pi * B * h)
    q_per_length = (ti - tinf) / resistance
    length = 1.0 if long else L
    assert model.face_power("bore") == pytest.approx(q_per_length * length, rel=1e-9)
    t_outer = ti - q_per_length * math.log(B / A) / (2 * math.pi * K)
    assert model.temperature([B], [0.4], [0.2])[0] == pytest.approx(t_outer, abs=1e-8)


@pytest.mark.parametrize("m", [1, 2, 5])
def test_long_tube_harmonic_closed_form(m):
    """T = T_0 + (A r^m + B r^-m) cos(m theta) in a long tube with a harmonic on the bore and
    convection outside: A, B from the two wall conditions (polar separation of variables)."""
    h, t0, amp = 40.0, 300.0, 12.0
    faces = {"bore": Temperature(lambda th, z: t0 + amp * np.cos(m * th)), "side": Convection(h, t0)}
    model = CylinderModel(_long(), faces)
    # bore: A a^m + B a^-m = amp;  side: k d/dr + h = 0 at b
    M = np.array([[A ** m, A ** -m],
                  [K * m * B ** (m - 1) + h * B ** m, -K * m * B ** (-m - 1) + h * B ** -m]])
    ca, cb = np.linalg.solve(M, [amp, 0.0])
    r = np.linspace(A, B, 7)
    th = np.linspace(0.3, 5.0, 7)
    exact = t0 + (ca * r ** m + cb * r ** -m) * np.cos(m * th)
    got = model.temperature(r, th, np.full(7, 123.0))  # any z: nothing varies along a long part
    assert np.abs(got - exact).max() < 1e-9 * amp


def test_long_part_refuses_data_that_vary_along_z():
    faces = {"bore": Temperature(lambda th, z: 400 + z), "side": Insulated()}
    with pytest.raises(ForwardModelError, match="vary along z"):
        CylinderModel(_long(), faces)


@pytest.mark.parametrize("faces, pattern", [
    ({"bore": Insulated(), "side": Flux(100.0), "bottom": Insulated(), "top": Insulated()}, "nowhere to go"),
    ({"bore": UnknownFlux(), "side": Flux(100.0), "bottom": Insulated(), "top": Insulated()}, "level"),
])
def test_ill_posed_hollow_setups_refused(faces, pattern):
    with pytest.raises(IllPosedError, match=pattern):
        CylinderModel(_tube(), faces)


def test_geometry_refusals():
    with pytest.raises(ForwardModelError, match="inner_radius"):
        Cylinder(B, L, K, inner_radius=B)
    with pytest.raises(ForwardModelError, match="long"):
        Cylinder(B, math.inf, K, inner_radius=A)
    with pytest.raises(ForwardModelError, match="hollow"):
        Cylinder(B, math.inf, K, long=True)
    with pytest.raises(ForwardModelError, match="bore"):
        CylinderModel(Cylinder(B, L, K), {"bottom": Insulated(), "top": Temperature(300.0),
                                          "side": Insulated(), "bore": Insulated()})


# ---------------------------------------------------------------- properties on random set-ups
KINDS = ("temperature", "flux", "insulated", "convection")


def _wall_profile(v, c, length):
    return lambda t, z: v + c[0] * np.cos(t) * np.sin(np.pi * z / length) + c[1] * np.sin(2 * t) + c[2] * z / length


def _end_profile(v, c, a, b):
    return lambda r, t: v + c[0] * (r - a) / (b - a) * np.cos(t) + c[1] * np.sin(2 * t) + c[2] * np.cos(np.pi * (r - a) / (b - a))


@st.composite
def hollow_cases(draw):
    a = B / draw(st.sampled_from([1.05, 1.5, 3.0, 10.0]))
    length = B * draw(st.floats(0.4, 3.0))
    faces = {}
    for face in ("bottom", "top", "side", "bore"):
        kind = draw(st.sampled_from(KINDS))
        c = [draw(st.floats(-15.0, 15.0)) for _ in range(3)]
        prof = draw(st.booleans())
        wall = face in ("side", "bore")

        def make(v, scale=1.0):
            if not prof:
                return v
            cc = [x * scale for x in c]
            return _wall_profile(v, cc, length) if wall else _end_profile(v, cc, a, B)
        if kind == "temperature":
            faces[face] = Temperature(make(draw(st.floats(280.0, 500.0))))
        elif kind == "flux":
            faces[face] = Flux(make(draw(st.floats(-2e4, 2e4)), 500.0))
        elif kind == "insulated":
            faces[face] = Insulated()
        else:
            faces[face] = Convection(draw(st.floats(5.0, 2000.0)), make(draw(st.floats(280.0, 400.0))))
    if all(f.kind == "N" for f in faces.values()):
        faces["bore"] = Temperature(350.0)
    return Cylinder(B, length, K, inner_radius=a), faces


def _laplacian(model, r, th, z, h):
    """Central second differences in Cartesian coordinates (textbook 7-point stencil)."""
    x, y = r * np.cos(th), r * np.sin(th)

    def t(xx, yy, zz):
        return model.temperature(np.hypot(xx, yy), np.arctan2(yy, xx), zz)
    c = t(x, y, z)
    return (t(x + h, y, z) + t(x - h, y, z) + t(x, y + h, z) + t(x, y - h, z) + t(x, y, z + h)
            + t(x, y, z - h) - 6 * c) / h ** 2


@settings(max_examples=10, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow])
@given(hollow_cases())
def test_random_hollow_setups_laplace_faces_and_balance(case):
    cyl, faces = case
    model = CylinderModel(cyl, faces, tolerance=1e-9)
    a, b, length = cyl.inner_radius, cyl.radius, cyl.height
    scale = model.temperature_scale
    # heat balance of the whole part (and so of every sub-problem's sum) to 1e-6
    powers = [model.face_power(f) for f in cyl.faces]
    size = max(abs(p) for p in powers) + K * scale * min(b - a, length)
    assert abs(sum(powers)) < 1e-6 * size
    # Laplace's equation at interior points
    rng = np.random.default_rng(3)
    r = a + (b - a) * rng.uniform(0.3, 0.7, 5)
    th = rng.uniform(0, 2 * np.pi, 5)
    z = length * rng.uniform(0.3, 0.7, 5)
    h = 0.02 * min(b - a, length)
    lap = _laplacian(model, r, th, z, h)
    curvature = scale / min(b - a, length) ** 2
    assert np.abs(lap).max() < 2e-3 * curvature
    # each wall's condition at mid-height points
    tt = np.linspace(0, 2 * np.pi, 7)[:-1]
    zz = np.full(tt.size, 0.5 * length)
    for face in ("side", "bore"):
        cond = faces[face]
        r_w = cyl.wall_radius(face)
        vals = model.evaluate(np.full(tt.size, r_w), tt, zz)
        dn = (1.0 if face == "side" else -1.0) * vals.gradient[0]
        lhs = cond.operator(vals.temperature, dn, K)
        rhs = cond.data(tt, zz)
        natural = cond.homogeneous.datum_scale(K, min(b - a, length)) * scale
        assert np.abs(lhs - rhs).max() < 5e-3 * natural, face
