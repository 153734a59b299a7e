"""Fit of coefficients c and a few nonlinear parameters theta through lmfit.

lmfit's `least_squares` method (scipy trust-region reflective, bounds honoured)
minimizes the sum of squares of the stacked residual

    [ phi(L^-1 (G(theta) c + t0(theta) - d)) ;  sqrt(alpha p) (c - c0) ;  (theta_j - mu_j) / sd_j ]

with S = L L^T, p the prior precision diagonal, (mu_j, sd_j) optional Gaussian priors on
theta. The Jacobian is analytic in c (L^-1 G, diag sqrt(alpha p)) and by central
differences of `design(values) -> (G, t0)` in theta. phi is the identity for
loss='linear'; for a robust loss rho (scipy's 'soft_l1' or 'huber', scale f) it is
phi(r) = sign(r) f sqrt(rho((r/f)^2)), so that sum phi^2 = f^2 sum rho((r/f)^2):
the robust loss acts on the sensor rows only and leaves the Gaussian priors Gaussian.
Joint covariance of (c, theta): (J^T J)^-1 at the optimum (for a robust loss, the
Gaussian approximation of the robust objective there).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np

from .errors import InverseError
from .linear_gaussian import LinearGaussianProblem
from .noise import Whitener
from .problem import LOSSES

if TYPE_CHECKING:
    import lmfit

COEF_PREFIX = "c_"


def _rho(z, loss):
    """(rho(z), rho'(z)) of scipy's robust losses, z = (r/f)^2."""
    if loss == "soft_l1":
        q = np.sqrt(1.0 + z)
        return 2.0 * z / (q + 1.0), 1.0 / q
    big = z > 1.0
    sq = np.sqrt(np.where(big, z, 1.0))
    return np.where(big, 2.0 * sq - 1.0, z), np.where(big, 1.0 / sq, 1.0)


def _robust(r, loss, f):
    """phi(r) and phi'(r) for the sensor rows (identity for 'linear')."""
    if loss == "linear":
        return r, np.ones_like(r)
    z = (r / f) ** 2
    rho, _ = _rho(z, loss)
    phi = np.sign(r) * f * np.sqrt(rho)
    if loss == "soft_l1":
        q = np.sqrt(1.0 + z)
        dphi = np.sqrt(0.5 * (q + 1.0)) / q                 # rho' sqrt(z / rho)
    else:
        dphi = np.where(z > 1.0, 1.0 / np.sqrt(np.maximum(2.0 * np.sqrt(z) - 1.0, 1.0)), 1.0)
    return phi, dphi


@dataclass
class LmfitFit:
    """Result of `fit_lmfit`.

    coefficients (K,); values: every nonlinear parameter's final value; names: order of
    the rows of `covariance` (coefficients 'c_0'.. then the varying nonlinear parameters);
    chi2 = ||L^-1 (G c + t0 - d)||^2 (Gaussian misfit); cost = minimized sum of squares;
    G, t0 at the optimum; weights: rho'((r/f)^2) per sensor (1 for loss='linear').
    """

    coefficients: np.ndarray
    values: dict
    names: tuple
    covariance: np.ndarray
    chi2: float
    cost: float
    G: np.ndarray
    t0: np.ndarray
    alpha: float
    loss: str
    weights: np.ndarray
    result: lmfit.minimizer.MinimizerResult
    _inputs: tuple = field(repr=False, default=None)

    @property
    def coefficient_covariance(self) -> np.ndarray:
        k = self.coefficients.size
        return self.covariance[:k, :k]

    @property
    def sd(self) -> dict:
        """Standard deviation of every fitted variable, by name."""
        return dict(zip(self.names, np.sqrt(np.diag(self.covariance))))

    def linear_problem(self) -> LinearGaussianProblem:
        """The linear Gaussian problem at the fitted nonlinear values (for diagnostics and bands)."""
        d, wh, p, c0 = self._inputs
        return LinearGaussianProblem(self.G, d, self.t0, wh, p, c0)


def fit_linear_lmfit(G, d, t0, noise, prior_diag, alpha, c0=None, **kwargs) -> LmfitFit:
    """`fit_lmfit` with a fixed design (G, t0) and no nonlinear parameters."""
    G = np.asarray(G, dtype=float)
    t0 = np.broadcast_to(np.asarray(t0, dtype=float), (G.shape[0],)).copy()
    return fit_lmfit(lambda values: (G, t0), None, d, noise, prior_diag, alpha, c0=c0, **kwargs)


def fit_lmfit(design, params, d, noise, prior_diag, alpha, c0=None, priors=None,
              loss: str = "linear", f_scale: float = 1.0, scale_covar: bool = False,
              fd_rel_step: float = 6e-6, tol: float = 1e-12, max_nfev: int | None = None) -> LmfitFit:
    """Fit c (linear, Gaussian prior) and the varying parameters of `params` with lmfit.

    design(values: dict) -> (G (n, K), t0 (n,)) for the nonlinear values (all of params).
    params: lmfit.Parameters (bounds honoured; `expr` constraints not supported) or None.
    priors: {name: (mean, sd)} Gaussian priors on nonlinear parameters.
    loss: 'linear' | 'soft_l1' | 'huber' on the whitened sensor residuals, scale f_scale
    (in noise sds). scale_covar=False: sigma is known, covariance not rescaled by the
    reduced chi-square. fd_rel_step: difference step relative to |theta| (1 if theta = 0).
    The coefficients start at c0.
    """
    if loss not in LOSSES:
        raise InverseError(f"loss must be one of {LOSSES}, got {loss!r}")
    alpha = float(alpha)
    if not (np.isfinite(alpha) and alpha > 0):
        raise InverseError("smoothing strength alpha must be positive and finite")
    if not f_scale > 0:
        raise InverseError("f_scale must be positive")
    d = np.asarray(d, dtype=float)
    n = d.size
    wh = noise if isinstance(noise, Whitener) else Whitener(noise, n)
    p = np.asarray(prior_diag, dtype=float)
    K = p.size
    c0 = np.zeros(K) if c0 is None else np.asarray(c0, dtype=float)
    sqrt_ap = np.sqrt(alpha * p)
    import lmfit   # here, not at the top: lmfit loads scipy.stats (~0.5 s), and a default fit never calls it

    user = lmfit.Parameters() if params is None else params
    for name, par in user.items():
        if par.expr is not None:
            raise InverseError(f"parameter {name!r} uses an expression; write that dependence in design()")
    cnames = [f"{COEF_PREFIX}{k}" for k in range(K)]
    clash = set(cnames) & set(user)
    if clash:
        raise InverseError(f"nonlinear parameter names clash with coefficient names: {sorted(clash)}")
    priors = {} if priors is None else dict(priors)
    for name, (mu, sd) in priors.items():
        if name not in user or not sd > 0:
            raise InverseError(f"prior for {name!r}: needs an existing parameter and a positive sd")
    tnames = [name for name, par in user.items() if par.vary]
    pnames = list(priors)

    cache = {}

    def design_at(values):
        key = tuple(values[k] for k in user)
        if key not in cache:
            G, t0 = design(dict(values))
            G = np.asarray(G, dtype=float)
            t0 = np.broadcast_to(np.asarray(t0, dtype=float), (n,))
            if G.shape != (n, K):
                raise InverseError(f"design() returned G of shape {G.shape}, expected {(n, K)}")
            while len(cache) >= 8:          # the least recently used goes
                cache.pop(next(iter(cache)))
            cache[key] = (G, t0)
        cache[key] = cache.pop(key)         # now the most recently used
        return cache[key]

    def unpack(pars):
        c = np.array([pars[k].value for k in cnames])
        values = {k: float(pars[k].value) for k in user}
        return c, values

    def data_rows(c, values):
        G, t0 = design_at(values)
        return wh.whiten(G @ c + t0 - d)

    def residual(pars):
        c, values = unpack(pars)
        phi, _ = _robust(data_rows(c, values), loss, f_scale)
        th = [(values[k] - priors[k][0]) / priors[k][1] for k in pnames]
        return np.concatenate([phi, sqrt_ap * (c - c0), th])

    def jacobian(pars, **_):
        c, values = unpack(pars)
        return _jacobian(c, values, central=False)

    def _jacobian(c, values, central=True):
        G, _ = design_at(values)
        r = data_rows(c, values)
        _, dphi = _robust(r, loss, f_scale)
        J = np.zeros((n + K + len(pnames), K + len(tnames)))
        J[:n, :K] = wh.whiten(G)
        J[n:n + K, :K] = np.diag(sqrt_ap)
        for j, name in enumerate(tnames):
            J[:n, K + j] = _fd_column(name, c, values, central)
        J[:n] *= dphi[:, None]
        for i, name in enumerate(pnames):
            if name in tnames:
                J[n + K + i, K + tnames.index(name)] = 1.0 / priors[name][1]
        return J

    def _fd_column(name, c, values, central):
        """d(whitened data rows)/d theta: central differences, or during the iterations one
        step from theta, whose design is cached already (one design build per column instead
        of two; the final Jacobian, which gives the covariance, is central)."""
        par = user[name]
        x = values[name]
        h = fd_rel_step * (abs(x) if x != 0 else 1.0)
        lo = -np.inf if par.min is None else par.min
        hi = np.inf if par.max is None else par.max
        if central:
            up, dn = min(x + h, hi), max(x - h, lo)
        else:
            up, dn = (x + h, x) if x + h <= hi else (x, max(x - h, lo))
        vu, vd = dict(values), dict(values)
        vu[name], vd[name] = up, dn
        if up == dn:
            raise InverseError(f"parameter {name!r} has no room between its bounds for a difference step")
        return (data_rows(c, vu) - data_rows(c, vd)) / (up - dn)

    fit_params = lmfit.Parameters()
    for k, name in enumerate(cnames):
        fit_params.add(name, value=float(c0[k]))
    for name, par in user.items():
        fit_params.add(name, value=par.value, vary=par.vary, min=par.min, max=par.max)
    mini = lmfit.Minimizer(residual, fit_params, scale_covar=scale_covar)
    kws = dict(Dfun=jacobian, ftol=tol, xtol=tol, gtol=tol, x_scale="jac")
    if max_nfev is not None:
        kws["max_nfev"] = max_nfev
    res = mini.minimize(method="least_squares", **kws)
    names = tuple(cnames + tnames)
    if tuple(res.var_names) != names:
        raise RuntimeError("lmfit reordered the variables")  # internal consistency
    c, values = unpack(res.params)
    J = _jacobian(c, values)
    _, sv, vt = np.linalg.svd(J, full_matrices=False)
    if sv[-1] <= sv[0] * 1e-12:
        raise InverseError("the fitted parameters are not identifiable from the readings and priors "
                           "(singular Jacobian); add a prior or fix a parameter")
    cov = (vt.T / sv**2) @ vt
    if scale_covar:
        cov = cov * res.redchi
    for name, sd in zip(names, np.sqrt(np.diag(cov))):
        res.params[name].stderr = float(sd)
    G, t0 = design_at(values)
    r = data_rows(c, values)
    _, w = _rho((r / f_scale) ** 2, loss) if loss != "linear" else (None, np.ones(n))
    return LmfitFit(coefficients=c, values=values, names=names, covariance=cov,
                    chi2=float(r @ r), cost=float(np.sum(residual(res.params) ** 2)),
                    G=np.array(G), t0=np.array(t0), alpha=alpha, loss=loss, weights=np.asarray(w),
                    result=res, _inputs=(d, wh, p, c0))
