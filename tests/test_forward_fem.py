"""Finite-element cross-check of the forward model (scikit-fem, through tests/fem_cylinder.py).

The reference solves each azimuthal harmonic u_m(r, z) cos|sin(m theta) with P2 triangles
(scikit-fem, reference library); it shares no code with the series model.  Both get the
same numbers (absolute kelvin, W/m^2).  Agreement is required within 1e-4 of the
temperature span at interior points.
"""

import math

import numpy as np
import pytest
from scipy import special

from fem_cylinder import solve_field, solve_harmonic
from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature,
                     UnknownFlux, UnknownTemperature)

A, L, K = 0.05, 0.08, 20.0  # radius [m], height [m], conductivity [W/(m K)]
TOL = 1e-4  # of the temperature span


def _const(v):
    return lambda s: v + 0.0 * np.asarray(s, float)


def _build(spec):
    """spec: face -> ('D', {m: g_m}) | ('N', {m: q_m}) | ('R', h, {m: Tamb_m}); g_m(s) is the
    amplitude of cos(m theta), s = r on end faces and z on the side.  Returns the model's face
    conditions and the FEM's faces per harmonic, built from the same functions."""
    faces, orders = {}, set()
    for f, s in spec.items():
        orders |= set(s[-1])
    for f, s in spec.items():
        amps = s[-1]

        def profile(u, v, amps=amps, f=f):
            th, x = (u, v) if f == "side" else (v, u)
            return sum(g(x) * np.cos(m * th) for m, g in amps.items())

        if s[0] == "D":
            faces[f] = Temperature(profile)
        elif s[0] == "N":
            faces[f] = Flux(profile) if amps else Insulated()
        else:
            faces[f] = Convection(s[1], profile)
    fem = {}
    for m in sorted(orders):
        fm = {}
        for f, s in spec.items():
            g = s[-1].get(m, _const(0.0))
            fm[f] = ("R", s[1], g) if s[0] == "R" else (s[0], g)
        fem[(m, "cos")] = fm
    return faces, fem


def _points(a, length, n=60, seed=1, z_hi=0.95):
    rng = np.random.default_rng(seed)
    return (rng.uniform(0.05 * a, 0.95 * a, n), rng.uniform(0.0, 2 * np.pi, n),
            rng.uniform(0.05 * length, z_hi * length, n))


Q0 = 3.0e4
CASES = {
    # known non-uniform heater profile q(r) = q0 (1 + 0.5 cos(pi r / a)); convection side and top
    "flux-profile/convection-side/convection-top": (
        {"bottom": ("N", {0: lambda r: Q0 * (1 + 0.5 * np.cos(np.pi * r / A))}),
         "side": ("R", 40.0, {0: _const(295.0)}), "top": ("R", 120.0, {0: _const(300.0)})}, {}),
    "temperature/linear-temperature-side/flux-top": (
        {"bottom": ("D", {0: _const(400.0)}), "side": ("D", {0: lambda z: 400.0 - 100.0 * z / L}),
         "top": ("N", {0: _const(-2.0e4)})}, {}),
    # cos(theta) harmonic heater profile: the m = 1 FEM problem carries the m^2/r^2 term
    "flux-cos-theta/temperature-side/convection-top": (
        {"bottom": ("N", {0: _const(2.0e4), 1: lambda r: 1.0e4 * r / A}),
         "side": ("D", {0: _const(300.0)}), "top": ("R", 80.0, {0: _const(290.0)})}, {"nr": 60, "nz": 60}),
    "temperature/flux-profile-side/convection-top": (
        {"bottom": ("D", {0: _const(350.0)}), "side": ("N", {0: lambda z: 1.0e4 * np.cos(np.pi * z / L)}),
         "top": ("R", 200.0, {0: _const(300.0)})}, {}),
    "convection-cos-2theta/convection-side/convection-top": (
        {"bottom": ("R", 500.0, {0: _const(400.0), 2: lambda r: 30.0 * (r / A) ** 2}),
         "side": ("R", 50.0, {0: _const(300.0)}), "top": ("R", 100.0, {0: _const(300.0)})}, {}),
    "temperature/convection-cos-theta-side/temperature": (
        {"bottom": ("D", {0: _const(350.0)}),
         "side": ("R", 60.0, {0: _const(300.0), 1: lambda z: 20.0 * np.sin(np.pi * z / L)}),
         "top": ("D", {0: _const(350.0)})}, {}),
    "flux/flux-profile-side/temperature": (
        {"bottom": ("N", {0: _const(1.0e4)}), "side": ("N", {0: lambda z: -2.0e3 * z / L}),
         "top": ("D", {0: _const(300.0)})}, {}),
    "temperature-cos-3theta/insulated-side/temperature": (
        {"bottom": ("D", {0: _const(300.0), 3: lambda r: 10.0 * (r / A) ** 3 * (1 - (r / A) ** 2)}),
         "side": ("N", {}), "top": ("D", {0: _const(305.0)})}, {"nr": 80, "nz": 60, "grade": {"bottom": 3.0}}),
}


