"""The smooth model's columns: G and t0 at sensors, face values and powers of the unknown
face's eigenfunctions (forward.UnknownBasis), and the prior diagonal P.

Every derived figure is linear in the coefficients, value = k + F c; a `Design` gives
(F, k) for face points (`face`), sensors or query points (`sensors`) and the power
(`powers`), so the same builder can be re-run on a design rebuilt at other values of
calibrated face parameters (joint uncertainty, see calibration.py).
"""

from __future__ import annotations


import numpy as np

from ..forward import CylinderModel

from .hyperprior import matern_precision
from .problem import SMOOTHING_ORDER

#: prior precision of the nominal direction relative to its smoothness prior (nearly flat)
NOMINAL_PRECISION_FACTOR = 1e-4


def prior_diagonal(basis, radius, smoothing):
    """P_k = (N_k / A) (1 + a^2 ev_k)^s (dimensionless): the Whittle-Matern precision at
    length scale a (the radius) and the order s of `smoothing`."""
    return matern_precision(basis, radius, SMOOTHING_ORDER[smoothing])


def nominal_direction(basis):
    """Unit coefficients of the nominal profile's shape: the uniform profile where the basis
    holds it exactly (`basis.uniform_column`: the m = 0 rim column of an unknown-flux face
    beside a temperature side, or the uniform wall column of an unknown side whose ends
    allow it: forward/corner_columns.py), else the fundamental eigenfunction (m = 0 cos,
    first term)."""
    u = np.zeros(basis.size)
    axisym = (basis.m == 0) & ~basis.is_sin
    j = basis.uniform_column
    u[j if j is not None else np.flatnonzero(axisym & (basis.n_index == 0))[0]] = 1.0
    return u


def smooth_prior(basis, radius, smoothing):
    """(P, u): the prior diagonal with the nominal direction u nearly flat, so that the
    fitted level of the nominal profile keeps its uncertainty in the bands."""
    P = prior_diagonal(basis, radius, smoothing).copy()
    u = nominal_direction(basis)
    P[u > 0] *= NOMINAL_PRECISION_FACTOR
    return P, u


class Design:
    """G and t0 at points for a part and its faces, rebuilt when nonlinear parameters change."""

    def __init__(self, cylinder, faces, tolerance, harmonics, terms):
        self.cylinder, self.faces, self.tolerance = cylinder, dict(faces), tolerance
        self.harmonics, self.terms = harmonics, terms
        self.model = CylinderModel(cylinder, self.faces, tolerance=tolerance)
        self.basis = self.model.basis(harmonics, terms)

    @property
    def size(self) -> int:
        return self.basis.size

    @property
    def face_name(self) -> str:
        return self.basis.face

    @property
    def quantity(self) -> str:
        return self.basis.quantity

    def with_faces(self, faces) -> "Design":
        return Design(self.cylinder, faces, self.tolerance, self.harmonics, self.terms)

    def at(self, r, theta, z, gradient=False):
        """(G, t0, forward field values, dG) at points (SI); the known field's gradient and
        dG only when `gradient` is asked for (else None)."""
        ev = self.model.evaluate(r, theta, z, gradient=gradient)
        G, dG = self.basis.fields(r, theta, z, gradient=gradient)
        return G, ev.temperature, ev, dG

    def sensors(self, r, theta, z):
        """(G (P, K) [K per unit coefficient], t0 (P,) [K]) at points."""
        G, t0, _, _ = self.at(r, theta, z)
        return G, t0

    def face(self, u, v):
        """(B (Q, K), known (Q,)) of the face quantity at face coordinates."""
        return self.basis.face_values(u, v), self.basis.known_face_values(u, v)

    def face_grid(self, along, around):
        """face() on the grid of lines along (r or z) x around (theta), along major."""
        return self.basis.face_values_lines(along, around)

    def powers(self):
        """(p (K,) [W per unit coefficient], known power [W]) into the part through the face."""
        return self.basis.powers(), float(self.basis.known_power())
