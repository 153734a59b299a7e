"""The hollow part's exact series against an independent finite-element solution.

tests/fem_cylinder.py (scikit-fem, P2 on the (r, z) rectangle a <= r <= b, one azimuthal
harmonic) and tests/fem_tube.py (the long tube's plane problem, P2 on a line) share no code
with `forward`.  Each case prescribes one harmonic m on the faces; the series' field at
interior points must match the FEM's within 1e-4 of the field's span (issue 11's goal).
"""

import math

import numpy as np
import pytest

from fem_cylinder import solve_harmonic
from fem_tube import solve_long_tube
from heatsight.forward import Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature

A, B, L, K = 0.03, 0.08, 0.05, 20.0
T0 = 300.0  # the series cases' uniform level: the FEM solves for T - T0 (the harmonic part)


def _x(r):
    return (r - A) / (B - A)


def _band(z, lo=0.015, hi=0.035, width=0.002):
    """A band heater's flux [W/m^2] with edges of `width` (tanh): the projections use Gauss
    rules, which integrate a jump in the data only to O(1 / nodes)."""
    return 1e4 * 0.5 * (np.tanh((z - lo) / width) - np.tanh((z - hi) / width))


CASES = {
    # name: (m, FEM faces (harmonic amplitude as a function of the face coordinate), series faces)
    "end flux, temperature walls, convection top (m=2)": (
        2, {"bottom": ("N", lambda s: 5e3 * (1 + np.cos(np.pi * _x(s)))), "top": ("R", 80.0, 0.0),
            "side": ("D", 0.0), "bore": ("D", 0.0)},
        {"bottom": Flux(lambda r, t: 5e3 * (1 + np.cos(np.pi * _x(r))) * np.cos(2 * t)),
         "top": Convection(80.0, T0), "side": Temperature(T0), "bore": Temperature(T0)}),
    "end temperature, convection on the bore (m=1)": (
        1, {"bottom": ("D", lambda s: 50 * np.sin(np.pi * _x(s)) ** 2), "top": ("D", 0.0),
            "side": ("N", 0.0), "bore": ("R", 300.0, 0.0)},
        {"bottom": Temperature(lambda r, t: T0 + 50 * np.sin(np.pi * _x(r)) ** 2 * np.cos(t)),
         "top": Temperature(T0), "side": Insulated(), "bore": Convection(300.0, T0)}),
    "non-uniform bore flux, temperature ends, convection outside (m=3)": (
        3, {"bottom": ("D", 0.0), "top": ("D", 0.0), "side": ("R", 50.0, 0.0),
            "bore": ("N", lambda s: 2e4 * np.sin(np.pi * s / L) ** 2)},
        {"bottom": Temperature(T0), "top": Temperature(T0), "side": Convection(50.0, T0),
         "bore": Flux(lambda t, z: 2e4 * np.sin(np.pi * z / L) ** 2 * np.cos(3 * t))}),
    "non-uniform outer wall temperature, everything else insulated (m=0)": (
        0, {"bottom": ("N", 0.0), "top": ("N", 0.0), "side": ("D", lambda s: 40 * (s / L) ** 2),
            "bore": ("N", 0.0)},
        {"bottom": Insulated(), "top": Insulated(), "side": Temperature(lambda t, z: T0 + 40 * (z / L) ** 2),
         "bore": Insulated()}),
    "band heater outside, convection on the bore and the ends (m=0)": (
        0, {"bottom": ("R", 20.0, 0.0), "top": ("R", 20.0, 0.0),
            "side": ("N", _band), "bore": ("R", 500.0, 0.0)},
        {"bottom": Convection(20.0, T0), "top": Convection(20.0, T0),
         "side": Flux(lambda t, z: _band(z)), "bore": Convection(500.0, T0)}),
}


@pytest.mark.parametrize("name", list(CASES))
def test_hollow_series_matches_fem(name):
    m, fem_faces, faces = CASES[name]
    sol = solve_harmonic(B, L, K, m, fem_faces, inner_radius=A, nr=40, nz=40)
    r, z = np.meshgrid(A + (B - A) * np.linspace(0.1, 0.9, 5), L * np.linspace(0.1, 0.9, 5))
    r, z = r.ravel(), z.ravel()
    u_fem = sol.temperature(r, z)
    model = CylinderModel(Cylinder(B, L, K, inner_radius=A), faces)
    u = model.temperature(r, np.zeros_like(r), z) - T0
    span = np.ptp(u_fem)
    assert span > 0
    assert np.abs(u - u_fem).max() < 1e-4 * span, name


@pytest.mark.parametrize("m", [0, 2])
def test_long_tube_matches_fem(m):
    """Long tube: bore temperature harmonic, convection outside."""
    fem_faces = {"bore": ("D", 25.0), "side": ("R", 40.0, 0.0)}
    sol = solve_long_tube(A, B, K, m, fem_faces, n=60)
    r = A + (B - A) * np.linspace(0.0, 1.0, 7)
    u_fem = sol.temperature(r)
    faces = {"bore": Temperature(lambda t, z: T0 + 25.0 * np.cos(m * t)), "side": Convection(40.0, T0)}
    model = CylinderModel(Cylinder(B, math.inf, K, inner_radius=A, long=True), faces)
    u = model.temperature(r, np.zeros_like(r), np.zeros_like(r)) - T0
    assert np.abs(u - u_fem).max() < 1e-4 * np.ptp(np.concatenate([u_fem, [0.0]]))