def _compare(spec, mesh):
    faces, fem_spec = _build(spec)
    model = CylinderModel(Cylinder(A, L, K), faces)
    fem = solve_field(A, L, K, fem_spec, **{"nr": 40, "nz": 40, **mesh})
    r, th, z = _points(A, L)
    t_model = model.temperature(r, th, z)
    t_fem = fem.temperature(r, th, z)
    span = np.ptp(t_fem)
    return np.abs(t_model - t_fem).max() / span, model, fem


@pytest.mark.parametrize("name", list(CASES))
def test_field_matches_fem(name):
    spec, mesh = CASES[name]
    err, _, _ = _compare(spec, mesh)
    assert err < TOL, f"{name}: max |T_model - T_fem| = {err:.2e} of the span"  # scikit-fem reference


@pytest.mark.parametrize("name", ["flux-profile/convection-side/convection-top",
                                  "temperature/linear-temperature-side/flux-top",
                                  "temperature/flux-profile-side/convection-top",
                                  "flux/flux-profile-side/temperature"])
def test_face_powers_match_fem(name):
    spec, mesh = CASES[name]
    _, model, fem = _compare(spec, {**mesh, "nr": 60, "nz": 60})
    total = sum(abs(fem.heat_in(f)) for f in ("bottom", "top", "side"))
    for f in ("bottom", "top", "side"):
        # scikit-fem: consistent heat flow through each face (data, Robin law or residual)
        assert model.face_power(f) == pytest.approx(fem.heat_in(f), abs=1e-4 * total), f


# ------------------------------------------------------------- unknown-face columns


@pytest.mark.parametrize("j_sel", [(0, False, 0), (1, False, 0), (1, True, 0), (2, True, 1), (0, False, 2)])
def test_unknown_flux_bottom_column_matches_fem(j_sel):
    """One column of the unknown-flux basis: the field of q_in = J_m(lam r/a) cos|sin(m theta) on
    the bottom with the other faces homogeneous (side T = 0, top convection to 0)."""
    h = 80.0
    model = CylinderModel(Cylinder(A, L, K), {"bottom": UnknownFlux(), "side": Temperature(300.0),
                                              "top": Convection(h, 300.0)})
    basis = model.basis(2, 3)
    m, is_sin, n = j_sel
    j = int(np.flatnonzero((basis.m == m) & (basis.is_sin == is_sin) & (basis.n_index == n))[0])
    lam = basis.eigenvalues[j]
    fem = solve_harmonic(A, L, K, m, {"bottom": ("N", lambda s: special.jv(m, lam * s / A)),
                                      "side": ("D", 0.0), "top": ("R", h, 0.0)},
                         nr=50, nz=50, grade={"bottom": 4.0})
    r, th, z = _points(A, L, seed=3)
    col, _ = basis.fields(r, th, z)
    ang = np.sin(m * th) if is_sin else np.cos(m * th)
    t_fem = fem.temperature(r, z) * ang
    err = np.abs(col[:, j] - t_fem).max() / np.ptp(t_fem)
    assert err < TOL, err  # scikit-fem reference


