"""`heatsight trend`: follow the unknown face over a logged record.

    heatsight trend CASE.toml --log LOG.csv [--every N] [--out DIR]
                   [--window SECONDS] [--drift K] [--sigma-floor K] [--overwrite]

The log is streamed in chunks (data_io.logs) and cut into windows of --window seconds;
a window is steady when no sensor drifts by --drift K or more over it (inverse.steady).
The reference is the first steady window that has settled (largest drift at most
REFERENCE_DRIFT_FRACTION of --drift; else the first steady window, with a warning).  It is
fitted with `inverse.fit` (sensor screening), which fixes the sensors of the whole trend;
the smoothing strength is the one the joint evidence of all steady windows prefers
(windows mode; --every streams, so there the reference window's own choice stands), unless
the case fixes the strength or names another rule.  Then every steady window (default) or
every Nth logged row (--every N) is inverted by one batch solver (inverse.batch).

Changes: each zone's change from the reference is estimated from the difference of the
readings to the reference window, in which the thermocouple offsets and placement errors
cancel, with its own strength (joint evidence of the differences in windows mode, half the
trend's strength with --every); its sd is the random noise's only.  Beyond
`change_threshold(rows x zones)` sd (Bonferroni, family-wise 2 %) the zone is flagged;
rows before the reference (the part still settling) are never flagged.

Noise of a row: a window mean has the random sd of inverse.steady (scatter / sqrt(n_eff)
with the --sigma-floor); a single logged row has the layout's sigma (or the default).  The
offsets (from type and class) and placement tolerances widen the sd of absolute values.

Outputs (all or none, in DIR, default <case>-trend next to the case): trend.csv (streamed
row by row, so a long log never sits in memory), trend.png, summary.json and report.html
(the reference window's fit report with a trend section).
"""

from __future__ import annotations

import argparse
import base64
import math
import os
import shutil
import sys
from html import escape
from pathlib import Path

import numpy as np

from ..forward.errors import ForwardModelError
from ..inverse.errors import InverseError
from ..inverse.steady import DEFAULT_DRIFT_K, DEFAULT_FLOOR_K, DEFAULT_WINDOW_S

from .csv_out import OutputSet, neutralize
from .errors import InputError
from .logs import DEFAULT_CHUNK_ROWS, csv_header, csv_rows, number_cells, text_cells

OUTPUT_NAMES = ("trend.csv", "trend.png", "summary.json", "report.html")
#: in --every mode, rows wait for the first steady window; past this many the steadiest
#: complete window so far becomes the reference
MAX_PENDING_ROWS = 200_000
#: the trend figure shows at most about twice this many points (longer trends are binned)
FIGURE_POINTS = 1500
#: a progress bar is drawn from this many chunks on
PROGRESS_MIN_CHUNKS = 4
#: windows inverted per call of the batch solver
WINDOW_BATCH = 4096
#: the reference is the first steady window whose largest drift is at most this fraction of
#: --drift: a window just inside the limit may still be settling, and a baseline must not
#: (common practice, no source)
REFERENCE_DRIFT_FRACTION = 0.25


class _Progress:
    def __init__(self, total: int, enabled: bool):
        self.total, self.enabled, self.done = max(int(total), 1), enabled and total >= PROGRESS_MIN_CHUNKS, 0

    def step(self):
        self.done += 1
        if self.enabled:
            width = 30
            filled = int(width * min(self.done, self.total) / self.total)
            print(f"\r  reading the log: chunk {self.done}/{self.total} [{'#' * filled}{'.' * (width - filled)}]",
                  end="", file=sys.stderr, flush=True)

    def close(self):
        if self.enabled and self.done:
            print("", file=sys.stderr, flush=True)


