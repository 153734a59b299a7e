"""Lifting: a simple exact harmonic field w subtracted before the series are built.

    w(r, theta, z) = sum_m (r/a)^m Theta_m(theta) (alpha_m + beta_m z / L)

Each term is harmonic ((r/a)^m Theta_m is a 2-D harmonic, independent of z, times a
linear function of z).  The coefficients are chosen so that w takes the temperature of a
temperature side at both rims (or, on an unknown-temperature side, the temperature of
the known end faces there).  The residual data then vanish where a temperature face
meets another temperature-kind face, so the series converge uniformly and the rim of an
unknown temperature face takes the neighbour's value instead of being dragged to zero.
On a semi-infinite part the side data must not vary along z; w then carries them exactly
(for every side kind), so no side series is needed.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .harmonics import harmonic_amplitudes, significant_harmonics, theta_nodes


@dataclass
class Lifting:
    radius: float
    height: float
    m: np.ndarray
    is_sin: np.ndarray
    alpha: np.ndarray
    beta: np.ndarray

    @classmethod
    def zero(cls, radius, height):
        e = np.zeros(0)
        return cls(radius, height, e.astype(int), e.astype(bool), e, e)

    @classmethod
    def from_rim_values(cls, radius, height, bottom_values, top_values, tol, max_harmonic):
        """Lifting matching rim temperatures sampled at theta_nodes(n) (either may be None)."""
        rows = [v for v in (bottom_values, top_values) if v is not None]
        if not rows:
            return cls.zero(radius, height)
        a, b = harmonic_amplitudes(np.vstack(rows), axis=-1)
        if bottom_values is None:
            a0, b0, a1, b1 = a[0], b[0], a[0], b[0]
        elif top_values is None:
            a0, b0, a1, b1 = a[0], b[0], a[0], b[0]
        else:
            a0, b0, a1, b1 = a[0], b[0], a[1], b[1]
        ms = significant_harmonics(np.vstack([a, b]), np.zeros_like(np.vstack([a, b])), tol, max_harmonic)
        m_list, s_list, al, be = [], [], [], []
        for m in ms:
            for is_sin, lo, hi in ((False, a0[m], a1[m]), (True, b0[m], b1[m])):
                if is_sin and m == 0:
                    continue
                if lo == 0 and hi == 0:
                    continue
                m_list.append(m)
                s_list.append(is_sin)
                al.append(lo)
                be.append(hi - lo)
        return cls(radius, height, np.array(m_list, dtype=int), np.array(s_list, dtype=bool),
                   np.array(al, float), np.array(be, float))

    @classmethod
    def two_dimensional(cls, radius, m, is_sin, alpha):
        """z-independent lifting sum alpha_m (r/a)^m Theta_m (semi-infinite parts)."""
        m = np.asarray(m, int)
        return cls(radius, math.inf, m, np.asarray(is_sin, bool), np.asarray(alpha, float),
                   np.zeros(m.size))

    @property
    def empty(self):
        return self.m.size == 0

    def _parts(self, r, theta, z):
        a, L = self.radius, self.height
        rho = (np.asarray(r, float) / a)[:, None]
        arg = np.multiply.outer(np.asarray(theta, float), self.m)
        th = np.where(self.is_sin, np.sin(arg), np.cos(arg))
        dth_m = np.where(self.is_sin, np.cos(arg), -np.sin(arg))
        zf = (np.asarray(z, float) / L)[:, None] if math.isfinite(L) else 0.0
        lin = self.alpha + self.beta * zf
        slope = self.beta / L if math.isfinite(L) else 0.0 * self.beta
        pw = rho ** self.m
        pw1 = np.where(self.m >= 1, rho ** np.maximum(self.m - 1, 0), 0.0)
        return th, dth_m, lin, slope, pw, pw1

    def temperature(self, r, theta, z):
        if self.empty:
            return np.zeros(np.asarray(r).shape)
        th, _, lin, _, pw, _ = self._parts(r, theta, z)
        return (pw * th * lin).sum(axis=1)

    def gradient(self, r, theta, z):
        """(dw/dr, (1/r) dw/dtheta, dw/dz), shape (3, P)."""
        if self.empty:
            return np.zeros((3,) + np.asarray(r).shape)
        a = self.radius
        th, dth_m, lin, slope, pw, pw1 = self._parts(r, theta, z)
        return np.stack([((self.m / a) * pw1 * th * lin).sum(1),
                         ((self.m / a) * pw1 * dth_m * lin).sum(1),
                         (pw * th * slope).sum(1)])

    def power(self, face, conductivity):
        """Heat INTO the part [W] through a face carried by w (only the m = 0 part)."""
        if self.empty or not math.isfinite(self.height):
            return 0.0
        sel = (self.m == 0) & ~self.is_sin
        slope = float(self.beta[sel].sum()) / self.height
        area = math.pi * self.radius ** 2
        return {"bottom": -conductivity * slope * area, "top": conductivity * slope * area,
                "side": 0.0}[face]


def rim_samples(n: int):
    return theta_nodes(n)