@pytest.mark.parametrize("j_sel", [(0, False, 0), (1, True, 1), (2, False, 0)])
def test_unknown_temperature_side_column_matches_fem(j_sel):
    """Side eigenfunction sin(mu z/L + phi) cos|sin(m theta) as temperature data, flux bottom
    (homogeneous: insulated) and convection top (homogeneous: to 0 K)."""
    h = 150.0
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Flux(1e4), "side": UnknownTemperature(),
                                              "top": Convection(h, 300.0)})
    basis = model.basis(2, 3)
    m, is_sin, n = j_sel
    j = int(np.flatnonzero((basis.m == m) & (basis.is_sin == is_sin) & (basis.n_index == n))[0])
    th0 = 0.7
    ang0 = math.sin(m * th0) if is_sin else math.cos(m * th0)

    def z_fn(s):  # the model's own face eigenfunction along z (checked in test_forward_norms)
        s = np.asarray(s, float)
        return basis.face_values(np.full(s.size, th0), s)[:, j] / ang0

    fem = solve_harmonic(A, L, K, m, {"bottom": ("N", 0.0), "side": ("D", z_fn), "top": ("R", h, 0.0)},
                         nr=40, nz=40, grade={"side": 3.0})
    r, th, z = _points(A, L, seed=4)
    col, _ = basis.fields(r, th, z)
    ang = np.sin(m * th) if is_sin else np.cos(m * th)
    t_fem = fem.temperature(r, z) * ang
    assert np.abs(col[:, j] - t_fem).max() / np.ptp(t_fem) < TOL  # scikit-fem reference


def test_unknown_temperature_top_column_with_convection_side_matches_fem():
    h = 300.0
    model = CylinderModel(Cylinder(A, L, K), {"bottom": Temperature(320.0), "side": Convection(h, 300.0),
                                              "top": UnknownTemperature()})
    basis = model.basis(1, 3)
    j = int(np.flatnonzero((basis.m == 1) & ~basis.is_sin & (basis.n_index == 1))[0])
    lam = basis.eigenvalues[j]
    fem = solve_harmonic(A, L, K, 1, {"bottom": ("D", 0.0), "side": ("R", h, 0.0),
                                      "top": ("D", lambda s: special.jv(1, lam * s / A))},
                         nr=50, nz=50, grade={"top": 3.0})
    r, th, z = _points(A, L, seed=5)
    col, _ = basis.fields(r, th, z)
    t_fem = fem.temperature(r, z) * np.cos(th)
    assert np.abs(col[:, j] - t_fem).max() / np.ptp(t_fem) < TOL  # scikit-fem reference


# ------------------------------------------------------------- semi-infinite parts


@pytest.mark.parametrize("side", [("D", 300.0), ("R", 2000.0, 300.0)])
def test_semi_infinite_matches_long_fem_part(side):
    """A part 10 radii long stands in for a semi-infinite one (the slowest mode decays by
    exp(-lam_1 10) < 1e-8 over it); compare near the bottom."""
    q = lambda r: Q0 * (1 + 0.5 * np.cos(np.pi * r / A))  # noqa: E731
    side_cond = Temperature(side[1]) if side[0] == "D" else Convection(side[1], side[2])
    model = CylinderModel(Cylinder(A, math.inf, K), {"bottom": Flux(lambda r, t: q(r)), "side": side_cond})
    length = 10 * A
    fem = solve_harmonic(A, length, K, 0, {"bottom": ("N", q), "side": side, "top": side},
                         nr=40, nz=80, grade={"bottom": 10.0})
    rng = np.random.default_rng(6)
    r, th, z = rng.uniform(0.05 * A, 0.95 * A, 60), rng.uniform(0, 2 * np.pi, 60), rng.uniform(0.05 * A, 2 * A, 60)
    t_fem = fem.temperature(r, z)
    err = np.abs(model.temperature(r, th, z) - t_fem).max() / np.ptp(t_fem)
    assert err < TOL, err  # scikit-fem reference
