"""Grid evaluation, temperature-only evaluation, series growth, cached root
tables and the blocked Bessel table.

The grid methods must give the pointwise methods' numbers (to round-off); the full-field
grid is also checked against scikit-fem (tests/fem_cylinder.py, reference library); the
cached roots against scipy.special (reference library) and a cold computation.
"""

import numpy as np
import pytest
from scipy import optimize, special

from fem_cylinder import solve_field
from heatsight.forward import (Convection, Cylinder, CylinderModel, Flux, Insulated, Temperature,
                               UnknownFlux, UnknownTemperature)
from heatsight.forward import bessel, roots
from heatsight.forward.series import KnownSeries

A, L, K = 0.15, 0.04, 16.0


def _flux(r, th):
    return 5e3 * (1 + 0.3 * (r / A) ** 2) + 1.5e3 * (r / A) * np.cos(th) + 800 * np.sin(2 * th) * (r / A) ** 2


KNOWN = {
    "flux/convection/insulated": {"bottom": Flux(_flux), "top": Convection(25.0, 298.15), "side": Insulated()},
    "flux/convection/temperature-profile": {
        "bottom": Flux(_flux), "top": Convection(25.0, 298.15),
        "side": Temperature(lambda th, z: 300 + 5 * np.cos(th) + 100 * z)},
    "temperature/convection/side-flux": {
        "bottom": Temperature(350.0), "top": Convection(25.0, 298.15),
        "side": Flux(lambda th, z: 1e3 * np.cos(th) * z / L)},
}


@pytest.mark.parametrize("name", list(KNOWN))
def test_evaluate_grid_equals_pointwise(name):
    model = CylinderModel(Cylinder(A, L, K), KNOWN[name])
    r = np.linspace(0, A, 9)
    th = np.linspace(0, 2 * np.pi, 7, endpoint=False)
    z = np.linspace(0, L, 5)
    grid = model.evaluate_grid(r, th, z, gradient=True)
    R, TH, Z = np.meshgrid(r, th, z, indexing="ij")
    pts = model.evaluate(R, TH, Z)
    span = np.ptp(pts.temperature)
    assert grid.temperature.shape == (9, 7, 5) and grid.gradient.shape == (3, 9, 7, 5)
    assert np.abs(grid.temperature - pts.temperature).max() < 1e-12 * span
    assert np.abs(grid.gradient - pts.gradient).max() < 1e-12 * np.abs(pts.gradient).max()
    assert np.abs(grid.heat_flux - pts.heat_flux).max() < 1e-12 * np.abs(pts.heat_flux).max()
    assert np.abs(grid.truncation_error - pts.truncation_error).max() <= 1e-12 * span
    plain = model.evaluate_grid(r, th, z)
    assert plain.gradient is None and plain.heat_flux is None
    assert np.abs(plain.temperature - pts.temperature).max() < 1e-12 * span


def test_temperature_only_path_equals_full_evaluation():
    model = CylinderModel(Cylinder(A, L, K), KNOWN["flux/convection/temperature-profile"])
    rng = np.random.default_rng(3)
    r, th, z = rng.uniform(0, A, 40), rng.uniform(0, 6.3, 40), rng.uniform(0, L, 40)
    only = model.evaluate(r, th, z, gradient=False)
    full = model.evaluate(r, th, z)
    assert only.gradient is None and only.heat_flux is None
    assert np.abs(only.temperature - full.temperature).max() < 1e-12 * np.ptp(full.temperature)


