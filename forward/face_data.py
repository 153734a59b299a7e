"""Face data of a sub-problem built from a known field: given(u, v) - B_F[field], on points
and on the grid of lines that a known face's series samples (forward.series.KnownSeries)."""

from __future__ import annotations

import numpy as np

from .geometry import is_wall


def uniform_operator(field, condition, k) -> float | None:
    """B_F[field] when it is one number over the face: a constant field (or none) has the same
    operator everywhere, T ('D'), 0 ('N'), h T ('R'); None otherwise."""
    const = field.constant_value()
    return None if const is None else float(condition.operator(const, 0.0, k))


class OperatorData:
    """Face data of a sub-problem: given(u, v) - B_F[field] on face F (given: the face's own
    data, or None for zero), at face coordinates (u, v) ((r, theta) on an end face, (theta,
    z) on a wall) and, faster, on the grid of lines s x theta (`grid`, what KnownSeries
    samples)."""

    def __init__(self, model, field, face, condition, given=None):
        self.model, self.field, self.face, self.condition, self.given = model, field, face, condition, given
        self.uniform_operator = uniform_operator(field, condition, model.k)

    def _operator(self, u, v):
        if self.uniform_operator is not None:
            return np.full(np.broadcast(np.asarray(u, float), np.asarray(v, float)).shape, self.uniform_operator)
        return self.model.face_operator(self.field, self.face, self.condition, u, v)

    def __call__(self, u, v):
        out = -self._operator(u, v)
        return out if self.given is None else self.given(u, v) + out

    def grid(self, s, theta):
        """The data on the grid of lines s x theta, (S, T): s = r on an end face, z on a wall."""
        s, theta = np.asarray(s, float).ravel(), np.asarray(theta, float).ravel()
        out = (np.full((s.size, theta.size), -self.uniform_operator) if self.uniform_operator is not None else
               -self.model.face_operator_grid(self.field, self.face, self.condition, s, theta))
        if self.given is None:
            return out
        S, TH = np.meshgrid(s, theta, indexing="ij")
        given = self.given(TH, S) if is_wall(self.face) else self.given(S, TH)
        return np.asarray(given, float).reshape(S.shape) + out