class _Digest:
    """Bounded summary of a long trend for its figure: consecutive rows are merged into bins
    (mean of values, min of lower bounds, max of upper bounds, any flag), and bins merge
    pairwise whenever there are more than 2 x FIGURE_POINTS of them."""

    KINDS = {"time": "mean", "value": "mean", "lower": "min", "upper": "max", "change": "mean",
             "limit": "max", "flag": "any"}

    def __init__(self):
        self.size = 1
        self.bins: dict = {}
        self.count = np.zeros(0)

    @staticmethod
    def _reduce(kind, x, starts, weights):
        if kind == "mean":
            return np.add.reduceat(x * weights, starts) / np.add.reduceat(weights, starts)
        if kind == "min":
            return np.fmin.reduceat(x, starts)
        if kind == "max":
            return np.fmax.reduceat(x, starts)
        return np.logical_or.reduceat(x.astype(bool), starts)

    def add(self, columns: dict):
        n = len(next(iter(columns.values())))
        if n == 0:
            return
        starts = np.arange(0, n, self.size)
        ones = np.ones(n)
        for key, x in columns.items():
            kind = self.KINDS[key[-1]]
            part = self._reduce(kind, np.asarray(x, float) if kind != "any" else np.asarray(x), starts, ones)
            self.bins[key] = np.concatenate([self.bins[key], part]) if key in self.bins else part
        self.count = np.concatenate([self.count, np.add.reduceat(ones, starts)])
        while self.count.size > 2 * FIGURE_POINTS:
            starts = np.arange(0, self.count.size, 2)
            for key, x in self.bins.items():
                self.bins[key] = self._reduce(self.KINDS[key[-1]], x, starts, self.count)
            self.count = np.add.reduceat(self.count, starts)
            self.size *= 2


def _output_folder(case, out, overwrite, log_path):
    from .fit_command import _output_folder as fit_folder

    folder = Path(out) if out else case.folder / f"{case.path.stem}-trend"
    folder, create = fit_folder(argparse.Namespace(out=str(folder), overwrite=overwrite), case)
    for name in OUTPUT_NAMES:
        if (folder / name).resolve() == Path(log_path).resolve():
            raise InputError(f"{name} in the output folder is the log of this run; choose another --out",
                             file=folder)
    return folder, create


