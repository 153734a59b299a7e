"""Azimuthal harmonics of sampled face data."""

from __future__ import annotations

import numpy as np

N_THETA_MIN = 16


def theta_nodes(n: int) -> np.ndarray:
    """n equally spaced angles in [0, 2 pi) [rad] (trapezoidal rule, exact for |m| < n/2)."""
    return 2.0 * np.pi * np.arange(n) / n


def harmonic_amplitudes(samples: np.ndarray, axis: int = -1):
    """Fourier amplitudes a_m, b_m of f(theta) = sum a_m cos(m theta) + b_m sin(m theta).

    samples are taken at theta_nodes(n) along `axis`; returns arrays with that axis
    replaced by m = 0 .. n//2 - 1.
    """
    samples = np.moveaxis(np.asarray(samples, float), axis, -1)
    n = samples.shape[-1]
    spec = np.fft.rfft(samples, axis=-1) / n
    mmax = n // 2
    a = 2.0 * spec.real[..., :mmax]
    b = -2.0 * spec.imag[..., :mmax]
    a[..., 0] *= 0.5
    b[..., 0] = 0.0
    return np.moveaxis(a, -1, axis), np.moveaxis(b, -1, axis)


def significant_harmonics(a, b, tol: float, max_harmonic: int, scale: float | None = None):
    """Orders m whose amplitude (max over the other axes) exceeds tol * scale (default: the
    largest amplitude)."""
    amp = np.maximum(np.abs(a), np.abs(b))
    amp = amp.reshape(-1, amp.shape[-1]).max(axis=0) if amp.ndim > 1 else amp
    ref = (amp.max() if amp.size else 0.0) if scale is None else scale
    if ref == 0:
        return np.zeros(0, dtype=int)
    keep = np.flatnonzero(amp > tol * ref)
    return keep[keep <= max_harmonic]
