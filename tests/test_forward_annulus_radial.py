"""Radial eigenfunctions of the hollow part (forward/annulus_radial.py) against outside references.

References: mpmath.besselj / bessely / findroot at 30 digits (reference library);
scipy.special jv / yv / jvp / yvp, scipy.integrate.quad_vec, scipy.linalg.eig (reference
library); Abramowitz & Stegun Table 9.7, zeros of J_0(x) Y_0(kx) - J_0(kx) Y_0(x)
(handbook table, values recalled from memory, verified against mpmath in the same test);
Chebyshev collocation of the Sturm-Liouville problem (Trefethen, Spectral Methods in MATLAB,
ch. 6, differentiation matrix formula, from memory).
"""


import mpmath
import numpy as np
import pytest
from scipy import integrate, linalg, special

from heatsight.forward.annulus_radial import (AnnulusRadial, _phase_estimate, annulus_eigenvalues,
                                             bessel_phase)
from heatsight.forward.faces import EndCondition
from heatsight.forward.modulus_phase import far_values

K = 15.0  # W/(m K)
KINDS = ("D", "N", "R")


def cond(kind, biot, radius):
    """EndCondition of a kind with h set from a Biot number Bi = h radius / k."""
    return EndCondition(kind, biot * K / radius if kind == "R" else 0.0)


def mp_cross(m, q):
    """J_m(x) Y_m(qx) - J_m(qx) Y_m(x), divided by the two moduli (mpmath, reference library)."""
    q = mpmath.mpf(q)

    def f(x):
        jx, yx, jq, yq = (mpmath.besselj(m, x), mpmath.bessely(m, x),
                          mpmath.besselj(m, q * x), mpmath.bessely(m, q * x))
        return (jx * yq - jq * yx) / (mpmath.hypot(jx, yx) * mpmath.hypot(jq, yq))
    return f


def mp_characteristic(m, a, b, ka, kb, bia, bib):
    """Cross product of the wall functionals Z, z Z', z Z' -+ Bi Z (bore / side) in mpmath."""
    def wall(kind, z, biot, sgn):
        j, y = mpmath.besselj(m, z), mpmath.bessely(m, z)
        dj, dy = z * mpmath.besselj(m, z, 1), z * mpmath.bessely(m, z, 1)
        return {"D": (j, y), "N": (dj, dy), "R": (dj + sgn * biot * j, dy + sgn * biot * y)}[kind]

    def f(kappa):
        aj, ay = wall(ka, kappa * a, bia, -1)
        bj, by = wall(kb, kappa * b, bib, 1)
        return (aj * by - ay * bj) / (mpmath.hypot(aj, ay) * mpmath.hypot(bj, by))
    return f


# ------------------------------------------------------------------ cross-product zeros

CASES = [(q, m, n) for q in (1.01, 1.2, 1.5, 2.0, 5.0, 100.0)
         for m, n in ((0, 1), (1, 2), (5, 20), (50, 3 if q == 1.01 else 200))]


def test_cross_product_zeros_match_mpmath():
    a = 0.04
    mpmath.mp.dps = 30
    worst = 0.0
    for q, m, n in CASES:
        lam = annulus_eigenvalues(EndCondition("D"), EndCondition("D"), m, n, a, q * a, K)[-1] * a
        x = mpmath.mpf(lam)
        # mpmath.findroot in a +-1e-9 bracket: fails unless the cross product changes sign there
        ref = mpmath.findroot(mp_cross(m, q), (x * (1 - mpmath.mpf(1e-9)), x * (1 + mpmath.mpf(1e-9))),
                              solver="anderson")
        err = abs(float((lam - ref) / ref))
        # conditioning: q x is rounded, the root moves by eps q / (q - 1) relative
        assert err < 2e-15 * max(1.0, q / (q - 1.0)), (q, m, n, lam, err)
        worst = max(worst, err * (q - 1.0) / q if q < 2 else err)
    mpmath.mp.dps = 15
    assert worst < 2e-15  # the same bound, scaled back by the conditioning


# Abramowitz & Stegun Table 9.7, first five zeros for k = 1.2, 1.5, 2.0 (from memory)
AS_97 = {1.2: (15.7014, 31.4126, 47.1217, 62.8302, 78.5385),
         1.5: (6.2702, 12.5598, 18.8451, 25.1294, 31.4133),
         2.0: (3.1230, 6.2734, 9.4182, 12.5614, 15.7040)}


