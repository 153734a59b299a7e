"""Eigenvalues and Bessel functions of the forward model against outside references.

References: mpmath.besseljzero and mpmath.findroot (reference library), scipy.special
and scipy.optimize.brentq (reference library), Abramowitz & Stegun Table 9.5 and
Incropera, Fundamentals of Heat and Mass Transfer, Table 5.1 (handbook tables, values
recalled from memory and marked so).
"""

import math

import mpmath
import numpy as np
import pytest
from scipy import optimize, special

from heatsight.forward.bessel import besselj, besselj_triplet, ive_orders
from heatsight.forward.roots import (axial_eigenvalues, bessel_derivative_zeros, bessel_zeros,
                           radial_eigenvalues, robin_radial_roots)

ORDERS = (0, 1, 2, 5, 10, 50)
SPOT = (1, 2, 3, 7, 20, 51, 100, 149, 199, 200)  # 1-based root indices to spot-check


# ----------------------------------------------------------------- zeros of J_m, J_m'


@pytest.mark.parametrize("m", ORDERS)
def test_bessel_zeros_match_mpmath(m):
    z = bessel_zeros(m, 200)
    assert z.shape == (200,)
    for n in SPOT:
        ref = float(mpmath.besseljzero(m, n))  # mpmath.besseljzero (reference library)
        assert z[n - 1] == pytest.approx(ref, rel=2e-15, abs=1e-13)


@pytest.mark.parametrize("m", ORDERS)
def test_bessel_derivative_zeros_match_mpmath(m):
    z = bessel_derivative_zeros(m, 200)
    assert z.shape == (200,)
    for n in SPOT:
        # mpmath.besseljzero(derivative=1) (reference library); it also counts
        # lambda = 0 as the first root of J_0', as the model does
        ref = float(mpmath.besseljzero(m, n, derivative=1))
        assert z[n - 1] == pytest.approx(ref, rel=2e-15, abs=1e-12)


@pytest.mark.parametrize("m", ORDERS)
@pytest.mark.parametrize("family", ["D", "N"])
def test_zeros_increase_without_gaps(m, family):
    z = bessel_zeros(m, 200) if family == "D" else bessel_derivative_zeros(m, 200)
    gaps = np.diff(z)
    assert np.all(gaps > 0.5)  # strictly increasing, no duplicates
    # McMahon's expansion: consecutive zeros of J_m and J_m' approach a spacing of pi
    # (Abramowitz & Stegun 9.5.12, from memory)
    assert gaps[-1] == pytest.approx(math.pi, abs=2e-3 if m < 50 else 2e-2)
    # the function really vanishes there (scipy.special.jv / jvp, reference library) ...
    fn = special.jv if family == "D" else special.jvp
    assert np.abs(fn(m, z)).max() < 1e-13
    # ... and no root is skipped: sign changes of scipy's J_m (or J_m') on a fine grid
    # up to the last root equal the number of positive roots returned
    x = np.arange(1e-6, z[-1] + 0.5, 1e-2)  # >= 300 points per root spacing
    y = fn(m, x)
    changes = int(np.count_nonzero(np.sign(y[:-1]) * np.sign(y[1:]) < 0))
    assert changes == int(np.count_nonzero(z > 0))


def test_handbook_zeros():
    # Abramowitz & Stegun Table 9.5 (from memory)
    assert bessel_zeros(0, 1)[0] == pytest.approx(2.404825558, abs=1e-9)
    assert bessel_zeros(1, 1)[0] == pytest.approx(3.831705970, abs=1e-9)
    assert bessel_zeros(0, 2)[1] == pytest.approx(5.520078110, abs=1e-9)
    assert bessel_derivative_zeros(1, 1)[0] == pytest.approx(1.841183781, abs=1e-9)
    assert bessel_derivative_zeros(2, 1)[0] == pytest.approx(3.054236928, abs=1e-9)
    # J_0' = -J_1: the N family of m = 0 is 0, j_{1,1}, j_{1,2}, ... (A&S 9.1.28, from memory)
    d0 = bessel_derivative_zeros(0, 4)
    assert d0[0] == 0.0
    np.testing.assert_allclose(d0[1:], bessel_zeros(1, 3), rtol=1e-15)


# ---------------------------------------------------------------------- Robin roots


@pytest.mark.parametrize("biot, zeta1", [(0.1, 0.4417), (1.0, 1.2558), (10.0, 2.1795)])
def test_robin_first_root_incropera_cylinder(biot, zeta1):
    # Incropera, Fundamentals of Heat and Mass Transfer, Table 5.1, infinite cylinder
    # column: zeta J1(zeta) = Bi J0(zeta) (from memory)
    assert robin_radial_roots(0, 1, biot)[0] == pytest.approx(zeta1, abs=1e-4)


