"""Sensor readings as the inverse layer sees them (SI units)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .errors import InverseError

#: Random standard deviation of a reading when no sigma is given [K] (common practice, no
#: source); the one place this default lives (data_io.thermocouples uses it).
DEFAULT_SIGMA_K = 0.5
#: the fewest usable readings of a fit (a snapshot, or a trend's reference window)
MIN_READINGS = 3


@dataclass
class SensorReadings:
    """One snapshot: sensor names, positions r [m], theta [rad], z [m], readings [K],
    random noise sd sigma [K], per-sensor offset (bias) prior sd [K], placement
    tolerance [m] (a +- bound, treated as a rectangular distribution)."""

    names: list
    r: np.ndarray
    theta: np.ndarray
    z: np.ndarray
    temperature: np.ndarray
    sigma: np.ndarray
    offset_sd: np.ndarray
    position_tolerance: np.ndarray

    def __post_init__(self):
        n = len(self.names)
        for name in ("r", "theta", "z", "temperature", "sigma", "offset_sd", "position_tolerance"):
            v = np.broadcast_to(np.asarray(getattr(self, name), dtype=float), (n,)).copy()
            if not np.all(np.isfinite(v)):
                raise InverseError(f"sensor {name} must be finite numbers")
            setattr(self, name, v)
        self.names = [str(x) for x in self.names]
        seen, repeated = set(), []
        for name in self.names:
            if name in seen and name not in repeated:
                repeated.append(name)
            seen.add(name)
        if repeated:
            raise InverseError(f"sensor names must be unique; repeated: {', '.join(repeated[:5])}")
        if np.any(self.sigma <= 0):
            raise InverseError("sensor sigma must be positive")
        for name in ("offset_sd", "position_tolerance"):
            if np.any(getattr(self, name) < 0):
                raise InverseError(f"sensor {name} must not be negative")
        if np.any(self.temperature < 0):
            worst = self.names[int(np.argmin(self.temperature))]
            raise InverseError(f"sensor {worst}: a reading below 0 K (temperatures are absolute kelvin "
                               "inside heatsight)")

    @property
    def n(self):
        return len(self.names)

    def subset(self, keep) -> "SensorReadings":
        idx = np.flatnonzero(np.asarray(keep)) if np.asarray(keep).dtype == bool else np.asarray(keep)
        return SensorReadings([self.names[i] for i in idx], self.r[idx], self.theta[idx], self.z[idx],
                              self.temperature[idx], self.sigma[idx], self.offset_sd[idx],
                              self.position_tolerance[idx])

    @classmethod
    def from_frame(cls, frame) -> "SensorReadings":
        """From a table indexed by sensor with columns r, theta, z, temperature and optionally
        sigma, offset_sd, position_tolerance (SI; e.g. data_io.tables.read_snapshot)."""
        cols = frame.columns

        def col(name, default):
            if name in cols:
                return frame[name].to_numpy(dtype=float, na_value=np.nan)
            return np.full(len(frame), default)

        names = list(frame["sensor"]) if "sensor" in cols else list(frame.index)
        pos = np.nan_to_num(col("position_tolerance", 0.0), nan=0.0)
        off = np.nan_to_num(col("offset_sd", 0.0), nan=0.0)
        return cls(names, col("r", np.nan), col("theta", np.nan), col("z", np.nan),
                   col("temperature", np.nan), col("sigma", DEFAULT_SIGMA_K), off, pos)


def as_readings(readings) -> SensorReadings:
    if isinstance(readings, SensorReadings):
        return readings
    if hasattr(readings, "frame"):  # a data_io Table
        readings = readings.frame
    if hasattr(readings, "columns"):
        return SensorReadings.from_frame(readings)
    raise InverseError("readings must be SensorReadings or a table with r, theta, z, temperature")