class _Trend:
    """One run: the log stream, the windows, the reference fit, the batch solver, the output."""

    def __init__(self, case, layout, columns, reader, *, window, drift, sigma_floor, every):
        from .thermocouples import DEFAULT_SIGMA_K
        from .logs import WindowAccumulator

        self.case, self.layout, self.cols, self.reader = case, layout, columns, reader
        self.window, self.drift, self.floor, self.every = float(window), float(drift), float(sigma_floor), every
        self.windows = WindowAccumulator(columns.n, window)
        lay = layout.frame.loc[columns.sensors]
        self.names = list(columns.sensors)
        self.r, self.theta, self.z = (lay[c].to_numpy(float) for c in ("r", "theta", "z"))
        sig = lay["sigma"].to_numpy(float)
        self.reading_sigma = np.where(np.isfinite(sig), sig, DEFAULT_SIGMA_K)
        self.ptol = lay["position_tolerance"].to_numpy(float)
        self.warnings: list[str] = list(columns.warnings)
        self.result = self.solver = self.changes = None
        self.ref_window = None
        self.pending: list = []
        self.pending_rows = 0
        self.row_counter = 0
        self.trend_rows = 0
        self.stream = None
        self.digest = _Digest()
        self.flags: dict = {}
        self.threshold = None
        self.zone_names: list = []
        self.last_row = None
        self.first_row = None

    # ---------------------------------------------------------------- reference
    def _choose_reference(self, final: bool) -> int | None:
        """The reference window: the first steady window that has settled (largest drift at
        most REFERENCE_DRIFT_FRACTION of --drift), else the first steady window, else (only
        in --every mode) the steadiest complete window; None while waiting for more data."""
        stats = self.windows.stats
        steady = np.flatnonzero(stats.steady(self.drift))
        drift = stats.max_drift()
        settled = steady[drift[steady] <= REFERENCE_DRIFT_FRACTION * self.drift]
        if settled.size:
            return int(settled[0])
        waiting = not final and self.pending_rows < MAX_PENDING_ROWS
        if steady.size:
            if waiting:
                return None
            i = int(steady[0])
            self.warnings.append(f"no steady window drifts less than {REFERENCE_DRIFT_FRACTION * self.drift:.3g} K "
                                 f"{'in the log' if final else f'in its first {self.pending_rows} rows'}; the "
                                 f"reference, the first steady window (t = {stats.start[i]:.6g} to "
                                 f"{stats.end[i]:.6g} s, drift {drift[i]:.3g} K), may still be settling, and "
                                 "its settling shows in every change")
            return i
        if waiting:
            return None
        complete = np.flatnonzero(stats.complete & stats.valid.any(axis=1))
        if not complete.size:
            if final:
                raise self._no_steady(stats)
            return None
        i = int(complete[np.argmin(drift[complete])])
        self.warnings.append(f"no steady window (every sensor within {self.drift:g} K over {self.window:g} s) "
                             f"was found {'in the log' if final else f'in its first {self.pending_rows} rows'}; "
                             f"changes are relative to the steadiest window, t = {stats.start[i]:.6g} to "
                             f"{stats.end[i]:.6g} s, which drifts {drift[i]:.3g} K")
        return i

    def _no_steady(self, stats) -> InputError:
        complete = stats.complete & stats.valid.any(axis=1)
        if not complete.any():
            return InputError(f"no complete window of {self.window:g} s in the log (it spans "
                              f"{stats.end.max() - stats.start.min() if stats.size else 0:.6g} s); "
                              f"give a shorter --window", file=self.cols.path)
        md = np.where(complete, stats.max_drift(), np.inf)
        i = int(np.argmin(md))
        worst = int(np.nanargmax(np.where(stats.valid[i], stats.drift[i], -np.inf)))
        suggest = float(f"{md[i] * 1.25:.2g}")
        return InputError(
            f"no steady window: in every {self.window:g}-s window some sensor drifts by {self.drift:g} K or "
            f"more (the steadiest window, t = {stats.start[i]:.6g} to {stats.end[i]:.6g} s, drifts "
            f"{md[i]:.3g} K at sensor {self.names[worst]}); if that is steady enough for you, give "
            f"--drift {suggest:g}, or let the part settle longer", file=self.cols.path)

    def _setup(self, i: int, steady=None) -> None:
        """Fit the reference window i, fix the sensors and the strength, build the solver.

        steady: indices of every steady window (windows mode): the strength is then the one
        the joint evidence of all of them prefers, unless the case fixes the strength or asks
        for another rule.  Without it (--every mode, which streams) the reference window's
        own choice stands."""
        from .. import inverse
        from ..inverse import SensorReadings
        from ..inverse.batch import BatchSolver

        from .tables import offset_sd

        stats = self.windows.stats
        self.ref_window = (float(stats.start[i]), float(stats.end[i]))
        valid = stats.valid[i]
        mean = stats.mean[i]
        sig = stats.sigma(self.floor)[i]
        level = np.where(valid, mean, np.nanmean(np.where(valid, mean, np.nan)))
        tau, notes = offset_sd(self.layout.frame.loc[self.names], level)
        self.warnings.extend(f"{self.layout.path}: {n}" for n in notes)
        if valid.sum() < 3:
            raise InputError(f"the reference window (t = {self.ref_window[0]:.6g} to {self.ref_window[1]:.6g} s) "
                             f"has only {int(valid.sum())} sensor(s) with readings; a fit needs at least 3",
                             file=self.cols.path)
        k = np.flatnonzero(valid)
        rd = SensorReadings([self.names[j] for j in k], self.r[k], self.theta[k], self.z[k], mean[k], sig[k],
                            tau[k], self.ptol[k])

        def fit(strength=None):
            try:
                return inverse.fit(self.case, rd, strength=strength)
            except (InverseError, ForwardModelError) as exc:
                raise InputError(f"fit of the reference window: {exc}", file=self.case.path) from None

        def solver_for(result, aside):
            used = np.array([s not in aside for s in self.names])
            u = used
            return used, BatchSolver.from_fit(result, self.r[u], self.theta[u], self.z[u], offset_sd=tau[u],
                                              position_tolerance=self.ptol[u], zones=self.case.zones)

        result = fit()
        aside = set(result.summary["set_aside"])
        used, solver = solver_for(result, aside)
        self.strength_rule = f"{result.summary['strength_method']} of the reference window"
        if steady is not None and getattr(self.case.fit, "strength_method", "evidence") == "evidence":
            means = np.where(stats.valid, stats.mean, np.nan)[steady][:, used]
            alpha, notes = solver.joint_strength(means, (stats.sigma(self.floor) ** 2)[steady][:, used])
            self.warnings.extend(notes)
            result = fit(alpha)
            result.summary["strength_method"] = "evidence of all steady windows"
            aside |= set(result.summary["set_aside"])
            used, solver = solver_for(result, aside)
            self.strength_rule = f"joint evidence of the {len(steady)} steady windows"
        self.result, self.used, self.solver, self.tau = result, used, solver, tau
        for s in sorted(aside):
            self.warnings.append(f"sensor {s} was set aside in the reference window and is left out of the trend")
        edf = float(result.summary["effective_parameters"])
        if edf < 2.0 and solver.change_names:
            cure = ("run without --every (the strength then comes from all steady windows) or fix [fit] "
                    "strength in the case" if steady is None else "fix [fit] strength in the case to resolve zones")
            self.warnings.append(f"at the trend's smoothing strength the fit has only {edf:.2g} effective "
                                 "parameters: the trend resolves little beyond the face mean, and a change of "
                                 f"one zone shows in all of them; {cure}")
        # changes: estimated from the readings' difference to the reference window
        self.ref_d = np.where(valid, mean, np.nan)[used]
        self.ref_rv = np.where(valid, sig ** 2, np.nan)[used]
        changes = solver.changes()
        self.change_rule = "half the trend's strength (the prior of a difference of two profiles)"
        others = [] if steady is None else [w for w in steady if w != i]
        if others and getattr(self.case.fit, "strength_method", "evidence") == "evidence":
            X = np.where(stats.valid, stats.mean, np.nan)[others][:, used] - self.ref_d
            RV = (stats.sigma(self.floor) ** 2)[others][:, used] + self.ref_rv
            alpha_c, notes = changes.joint_strength(X, RV)
            changes = solver.changes(alpha_c)
            self.change_rule = f"joint evidence of the {len(others)} differences to the reference window"
        self.changes = changes
        self.zone_names = list(solver.change_names)
        self.flags = {z: {"zone": z, "flagged_rows": 0, "first_flagged_start_s": None,
                          "largest_change_in_sd": 0.0} for z in self.zone_names}

    def _set_threshold(self, rows: int) -> None:
        from ..inverse.batch import TREND_FAMILY_LEVEL, change_threshold

        self.comparisons = max(rows - 1, 1) * max(len(self.zone_names), 1)
        self.threshold = change_threshold(self.comparisons)
        self.family_level = TREND_FAMILY_LEVEL

    # ---------------------------------------------------------------- rows
    def _columns(self):
        names = ["start_s", "end_s"]
        if self.reader.timestamps:
            names += ["start_iso", "end_iso"]
        names += ["n_rows", "n_sensors", "mean", "mean_sd", "min", "max", "nonuniformity", "nonuniformity_sd",
                  "total_power_W", "total_power_sd_W"]
        for z in self.zone_names:
            names += [f"{z}_mean", f"{z}_sd", f"{z}_change", f"{z}_change_sd", f"{z}_flag"]
        return names

    def _value(self, x):
        """Absolute face values in the display unit (degC for temperature)."""
        return x - 273.15 if self.result.quantity == "temperature" else x

    def _write(self, start, end, n_rows, est, d, rv, reference_mask=None):
        """Write rows: est the batch answers; d (R, n) and rv ((n,) or (R, n)) the rows'
        readings and random variances, for their changes from the reference window."""
        if self.stream is None:
            raise RuntimeError("output stream not open")
        if self.trend_rows == 0:
            self.stream.write(csv_header([neutralize(c) for c in self._columns()]).encode("utf-8"))
        R = start.size
        if R == 0:
            return
        ch = self.changes.solve(d - self.ref_d, rv + self.ref_rv)
        change, csd = ch.values, ch.sd
        if reference_mask is not None and reference_mask.any():
            change[reference_mask], csd[reference_mask] = 0.0, 0.0
        with np.errstate(invalid="ignore", divide="ignore"):
            score = np.abs(change) / csd
        # rows before the reference (the part still settling) are reported, never flagged
        flag = np.isfinite(score) & (score > self.threshold) & (start >= self.ref_window[0])[:, None]
        cells = [number_cells(start, 13), number_cells(end, 13)]
        if self.reader.timestamps:
            cells += [text_cells(self.reader.iso(start)), text_cells(self.reader.iso(end))]
        v = self._value
        cells += [number_cells(n_rows), number_cells(est.n_used), number_cells(v(est.value("mean"))),
                  number_cells(est.sd_of("mean")), number_cells(v(est.min)), number_cells(v(est.max)),
                  number_cells(est.nonuniformity), number_cells(est.nonuniformity_sd),
                  number_cells(est.value("total_power")), number_cells(est.sd_of("total_power"))]
        words = text_cells(["true", "false"])
        for j, z in enumerate(self.zone_names):
            fz = flag[:, j]
            flag_cells = np.where(fz[:, None], words[0], words[1])
            cells += [number_cells(v(est.value(z))), number_cells(est.sd_of(z)), number_cells(change[:, j]),
                      number_cells(csd[:, j]), flag_cells]
            info = self.flags[z]
            if fz.any():
                first = int(np.argmax(fz))
                if info["first_flagged_start_s"] is None:
                    info["first_flagged_start_s"] = float(start[first])
                    info["first_flagged_end_s"] = float(end[first])
                    if self.reader.timestamps:
                        info["first_flagged_start_iso"] = str(self.reader.iso(start[first:first + 1])[0])
                    info["change_at_first_flag"] = float(change[first, j])
                    info["change_sd_at_first_flag"] = float(csd[first, j])
                info["flagged_rows"] += int(fz.sum())
            if np.any(np.isfinite(score[:, j])):
                info["largest_change_in_sd"] = max(info["largest_change_in_sd"], float(np.nanmax(score[:, j])))
        self.stream.write(csv_rows(cells))
        self.trend_rows += R
        z95 = 1.959963984540054
        mean, msd = est.value("mean"), est.sd_of("mean")
        cols = {("time",): 0.5 * (start + end), ("mean", "value"): mean, ("mean", "lower"): mean - z95 * msd,
                ("mean", "upper"): mean + z95 * msd}
        for j, z in enumerate(self.zone_names):
            val, sd = est.value(z), est.sd_of(z)
            cols.update({(z, "value"): val, (z, "lower"): val - z95 * sd, (z, "upper"): val + z95 * sd,
                         (z, "change"): change[:, j], (z, "limit"): self.threshold * csd[:, j],
                         (z, "flag"): flag[:, j]})
        self.digest.add(cols)
        ok = np.isfinite(mean)

        def row(i):
            return {"start_s": float(start[i]), "end_s": float(end[i]), "mean": float(v(mean[i])),
                    "zones": {z: float(v(est.value(z)[i])) for z in self.zone_names},
                    "changes": {z: (float(change[i, j]), float(csd[i, j])) for j, z in enumerate(self.zone_names)}}

        if ok.any():
            self.last_row = row(int(np.flatnonzero(ok)[-1]))
            if self.first_row is None:
                self.first_row = row(int(np.flatnonzero(ok)[0]))
        bad = int((~ok).sum())
        if bad:
            self.skipped = getattr(self, "skipped", 0) + bad

    def _rows(self, times, values):
        d, rv = values[:, self.used], self.reading_sigma[self.used] ** 2
        self._write(times, times, np.ones(times.size), self.solver.solve(d, rv), d, rv)

    def _flush_pending(self):
        for t, x in self.pending:
            self._rows(t, x)
        self.pending, self.pending_rows = [], 0

    # ---------------------------------------------------------------- the run
    def run(self, stream, progress: _Progress, expected_rows: int):
        self.stream = stream
        for chunk in self.reader:
            self.windows.add(chunk.times, chunk.values)
            if self.every:
                keep = (self.row_counter + np.arange(chunk.times.size)) % self.every == 0
                t, x = chunk.times[keep], chunk.values[keep]
                if self.solver is None:
                    self.pending.append((t, x))
                    self.pending_rows += t.size
                    i = self._choose_reference(final=False)
                    if i is not None:
                        self._setup(i)
                        self._set_threshold(math.ceil(expected_rows / self.every))
                        self._flush_pending()
                else:
                    self._rows(t, x)
            self.row_counter += chunk.times.size
            progress.step()
        progress.close()
        self.windows.finish()
        self.warnings[:0] = self.reader.warnings()
        if self.every:
            if self.solver is None:
                self._setup(self._choose_reference(final=True))
                self._set_threshold(math.ceil(self.row_counter / self.every))
                self._flush_pending()
            return
        stats = self.windows.stats
        steady = np.flatnonzero(stats.steady(self.drift))
        if not steady.size:
            raise self._no_steady(stats)
        ref = self._choose_reference(final=True)
        self._setup(ref, steady)
        self._set_threshold(steady.size)
        sig2 = stats.sigma(self.floor) ** 2
        means = np.where(stats.valid, stats.mean, np.nan)
        for lo in range(0, steady.size, WINDOW_BATCH):
            w = steady[lo:lo + WINDOW_BATCH]
            d, rv = means[w][:, self.used], sig2[w][:, self.used]
            self._write(stats.start[w], stats.end[w], stats.n_rows[w], self.solver.solve(d, rv), d, rv,
                        reference_mask=(w == ref))

    # ---------------------------------------------------------------- summaries
    def figure_data(self) -> dict:
        b = self.digest.bins
        t = b.get(("time",), np.zeros(0))
        if self.reader.timestamps:
            time = (self.reader.origin_ns + np.rint(t * 1e9).astype(np.int64)).astype("datetime64[ns]")
            label = "time (UTC)" if self.reader.aware else "time"
            ref = tuple((self.reader.origin_ns + np.rint(np.array(self.ref_window) * 1e9).astype(np.int64))
                        .astype("datetime64[ns]"))
        else:
            time, label = t / 3600.0, "time [h]"
            ref = tuple(np.array(self.ref_window) / 3600.0)
        zones = [{"name": z, **{k: b[(z, k)] for k in ("value", "lower", "upper", "change", "limit", "flag")}}
                 for z in self.zone_names]
        return {"quantity": self.result.quantity, "face": self.result.face, "time": time, "time_label": label,
                "mean": {k: b[("mean", k)] for k in ("value", "lower", "upper")}, "zones": zones,
                "reference": ref}

    def summary(self, case_path, log_path) -> dict:
        from .fit_outputs import CAUTION, summary_dict

        stats = self.windows.stats
        steady = stats.steady(self.drift)
        unit = "degC" if self.result.quantity == "temperature" else "W/m^2"
        ref = {"start_s": self.ref_window[0], "end_s": self.ref_window[1]}
        if self.reader.timestamps:
            ref.update(start_iso=str(self.reader.iso([self.ref_window[0]])[0]),
                       end_iso=str(self.reader.iso([self.ref_window[1]])[0]))
        flags = [dict(v) for v in self.flags.values() if v["flagged_rows"]]
        return {
            "case": str(case_path), "log": str(log_path),
            "mode": "every" if self.every else "windows", "every": self.every,
            "window_s": self.window, "drift_K": self.drift, "sigma_floor_K": self.floor,
            "face": self.result.face, "quantity": self.result.quantity, "unit": unit,
            "rows_read": int(self.reader.rows),
            "windows": {"total": int(stats.size), "complete": int(stats.complete.sum()),
                        "steady": int(steady.sum())},
            "trend_rows": int(self.trend_rows),
            "rows_not_inverted": int(getattr(self, "skipped", 0)),
            "reference_window": ref,
            "strength": float(self.result.posterior.alpha),
            "strength_method": self.strength_rule,
            "change_strength": float(self.changes.alpha), "change_strength_method": self.change_rule,
            "sensors_used": [s for s, u in zip(self.names, self.used) if u],
            "set_aside": list(self.result.summary["set_aside"]),
            "zones": self.zone_names,
            "flag_threshold_sd": self.threshold, "flag_family_level": self.family_level,
            "flag_comparisons": int(self.comparisons),
            "flags": flags,
            "warnings": list(dict.fromkeys(self.warnings + list(self.result.warnings))),
            "caution": CAUTION,
            "reference_fit": summary_dict(self.result, case_path=case_path, readings_path=log_path),
        }


