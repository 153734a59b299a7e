"""Steady windows of a logged record: drift, window averages and their random uncertainty.

The record is cut into consecutive windows of W seconds counted from an origin (the log's
first time): window k holds the samples with origin + k W <= t < origin + (k + 1) W.  Per
window and sensor, from its valid samples (NaN = missing; n of them):

    mean      the average reading [K],
    drift     |slope| x W of the least-squares line through the samples: how far the
              sensor moves over one window [K],
    scatter   the sd of the residuals about that line (n - 2 degrees of freedom) [K],
    rho       the lag-1 autocorrelation of those residuals, from the squared differences
              of consecutive residuals: sum (e_i - e_{i-1})^2 = 2 SS (1 - rho) (nearly),
    n_eff     n (1 - rho) / (1 + rho) with rho clipped to [0, RHO_MAX]: the number of
              independent samples an AR(1) series of n samples is worth.

A sensor is *valid* in a window when it has readings in at least MIN_VALID_FRACTION of the
window's samples and at least MIN_SAMPLES of them; a window is *complete* when its samples
span at least MIN_SPAN_FRACTION of W; it is *steady* when it is complete, has a valid
sensor, and every valid sensor drifts less than the threshold.  The least-squares slope
rather than max - min is used so that the random scatter of the readings does not count as
drift.

The random sd of a window mean is sigma = sqrt(scatter^2 / n_eff + floor^2): the scatter
measured in the window, shrunk by averaging, plus a floor for what does not average out
within a window (slow wander, logger repeatability).  Thermocouple offsets are not in it:
an offset is the same in every window, a shared bias that the fit marginalizes and that
cancels in changes between windows (design notes §5).

Defaults (common practice, no source): windows of 10 min, drift below 0.5 K over a window,
a floor of 0.05 K.

`WindowAccumulator` builds these statistics from a stream of chunks (a log longer than
memory), carrying over the window that spans a chunk boundary.

All arrays are SI: times in s, readings in K.
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np
from scipy import sparse

from .errors import InverseError

#: window length [s] (common practice, no source)
DEFAULT_WINDOW_S = 600.0
#: largest drift [K] of any sensor over a steady window (common practice, no source)
DEFAULT_DRIFT_K = 0.5
#: random sd [K] of a window mean that averaging cannot remove (common practice, no source)
DEFAULT_FLOOR_K = 0.05
#: a sensor needs readings in this fraction of a window's samples to count in it
MIN_VALID_FRACTION = 0.5
#: a window's samples must span this fraction of the window to judge its drift
MIN_SPAN_FRACTION = 0.5
#: fewest samples of a sensor (and of a window) for a line fit with a scatter
MIN_SAMPLES = 3
#: upper clip of the lag-1 autocorrelation in n_eff
RHO_MAX = 0.99


def window_index(times, origin: float, window: float) -> np.ndarray:
    """Window number floor((t - origin) / window) of each time (int64)."""
    if not (np.isfinite(window) and window > 0):
        raise InverseError("the window length must be a positive number of seconds")
    return np.floor((np.asarray(times, float) - float(origin)) / float(window)).astype(np.int64)


@dataclass
class WindowStats:
    """Statistics of B windows of n sensors (see the module notes).

    index (B,) window numbers; start, end (B,) first and last sample time [s]; n_rows (B,)
    samples in the window; count (B, n) valid samples per sensor; mean, drift, scatter (B, n)
    [K]; rho (B, n).  window: the window length W [s].  Entries of sensors with fewer than
    MIN_SAMPLES readings are NaN.
    """

    index: np.ndarray
    start: np.ndarray
    end: np.ndarray
    n_rows: np.ndarray
    count: np.ndarray
    mean: np.ndarray
    drift: np.ndarray
    scatter: np.ndarray
    rho: np.ndarray
    window: float

    @property
    def size(self) -> int:
        return int(self.index.size)

    @classmethod
    def empty(cls, n_sensors: int, window: float) -> "WindowStats":
        z1, z2 = np.zeros(0), np.zeros((0, n_sensors))
        return cls(np.zeros(0, np.int64), z1, z1, np.zeros(0, np.int64), np.zeros((0, n_sensors), np.int64),
                   z2, z2, z2, z2, float(window))

    @classmethod
    def concat(cls, parts) -> "WindowStats":
        parts = list(parts)
        if not parts:
            raise InverseError("nothing to concatenate")
        arrays = {f.name: np.concatenate([getattr(p, f.name) for p in parts])
                  for f in fields(cls) if f.name != "window"}
        return cls(**arrays, window=parts[0].window)

    def subset(self, keep) -> "WindowStats":
        arrays = {f.name: getattr(self, f.name)[keep] for f in fields(self) if f.name != "window"}
        return WindowStats(**arrays, window=self.window)

    @property
    def valid(self) -> np.ndarray:
        """(B, n): the sensor has enough readings in the window to count in it."""
        need = np.maximum(MIN_SAMPLES, np.ceil(MIN_VALID_FRACTION * self.n_rows))[:, None]
        return (self.count >= need) & np.isfinite(self.mean)

    @property
    def complete(self) -> np.ndarray:
        """(B,): the samples span at least MIN_SPAN_FRACTION of the window."""
        return (self.n_rows >= MIN_SAMPLES) & (self.end - self.start >= MIN_SPAN_FRACTION * self.window)

    @property
    def n_eff(self) -> np.ndarray:
        """(B, n) effective number of independent samples, n (1 - rho) / (1 + rho), >= 1."""
        rho = np.clip(np.nan_to_num(self.rho, nan=0.0), 0.0, RHO_MAX)
        return np.maximum(self.count * (1.0 - rho) / (1.0 + rho), 1.0)

    def max_drift(self) -> np.ndarray:
        """(B,) largest drift of a valid sensor [K] (inf where no sensor is valid)."""
        d = np.where(self.valid, self.drift, -np.inf)
        out = d.max(axis=1, initial=-np.inf)
        return np.where(np.isfinite(out), out, np.inf)

    def steady(self, drift_limit: float = DEFAULT_DRIFT_K) -> np.ndarray:
        """(B,) complete windows in which every valid sensor drifts less than drift_limit [K]."""
        if not (np.isfinite(drift_limit) and drift_limit > 0):
            raise InverseError("the drift threshold must be a positive number of kelvin")
        return self.complete & self.valid.any(axis=1) & (self.max_drift() < drift_limit)

    def sigma(self, floor: float = DEFAULT_FLOOR_K) -> np.ndarray:
        """(B, n) random sd of the window means [K]: sqrt(scatter^2 / n_eff + floor^2)."""
        if not (np.isfinite(floor) and floor >= 0):
            raise InverseError("the sigma floor must be a non-negative number of kelvin")
        s2 = np.nan_to_num(self.scatter, nan=0.0) ** 2 / self.n_eff
        out = np.sqrt(s2 + float(floor) ** 2)
        return np.where(self.valid, out, np.nan)


def summarize(times, values, index, window: float) -> WindowStats:
    """Statistics of the windows present in a record (rows sorted by time, every window
    complete: the caller cuts a stream at window boundaries).

    times (R,) [s]; values (R, n) [K], NaN = missing; index (R,) window numbers (from
    `window_index`), non-decreasing.
    """
    t = np.asarray(times, float)
    X = np.asarray(values, float)
    idx = np.asarray(index, np.int64)
    if X.ndim != 2 or X.shape[0] != t.size or idx.shape != t.shape:
        raise InverseError("times (R,), values (R, n) and index (R,) must agree")
    n = X.shape[1]
    if t.size == 0:
        return WindowStats.empty(n, window)
    if np.any(np.diff(idx) < 0):
        raise InverseError("window numbers must not decrease")
    starts = np.flatnonzero(np.r_[True, idx[1:] != idx[:-1]])
    ends = np.r_[starts[1:], t.size]
    n_rows = ends - starts
    ok = np.isfinite(X)
    w = ok.astype(float)
    tt = t - np.repeat(t[starts], n_rows)              # time since the window's first sample
    # shift each sensor by a typical value so that the sums below lose no digits
    sample = X[:: max(1, t.size // 256)]
    seen = np.isfinite(sample).any(axis=0)           # a sensor silent over the sample stays at 0
    ref = np.zeros(n)
    ref[seen] = np.nanmedian(sample[:, seen], axis=0)
    Xc = np.where(ok, X - ref, 0.0)

    # window sums as one sparse (windows x rows) product: 5x faster than np.add.reduceat along axis 0
    windows = sparse.csr_matrix((np.ones(t.size), np.arange(t.size), np.r_[starts, t.size]),
                                shape=(starts.size, t.size))

    def total(a):
        return windows @ a

    count = total(w)
    s_t, s_tt = total(w * tt[:, None]), total(w * (tt * tt)[:, None])
    s_x, s_xx, s_tx = total(Xc), total(Xc * Xc), total(Xc * tt[:, None])
    # consecutive pairs inside a window, both valid; pair i joins rows i - 1 and i
    pair = np.zeros_like(ok)
    pair[1:] = ok[1:] & ok[:-1] & (idx[1:] == idx[:-1])[:, None]
    dxp = np.zeros_like(Xc)
    dxp[1:] = Xc[1:] - Xc[:-1]
    dxp *= pair
    dtp = np.r_[0.0, np.diff(t)]
    s_dd, s_dxt = total(dxp * dxp), total(dxp * dtp[:, None])
    s_dtt = total(pair * (dtp * dtp)[:, None])
    with np.errstate(invalid="ignore", divide="ignore"):
        tm, xm = s_t / count, s_x / count
        vtt = s_tt - count * tm * tm
        vtx = s_tx - count * tm * xm
        vxx = s_xx - count * xm * xm
        slope = vtx / vtt
        ss = np.maximum(vxx - slope * vtx, 0.0)          # residual sum of squares about the line
        # sum of squared differences of consecutive residuals = 2 SS (1 - rho), nearly
        sde = np.maximum(s_dd - 2 * slope * s_dxt + slope * slope * s_dtt, 0.0)
        rho = 1.0 - sde / (2.0 * ss)
        scatter = np.sqrt(ss / (count - 2))
    enough = count >= MIN_SAMPLES
    nan = np.full_like(xm, np.nan)
    mean = np.where(count > 0, xm + ref, np.nan)
    drift = np.where(enough & (vtt > 0), np.abs(slope) * float(window), nan)
    scatter = np.where(enough, scatter, nan)
    rho = np.where(enough & (ss > 0), rho, nan)
    return WindowStats(idx[starts], t[starts], t[ends - 1], n_rows, count.astype(np.int64), mean, drift,
                       scatter, rho, float(window))


def detect(times, values, window: float = DEFAULT_WINDOW_S, drift_limit: float = DEFAULT_DRIFT_K,
           origin: float | None = None) -> tuple[WindowStats, np.ndarray]:
    """Windows of a whole record held in memory and which of them are steady: (stats, mask)."""
    t = np.asarray(times, float)
    if t.size == 0:
        raise InverseError("the record is empty")
    idx = window_index(t, t[0] if origin is None else origin, window)
    stats = summarize(t, values, idx, window)
    return stats, stats.steady(drift_limit)


class WindowAccumulator:
    """Steady-window statistics of a stream of chunks: windows of `window` s from the first
    time; complete windows are summarized as chunks arrive, the window spanning a chunk
    boundary is carried over.  `stats` holds every window finished so far."""

    def __init__(self, n_sensors: int, window: float):
        self.window = float(window)
        self.n = int(n_sensors)
        self.origin = None
        self._parts: list[WindowStats] = []
        self._carry_t = np.zeros(0)
        self._carry_x = np.zeros((0, self.n))
        self._stats: WindowStats | None = None

    def add(self, times, values) -> None:
        if self.origin is None and len(times):
            self.origin = float(times[0])
        t = np.concatenate([self._carry_t, times]) if self._carry_t.size else np.asarray(times, float)
        x = np.concatenate([self._carry_x, values]) if self._carry_x.size else np.asarray(values, float)
        if t.size == 0:
            return
        idx = window_index(t, self.origin, self.window)
        done = int(np.searchsorted(idx, idx[-1], side="left"))
        if done:
            self._parts.append(summarize(t[:done], x[:done], idx[:done], self.window))
            self._stats = None
        self._carry_t, self._carry_x = t[done:].copy(), x[done:].copy()

    def finish(self) -> None:
        if self._carry_t.size:
            idx = window_index(self._carry_t, self.origin, self.window)
            self._parts.append(summarize(self._carry_t, self._carry_x, idx, self.window))
            self._stats = None
        self._carry_t, self._carry_x = np.zeros(0), np.zeros((0, self.n))

    @property
    def stats(self) -> WindowStats:
        if self._stats is None:
            self._stats = WindowStats.concat(self._parts) if self._parts else WindowStats.empty(self.n, self.window)
            self._parts = [self._stats]
        return self._stats