@pytest.mark.parametrize("q", sorted(AS_97))
def test_abramowitz_stegun_table_9_7(q):
    lam = annulus_eigenvalues(EndCondition("D"), EndCondition("D"), 0, 5, 1.0, q, K)
    mpmath.mp.dps = 20
    for s, tab in enumerate(AS_97[q]):
        ref = mpmath.findroot(mp_cross(0, q), (tab - 1e-3, tab + 1e-3), solver="anderson")
        assert abs(float(ref) - tab) <= 5.1e-5  # the remembered table agrees with mpmath
        assert lam[s] == pytest.approx(tab, abs=5.1e-5)  # A&S Table 9.7 (from memory)
        assert lam[s] == pytest.approx(float(ref), rel=1e-15)  # mpmath (reference library)
    mpmath.mp.dps = 15


# ------------------------------------------------------------------ helpers: references


def characteristic(m, q, ka, kb, bia, bib, lam):
    """Sign-faithful cross product from scipy's jv/yv/jvp/yvp (reference library): wall
    functionals Z (D), z Z' (N), z Z' -+ Bi Z (R, bore / side), each pair scaled to O(1)."""
    def wall(kind, z, biot, sgn):
        j, y, dj, dy = special.jv(m, z), special.yv(m, z), z * special.jvp(m, z), z * special.yvp(m, z)
        pair = {"D": (j, y), "N": (dj, dy), "R": (dj + sgn * biot * j, dy + sgn * biot * y)}[kind]
        return np.array(pair) / np.maximum(np.abs(pair[0]), np.abs(pair[1]))
    aj, ay = wall(ka, lam, bia, -1.0)
    bj, by = wall(kb, q * lam, bib, 1.0)
    return aj * by - ay * bj


def chebyshev_eigenvalues(ka, kb, m, a, b, ha, hb, n=72):
    """kappa of R'' + R'/r - m^2/r^2 R = -kappa^2 R by Chebyshev collocation (generalized
    eigenproblem, wall rows replaced by the conditions), ascending, finite ones only."""
    x = np.cos(np.pi * np.arange(n + 1) / n)
    c = np.r_[2.0, np.ones(n - 1), 2.0] * (-1.0) ** np.arange(n + 1)
    dx = x[:, None] - x[None, :]
    d = np.outer(c, 1.0 / c) / (dx + np.eye(n + 1))
    d -= np.diag(d.sum(axis=1))
    r = 0.5 * (a + b) + 0.5 * (b - a) * x
    d1 = d * (2.0 / (b - a))
    d2 = d1 @ d1
    A = d2 + np.diag(1.0 / r) @ d1 - np.diag(m * m / r ** 2)
    B = -np.eye(n + 1)
    e = np.eye(n + 1)
    rows = {"D": lambda i, s, h: e[i], "N": lambda i, s, h: d1[i], "R": lambda i, s, h: s * K * d1[i] + h * e[i]}
    A[0], B[0] = rows[kb](0, 1.0, hb), 0.0  # x = 1: r = b, outward +r
    A[n], B[n] = rows[ka](n, -1.0, ha), 0.0  # x = -1: r = a, outward -r
    w = linalg.eig(A, B, right=False)
    w = w[np.isfinite(w) & (np.abs(w) < 1e12)]
    return np.sort(np.sqrt(np.abs(w.real)))


# ------------------------------------------------------------------ every kind combination