def _every_words(n) -> str:
    """'every row', 'every 2nd row', 'every 60th row'."""
    if n == 1:
        return "every row"
    suffix = "th" if 10 <= n % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(n % 10, "th")
    return f"every {n}{suffix} row"


def _fmt(x, digits=4):
    return "–" if x is None or not np.isfinite(x) else f"{x:.{digits}g}"


def trend_html(summary: dict, figure_png: bytes, reader_timestamps: bool) -> str:
    """The report's trend section (safe HTML: every user or data string escaped)."""
    unit = summary["unit"]
    du = "K" if unit == "degC" else unit
    e = lambda s: escape(str(s), quote=True)  # noqa: E731
    ref = summary["reference_window"]
    when = (f"{ref['start_iso']} to {ref['end_iso']}" if "start_iso" in ref
            else f"t = {ref['start_s']:.6g} to {ref['end_s']:.6g} s")
    if summary["mode"] == "every":
        what = f"{_every_words(summary['every'])} of the log ({summary['trend_rows']} rows)"
    else:
        what = (f"every steady window: {summary['windows']['steady']} of {summary['windows']['total']} windows of "
                f"{summary['window_s']:g} s had every sensor within {summary['drift_K']:g} K")
    parts = [f"<p>Inverted: {e(what)}, from {e(summary['rows_read'])} logged rows. The reference is the first "
             f"steady window ({e(when)}); its fit is the one reported above, and it fixes the smoothing "
             f"strength (α = {summary['strength']:.3g}) and the sensors of the whole trend.</p>",
             f"<p>A zone's change is estimated from the difference of the readings to the reference window, "
             f"in which the thermocouple offsets (the same at every time) cancel; its sd is that of the "
             f"random noise only. A zone is flagged when its change exceeds "
             f"{summary['flag_threshold_sd']:.2f} times that sd (Bonferroni over {summary['flag_comparisons']} "
             f"comparisons at a family-wise {summary['flag_family_level']:.0%}). A large change of one zone "
             f"spreads a little into its neighbours through the fit's smoothing, so judge flags by the size "
             f"of the change: the zone that moves most is where the change is.</p>"]
    rows = []
    first, last = summary.get("first_row"), summary.get("last_row")

    def shown(row, z):          # a zone mean of a row (in the summary's unit)
        return row["zones"][z] if row else None
    for z in summary["zones"]:
        f = next((x for x in summary["flags"] if x["zone"] == z), None)
        flagged = "no"
        if f:
            at = f.get("first_flagged_start_iso") or f"t = {f['first_flagged_start_s']:.6g} s"
            flagged = f"yes, from {at} ({f['flagged_rows']} row{'' if f['flagged_rows'] == 1 else 's'})"
        ch = last["changes"].get(z) if last else None
        rows.append(f"<tr><td>{e(z)}</td><td class=\"num\">{e(_fmt(shown(first, z), 6))}</td>"
                    f"<td class=\"num\">{e(_fmt(shown(last, z), 6))}</td>"
                    f"<td class=\"num\">{e(_fmt(ch[0] if ch else None, 3))} ± {e(_fmt(ch[1] if ch else None, 2))}</td>"
                    f"<td>{e(flagged)}</td></tr>")
    if rows:
        parts.append(f"<table><tr><th>zone</th><th>first row [{e(unit)}]</th><th>last row [{e(unit)}]</th>"
                     f"<th>last change [{e(du)}] ± sd</th><th>flagged</th></tr>" + "".join(rows) + "</table>")
    else:
        parts.append("<p>The case defines no zones on the estimated face, so nothing is flagged; add "
                     "[[zones]] to the case to follow heater zones.</p>")
    data = base64.b64encode(figure_png).decode("ascii")
    caption = ("The face mean and each zone over the log with 95 % bands; below, each zone's change from the "
               "reference window with its flag limit; ▼ marks flagged rows.")
    parts.append(f'<figure id="figure-trend"><img alt="{e(caption)}" src="data:image/png;base64,{data}">'
                 f"<figcaption>{e(caption)}</figcaption></figure>")
    return "\n".join(parts)


