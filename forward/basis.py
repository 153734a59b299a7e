"""The unknown face's basis: one exact field per eigenfunction of the face (modes.py), then
the corner columns that carry what the eigenfunctions cannot at the face's edges
(corner_columns.py).  `CylinderModel.basis(harmonics, terms)` builds it."""

from __future__ import annotations

import numpy as np

from .geometry import is_wall
from .corner_columns import end_rim_columns, orthogonalize, wall_columns


class UnknownBasis:
    """Columns of the inverse problem: one field per eigenfunction of the unknown face, then
    its corner columns (n_index = -1; see corner_columns).

    Face quantity = known part + sum_k c_k Phi_k on the face, where Phi_k is the k-th column's
    face function and the quantity is the temperature [K] (unknown-temperature) or the heat
    flux into the part [W/m^2] (unknown-flux).
    """

    def __init__(self, model, harmonics: int, terms: int, corners: bool = True):
        self.model = model
        self._norms = None
        self.face = model.unknown_face
        cond = model.faces[self.face]
        self.quantity = "temperature" if cond.kind == "D" else "heat_flux"
        families = model.families
        ms, sins, ev, nidx = [], [], [], []
        for m in range(harmonics + 1):
            e = families.eigenvalues(self.face, m, terms)
            for is_sin in ((False,) if m == 0 else (False, True)):
                ms.append(np.full(e.size, m)), sins.append(np.full(e.size, is_sin))
                ev.append(e), nidx.append(np.arange(e.size))
        m, is_sin, ev = np.concatenate(ms), np.concatenate(sins), np.concatenate(ev)
        self.n_index = np.concatenate(nidx)
        self.modes = families.modes(self.face, m, is_sin, ev)
        if model.cylinder.hollow or not corners:
            self.rim = []  # no corner columns on a hollow part yet (see DEVELOPERS.md)
            self.mix = np.zeros((ev.size, 0))
        elif self.face == "side":
            self.rim = wall_columns(model, harmonics)
            # wall columns minus their projection on the eigenfunctions (corner_columns)
            self.mix = orthogonalize(self.rim, self.modes, ev.size)
        else:
            self.rim = end_rim_columns(model, self.face, harmonics)
            self.mix = np.zeros((ev.size, len(self.rim)))
        n_rim = len(self.rim)
        self.m = np.concatenate([m, [c.m for c in self.rim]]).astype(int)
        self.is_sin = np.concatenate([is_sin, [c.is_sin for c in self.rim]]).astype(bool)
        self.eigenvalues = np.concatenate([ev, np.full(n_rim, np.nan)])
        self.n_index = np.concatenate([self.n_index, np.full(n_rim, -1)])
        self.n_eigen = ev.size

    @property
    def uniform_column(self):
        """Index of the column whose face function is uniform, or None: the m = 0 rim-flux
        column of an unknown-flux end beside a temperature side, or the uniform wall column
        (see corner_columns)."""
        if not self.rim:
            return None
        if self.face == "side":
            hit = [i for i, c in enumerate(self.rim) if c.uniform]
            return int(self.n_eigen + hit[0]) if hit else None
        return int(self.n_eigen + next(i for i, c in enumerate(self.rim) if c.m == 0))

    @property
    def size(self):
        return self.m.size

    def fields(self, r, theta, z, gradient=False):
        """Temperature per unit coefficient (P, K) [K] and optionally the gradient (3, P, K)."""
        r, theta, z = self.model._check_points(r, theta, z)
        r, theta, z = r.ravel(), theta.ravel(), z.ravel()
        t, g = self.modes.fields(r, theta, z, gradient=gradient)
        if not self.rim:
            return t, g
        tc, gc = [], []
        for col in self.rim:
            tw, gw = col.fields(r, theta, z, gradient=gradient)
            tc.append(tw), gc.append(gw)
        t = np.concatenate([t, np.stack(tc, axis=1) - t @ self.mix], axis=1)
        if gradient:
            g = np.concatenate([g, np.stack(gc, axis=2) - g @ self.mix], axis=2)
        return t, g

    def face_values(self, u, v):
        """Phi_k at face coordinates (r, theta) or (theta, z): (Q, K); a corner column's face
        function is its polynomial profile times Theta_m, less its eigenfunction part on the
        side (see corner_columns)."""
        u, v = np.broadcast_arrays(np.asarray(u, float).ravel(), np.asarray(v, float).ravel())
        phi = self.modes.eigenfunctions(u, v)
        if not self.rim:
            return phi
        cyl = self.model.cylinder
        s, th = (v / cyl.height, u) if self.face == "side" else (u / cyl.radius, v)
        extra = np.stack([c.face_values(s, th) for c in self.rim], axis=1)
        if self.mix.any():  # end faces: no eigenfunction part to take off
            extra -= phi @ self.mix
        return np.concatenate([phi, extra], axis=1)

    def face_values_grid(self, u, v):
        """Phi_k on the grid of lines u x v (1-D: r x theta on an end face, theta x z on the
        side), shape (U, V, K): equal to face_values at the grid's points (u major) to
        round-off, with the radial (or axial) factor evaluated once per line and the angle
        once per angle."""
        u, v = np.asarray(u, float).ravel(), np.asarray(v, float).ravel()
        phi = self.modes.eigenfunctions_grid(u, v)
        if not self.rim:
            return phi
        cyl = self.model.cylinder
        if self.face == "side":  # s = z / L along v, theta along u
            cols = [c.face_values_grid(v / cyl.height, u).T for c in self.rim]
        else:
            cols = [c.face_values_grid(u / cyl.radius, v) for c in self.rim]
        extra = np.stack(cols, axis=2)
        if self.mix.any():
            extra -= phi @ self.mix
        return np.concatenate([phi, extra], axis=2)

    def face_values_lines(self, along, around):
        """(Phi (Q, K), known (Q,)) on the grid of lines along (r on an end face, z on the
        side) [m] x around (theta) [rad], along major: face_values and known_face_values at
        those points, each factor evaluated once per line."""
        along, around = np.asarray(along, float).ravel(), np.asarray(around, float).ravel()
        if is_wall(self.face):
            phi = self.face_values_grid(around, along).transpose(1, 0, 2)
            known = self.known_face_values_grid(around, along).T
        else:
            phi = self.face_values_grid(along, around)
            known = self.known_face_values_grid(along, around)
        return phi.reshape(-1, self.size), known.ravel()

    def known_face_values_grid(self, u, v):
        """known_face_values on the grid of lines u x v, shape (U, V)."""
        u, v = np.asarray(u, float).ravel(), np.asarray(v, float).ravel()
        U, V = np.meshgrid(u, v, indexing="ij")
        return self.known_face_values(U, V).reshape(U.shape)

    def known_face_values(self, u, v):
        """The face quantity carried by the known field (the lifting) at face coordinates (Q,)."""
        u, v = (np.asarray(x, float).ravel() for x in (u, v))
        cond = self.model.faces[self.face]
        return self.model._lifting_operator(self.face, cond, u, v)

    def norms(self):
        """integral of Phi_k^2 over the face [m^2] (corner columns: their exact norms);
        computed once (read-only: the priors of every hyperparameter point ask for them)."""
        if self._norms is None:
            n = self.modes.norms()
            n = np.concatenate([n, [c.norm for c in self.rim]]) if self.rim else np.array(n, float)
            n.setflags(write=False)
            self._norms = n
        return self._norms

    def surface_eigenvalues(self):
        """-Laplacian_face Phi_k = ev_k Phi_k, ev_k [1/m^2] (corner columns, which are no
        eigenfunctions, get a stand-in: see corner_columns)."""
        ev = self.modes.surface_eigenvalues()
        return np.concatenate([ev, [c.surface_eigenvalue for c in self.rim]]) if self.rim else ev

    def powers(self):
        """Heat INTO the part through the unknown face [W] per unit coefficient, (K,)
        (NaN without a conductivity)."""
        if not self.model.has_conductivity:
            return np.full(self.size, np.nan)
        p = self.modes.powers()[self.face]
        return np.concatenate([p, np.array([c.power for c in self.rim]) - p @ self.mix]) if self.rim else p

    def known_power(self):
        """Heat INTO the part through the unknown face [W] from the known field."""
        return self.model.face_power(self.face)
