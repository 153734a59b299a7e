"""What a fit marginalized into its kept readings' noise, for the figures' shares and for
planning: the left-out modes (truncation.py) and the unseen stretches' steps (stretch.py)."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .functionals import functional_matrix
from .truncation import conditional, functional_tails


def functional_rows(columns, zones=()) -> dict:
    """{name: row (T,)} of a marginalized set (LeftOutColumns, stretch.StretchSteps) on the
    fit's quadrature rule: the face mean and each zone mean by name
    (functionals.functional_matrix), the total power from the set's own powers()."""
    names, F, _ = functional_matrix(columns, zones)
    rows = dict(zip(names, F))
    rows["total_power"] = np.asarray(columns.powers()[0], float)
    return rows


#: points per block in MarginalSets.at_points and prior_at_points
POINT_BLOCK = 512


def prior_at_points(sets, prior, r, theta, z) -> np.ndarray:
    """The prior variance (Q,) [K^2] of column sets (LeftOutColumns, stretch.StretchSteps; None
    entries skipped) at points (r, theta, z) [m, rad, m]: sum_t fields_t(x)^2 v_t, not given
    the readings (a calibrated fit's, whose face map adds the same variance on the face)."""
    r, theta, z = (np.atleast_1d(np.asarray(x, float)).ravel() for x in (r, theta, z))
    out = np.zeros(r.size)
    for c in (c for c in sets if c is not None):
        v = c.variances(prior)
        for lo in range(0, r.size, POINT_BLOCK):
            sl = slice(lo, min(lo + POINT_BLOCK, r.size))
            out[sl] += (c.fields(r[sl], theta[sl], z[sl]) ** 2) @ v
    return out


@dataclass
class MarginalSets:
    """The column sets a fit marginalized into its kept readings' noise: the left-out modes
    `left` (LeftOutColumns or None) under the learned prior `prior`, the unseen stretches'
    `steps` (stretch.StretchSteps or None), the kept readings `rd`, their noise covariance
    `S` (n, n) [K^2] with both sets' signal, the kept model columns' fields `X` (n, K), and
    the steps' fields there `step_fields` (n, J) [K per face unit] (None without steps)."""

    left: object
    prior: object
    steps: object
    rd: object
    S: np.ndarray
    X: np.ndarray
    step_fields: np.ndarray | None = None
    #: rows by zones (rows): the fit's figures and the planner ask for the same ones
    _rows: dict = field(default_factory=dict, repr=False, compare=False)

    def rows(self, zones=()):
        """(names, rows of `left` (q, T) or None, rows of `steps` (q, J) or None) for the total
        power, the face mean and each zone mean (functional_rows; a zone one set's rule finds
        empty, split at the other's edges too, takes no share of it).  Each set's rows are
        evaluated once per set of zones (an enlarged basis on the quadrature rule), zones
        compared by value (inverse.problem.Zone is frozen)."""
        key = tuple(zones)
        try:
            hash(key)
        except TypeError:           # zone objects that are not values (no cache)
            return self._rows_of(zones)
        if key not in self._rows:
            self._rows[key] = self._rows_of(zones)
        return self._rows[key]

    def _rows_of(self, zones):
        tables = [None if c is None else functional_rows(c, zones) for c in (self.left, self.steps)]
        first = next((t for t in tables if t is not None), None)
        if first is None:
            return [], None, None
        names = ["total_power"] + [n for n in first if n != "total_power"]

        def on(t):
            if t is None:
                return None
            size = len(next(iter(t.values())))
            return np.array([t.get(n, np.zeros(size)) for n in names])
        return names, on(tables[0]), on(tables[1])

    def shares(self, zones=(), with_steps=True, noise_covariance=None) -> dict:
        """{name: (h (n,), variance)}: each figure's share of the sets given the residual r =
        d - t0 - X c at the kept readings, value = k + f . c + h . r + e (functional_tails);
        with_steps=False: the left-out modes' share alone, given the residual of the steps
        too, under `noise_covariance` (the noise without the steps' signal)."""
        names, left_rows, step_rows = self.rows(zones)
        steps = self.steps if with_steps else None
        if self.left is None and steps is None:
            return {n: (np.zeros(self.rd.n), 0.0) for n in names}
        S = self.S if noise_covariance is None else noise_covariance
        return dict(zip(names, functional_tails(self.left, left_rows, self.rd, self.prior, S, steps,
                                                step_rows if with_steps else None)))

    def _columns_at_readings(self):
        """(the sets, [(their fields at the kept readings (n, T), prior variances (T,))])."""
        cols = [c for c in (self.left, self.steps) if c is not None]
        rd = self.rd
        return cols, [(self.step_fields if c is self.steps and self.step_fields is not None
                       else c.fields(rd.r, rd.theta, rd.z), c.variances(self.prior)) for c in cols]

    def gradient_at_points(self, r, theta, z) -> np.ndarray:
        """Hg (3, Q, n): the sets' part of the temperature gradient at points given the residual
        r_k at the kept readings, grad T = grad t0 + grad G c + Hg r_k (the conditional mean of
        at_points with each set's gradient as its rows; heat flux -k grad T, predict_flux)."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)).ravel() for x in (r, theta, z))
        q, n = r.size, self.rd.n
        out = np.zeros((3, q, n))
        cols, at_readings = self._columns_at_readings()
        if not cols:
            return out
        for lo in range(0, q, POINT_BLOCK):
            sl = slice(lo, min(lo + POINT_BLOCK, q))
            # the three components' rows at once: one solve with S per block
            parts = [(G, v, c.gradients(r[sl], theta[sl], z[sl]).reshape(-1, v.size))
                     for (G, v), c in zip(at_readings, cols)]
            h, _ = conditional(parts, self.S)
            out[:, sl] = h.T.reshape(3, -1, n)
        return out

    def at_points(self, r, theta, z):
        """(H (Q, n), variance (Q,)): the sets' part of the temperature at points (r, theta, z)
        [m, rad, m] given the residual r_k = d - t0 - X c at the kept readings, value = t0 + G c
        + H r_k + e (truncation.conditional with each set's fields at the points as its rows)."""
        r, theta, z = (np.atleast_1d(np.asarray(x, float)).ravel() for x in (r, theta, z))
        q = r.size
        cols, at_readings = self._columns_at_readings()
        if not cols:
            return np.zeros((q, self.rd.n)), np.zeros(q)
        H, variance = np.zeros((q, self.rd.n)), np.zeros(q)
        # points in blocks: the enlarged basis has ~10x the fit's columns (a points table of
        # 5,000 rows took 500 MB at once)
        for lo in range(0, q, POINT_BLOCK):
            sl = slice(lo, min(lo + POINT_BLOCK, q))
            parts = [(G, v, c.fields(r[sl], theta[sl], z[sl])) for (G, v), c in zip(at_readings, cols)]
            h, var = conditional(parts, self.S)
            H[sl], variance[sl] = h.T, var
        return H, variance