def console_lines(summary: dict, folder) -> str:
    unit = summary["unit"]
    du = "K" if unit == "degC" else unit
    ref = summary["reference_window"]
    lines = [f"trend of the {summary['face']} face {summary['quantity'].replace('_', ' ')} ({unit}) over "
             f"{summary['log']}:",
             f"  rows read       {summary['rows_read']}; windows of {summary['window_s']:g} s: "
             f"{summary['windows']['steady']} steady of {summary['windows']['total']}",
             f"  trend rows      {summary['trend_rows']}"
             + (f" ({_every_words(summary['every'])})" if summary["mode"] == "every" else " (steady windows)"),
             f"  reference       t = {ref['start_s']:.6g} to {ref['end_s']:.6g} s; strength "
             f"{summary['strength']:.3g}; {len(summary['sensors_used'])} sensors"
             + (f" (set aside: {', '.join(summary['set_aside'])})" if summary["set_aside"] else ""),
             f"  flag limit      |change| > {summary['flag_threshold_sd']:.2f} sd"]
    last = summary.get("last_row")
    for z in summary["zones"]:
        f = next((x for x in summary["flags"] if x["zone"] == z), None)
        ch = last["changes"][z] if last else (math.nan, math.nan)
        text = f"  zone {z:<10} last change {_fmt(ch[0], 3)} +- {_fmt(ch[1], 2)} {du}"
        if f:
            text += (f"  FLAGGED from t = {f['first_flagged_start_s']:.6g} s ({f['flagged_rows']} "
                     f"row{'' if f['flagged_rows'] == 1 else 's'})")
        lines.append(text)
    for w in summary["warnings"]:
        lines.append(f"  warning: {w}")
    lines.append(f"outputs in {folder}")
    return "\n".join(lines)