@pytest.mark.parametrize("ka", KINDS)
@pytest.mark.parametrize("kb", KINDS)
@pytest.mark.parametrize("m", [0, 3])
def test_every_combination_walls_equation_and_completeness(ka, kb, m):
    a, b = 0.05, 0.12
    bia, bib = 0.7, 30.0
    inner, outer = cond(ka, bia, a), cond(kb, bib, b)
    kappa = annulus_eigenvalues(inner, outer, m, 10, a, b, K)
    modes = AnnulusRadial(inner, outer, np.full(10, m), kappa, a, b, K)
    r = np.linspace(a, b, 401)
    val, der, mr = modes.values(r)
    size = np.abs(val).max(axis=0)
    # wall conditions B[R] = 0 (faces.EndCondition.operator; dT/dn = -R' on the bore)
    for wall, c, sgn in (("bore", inner, -1.0), ("side", outer, 1.0)):
        rv, dv = modes.at_wall(wall)
        scale = size * (1.0 if c.kind == "D" else K * np.maximum(kappa, 1.0 / b) + c.h)
        assert np.all(np.abs(c.operator(rv, sgn * dv, K)) <= 1e-12 * scale), wall
        vv, dd, _ = modes.values(np.array([a if wall == "bore" else b]))
        np.testing.assert_allclose(vv[0], rv, atol=1e-13 * size.max())
        np.testing.assert_allclose(dd[0], dv, atol=1e-12 * (kappa * size).max())
    # Bessel's equation by central differences of the returned derivative (finite differences)
    h = 1e-4 / kappa.max()
    inner_r = r[1:-1]
    _, dp, _ = modes.values(inner_r + h)
    _, dm, _ = modes.values(inner_r - h)
    v0, d0, m0 = val[1:-1], der[1:-1], mr[1:-1]
    residual = (dp - dm) / (2 * h) + d0 / inner_r[:, None] + (kappa ** 2 - (m / inner_r[:, None]) ** 2) * v0
    assert np.all(np.abs(residual) <= 1e-6 * np.maximum(kappa, 1 / a) ** 2 * size)
    vp, _, _ = modes.values(inner_r + h)
    vm, _, _ = modes.values(inner_r - h)
    assert np.all(np.abs((vp - vm) / (2 * h) - d0) <= 1e-7 * np.maximum(kappa, 1 / a) * size)
    np.testing.assert_allclose(m0, m * v0 / inner_r[:, None])
    # the roots to round-off: mpmath's cross product of the wall functionals (reference library)
    mpmath.mp.dps = 20
    for lam in kappa[kappa > 0][[0 if m == 0 else -1]]:
        ref = mpmath.findroot(mp_characteristic(m, a, b, ka, kb, bia, bib),
                              (lam * (1 - mpmath.mpf(1e-9)), lam * (1 + mpmath.mpf(1e-9))), solver="anderson")
        assert lam == pytest.approx(float(ref), rel=2e-15)
    mpmath.mp.dps = 15
    # values and count: Chebyshev collocation of the same problem (independent solver)
    cheb = chebyshev_eigenvalues(ka, kb, m, a, b, inner.h, outer.h)
    # (the collocation's own error is ~1e-8 here: same answer with 48..128 nodes to that level)
    np.testing.assert_allclose(kappa[1:], cheb[1:10], rtol=1e-7)
    if kappa[0] == 0:  # the constant mode: a collocation eigenvalue kappa^2 ~ 0
        assert cheb[0] ** 2 < 1e-6 * kappa[1] ** 2
    else:
        assert kappa[0] == pytest.approx(cheb[0], rel=1e-7)
    assert np.sum(cheb < kappa[-1] * (1 + 1e-7)) == 10
    # orthogonality and norms by quadrature (scipy.integrate.quad_vec)
    gram = integrate.quad_vec(lambda s: np.outer(*[modes.values(np.array([s]))[0][0]] * 2) * s,
                              a, b, epsabs=1e-14, epsrel=1e-11)[0]
    np.testing.assert_allclose(np.diag(gram), modes.norms(), rtol=1e-10)
    off = gram - np.diag(np.diag(gram))
    assert np.abs(off).max() < 1e-10 * modes.norms().max()


# ------------------------------------------------------------------ norms, ring integrals


@pytest.mark.parametrize("ka,kb,m,q", [("D", "N", 50, 100.0), ("N", "D", 50, 1.01), ("R", "R", 0, 100.0),
                                       ("D", "D", 0, 1.01), ("N", "N", 0, 3.0), ("N", "R", 50, 100.0),
                                       ("R", "D", 7, 1.01)])
def test_norms_and_ring_integrals_against_quadrature(ka, kb, m, q):
    a = 0.02
    b = q * a
    inner, outer = cond(ka, 2.5, a), cond(kb, 0.3, b)
    kappa = annulus_eigenvalues(inner, outer, m, 40, a, b, K)[[0, 1, 2, 9, 39]]
    modes = AnnulusRadial(inner, outer, np.full(5, m), kappa, a, b, K)

    def integrand(s):
        v = modes.values(np.array([s]))[0][0]
        return np.concatenate([v * v * s, v * s])
    quad = integrate.quad_vec(integrand, a, b, epsabs=1e-16, epsrel=1e-12, limit=400)[0]
    # scipy.integrate.quad_vec (reference library).  The closed form is a difference of wall
    # terms ~ b / (b - a) times the norm, so a wall 1 % of the radius thick loses two digits
    # (measured 1.6e-13 there, <= 1.3e-14 elsewhere)
    np.testing.assert_allclose(modes.norms(), quad[:5], rtol=1e-12 if q < 1.1 else 1e-13)
    np.testing.assert_allclose(modes.norms(), 0.5 * (b * b - a * a), rtol=1e-12)  # the normalization rule
    ring = modes.ring_integrals()
    if m == 0:
        np.testing.assert_allclose(ring, quad[5:], rtol=1e-9, atol=1e-11 * (b * b - a * a))
    else:
        assert np.all(np.isnan(ring))
    val = modes.values(np.linspace(a, b, 3001))[0]
    assert np.all(np.isfinite(val)) and np.all(np.abs(val).max(axis=0) < 10.0)  # O(1) everywhere


