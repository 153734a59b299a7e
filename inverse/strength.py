"""Choice of the smoothing strength alpha of a LinearGaussianProblem.

Methods (all evaluated from the problem's single SVD):
- 'evidence'    maximize log p(d | alpha) (marginal likelihood); 'auto' means this.
- 'gcv'         minimize generalized cross-validation V(alpha) (Golub, Heath & Wahba 1979).
- 'lcurve'      maximize the curvature of (log residual norm, log seminorm) (Hansen's corner),
                the largest interior local maximum on the grid (`lcurve_alphas`: without
                the spurious corner of a nearly unregularized direction).
- 'discrepancy' solve chi2(alpha) = target, target = n by default (Morozov).
- a number      fixed alpha.
Evidence, GCV and L-curve are searched on a log grid, then refined by a bounded scalar
minimization in log alpha between the grid neighbours of the best grid point.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np
from scipy.optimize import brentq, minimize_scalar

from .errors import InverseError, StrengthError
from .linear_gaussian import LinearGaussianProblem

METHODS = ("evidence", "gcv", "lcurve", "discrepancy")


@dataclass(frozen=True)
class StrengthChoice:
    """Chosen alpha and the criterion curve behind it (for plotting).

    criterion: name of `values` ('log_evidence', 'gcv', 'curvature' or 'chi2');
    for a fixed alpha the log evidence curve is returned for context.
    residual_norm, seminorm: the L-curve on the same grid. target: chi2 target (discrepancy).
    """

    alpha: float
    method: str
    criterion: str
    alphas: np.ndarray
    values: np.ndarray
    residual_norm: np.ndarray
    seminorm: np.ndarray
    target: float | None = None
    warnings: tuple[str, ...] = ()


def default_alphas(problem: LinearGaussianProblem, num: int = 200, margin: float = 1e2) -> np.ndarray:
    """Log-spaced grid [s_min^2 / margin, s_max^2 * margin] of `num` strengths.

    alpha is compared with s_j^2 (filter factor s^2/(s^2+alpha)): below s_min^2 every
    mode is resolved, above s_max^2 none is, so the interesting range is covered with a
    margin. s_min = the smallest singular value above 1e-6 s_max (smaller ones are not
    resolved by double-precision data anyway).
    """
    s = problem.singular_values
    smax = float(s.max()) if s.size else 0.0
    if not smax > 0:
        raise InverseError("the design matrix is zero: the readings carry no information on the unknown face")
    smin = float(s[s > 1e-6 * smax].min())
    return np.geomspace(smin**2 / margin, smax**2 * margin, int(num))


def _fixed_notes(alpha: float, grid: np.ndarray) -> list[str]:
    """A fixed strength beyond the range where it shapes the answer (`default_alphas`' grid:
    below it the prior holds no mode back, above it the readings move none)."""
    if alpha < grid[0]:
        return [f"the fixed strength {alpha:.3g} is below {grid[0]:.3g}, where the prior still holds back any "
                f"mode: the answer is not regularized (the readings' noise amplified, as its bands show); "
                f"leave strength = \"auto\" for the evidence's choice"]
    if alpha > grid[-1]:
        return [f"the fixed strength {alpha:.3g} is above {grid[-1]:.3g}, where the readings still move any mode: "
                f"the answer is the prior's mean; leave strength = \"auto\" for the evidence's choice"]
    return []


#: a leading singular value more than this factor above the next belongs to a nearly
#: unregularized direction (e.g. the fit's nominal level, whose prior is nearly flat)
FREE_GAP = 100.0


def lcurve_alphas(problem: LinearGaussianProblem, num: int = 200, margin: float = 1e2) -> np.ndarray:
    """`default_alphas` without the range of nearly unregularized leading directions.

    The L-curve has a corner wherever the filter factor of a direction switches off; for a
    direction whose singular value stands more than FREE_GAP above all others (a nearly
    flat prior) that corner is an artefact: it measures the prior that was meant not to act,
    and there the fit collapses onto the prior mean. The grid therefore ends at margin times
    the square of the largest singular value not so separated.
    """
    grid = default_alphas(problem, num, margin)
    s = problem.singular_values
    s = s[s > 1e-6 * s.max()]
    lead = 0
    while lead + 1 < s.size and s[lead] > FREE_GAP * s[lead + 1]:
        lead += 1
    if lead == 0:
        return grid
    return np.geomspace(grid[0], s[lead] ** 2 * margin, int(num))


def _refine(objective, log_grid, values, what, interior_only=False):
    """Minimize objective(log alpha) near the grid minimum; returns (alpha, warnings).

    interior_only: prefer the best interior local minimum when there is one.
    """
    i = int(np.nanargmin(values))
    if interior_only:
        v = values
        loc = np.flatnonzero((v[1:-1] < v[:-2]) & (v[1:-1] < v[2:])) + 1
        if loc.size:
            i = int(loc[np.argmin(v[loc])])
    if i == 0 or i == len(log_grid) - 1:
        side = "smallest" if i == 0 else "largest"
        msg = (f"{what}: best value at the {side} alpha of the grid "
               f"[{np.exp(log_grid[0]):.3g}, {np.exp(log_grid[-1]):.3g}]; the optimum may lie beyond it")
        return float(np.exp(log_grid[i])), (msg,)
    res = minimize_scalar(objective, bounds=(log_grid[i - 1], log_grid[i + 1]), method="bounded",
                          options={"xatol": 1e-7})
    t = res.x if res.fun <= values[i] else log_grid[i]
    return float(np.exp(t)), ()


def choose_strength(problem: LinearGaussianProblem, method="evidence", alphas=None,
                    target: float | None = None) -> StrengthChoice:
    """Choose alpha by `method` ('evidence' | 'auto' | 'gcv' | 'lcurve' | 'discrepancy' | number).

    alphas: grid to search (default `default_alphas(problem)`); target: chi2 target for
    'discrepancy' (default n). Raises StrengthError when the discrepancy rule has no solution.
    """
    if alphas is not None:
        grid = np.sort(np.asarray(alphas, dtype=float).ravel())
    elif isinstance(method, str) and method.strip().lower() == "lcurve":
        grid = lcurve_alphas(problem)
    else:
        grid = default_alphas(problem)
    if grid.size < 3 or np.any(grid <= 0) or not np.all(np.isfinite(grid)):
        raise InverseError("alphas must hold at least 3 positive finite values")
    lg = np.log(grid)
    rn, sn = problem.residual_norm(grid), problem.seminorm(grid)

    def pack(alpha, name, criterion, values, target=None, warnings=()):
        return StrengthChoice(float(alpha), name, criterion, grid, values, rn, sn, target, tuple(warnings))

    if not isinstance(method, str):
        alpha = float(method)
        if not (np.isfinite(alpha) and alpha > 0):
            raise InverseError(f"a fixed smoothing strength must be a positive number, got {method!r}")
        return pack(alpha, "fixed", "log_evidence", problem.log_evidence(grid), warnings=_fixed_notes(alpha, grid))
    name = method.strip().lower()
    if name == "auto":
        name = "evidence"
    if name == "evidence":
        v = problem.log_evidence(grid)
        alpha, w = _refine(lambda t: -problem.log_evidence(np.exp(t)), lg, -v, "evidence")
        return pack(alpha, name, "log_evidence", v, warnings=w)
    if name == "gcv":
        v = problem.gcv(grid)
        alpha, w = _refine(lambda t: problem.gcv(np.exp(t)), lg, v, "GCV")
        return pack(alpha, name, "gcv", v, warnings=w)
    if name == "lcurve":
        v = problem.lcurve_curvature(grid)
        corner = (v[1:-1] > v[:-2]) & (v[1:-1] > v[2:]) & (v[1:-1] > 0)
        if not corner.any():
            # No convex corner: with more unknowns than readings and a fitted prior mean the
            # curve is a '7' (seminorm bounded as alpha -> 0), and the largest curvature sits
            # at an end of the grid -- an arbitrary alpha. Use the evidence and say so.
            ev = choose_strength(problem, "evidence")
            note = ("the L-curve of these readings has no corner (its curvature is nowhere a positive "
                    "interior maximum), so the smoothing strength comes from the evidence instead")
            return replace(ev, warnings=ev.warnings + (note,))
        alpha, w = _refine(lambda t: -problem.lcurve_curvature(np.exp(t)), lg, -v, "L-curve",
                           interior_only=True)
        return pack(alpha, name, "curvature", v, warnings=w)
    if name == "discrepancy":
        tgt = float(problem.n) if target is None else float(target)
        alpha = _discrepancy_root(problem, tgt, lg)
        return pack(alpha, name, "chi2", rn**2, target=tgt)
    raise InverseError(f"unknown strength method {method!r}; use one of {METHODS + ('auto',)} or a number")


def _discrepancy_root(problem: LinearGaussianProblem, target: float, lg) -> float:
    """alpha with chi2(alpha) = target; chi2 increases monotonically in alpha."""
    lo_lim, hi_lim = problem.chi2_limits
    if lo_lim >= target:
        raise StrengthError(
            f"discrepancy principle impossible: even with no smoothing chi2 = {lo_lim:.4g} >= target "
            f"{target:.4g}; the model cannot fit the readings to within their stated noise "
            "(noise underestimated, a faulty sensor, or too few modes)")
    if hi_lim <= target:
        raise StrengthError(
            f"discrepancy principle impossible: even the prior mean alone (alpha -> inf) leaves only "
            f"chi2 = {hi_lim:.4g} <= target {target:.4g}; the readings show nothing beyond the nominal "
            "profile at this noise level, so no finite strength meets the target")
    fun = lambda t: float(problem.chi2(np.exp(t))) - target
    a, b = lg[0], lg[-1]
    for _ in range(60):
        if fun(a) < 0:
            break
        a -= np.log(1e3)
    for _ in range(60):
        if fun(b) > 0:
            break
        b += np.log(1e3)
    return float(np.exp(brentq(fun, a, b, xtol=1e-12, rtol=1e-12)))