def run_trend(case_path, *, log=None, every=None, out=None, window=DEFAULT_WINDOW_S, drift=DEFAULT_DRIFT_K,
              sigma_floor=DEFAULT_FLOOR_K, overwrite=False, chunk_rows=DEFAULT_CHUNK_ROWS, echo=print,
              progress=True):
    """Run a trend and write its outputs; returns (summary dict, output folder)."""
    from .case import load_case
    from .csv_out import json_text
    from .fit_command import case_text
    from .logs import LogReader, count_rows, open_log
    from .plots import face_map, figure_png, sensor_health, trend_figure
    from .report import render_report
    from .tables import read_layout, readings_form

    case = load_case(case_path, purpose="fit")
    case.require("fit")
    log_path = Path(log) if log else case.sensors.readings
    if log_path is None:
        raise InputError("no log: give --log LOG.csv", file=case.path)
    if not log and readings_form(log_path) != "log":
        raise InputError("the case's readings are a snapshot; give the log with --log LOG.csv", file=log_path)
    if every is not None and every < 1:
        raise InputError(f"--every needs a whole number >= 1, got {every}")
    folder, create = _output_folder(case, out, overwrite, log_path)
    layout = read_layout(case.sensors.layout, case.cylinder)
    columns = open_log(log_path, layout)
    lines = count_rows(log_path)
    expected = max(lines - columns.header_line, 1)
    reader = LogReader(columns, layout, chunk_rows)
    run = _Trend(case, layout, columns, reader, window=window, drift=drift, sigma_floor=sigma_floor, every=every)
    bar = _Progress(math.ceil(expected / max(int(chunk_rows), 1)), progress)
    if create:
        folder.mkdir()
    try:
        with OutputSet(folder) as outset:
            with outset.stream("trend.csv") as fh:
                run.run(fh, bar, expected)
                fh.flush()
                os.fsync(fh.fileno())
            summary = run.summary(case.path, log_path)
            summary["first_row"], summary["last_row"] = run.first_row, run.last_row
            png = figure_png(trend_figure(run.figure_data()))
            html = render_report(
                run.result, title=f"heatsight trend: {case.path.name}",
                case_text=case_text(case, log_path) + [("reference window", f"t = {run.ref_window[0]:.6g} to "
                                                                            f"{run.ref_window[1]:.6g} s")],
                figures={"face_map": figure_png(face_map(run.result)),
                         "sensors": figure_png(sensor_health(run.result))},
                extra_sections=[("Trend over the log", trend_html(summary, png, reader.timestamps))])
            outset.add("trend.png", png)
            outset.add("summary.json", json_text(summary))
            outset.add("report.html", html)
    except BaseException:
        bar.close()
        if create:
            shutil.rmtree(folder, ignore_errors=True)
        raise
    echo(console_lines(summary, folder))
    return summary, folder