def test_constant_mode_when_both_walls_insulated():
    a, b = 0.01, 0.05
    kappa = annulus_eigenvalues(EndCondition("N"), EndCondition("N"), 0, 3, a, b, K)
    assert kappa[0] == 0.0 and kappa[1] > 0
    modes = AnnulusRadial(EndCondition("N"), EndCondition("N"), np.zeros(3, int), kappa, a, b, K)
    v, d, mr = modes.values(np.array([a, 0.02, b]))
    np.testing.assert_array_equal(v[:, 0], 1.0)
    np.testing.assert_array_equal(d[:, 0], 0.0)
    assert modes.norms()[0] == pytest.approx(0.5 * (b * b - a * a), rel=1e-15)
    assert modes.ring_integrals()[0] == pytest.approx(0.5 * (b * b - a * a), rel=1e-15)
    # the other modes carry no net heat: orthogonal to the constant (textbook: the
    # integral of an 'N'-'N' eigenfunction over the section vanishes)
    assert np.abs(modes.ring_integrals()[1:]).max() < 1e-13 * (b * b - a * a)


# ------------------------------------------------------------------ the whole range


def test_bessel_phase_and_its_branch_estimate():
    # np.unwrap of scipy's atan2(Y_m, J_m) on a dense grid (reference library), from z
    # small where the phase is -pi/2 + O(1/log z) or closer
    z = np.linspace(1e-3, 300.0, 30001)
    for m in (0, 1, 2, 7, 20, 50, 60):
        j, y = special.jv(m, z), special.yv(m, z)
        ok = np.isfinite(y)
        ref = np.unwrap(np.arctan2(y[ok], j[ok]))
        ref -= np.round((ref[0] + 0.5 * np.pi) / (2 * np.pi)) * 2 * np.pi  # theta(0+) = -pi/2
        np.testing.assert_allclose(bessel_phase(m, z[ok], j[ok], y[ok]), ref, atol=1e-9)
        # the branch estimate is within 1 rad (the module needs < pi)
        assert np.abs(_phase_estimate(m, z[ok]) - ref).max() < 1.0


def test_range_finite_ascending_separated_and_complete():
    mpmath.mp.dps = 15
    rng = np.random.default_rng(11)
    for ka in KINDS:
        for kb in KINDS:
            for m in (0, 1, 50):
                for q in (1.01, 100.0):
                    # Bi at the ends of the range 1e-3..1e3 or log-uniform between
                    bia, bib = rng.choice([1e-3, 1e3, 10.0 ** rng.uniform(-3, 3)], size=2)
                    a = 0.03
                    inner, outer = cond(ka, bia, a), cond(kb, bib, q * a)
                    lam = annulus_eigenvalues(inner, outer, m, 200, a, q * a, K) * a
                    assert lam.shape == (200,) and np.all(np.isfinite(lam))
                    gaps = np.diff(lam)
                    assert np.all(gaps > 1e-3 * lam[1:] / 200), (ka, kb, m, q)
                    # completeness: sign changes of the scipy cross product on a grid much
                    # finer than the smallest gap, from 0 to past the last root
                    step = gaps.min() / 8
                    grid = np.arange(max(lam[0] * 1e-3, 1e-9), lam[-1] + 0.5 * gaps[-1], step)
                    f = characteristic(m, q, ka, kb, bia, bib, grid)
                    changes = np.count_nonzero(np.sign(f[1:]) != np.sign(f[:-1]))
                    positive = np.count_nonzero(lam > 0)
                    assert changes == positive, (ka, kb, m, q, bia, bib, changes, positive)
                    f_roots = characteristic(m, q, ka, kb, bia, bib, lam[lam > 0])
                    assert np.abs(f_roots).max() < 1e-9