@pytest.mark.parametrize("m", [0, 1, 2, 5, 10])
@pytest.mark.parametrize("biot", [1e-3, 0.1, 1.0, 7.5, 100.0, 1e4])
def test_robin_roots_match_mpmath_findroot(m, biot):
    roots = robin_radial_roots(m, 30, biot)
    assert np.all(np.diff(roots) > 0)

    def f(x):
        return x * mpmath.besselj(m, x, derivative=1) + biot * mpmath.besselj(m, x)

    # the n-th Robin root lies between the n-th Neumann and n-th Dirichlet roots
    # (mpmath.besseljzero, reference library); refine independently by mpmath.findroot
    for n in (1, 2, 5, 17, 30):
        lo = float(mpmath.besseljzero(m, n, derivative=1)) if (m, n) != (0, 1) else 0.0
        hi = float(mpmath.besseljzero(m, n))
        ref = float(mpmath.findroot(f, (lo + 1e-12, hi - 1e-12), solver="anderson"))
        assert lo < ref < hi
        assert roots[n - 1] == pytest.approx(ref, rel=1e-13, abs=1e-13)  # mpmath.findroot


def test_radial_eigenvalue_dispatch():
    np.testing.assert_array_equal(radial_eigenvalues("D", 3, 5), bessel_zeros(3, 5))
    np.testing.assert_array_equal(radial_eigenvalues("N", 3, 5), bessel_derivative_zeros(3, 5))
    np.testing.assert_array_equal(radial_eigenvalues("R", 3, 5, 2.0), robin_radial_roots(3, 5, 2.0))
    # Bi -> 0 tends to the Neumann roots, Bi -> infinity to the Dirichlet roots
    np.testing.assert_allclose(robin_radial_roots(2, 5, 1e-9), bessel_derivative_zeros(2, 5), rtol=1e-8)
    np.testing.assert_allclose(robin_radial_roots(2, 5, 1e9), bessel_zeros(2, 5), rtol=1e-8)


# ---------------------------------------------------------------------- axial roots


def test_axial_simple_families():
    k = np.arange(6)
    # sin(n pi z / L), cos(n pi z / L), sin((n + 1/2) pi z / L): textbook closed forms
    np.testing.assert_allclose(axial_eigenvalues("D", "D", 6), (k + 1) * np.pi, rtol=1e-15)
    np.testing.assert_allclose(axial_eigenvalues("N", "N", 6), k * np.pi, rtol=1e-15)
    np.testing.assert_allclose(axial_eigenvalues("D", "N", 6), (k + 0.5) * np.pi, rtol=1e-15)
    np.testing.assert_allclose(axial_eigenvalues("N", "D", 6), (k + 0.5) * np.pi, rtol=1e-15)


@pytest.mark.parametrize("biot, mu1", [(1.0, 0.8603), (10.0, 1.4289), (0.1, 0.3111)])
def test_axial_plane_wall_incropera(biot, mu1):
    # insulated at one end, convection at the other: mu tan(mu) = Bi.
    # Incropera, Fundamentals of Heat and Mass Transfer, Table 5.1, plane wall (from memory)
    assert axial_eigenvalues("N", "R", 3, 0.0, biot)[0] == pytest.approx(mu1, abs=1e-4)
    assert axial_eigenvalues("R", "N", 3, biot, 0.0)[0] == pytest.approx(mu1, abs=1e-4)


def _sign_change_roots(f, upper, n_grid=200_000):
    """Roots of a continuous f on (0, upper], bracketed on a fine grid and refined by brentq."""
    x = np.linspace(1e-9, upper, n_grid)
    y = f(x)
    idx = np.flatnonzero(np.sign(y[:-1]) * np.sign(y[1:]) < 0)
    return np.array([optimize.brentq(f, x[i], x[i + 1], xtol=1e-15, rtol=1e-15) for i in idx])


@pytest.mark.parametrize("bb, bt", [(0.3, 0.3), (1.0, 20.0), (1e-3, 5.0), (50.0, 200.0), (2.0, 1e-2)])
def test_axial_robin_robin_brentq(bb, bt):
    n = 40
    mu = axial_eigenvalues("R", "R", n, bb, bt)
    # characteristic equation tan(mu)(mu^2 - Bb Bt) = mu (Bb + Bt), written without poles
    # as sin(mu)(mu^2 - Bb Bt) - mu (Bb + Bt) cos(mu) = 0 (textbook separation of variables);
    # roots found by scipy.optimize.brentq on an independent grid (reference library)
    def f(x):
        return np.sin(x) * (x * x - bb * bt) - x * (bb + bt) * np.cos(x)

    ref = _sign_change_roots(f, mu[-1] + 0.5)
    assert ref.size == n  # the model misses and duplicates none
    np.testing.assert_allclose(mu, ref, rtol=1e-13, atol=1e-13)