def _run(args) -> int:
    run_trend(args.case, log=args.log, every=args.every, out=args.out, window=args.window, drift=args.drift,
              sigma_floor=args.sigma_floor, overwrite=args.overwrite)
    return 0


def _whole(text):
    from .fit_command import _count

    value = _count(text)
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}")
    return value


def _non_negative(text):
    from .cli import _positive_float

    try:
        if float(text) == 0.0:
            return 0.0
    except ValueError:
        pass
    return _positive_float(text)


def add_trend(sub) -> None:
    from .cli import _positive_float

    p = sub.add_parser(
        "trend", help="follow the unknown face over a logged record (steady windows or every Nth row)",
        description="Read a thermocouple log (a time column -- seconds, a unit in brackets, or ISO 8601 "
                    "timestamps -- then one column per sensor id), find the steady windows, fit the "
                    "first settled one, and invert every steady window (or every Nth row with --every) with the "
                    "same model. Writes trend.csv, trend.png, summary.json and report.html; flags a zone "
                    "whose change from the first settled steady window exceeds its uncertainty.",
        epilog="examples:\n  heatsight trend platen.toml --log shift.csv\n"
               "  heatsight trend platen.toml --log month.csv --every 60 --out platen-month\n"
               "  heatsight trend platen.toml --log shift.csv --window 300 --drift 0.2\n\n"
               f"Defaults (common practice, no source): --window {DEFAULT_WINDOW_S:g} s, --drift "
               f"{DEFAULT_DRIFT_K:g} K, --sigma-floor {DEFAULT_FLOOR_K:g} K.",
        formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("case", metavar="CASE.toml", help="case file (TOML)")
    p.add_argument("--log", metavar="LOG.csv", help="the logged readings (default: [sensors] readings, if a log)")
    p.add_argument("--every", type=_whole, metavar="N",
                   help="invert every Nth logged row instead of the steady windows")
    p.add_argument("--out", metavar="DIR", help="output folder (default: next to the case, <case>-trend)")
    p.add_argument("--window", type=_positive_float, default=DEFAULT_WINDOW_S, metavar="SECONDS",
                   help=f"length of a window (default {DEFAULT_WINDOW_S:g})")
    p.add_argument("--drift", type=_positive_float, default=DEFAULT_DRIFT_K, metavar="K",
                   help=f"a window is steady when no sensor drifts this much over it (default {DEFAULT_DRIFT_K:g})")
    p.add_argument("--sigma-floor", type=_non_negative, default=DEFAULT_FLOOR_K, metavar="K",
                   help="random sd of a window mean that averaging cannot remove (default "
                        f"{DEFAULT_FLOOR_K:g})")
    p.add_argument("--overwrite", action="store_true", help="allow writing into a non-empty folder")
    p.set_defaults(run=_run)
