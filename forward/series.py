"""Known-data series: project a face's (residual) data on its eigenfunctions and sum.

End face:  f(r, theta) = sum_mn c_mn J_m(lambda_mn r / a) Theta_m(theta),
           c_mn = integral_0^a f_m(r) J_m(lambda_mn r / a) r dr / N_mn
Side:      g(theta, z) = sum_mn c_mn Theta_m(theta) Z_n(z),
           c_mn = integral_0^L g_m(z) Z_n(z) dz / integral_0^L Z_n^2 dz
f_m, g_m are the azimuthal harmonic amplitudes (FFT on equally spaced angles); the
radial / axial integrals use Gauss-Legendre rules with enough nodes to resolve the
highest eigenfunction.  The number of terms doubles until the truncation estimate at
the requested points, sum over the last half of the terms of |c| x radial envelope(r) x
axial envelope(z) (modes.tail_envelopes: at least the size of the factor for every later
term at that point; |Theta_m| <= 1), is below tolerance x the data's temperature scale, or
the cap is reached;
harmonics below tolerance x the face's own largest datum are left out (both relative, so
any data scale is served alike).
`evaluate_grid` sums on a tensor grid of lines (forward/grid.py); `evaluate(...,
gradient=False)` sums the temperature only.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from scipy import special

from .families import SolidFamilies
from .geometry import Cylinder, is_wall
from .grid import grid_field
from .harmonics import harmonic_amplitudes, significant_harmonics, theta_nodes

CHUNK = 2_000_000  # point x mode entries per evaluation block


@lru_cache(maxsize=32)
def _gauss_unit(n):
    x, w = special.roots_legendre(int(n))
    return x, w


def _gauss(n, length, start=0.0):
    """Gauss-Legendre nodes and weights on [start, start + length]."""
    x, w = _gauss_unit(int(n))
    return start + 0.5 * length * (x + 1.0), 0.5 * length * w


class KnownSeries:
    """One sub-problem: known data on one face, the other faces homogeneous."""

    def __init__(self, face, data, geometry, kinds, conductivity, *, tol, scale, field_scale=None,
                 n_start=32, n_cap=1024, max_harmonic=64):
        """geometry: the part's family object (forward/families.py), or (radius, height) of a
        solid cylinder."""
        self.face = face
        self.wall = is_wall(face)
        self.data = data  # vectorized callable on face coordinates (SI)
        if isinstance(geometry, tuple):
            geometry = SolidFamilies(Cylinder(*geometry), kinds, conductivity)
        self.families = geometry
        self.cylinder = geometry.cylinder
        self.a, self.L = self.cylinder.radius, self.cylinder.height
        self.kinds = kinds  # dict face -> EndCondition
        self.k = conductivity
        self.tol = tol
        # scale: size of the face's raw data [data units]; harmonics below tol * scale are
        # dropped.  temperature_scale [K]: the truncation estimate must fall below tol times
        # it; field_scale (the whole field's data size in K) when given, else scale in K.
        self.scale = float(scale)
        kind = kinds[face]
        span = self.cylinder.datum_span(face)
        self.temperature_scale = (float(field_scale) if field_scale is not None
                                  else self.scale / kind.datum_scale(conductivity, span))
        self.n_cap = int(n_cap)
        self.max_harmonic = int(max_harmonic)
        self._harmonics()
        self.n_terms = 0
        self.modes = None
        self._build(int(n_start))

    # --- data sampling -------------------------------------------------------------
    def _interval(self):
        return self.families.interval(self.face)

    def _span(self):
        lo, hi = self._interval()
        return hi - lo

    def _nodes(self, n):
        """Gauss-Legendre nodes and weights on the face's interval of s."""
        lo, hi = self._interval()
        return _gauss(n, hi - lo, lo)

    def _sample(self, s, theta):
        """Data on a (s, theta) grid: s = r on end faces, z on the side; shape (len(s), len(theta))
        (through the data's own `grid` when it has one: forward.face_data.OperatorData)."""
        grid = getattr(self.data, "grid", None)
        if grid is not None:
            return np.asarray(grid(s, theta), float).reshape(len(s), len(theta))
        S, TH = np.meshgrid(s, theta, indexing="ij")
        if self.wall:
            return np.asarray(self.data(TH, S), float).reshape(S.shape)
        return np.asarray(self.data(S, TH), float).reshape(S.shape)

    def _harmonics(self):
        n_theta = 16
        s, _ = self._nodes(48)
        while True:
            a, b = harmonic_amplitudes(self._sample(s, theta_nodes(n_theta)), axis=1)
            ms = significant_harmonics(a, b, self.tol, self.max_harmonic, self.scale)
            top = int(ms.max()) if ms.size else 0
            if top < n_theta // 4 or n_theta >= 2 * self.max_harmonic + 2:
                break
            n_theta *= 2
        self.n_theta = max(n_theta, 2 * top + 4)
        self.orders = ms
        amp_c = np.abs(a).max(axis=0) if a.size else np.zeros(0)
        amp_s = np.abs(b).max(axis=0) if b.size else np.zeros(0)
        ref = self.scale
        self.parities = [(m, p) for m in ms for p in (False, True)
                         if not (p and m == 0) and (amp_s if p else amp_c)[m] > self.tol * ref]

    # --- construction ------------------------------------------------------------------
    def _eigen(self, m, n):
        return self.families.eigenvalues(self.face, m, n)

    def _make_modes(self, m, is_sin, ev):
        return self.families.modes(self.face, m, is_sin, ev)

    def _build(self, n):
        """Build the series with n terms per harmonic (roots come from the cached tables, so a
        doubling refines only the new eigenvalues)."""
        n = min(n, self.n_cap)
        if not self.parities:
            self.modes, self.coef, self.n_terms = None, np.zeros(0), n
            return
        # Every build projects all n terms with one rule resolving the highest eigenfunction:
        # keeping the earlier terms' coefficients (projected with coarser rules) and summing
        # only the new terms was tried and raised the round-off of the field by ~30 % (see
        # DEVELOPERS.md), so the terms already summed are summed again.
        ms = np.repeat([p[0] for p in self.parities], n)
        is_sin = np.repeat([p[1] for p in self.parities], n)
        ev = np.concatenate([self._eigen(p[0], n) for p in self.parities])
        modes = self._make_modes(ms, is_sin, ev)
        top_ev = float(ev.max())  # lambda (end faces) or mu (side), dimensionless
        nq = int(0.6 * top_ev + 16 * np.sqrt(top_ev + 1) + 80)
        s, w = self._nodes(nq)
        amps_c, amps_s = harmonic_amplitudes(self._sample(s, theta_nodes(self.n_theta)), axis=1)
        proj = np.empty(ms.size)
        if self.wall:
            zz, _ = modes.axial(s)  # (nq, K)
            weights = w[:, None] * zz
            norm = modes.axial_norms()
        else:
            norm = modes.norms() / np.where(ms == 0, 2.0 * np.pi, np.pi)
        for g, (mg, sg) in enumerate(self.parities):
            sl = slice(g * n, (g + 1) * n)
            amp = (amps_s if sg else amps_c)[:, mg]  # (nq,)
            if self.wall:
                proj[sl] = (amp @ weights[:, sl]) / norm[sl]
            else:
                proj[sl] = ((w * s * amp) @ modes.radial_values(s, sl)) / norm[sl]
        self.modes, self.coef, self.n_terms = modes, proj, n
        self._n_index = np.tile(np.arange(n), len(self.parities))

    def _integral_of_data(self, panels=64, order=16):
        """integral of the (residual) data over the face [data unit * m^2]: the m = 0
        amplitude on a composite Gauss rule (`panels` x `order` nodes), so data with kinks
        (piecewise-linear profiles) integrate to ~1e-6 and not to a single rule's ~1e-3.
        Computed once, on the first `powers()` (it does not depend on the terms)."""
        if getattr(self, "_data_integral", None) is not None:
            return self._data_integral
        lo, hi = self._interval()
        x, w = _gauss_unit(order)
        edges = np.linspace(lo, hi, panels + 1)
        half = 0.5 * np.diff(edges)[:, None]
        s = (edges[:-1, None] + half * (x[None, :] + 1.0)).ravel()
        w = (half * w[None, :]).ravel()
        amps_c, _ = harmonic_amplitudes(self._sample(s, theta_nodes(self.n_theta)), axis=1)
        ring = w * s if not self.wall else w * self.cylinder.wall_radius(self.face)
        self._data_integral = float(2.0 * np.pi * (ring @ amps_c[:, 0]))
        return self._data_integral

    def _ev(self, modes):
        return modes.mu if self.wall else modes.lam

    # --- evaluation ----------------------------------------------------------------------
    def _last_half(self, n_index):
        """The terms whose bound is the truncation estimate: the last half of each harmonic's
        terms; none when the terms carry the data exactly (families.complete_terms)."""
        complete = self.families.complete_terms(self.face)
        if complete is not None and self.n_terms >= complete:
            return np.zeros(n_index.size, dtype=bool)
        return n_index >= self.n_terms // 2

    @staticmethod
    def _tail_lines(modes, coef, last, r, z):
        """Truncation estimate on grid lines (R, Z) [K]: sum over the terms `last` of
        |c| x the radial and axial envelopes (modes.tail_envelopes; |Theta| <= 1)."""
        if not last.any():
            return np.zeros((np.size(r), np.size(z)))
        index = np.flatnonzero(last)
        rad, ax = modes.tail_envelopes(r, z, index)
        return rad @ (np.abs(coef[index])[:, None] * ax.T)

    def _block_points(self, block, r, theta, z, gradient):
        """Temperature (P,), gradient (3, P) and truncation estimate (P,) at points, in chunks;
        the estimate from the envelopes at each chunk's distinct radii and heights."""
        modes, coef, n_index = block
        last = self._last_half(n_index)
        P = r.size
        t = np.zeros(P)
        g = np.zeros((3, P))
        tail = np.zeros(P)
        step = max(1, CHUNK // max(coef.size, 1))
        for i in range(0, P, step):
            sl = slice(i, i + step)
            cols, grad = modes.fields(r[sl], theta[sl], z[sl], gradient=gradient)
            t[sl] = cols @ coef
            if gradient:
                g[:, sl] = grad @ coef
            if last.any():
                radii, ri = np.unique(r[sl], return_inverse=True)
                heights, zi = np.unique(z[sl], return_inverse=True)
                rad, ax = modes.tail_envelopes(radii, heights, np.flatnonzero(last))
                tail[sl] = (rad[ri.ravel()] * ax[zi.ravel()]) @ np.abs(coef[last])
        return t, g, tail

    def _block_grid(self, block, r, theta, z, gradient):
        """The same on the grid lines r x theta x z: (R, T, Z), (3, R, T, Z) and the estimate
        (R, 1, Z), the envelopes once per line."""
        modes, coef, n_index = block
        t, g = grid_field(coef, modes.m, modes.is_sin, modes.grid_factors(r, z, gradient), theta, gradient)
        tail = self._tail_lines(modes, coef, self._last_half(n_index), r, z)
        return t, (g if gradient else np.zeros((3,) + t.shape)), tail[:, None, :]

    def _grow_and_sum(self, block_sum):
        """Sum the terms built so far, then double the terms (and sum again) until the
        truncation estimate meets the tolerance or the cap is reached."""
        # the terms summed so far in one pass (one dot product per point, not one per block)
        while True:
            t, g, tail = block_sum((self.modes, self.coef, self._n_index))
            if np.size(tail) == 0 or np.max(tail) <= self.tol * self.temperature_scale \
                    or self.n_terms >= self.n_cap:
                return t, g, tail
            self._build(2 * self.n_terms)

    def evaluate(self, r, theta, z, gradient=True):
        """Temperature (P,), gradient (3, P) (zeros unless gradient) and truncation estimate
        (P,) of this sub-problem."""
        r, theta, z = (np.asarray(v, float).ravel() for v in (r, theta, z))
        if self.modes is None:
            return np.zeros(r.size), np.zeros((3, r.size)), np.zeros(r.size)
        return self._grow_and_sum(lambda b: self._block_points(b, r, theta, z, gradient))

    def evaluate_grid(self, r, theta, z, gradient=False):
        """The same on the tensor grid of lines r x theta x z: temperature (R, T, Z),
        gradient (3, R, T, Z) (zeros unless gradient), truncation estimate (R, T, Z); the
        radial, axial and angular factors are evaluated once per line (forward/grid.py)."""
        r, theta, z = (np.asarray(v, float).ravel() for v in (r, theta, z))
        shape = (r.size, theta.size, z.size)
        if self.modes is None:
            return np.zeros(shape), np.zeros((3,) + shape), np.zeros(shape)
        t, g, tail = self._grow_and_sum(lambda b: self._block_grid(b, r, theta, z, gradient))
        return t, g, np.broadcast_to(tail, shape).copy()

    def powers(self):
        """Heat INTO the part [W] through each face from this sub-problem.

        The mode sums converge only like 1/N when the data do not vanish at an edge shared
        with a temperature-kind face, so the data face's own power is taken from its data:
        k du/dn = d ('N') or d - h u ('R') on that face, i.e. the integral of d over the face
        (minus h times the integral of u, whose series converges faster).  The slowest
        other faces' power then follows from the sub-problem's balance (`_slow_faces`), split
        between two of them in the ratio of their mode sums.  A temperature data face, or a
        case with no slow face, keeps the plain mode sums (balanced, but slowly converging).
        """
        if self.modes is None:
            return {}
        out = {f: float(p @ self.coef) for f, p in self.modes.powers().items()}
        kind = self.kinds[self.face]
        rest = self._slow_faces()
        if kind.kind == "D" or (0, False) not in self.parities or not rest:
            return out
        # k du/dn = d - (B[u] - k du/dn): the operator's non-derivative part (h u for 'R')
        own = self._integral_of_data()
        if kind.kind != "N":
            own -= kind.operator(float(self._face_temperature_integrals() @ self.coef), 0.0, self.k)
        out[self.face] = own
        balance = -sum(v for f, v in out.items() if f not in rest)
        sums = sum(out[f] for f in rest)
        for f in rest:
            out[f] = balance / len(rest) if sums == 0 else balance * out[f] / sums
        return out

    def _slow_faces(self):
        """The other faces whose mode sums converge slowest (they take up the balance), or [].

        End-face data: the walls that are not 'N' (an 'N' wall's power is zero mode by mode);
        with every wall 'N', the far end ([] when semi-infinite).  Wall data: the 'D' ends
        (their axial functions vanish there while the data need not); with no 'D' end, the
        'R' ends.  (A hollow part's other wall converges fast: its radial factor decays
        across the wall.)
        """
        if not self.wall:
            walls = [f for f in ("side", "bore") if f in self.kinds and self.kinds[f].kind != "N"]
            if walls:
                return walls
            far = "top" if self.face == "bottom" else "bottom"
            return [far] if far in self.kinds and np.isfinite(self.L) else []
        ends = {f: self.kinds[f].kind for f in ("bottom", "top")}
        for kind in ("D", "R"):
            hit = [f for f, k in ends.items() if k == kind]
            if hit:
                return hit
        return []

    def _face_temperature_integrals(self):
        """integral over the data face of u per unit coefficient [K m^2] (m = 0 cos only)."""
        modes = self.modes
        axisym = (modes.m == 0) & ~modes.is_sin
        t0 = modes.face_temperature_factor()
        area = modes.area_integrals()
        return np.where(axisym, t0 * area, 0.0)
