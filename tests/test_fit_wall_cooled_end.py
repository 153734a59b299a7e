"""The unseen wall of a die standing on a water-cooled base, from scikit-fem readings.

A steel die (k = 25 W/(m K), a = 80 mm, L = 100 mm) heated by a band heater round its side,
bottom cooled by water (h = 1500 W/(m^2 K) to 25 degC), top by still air (h = 15), side
unknown.  The true wall is a heater zone with a smooth (tanh) edge plus a cos(theta) part;
it is not drawn from the prior.  Readings: 20 thermocouples in holes drilled from the top,
temperatures from the independent finite-element solver (scikit-fem, tests/fem_cylinder.py)
plus seeded noise.  The goals (relative RMS error of the wall <= 0.5, pointwise 95 % coverage
>= 0.85, total power within 2 sd, no healthy sensor set aside) are the project's own.
"""

import numpy as np
import pytest
from threadpoolctl import threadpool_limits
from types import SimpleNamespace

from fem_cylinder import solve_harmonic
from heatsight import inverse
from heatsight.forward import Convection, Cylinder, UnknownTemperature

A, L, K = 0.08, 0.10, 25.0
H_BASE, H_TOP, T_AMB = 1500.0, 15.0, 298.15
SIGMA = 0.15  # K
EDGE = 0.15 * L  # width of the heater zone's smooth edges


def band(z, lower, upper):
    """Heater zone lower..upper [m] with tanh edges, 0..1."""
    return 0.5 * (np.tanh((z - lower) / EDGE) - np.tanh((z - upper) / EDGE))


# the heater covers the lower four fifths of the side (its lower edge below the base), so the
# wall is hot right down to the cooled end: the situation users met
HOT_BASE = (-0.3 * L, 0.8 * L)
# the heater zone starts 30 mm above the base: the wall is cooler next to the cooled end
COLD_BASE = (0.3 * L, 0.8 * L)


def walls(zone):
    """(axisymmetric wall [K], cos(theta) amplitude [K]) as functions of z."""
    return (lambda z: 273.15 + 120.0 + 180.0 * band(z, *zone),
            lambda z: 15.0 * band(z, *zone) + 5.0)


def fem_field(zone):
    # scikit-fem P2 (reference library), graded into the cooled corner where the field has a
    # weak (r log r) singularity: the wall does not meet the base's Robin condition there
    w0, w1 = walls(zone)
    grade = {"bottom": 6.0, "side": 4.0}
    f0 = solve_harmonic(A, L, K, 0, {"bottom": ("R", H_BASE, T_AMB), "top": ("R", H_TOP, T_AMB),
                                     "side": ("D", w0)}, nr=60, nz=80, grade=grade)
    f1 = solve_harmonic(A, L, K, 1, {"bottom": ("R", H_BASE, 0.0), "top": ("R", H_TOP, 0.0),
                                     "side": ("D", w1)}, nr=60, nz=80, grade=grade)
    return f0, f1


def scenario(zone, seed):
    """Fit the wall from seeded FEM readings; the figures the goals are stated in."""
    f0, f1 = fem_field(zone)
    w0, w1 = walls(zone)
    rng = np.random.default_rng(seed)
    n = 20
    r = rng.uniform(0.3 * A, 0.92 * A, n)
    th = rng.uniform(0.0, 2 * np.pi, n)
    z = rng.uniform(0.1 * L, 0.9 * L, n)  # holes drilled from the top to various depths
    T = f0.temperature(r, z) + f1.temperature(r, z) * np.cos(th) + rng.normal(0.0, SIGMA, n)
    rd = inverse.SensorReadings([f"TC{i + 1}" for i in range(n)], r, th, z, T, np.full(n, SIGMA),
                                np.zeros(n), np.zeros(n))
    case = SimpleNamespace(cylinder=Cylinder(A, L, K), zones=[],
                           faces={"bottom": Convection(H_BASE, T_AMB), "top": Convection(H_TOP, T_AMB),
                                  "side": UnknownTemperature()})
    with threadpool_limits(1):
        res = inverse.fit(case, rd)
    g = res.grid
    zg = g["z_m"].to_numpy()
    tr = w0(zg) + w1(zg) * np.cos(g["theta_rad"].to_numpy())
    err = g["estimate"].to_numpy() - tr
    inside = (tr >= g["lower"].to_numpy()) & (tr <= g["upper"].to_numpy())
    power_true = f0.heat_in("side")  # W, the FEM's discrete heat balance
    s = res.summary
    return {
        "relative_rms": float(np.sqrt(np.mean(err ** 2)) / np.std(tr)),
        "coverage": float(inside.mean()),
        "base_error_K": float(err[zg == 0.0].mean()),
        "power_error_sd": float((s["total_power_W"] - power_true) / s["total_power_sd_W"]),
        "set_aside": list(s["set_aside"]),
    }


@pytest.mark.parametrize("seed", [11, 12])
def test_wall_hot_down_to_a_water_cooled_base(seed):
    out = scenario(HOT_BASE, seed)
    # before the wall's corner columns: relative RMS 0.81 / 0.91, base 125 / 132 K too low,
    # power -3.3 / -3.7 sd (seeds 11 / 12)
    assert out["relative_rms"] <= 0.5, out
    assert abs(out["base_error_K"]) <= 30.0, out
    assert out["coverage"] >= 0.85, out
    assert abs(out["power_error_sd"]) <= 2.0, out
    assert out["set_aside"] == [], out


def test_wall_cooler_next_to_a_water_cooled_base():
    """The heater zone 30 mm above the water-cooled base: no sensor sees the cold wall next to
    the base. Met since the prior learns the axisymmetric ratio (relative RMS 0.21, power
    +1.2 sd, wall at the base +40 K with coverage 1.00); it was 0.77, +3.5 sd, +56 K."""
    out = scenario(COLD_BASE, 11)
    assert out["relative_rms"] <= 0.5 and abs(out["power_error_sd"]) <= 2.0, out
