"""Face conditions of the cylinder (SI units: K, W/m^2, W/(m^2 K)).

Each face has an outward normal n.  The conditions are

    temperature          T = g                       g [K]
    flux                 k dT/dn = q_in              q_in [W/m^2], heat INTO the part
    insulated            k dT/dn = 0
    convection           -k dT/dn = h (T - T_amb)    h [W/(m^2 K)], T_amb [K]
    unknown-temperature  T unknown (to be estimated)
    unknown-flux         q_in unknown (to be estimated)

A face datum is either a number (uniform) or a *profile*: a vectorized callable of the
face coordinates in SI units, ``f(r, theta)`` on the end faces (r [m], theta [rad]) and
``f(theta, z)`` on the side (theta [rad], z [m]), returning the datum in SI units.

For superposition every face also has a *homogeneous kind*: 'D' (T = 0), 'N'
(dT/dn = 0) or 'R' (k dT/dn + h T = 0).  An unknown face is homogeneous as 'D'
(unknown-temperature) or 'N' (unknown-flux) in the other sub-problems.

The boundary operator B of a face, written in one place (`EndCondition.operator`; a
`FaceCondition` asks its homogeneous `EndCondition`):

    B[T] = T ('D'),   k dT/dn ('N'),   k dT/dn + h T ('R')        so that   B[T] = data.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Union

import numpy as np

from .errors import ForwardModelError

Profile = Callable[[np.ndarray, np.ndarray], np.ndarray]
Datum = Union[float, Profile]


def _check_datum(datum, what: str):
    if callable(datum):
        return datum
    try:
        value = float(datum)
    except (TypeError, ValueError):
        raise ForwardModelError(f"{what} must be a number or a profile, got {datum!r}") from None
    if not math.isfinite(value):
        raise ForwardModelError(f"{what} must be finite, got {datum!r}")
    return value


def evaluate_datum(datum: Datum, u, v) -> np.ndarray:
    """Datum on face coordinates (u, v) as an array broadcast to their shape."""
    u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
    if callable(datum):
        out = np.asarray(datum(u, v), dtype=float)
        return np.broadcast_to(out, u.shape).astype(float)
    return np.full(u.shape, float(datum))


@dataclass(frozen=True)
class EndCondition:
    """Homogeneous kind of a face ('D', 'N' or 'R') and its h [W/(m^2 K)] (only for 'R'):
    what the eigenvalue families and the superposition need of a face condition."""

    kind: str
    h: float = 0.0

    def operator(self, value, normal_derivative, k):
        """B[T] from T and dT/dn (outward normal) on the face: T ('D') [K], k dT/dn ('N')
        [W/m^2], k dT/dn + h T ('R') [W/m^2]; k [W/(m K)].  Works on arrays."""
        if self.kind == "D":
            return value
        if self.kind == "N":
            return k * normal_derivative
        if self.kind == "R":
            return k * normal_derivative + self.h * value
        raise ValueError(f"unknown homogeneous kind {self.kind!r}")

    def datum_scale(self, k, span):
        """Size of B[T] for a 1 K change over the length span [m]: 1 ('D'), k / span ('N'),
        h ('R'); converts a temperature size [K] to a datum size and back."""
        return {"D": 1.0, "N": k / span, "R": self.h}[self.kind]

    def biot(self, k, length):
        """Bi = h length / k (0 unless 'R')."""
        return self.h * length / k

    def reflection(self, kappa, k):
        """rho making Z = exp(-kappa s) + rho exp(kappa s) (s outward, at the face s = 0)
        homogeneous here, B[Z] = 0: rho = -B[1, -kappa] / B[1, kappa]; -1 ('D'), +1 ('N'),
        (k kappa - h) / (k kappa + h) ('R'); kappa [1/m] > 0."""
        return -self.operator(1.0, -kappa, k) / self.operator(1.0, kappa, k)


class FaceCondition:
    """Base class; `kind` is the homogeneous kind ('D', 'N' or 'R') of the face."""

    kind: str = ""
    condition: str = ""
    unknown: bool = False

    def data(self, u, v) -> np.ndarray:
        """Right-hand side of the face operator B[T] on this face, in SI units.

        B[T] = T ('D'), k dT/dn ('N'), k dT/dn + h T ('R'); data = g, q_in, h T_amb.
        Unknown faces have no data (zero: their part is the unknown basis).
        """
        return np.zeros(np.broadcast(np.asarray(u), np.asarray(v)).shape)

    @property
    def h(self) -> float:
        return 0.0

    @property
    def homogeneous(self) -> EndCondition:
        """The face's homogeneous condition (kind and h)."""
        return EndCondition(self.kind, self.h)

    def operator(self, value, normal_derivative, k):
        """B[T] on this face from T and dT/dn (outward): see `EndCondition.operator`."""
        return self.homogeneous.operator(value, normal_derivative, k)

    @property
    def is_uniform(self) -> bool:
        return True

    @property
    def uniform_datum(self) -> float | None:
        """The datum when it is one number over the face (`data` anywhere), else None."""
        return float(self.data(np.zeros(1), np.zeros(1))[0]) if self.is_uniform else None


class _ValueCondition(FaceCondition):
    """A condition whose data is its `value` (uniform number or profile)."""

    what = "value"

    def __post_init__(self):
        object.__setattr__(self, "value", _check_datum(self.value, self.what))

    def data(self, u, v):
        return evaluate_datum(self.value, u, v)

    @property
    def is_uniform(self):
        return not callable(self.value)


@dataclass(frozen=True)
class Temperature(_ValueCondition):
    value: Datum
    kind = "D"
    condition = "temperature"
    what = "temperature value"

    def __post_init__(self):
        super().__post_init__()
        if not callable(self.value) and self.value <= 0:
            raise ForwardModelError(f"temperature must be above absolute zero, got {self.value} K")


@dataclass(frozen=True)
class Flux(_ValueCondition):
    value: Datum
    kind = "N"
    condition = "flux"
    what = "heat-flux value"


@dataclass(frozen=True)
class Insulated(FaceCondition):
    kind = "N"
    condition = "insulated"


@dataclass(frozen=True)
class Convection(FaceCondition):
    h_value: float
    ambient: Datum
    kind = "R"
    condition = "convection"

    def __post_init__(self):
        h = _check_datum(self.h_value, "heat-transfer coefficient h")
        if callable(h) or h <= 0:
            raise ForwardModelError(
                f"heat-transfer coefficient h must be a positive number in W/(m^2*K), got {self.h_value!r}")
        object.__setattr__(self, "h_value", h)
        object.__setattr__(self, "ambient", _check_datum(self.ambient, "ambient temperature"))
        if not callable(self.ambient) and self.ambient <= 0:
            raise ForwardModelError(f"ambient temperature must be above absolute zero, got {self.ambient} K")

    @property
    def h(self):
        return self.h_value

    def data(self, u, v):
        return self.h_value * evaluate_datum(self.ambient, u, v)

    @property
    def is_uniform(self):
        return not callable(self.ambient)


@dataclass(frozen=True)
class UnknownTemperature(FaceCondition):
    kind = "D"
    condition = "unknown-temperature"
    unknown = True


@dataclass(frozen=True)
class UnknownFlux(FaceCondition):
    kind = "N"
    condition = "unknown-flux"
    unknown = True


CONDITIONS = {
    "temperature": Temperature,
    "flux": Flux,
    "insulated": Insulated,
    "convection": Convection,
    "unknown-temperature": UnknownTemperature,
    "unknown-flux": UnknownFlux,
}