def test_full_field_grid_matches_fem():
    """A platen face map and interior planes on a grid against scikit-fem P2 (reference library)."""
    q0, q1 = 5.0e3, 1.5e3
    faces = {"bottom": Flux(lambda r, th: q0 * (1 + 0.3 * (r / A) ** 2) + q1 * (r / A) * np.cos(th)),
             "top": Convection(25.0, 298.15), "side": Insulated()}
    spec = {(0, "cos"): {"bottom": ("N", lambda s: q0 * (1 + 0.3 * (s / A) ** 2)), "top": ("R", 25.0, 298.15),
                         "side": ("N", 0.0)},
            (1, "cos"): {"bottom": ("N", lambda s: q1 * s / A), "top": ("R", 25.0, 0.0), "side": ("N", 0.0)}}
    r = np.linspace(0.0, A, 11)
    th = np.linspace(0.0, 2 * np.pi, 12, endpoint=False)
    z = np.array([0.0, 0.5 * L, L])
    model = CylinderModel(Cylinder(A, L, K), faces)
    t = model.evaluate_grid(r, th, z).temperature
    fem = solve_field(A, L, K, spec, order=2, nr=40, nz=20)
    R, TH, Z = np.meshgrid(r, th, z, indexing="ij")
    ref = fem.temperature(R.ravel(), TH.ravel(), Z.ravel()).reshape(R.shape)
    assert np.abs(t - ref).max() < 1e-4 * np.ptp(ref)  # scikit-fem reference


BASES = {
    "unknown flux end beside a temperature side (rim columns)": (
        0.08, 0.1, {"bottom": UnknownFlux(), "top": Convection(25.0, 298.15), "side": Temperature(300.0)}),
    "unknown temperature wall beside a cooled base (wall columns)": (
        0.08, 0.1, {"bottom": Convection(1500.0, 300.0), "top": Convection(15.0, 300.0),
                    "side": UnknownTemperature()}),
    "unknown flux wall": (
        0.08, 0.1, {"bottom": Temperature(330.0), "top": Insulated(), "side": UnknownFlux()}),
    "unknown temperature top": (
        0.08, 0.1, {"bottom": Flux(2e3), "top": UnknownTemperature(), "side": Convection(10.0, 300.0)}),
}


@pytest.mark.parametrize("name", list(BASES))
def test_face_values_grid_equals_pointwise(name):
    a, length, faces = BASES[name]
    basis = CylinderModel(Cylinder(a, length, 20.0), faces).basis(4, 6)
    if basis.face == "side":
        u, v = np.linspace(0, 2 * np.pi, 12, endpoint=False), np.linspace(0, length, 9)
    else:
        u, v = np.linspace(0, a, 9), np.linspace(0, 2 * np.pi, 12, endpoint=False)
    U, V = np.meshgrid(u, v, indexing="ij")
    grid = basis.face_values_grid(u, v)
    pts = basis.face_values(U.ravel(), V.ravel())
    assert grid.shape == (u.size, v.size, basis.size)
    assert np.abs(grid.reshape(-1, basis.size) - pts).max() <= 1e-13 * np.abs(pts).max()
    known = basis.known_face_values_grid(u, v)
    assert np.abs(known.ravel() - basis.known_face_values(U.ravel(), V.ravel())).max() <= \
        1e-13 * max(1.0, np.abs(known).max())


def test_series_grown_by_doubling_matches_one_built_at_full_size():
    """Doubling with the cached roots gives the series built at the final size directly."""
    kinds = {f: c.homogeneous for f, c in KNOWN["flux/convection/insulated"].items()}
    args = ("bottom", _flux, (A, L), kinds, K)
    kw = dict(tol=1e-10, scale=5e3 * A / K)
    grown = KnownSeries(*args, n_start=16, **kw)
    r, th, z = np.array([0.3 * A, 0.9 * A]), np.array([0.2, 2.0]), np.array([1e-4, 0.5 * L])
    t_grown, _, _ = grown.evaluate(r, th, z)
    assert grown.n_terms >= 64  # it did grow
    direct = KnownSeries(*args, n_start=grown.n_terms, **kw)
    t_direct, _, _ = direct.evaluate(r, th, z)
    assert direct.n_terms == grown.n_terms
    assert np.array_equal(direct.coef, grown.coef)
    assert np.abs(t_grown - t_direct).max() < 1e-12 * kw["scale"]