@pytest.mark.parametrize("kind", ["D", "N"])
@pytest.mark.parametrize("biot", [0.05, 3.0, 400.0])
def test_axial_robin_mixed_brentq(kind, biot):
    mu = axial_eigenvalues(kind, "R", 25, 0.0, biot)
    # D at z = 0: Z = sin(mu z/L), Robin at z = L: mu cos(mu) + Bi sin(mu) = 0;
    # N at z = 0: Z = cos(mu z/L): Bi cos(mu) - mu sin(mu) = 0 (textbook); scipy brentq
    if kind == "D":
        def f(x):
            return x * np.cos(x) + biot * np.sin(x)
    else:
        def f(x):
            return biot * np.cos(x) - x * np.sin(x)
    ref = _sign_change_roots(f, mu[-1] + 0.5)
    assert ref.size == 25
    np.testing.assert_allclose(mu, ref, rtol=1e-13, atol=1e-13)


# ------------------------------------------------------------------ Bessel functions


def test_besselj_matches_scipy():
    rng = np.random.default_rng(7)
    x = np.concatenate([np.linspace(0.0, 1000.0, 20001), rng.uniform(0.0, 1000.0, 2000),
                        [0.0, 1e-300, 1e-12, 1e-6, 0.049999, 0.05, 999.99]])
    m = np.arange(0, 61)[:, None]  # one call: the model builds one table for all orders
    err = np.abs(besselj(m, x[None, :]) - special.jv(m, x[None, :])).max(axis=1)
    assert err.max() < 1e-12, (int(err.argmax()), err.max())  # scipy.special.jv (reference library)


def test_besselj_broadcast_and_negative_order():
    m = np.array([[0], [1], [7]])
    x = np.array([0.0, 0.3, 12.5, 77.0])
    np.testing.assert_allclose(besselj(m, x), special.jv(m, x), atol=1e-13)  # scipy.special.jv
    # J_{-1} = -J_1 (A&S 9.1.5, from memory)
    np.testing.assert_allclose(besselj(-1, x), -special.jv(1, x), atol=1e-13)
    jm1, j, jp1 = besselj_triplet(np.array([3]), np.array([4.2]))
    # J_m' = (J_{m-1} - J_{m+1}) / 2 against scipy.special.jvp (reference library)
    assert 0.5 * (jm1 - jp1)[0] == pytest.approx(special.jvp(3, 4.2), abs=1e-13)
    with pytest.raises(ValueError):
        besselj(0, -1.0)


@pytest.mark.parametrize("max_order", [0, 1, 4, 20, 60])
def test_ive_orders_match_scipy(max_order):
    x = np.array([0.0, 1e-300, 1e-12, 1e-6, 1e-3, 0.5, 1.0, 7.0, 45.0, 200.0, 700.0, 1e3, 1e4])
    out = ive_orders(max_order, x)
    assert out.shape == (max_order + 2, x.size)
    ref = special.ive(np.arange(max_order + 2)[:, None], x[None, :])  # scipy.special.ive
    np.testing.assert_allclose(out, ref, rtol=1e-12, atol=0.0)
    assert np.all(np.isfinite(out))


def test_shipped_zero_tables_equal_a_fresh_computation_and_scipy():
    # forward/bessel_zero_tables.npz is what compute_zero_tables() gives (regenerate it with
    # write_zero_tables() after changing the root finding); scipy.special.jn_zeros and
    # jnp_zeros are the outside reference for a few orders
    from heatsight.forward import roots as rt
    shipped = rt._shipped_tables()
    assert shipped is not None
    j, jp = rt.compute_zero_tables()
    assert j.shape == shipped[0].shape and jp.shape == shipped[1].shape
    np.testing.assert_allclose(shipped[0], j, rtol=1e-14)
    np.testing.assert_allclose(shipped[1], jp, rtol=1e-14)
    for m in (0, 1, 7, 30, 64):
        np.testing.assert_allclose(shipped[0][m, :100], special.jn_zeros(m, 100), rtol=1e-12)  # scipy
    for m in (1, 5, 40):
        np.testing.assert_allclose(shipped[1][m, :60], special.jnp_zeros(m, 60), rtol=1e-12)   # scipy
    # the families the fit asks for come from the table and extend past it
    np.testing.assert_allclose(rt.bessel_derivative_zeros(5, 300)[:256], shipped[1][5], rtol=0)
    np.testing.assert_allclose(rt.bessel_zeros(3, 400)[:320], shipped[0][3], rtol=1e-14)