@pytest.mark.parametrize("ka, kb, m, q, steps", [
    ("N", "N", 2, 3.0, (68, 89)),        # failed before: bracket [105.25, 108.07] without sign change
    ("N", "N", 28, 3.0, (32, 40, 58, 91)),  # gave wrong roots before (2.8 % off)
    ("R", "N", 44, 1.5, (71, 93, 106)),
    ("R", "R", 18, 1.5, (32, 43, 103)),
    ("D", "R", 0, 10.0, (5, 120)),
])
def test_roots_grown_in_steps_equal_one_computation(ka, kb, m, q, steps):
    """A cached table grown by later, longer requests (another fit asking for more terms)
    holds the same roots as one computation of the longest request.  Regression: the growth
    once started its bracketing grid at the last known root, whose cross-product sign is
    rounding noise there."""
    from heatsight.forward.roots import ROOT_CACHE
    a = 0.02
    inner, outer = cond(ka, 2.0, a), cond(kb, 5.0, q * a)
    ROOT_CACHE.clear()
    for n in steps:
        grown = annulus_eigenvalues(inner, outer, m, n, a, q * a, K)
    ROOT_CACHE.clear()
    once = annulus_eigenvalues(inner, outer, m, steps[-1], a, q * a, K)
    assert np.all(np.diff(grown) > 0)
    assert np.allclose(grown, once, rtol=1e-13, atol=0.0)


def test_modulus_phase_tables_match_mpmath():
    # mpmath.besselj / bessely and their derivatives at 20 digits (reference library)
    mpmath.mp.dps = 20
    worst = 0.0
    for m in (0, 1, 7, 29, 50):
        z = np.r_[m + 2.0 + np.geomspace(1e-3, 3.0, 4), np.geomspace(m + 6.0, 3e5, 10)] + 0.123
        j, y, dj, dy = far_values(m, z)
        for i, zi in enumerate(z):
            x = mpmath.mpf(zi)
            ref = (mpmath.besselj(m, x), mpmath.bessely(m, x),
                   x * mpmath.besselj(m, x, 1), x * mpmath.bessely(m, x, 1))
            mod, dmod = mpmath.hypot(ref[0], ref[1]), mpmath.hypot(ref[2], ref[3])
            for got, want, size in zip((j[i], y[i], dj[i], dy[i]), ref, (mod, mod, dmod, dmod)):
                worst = max(worst, abs(float((got - want) / size)))
    mpmath.mp.dps = 15
    assert worst < 3e-13  # of the modulus (the house J table: 4e-13)


@pytest.mark.parametrize("kind", ["I", "K"])
def test_scaled_modified_bessel_and_derivative_match_mpmath(kind):
    """wall_radial._scaled_bessel (f, df/dr) of I_m (scaled by e^{-beta b}) and K_m (scaled by
    e^{beta a}) against mpmath.besseli / besselk and mpmath.diff at 30 digits, from small to
    large beta r and orders 0..40."""
    from heatsight.forward.wall_radial import _scaled_bessel
    a, b = 0.02, 0.05
    mpmath.mp.dps = 30
    for m in (0, 1, 3, 12, 40):
        for beta in (0.5, 40.0, 900.0):
            r = np.array([a, 0.031, b])
            f, df = _scaled_bessel(kind, np.full(3, m), beta, r, a, b)
            for i, ri in enumerate(r):
                x = mpmath.mpf(beta) * mpmath.mpf(float(ri))
                if kind == "I":
                    fn, scale = (lambda t: mpmath.besseli(m, t)), mpmath.exp(-mpmath.mpf(beta) * b)
                else:
                    fn, scale = (lambda t: mpmath.besselk(m, t)), mpmath.exp(mpmath.mpf(beta) * a)
                ref_f = fn(x) * scale
                ref_df = mpmath.mpf(beta) * mpmath.diff(fn, x) * scale
                if abs(ref_f) < 1e-280 or abs(ref_f) > 1e280:
                    continue                    # beyond double range: scaled out of the fit's use
                assert float(f[i]) == pytest.approx(float(ref_f), rel=1e-12)
                assert float(df[i]) == pytest.approx(float(ref_df), rel=1e-12)


def test_wall_radial_values_in_any_order_and_with_repeats():
    """WallRadial.values evaluates the Bessel functions once per distinct radius: radii given
    unsorted, distinct or repeated, give each radius's own values (each evaluated alone)."""
    from heatsight.forward.faces import EndCondition as EC
    from heatsight.forward.wall_radial import WallRadial
    m = np.array([0, 0, 1, 3, 7])
    beta = np.array([0.0, 12.0, 5.0, 40.0, 300.0])
    wr = WallRadial("side", EC("R", 600.0), m, beta, 0.05, 0.08, 45.0)
    for r in (np.array([0.07, 0.051, 0.079, 0.06]), np.array([0.06, 0.07, 0.06, 0.051, 0.07])):
        q, dq, mq = wr.values(r)
        for i, ri in enumerate(r):
            one = wr.values(np.array([ri]))
            for got, want in zip((q, dq, mq), one):
                np.testing.assert_array_equal(got[i], want[0])