def test_cached_roots_equal_cold_roots_and_scipy():
    roots.ROOT_CACHE.clear()
    first = roots.bessel_derivative_zeros(3, 20)
    longer = roots.bessel_derivative_zeros(3, 40)  # extends the cached family
    assert np.array_equal(longer[:20], first)
    assert np.abs(longer - special.jnp_zeros(3, 40)).max() < 1e-11  # scipy.special.jnp_zeros
    warm_near = roots.robin_radial_roots(2, 30, 1.5)
    warm = roots.robin_radial_roots(2, 30, 1.5001)  # bracketed by the Bi = 1.5 roots
    roots.ROOT_CACHE.clear()
    cold = roots.robin_radial_roots(2, 30, 1.5001)
    assert np.abs(warm - cold).max() < 1e-12 * cold.max()
    assert np.all(warm > warm_near)  # the n-th Robin root grows with Bi

    def robin(x):
        return x * special.jvp(2, x) + 1.5001 * special.jv(2, x)
    # scipy.optimize.brentq on scipy.special.jv / jvp (reference library)
    ref = [optimize.brentq(robin, lo, hi, xtol=1e-14) for lo, hi in
           zip(np.concatenate([[2.0], special.jn_zeros(2, 29)]), special.jn_zeros(2, 30))]
    assert np.abs(cold - ref).max() < 1e-10


def test_root_cache_is_bounded():
    cache = roots._RootCache(max_entries=5)
    for i in range(12):
        cache.get(("R", 0, float(i)), 3, lambda have, n: np.arange(have, n, dtype=float))
    assert len(cache._data) == 5
    assert sorted(k[2] for k in cache._data) == [7.0, 8.0, 9.0, 10.0, 11.0]


def test_blocked_table_matches_scipy_and_extension_equals_rebuild():
    m = np.arange(3 * bessel.BLOCK + 17) % 30
    x = np.random.default_rng(5).uniform(0.0, 90.0, m.size)
    full = bessel._JTable(32, 128.0)
    grown = bessel._JTable(32, 16.0).extended(128.0)
    assert grown.n_nodes == full.n_nodes
    assert np.array_equal(grown(m, x), full(m, x))
    assert np.abs(full(m, x) - special.jv(m, x)).max() < 1e-12  # scipy.special.jv


def test_one_order_lookup_equals_the_array_path_and_scipy():
    """A scalar order reads that order's rows alone; the numbers are the array path's."""
    table = bessel._JTable(32, 256.0)
    x = np.outer(np.linspace(0.0, 1.0, 97), np.linspace(0.5, 250.0, 211))  # a projection's (s, kappa) grid
    for m in (0, 7, 32):
        one = table(m, x)
        assert one.shape == x.shape
        assert np.array_equal(one, table(np.full(x.shape, m), x))
        assert np.abs(one - special.jv(m, x)).max() < 1e-12  # scipy.special.jv
    assert np.array_equal(bessel.besselj(-1, x[:3]), -bessel.besselj(1, x[:3]))  # J_{-1} = -J_1


def test_theta_parts_in_any_order_and_with_repeats():
    """modes._theta_parts takes cos / sin once per distinct angle: the same numbers as
    cos(m theta), sin(m theta) (numpy) at every point, angles unsorted and repeated."""
    from heatsight.forward.modes import _theta_parts
    m = np.array([0, 1, 1, 4, 9])
    is_sin = np.array([False, False, True, True, False])
    theta = np.array([[2.0, 0.1, 2.0], [5.5, 0.1, 3.0]])
    th, dth = _theta_parts(m, is_sin, theta)
    arg = theta[..., None] * m
    np.testing.assert_array_equal(th, np.where(is_sin, np.sin(arg), np.cos(arg)))
    np.testing.assert_array_equal(dth, np.where(is_sin, np.cos(arg), -np.sin(arg)))
