"""The one place for band factors: the standard normal quantile of a two-sided band."""

from __future__ import annotations

from scipy.special import ndtri   # the standard normal quantile (norm.ppf), without scipy.stats' import time

from .errors import InverseError

#: two-sided 95 % factor of a Gaussian band, ndtri(0.975) = 1.959963984540054
Z95 = float(ndtri(0.975))


def z_factor(level: float = 0.95) -> float:
    """Half-width of the equal-tailed `level` band of a standard normal (1.96 for 0.95)."""
    if not 0 < level < 1:
        raise InverseError("level must lie between 0 and 1")
    return Z95 if level == 0.95 else float(ndtri(0.5 * (1.0 + level)))
