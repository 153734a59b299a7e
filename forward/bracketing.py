"""Vectorized root refinement inside sign-changing brackets (Illinois regula falsi)."""

from __future__ import annotations

import numpy as np

from .errors import ForwardModelError


def solve_bracketed(f, lo, hi, *, xtol: float = 4e-16, max_iter: int = 200) -> np.ndarray:
    """Roots of a vectorized function f, one in each bracket [lo_i, hi_i].

    f(x, i) is called with trial points x and the indices i of their brackets, so one
    call can serve brackets of different functions (e.g. different targets).

    Each bracket must hold a sign change, f(lo) f(hi) <= 0; the iteration keeps the
    sign change (Illinois-modified regula falsi, with a bisection step whenever an
    update fails to shrink the bracket by half), so a root is never lost or swapped
    for a neighbour.  Converges to |hi - lo| <= xtol * max(1, |x|).
    """
    lo = np.array(lo, dtype=float)
    hi = np.array(hi, dtype=float)
    all_idx = np.arange(lo.size)
    flo = np.asarray(f(lo, all_idx), dtype=float)
    fhi = np.asarray(f(hi, all_idx), dtype=float)
    if np.any(flo * fhi > 0) or not np.all(np.isfinite(flo * fhi)):
        bad = np.flatnonzero(~(flo * fhi <= 0))[:3]
        raise ForwardModelError(
            f"internal: root bracket without sign change at {list(zip(lo[bad], hi[bad]))}")
    x = np.where(flo == 0, lo, np.where(fhi == 0, hi, 0.5 * (lo + hi)))
    active = (flo != 0) & (fhi != 0)
    side = np.zeros(lo.shape, dtype=int)  # which end was kept last time (+1 lo, -1 hi)
    for _ in range(max_iter):
        if not active.any():
            break
        idx = np.flatnonzero(active)
        a, b, fa, fb = lo[idx], hi[idx], flo[idx], fhi[idx]
        width = b - a
        xs = (a * fb - b * fa) / (fb - fa)
        bad = ~np.isfinite(xs) | (xs <= a) | (xs >= b)
        xs = np.where(bad, 0.5 * (a + b), xs)
        fx = np.asarray(f(xs, idx), dtype=float)
        left = np.sign(fx) == np.sign(fa)  # root in [xs, b]
        new_a = np.where(left, xs, a)
        new_b = np.where(left, b, xs)
        new_fa = np.where(left, fx, fa)
        new_fb = np.where(left, fb, fx)
        # Illinois: halve the stale end's value when the same end is retained twice.
        s = side[idx]
        keep_b = left  # b retained
        new_fb = np.where(keep_b & (s == -1), 0.5 * new_fb, new_fb)
        new_fa = np.where(~keep_b & (s == 1), 0.5 * new_fa, new_fa)
        side[idx] = np.where(keep_b, -1, 1)
        # Guarantee progress: bisect where the bracket did not halve.
        slow = (new_b - new_a) > 0.5 * width
        mid = 0.5 * (new_a + new_b)
        fm = np.asarray(f(mid[slow], idx[slow]), dtype=float) if slow.any() else np.empty(0)
        if slow.any():
            sa = np.sign(fm) == np.sign(new_fa[slow])
            ia = np.flatnonzero(slow)
            na, nb, nfa, nfb = new_a[ia], new_b[ia], new_fa[ia], new_fb[ia]
            new_a[ia] = np.where(sa, mid[ia], na)
            new_fa[ia] = np.where(sa, fm, nfa)
            new_b[ia] = np.where(sa, nb, mid[ia])
            new_fb[ia] = np.where(sa, nfb, fm)
            side[idx[ia]] = 0
        lo[idx], hi[idx], flo[idx], fhi[idx] = new_a, new_b, new_fa, new_fb
        exact = fx == 0
        x[idx] = np.where(exact, xs, 0.5 * (new_a + new_b))
        done = exact | ((new_b - new_a) <= xtol * np.maximum(1.0, np.abs(x[idx])))
        active[idx[done]] = False
    if active.any():
        raise ForwardModelError("internal: root refinement did not converge")
    return x
