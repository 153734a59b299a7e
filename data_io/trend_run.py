"""One `heatsight trend` run, the I/O side: the log stream, the rows waiting for the
reference (--every), trend.csv written row by row, and a bounded digest for the figure.

Every statistical decision (reference window, strengths, change flags) is made by
inverse.trend; this module feeds it the log and writes what it answers, in file units
(data_io.display: degC or W/m^2).
"""

from __future__ import annotations

import math

import numpy as np

from ..forward.errors import ForwardModelError
from ..inverse import trend as stats_trend
from ..inverse.errors import InverseError

from .display import file_display
from .errors import InputError

#: the trend figure shows at most about twice this many points (longer trends are binned)
FIGURE_POINTS = 1500
#: a progress bar is drawn from this many chunks on
PROGRESS_MIN_CHUNKS = 4
#: windows inverted per call of the batch solver
WINDOW_BATCH = 4096
#: chunks of the log parsed ahead by a reader thread while the rows are inverted (0: no thread)
READ_AHEAD = 2


#: fewest rows a trend should have; fewer from --every N draws a warning
MIN_TREND_ROWS = 3


class Progress:
    """The log's progress bar (data_io.console: stderr, silent when stderr is not a terminal),
    drawn from PROGRESS_MIN_CHUNKS chunks on."""

    LABEL = "reading the log: chunk"

    def __init__(self, total: int, enabled: bool):
        from .console import current, _Silent

        total = max(int(total), 1)
        self.bar = current().progress(total, self.LABEL) if enabled and total >= \
            PROGRESS_MIN_CHUNKS else _Silent()
        self.open = True

    @property
    def live(self) -> bool:
        """Is a bar drawn (and still open)?"""
        from .console import _Silent

        return self.open and not isinstance(self.bar, _Silent)

    def note(self, text: str | None = None):
        """Say beside the bar what holds it up (text; None: back to reading the log)."""
        self.bar.describe(text or self.LABEL)

    def step(self):
        self.bar.update(1)

    def close(self):
        self.open = False
        self.bar.close()


class Digest:
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


class TrendRun:
    """One run: the log stream in, the rows (trend.csv or trend.parquet) and the figure digest out."""

    def __init__(self, case, layout, columns, reader, *, window, drift, sigma_floor, every):
        from ..inverse.readings import DEFAULT_SIGMA_K
        from ..inverse.steady import WindowAccumulator

        self.case, self.layout, self.cols, self.reader = case, layout, columns, reader
        self.window, self.drift, self.floor, self.every = float(window), float(drift), float(sigma_floor), every
        self.windows = WindowAccumulator(columns.n, window)
        lay = layout.frame.loc[columns.sensors]
        sig = lay["sigma"].to_numpy(float)
        self.sensors = stats_trend.SensorSet(
            list(columns.sensors), *(lay[c].to_numpy(float) for c in ("r", "theta", "z")),
            np.where(np.isfinite(sig), sig, DEFAULT_SIGMA_K), lay["position_tolerance"].to_numpy(float))
        self.names = self.sensors.names
        self.warnings: list[str] = list(columns.warnings)
        self.model: stats_trend.TrendModel | None = None
        self.flags: stats_trend.ChangeFlags | None = None
        self.pending: list = []
        self.pending_rows = 0
        self.row_counter = 0
        self.trend_rows = 0
        self.log_end = 0.0              # the last time [s] seen, for times said in one unit
        self.skipped = 0
        self.stream = None
        self.digest = Digest()
        self.last_row = None
        self.first_row = None
        self.units = None
        self.progress = None        # the log's Progress while the stream runs (_run)

    # ---------------------------------------------------------------- statistics (inverse.trend)
    def _reference(self, final: bool) -> int | None:
        try:
            i, notes = stats_trend.choose_reference(self.windows.stats, self.drift, final=final,
                                                    pending_rows=self.pending_rows, window=self.window,
                                                    names=self.names)
        except InverseError as exc:
            raise InputError(str(exc), file=self.cols.path) from None
        self.warnings.extend(notes)
        return i

    def _setup(self, i: int, steady=None) -> None:
        from .. import inverse
        from .console import current
        from .tables import offset_sd

        def fit(readings, strength, **overrides):
            what = "fitting the reference window" + ("" if strength is None else " at the joint strength")
            try:
                # logs are inverted with the smooth model (inverse.batch); "auto" means it here
                model = "smooth" if getattr(self.case.fit, "model", "auto") == "auto" else None
                return inverse.fit(self.case, readings, strength=strength, model=model,
                                   stage=lambda k, n, text: show(f"{what} [{k}/{n}]: {text}"), **overrides)
            except (InverseError, ForwardModelError) as exc:
                raise InputError(f"fit of the reference window: {exc}", file=self.case.path) from None

        def offsets(level):
            tau, notes = offset_sd(self.layout.frame.loc[self.names], level)
            return tau, [f"{self.layout.path}: {n}" for n in notes]

        # the steps of the reference fit: beside the log's bar while it is drawn (--every),
        # else on the status line
        bar = self.progress if self.progress is not None and self.progress.live else None
        status = None if bar is not None else current().status()
        show = bar.note if bar is not None else status.show
        try:
            self.model = stats_trend.TrendModel.build(
                fit, self.windows.stats, i, self.sensors, offsets, floor=self.floor, zones=self.case.zones,
                steady=steady, joint_evidence=getattr(self.case.fit, "strength_method", "evidence") == "evidence")
        except InverseError as exc:
            raise InputError(str(exc), file=self.cols.path) from None
        finally:
            if bar is not None:
                bar.note(None)
            else:
                status.close()
        self.warnings.extend(self.model.warnings)
        self.units = file_display(self.model.result.quantity)

    def _set_flags(self, rows: int) -> None:
        self.flags = stats_trend.ChangeFlags(self.model.zone_names, rows)
        self.checks = stats_trend.RowChecks([s for s, u in zip(self.names, self.model.used) if u], rows)

    @property
    def result(self):
        return self.model.result

    @property
    def ref_window(self):
        return self.model.ref_window

    # ---------------------------------------------------------------- rows
    def _columns(self):
        """The rows' column names, each numeric one naming its unit (data_io.csv_columns):
        values in the face's file unit (degC or W/m^2), sds, spreads and changes in its
        difference unit (K or W/m^2)."""
        from .csv_columns import unit_token

        u, du = (unit_token(x) for x in (self.units.unit, self.units.diff_unit))
        # a long part's powers are per metre of length (data_io.display.power_unit)
        pk = "W_per_m" if getattr(self.case.cylinder, "long", False) else "W"
        names = ["start_s", "end_s"]
        if self.reader.timestamps:
            names += ["start_iso", "end_iso"]
        names += ["n_rows", "n_sensors", f"mean_{u}", f"mean_sd_{du}", f"min_{u}", f"max_{u}",
                  f"nonuniformity_{du}", f"nonuniformity_sd_{du}", f"total_power_{pk}", f"total_power_sd_{pk}"]
        for z in self.model.zone_names:
            names += [f"{z}_mean_{u}", f"{z}_sd_{du}", f"{z}_change_{du}", f"{z}_change_sd_{du}", f"{z}_flag"]
        return names

    def _write(self, start, end, n_rows, est, d, rv, reference_mask=None):
        """Write rows: est the batch answers; d (R, n) and rv ((n,) or (R, n)) the rows'
        readings and random variances, for their changes from the reference window."""
        if self.stream is None:
            raise RuntimeError("output stream not open")
        names = self._columns()
        if self.trend_rows == 0:
            self.stream.header(names)
        R = start.size
        if R == 0:
            return
        self.log_end = max(self.log_end, float(np.max(end)))
        zones = self.model.zone_names
        change, csd = self.model.changes_of(d, rv, reference_mask)
        flag = self.flags.update(start, end, change, csd, self.ref_window[0])
        rows, lone = self.model.flag_support(d, rv, flag)
        self.flags.note_support(flag, rows, lone, self.checks.names)
        v = self.units.value
        data = [("time", start), ("time", end)]
        if self.reader.timestamps:
            data += [("text", self.reader.iso(start)), ("text", self.reader.iso(end))]
        data += [("count", n_rows), ("count", est.n_used), ("number", v(est.value("mean"))),
                 ("number", est.sd_of("mean")), ("number", v(est.min)), ("number", v(est.max)),
                 ("number", est.nonuniformity), ("number", est.nonuniformity_sd),
                 ("number", est.value("total_power")), ("number", est.sd_of("total_power"))]
        for j, z in enumerate(zones):
            data += [("number", v(est.value(z))), ("number", est.sd_of(z)), ("number", change[:, j]),
                     ("number", csd[:, j]), ("flag", flag[:, j])]
        self.stream.write([(name, kind, x) for name, (kind, x) in zip(names, data)])
        self.trend_rows += R
        mean, msd = est.value("mean"), est.sd_of("mean")
        lo, hi = stats_trend.band95(mean, msd)
        cols = {("time",): 0.5 * (start + end), ("mean", "value"): mean, ("mean", "lower"): lo,
                ("mean", "upper"): hi}
        for j, z in enumerate(zones):
            val, sd = est.value(z), est.sd_of(z)
            lo, hi = stats_trend.band95(val, sd)
            cols.update({(z, "value"): val, (z, "lower"): lo, (z, "upper"): hi, (z, "change"): change[:, j],
                         (z, "limit"): self.flags.threshold * csd[:, j], (z, "flag"): flag[:, j]})
        self.digest.add(cols)
        ok = np.isfinite(mean)

        def row(i):
            return {"start_s": float(start[i]), "end_s": float(end[i]), "mean": float(v(mean[i])),
                    "zones": {z: float(v(est.value(z)[i])) for z in zones},
                    "changes": {z: (float(change[i, j]), float(csd[i, j])) for j, z in enumerate(zones)}}

        if ok.any():
            self.last_row = row(int(np.flatnonzero(ok)[-1]))
            if self.first_row is None:
                self.first_row = row(int(np.flatnonzero(ok)[0]))
        self.skipped += int((~ok).sum())

    def _rows(self, times, values):
        used = self.model.used
        rv = self.sensors.reading_sigma[used] ** 2
        d = self.model.checked(self.checks, times, values[:, used], rv)
        self._write(times, times, np.ones(times.size), self.model.solver.solve(d, rv), d, rv)

    def _flush_pending(self):
        for t, x in self.pending:
            self._rows(t, x)
        self.pending, self.pending_rows = [], 0

    # ---------------------------------------------------------------- the run
    def run(self, stream, progress: Progress, expected_rows: int):
        """Stream the log into `stream` (a data_io.trend_sink sink), BLAS limited to few
        threads (inverse.threads.blas_threads), the log parsed ahead in a reader thread."""
        from ..inverse.threads import blas_threads

        with blas_threads():
            self._run(stream, progress, expected_rows)

    def _run(self, stream, progress: Progress, expected_rows: int):
        from .logs import read_ahead

        self.stream, self.progress = stream, progress
        chunks = read_ahead(iter(self.reader), READ_AHEAD) if READ_AHEAD > 0 else iter(self.reader)
        for chunk in chunks:
            self.windows.add(chunk.times, chunk.values)
            if self.every:
                keep = (self.row_counter + np.arange(chunk.times.size)) % self.every == 0
                t, x = chunk.times[keep], chunk.values[keep]
                if self.model is None:
                    self.pending.append((t, x))
                    self.pending_rows += t.size
                    i = self._reference(final=False)
                    if i is not None:
                        self._setup(i)
                        self._set_flags(math.ceil(expected_rows / self.every))
                        self._flush_pending()
                else:
                    self._rows(t, x)
            self.row_counter += chunk.times.size
            progress.step()
        progress.close()
        self.windows.finish()
        self.warnings[:0] = self.reader.warnings()
        if self.every:
            if self.model is None:
                self._setup(self._reference(final=True))
                self._set_flags(math.ceil(self.row_counter / self.every))
                self._flush_pending()
            if self.every > 1 and self.trend_rows < MIN_TREND_ROWS:
                self.warnings.append(f"--every {self.every} keeps only {self.trend_rows} of the log's "
                                     f"{self.row_counter} rows: there is no trend to follow; give a smaller "
                                     f"--every (at most {max((self.row_counter - 1) // (MIN_TREND_ROWS - 1), 1)} "
                                     f"for {MIN_TREND_ROWS} rows)")
            return
        stats = self.windows.stats
        steady = np.flatnonzero(stats.steady(self.drift))
        if not steady.size:
            raise InputError(str(stats_trend.no_steady_window(stats, self.drift, self.window, self.names)),
                             file=self.cols.path)
        ref = self._reference(final=True)
        self._setup(ref, steady)
        self._set_flags(steady.size)
        self._unsteady_note(stats)
        sig2 = stats.sigma(self.floor) ** 2
        means = np.where(stats.valid, stats.mean, np.nan)
        used = self.model.used
        for lo in range(0, steady.size, WINDOW_BATCH):
            w = steady[lo:lo + WINDOW_BATCH]
            d, rv = means[w][:, used], sig2[w][:, used]
            d = self.model.checked(self.checks, stats.start[w], d, rv, reference_mask=(w == ref))
            self._write(stats.start[w], stats.end[w], stats.n_rows[w], self.model.solver.solve(d, rv), d, rv,
                        reference_mask=(w == ref))

    def _unsteady_note(self, stats) -> None:
        """A warning naming the complete windows left out as not steady (the part changing):
        a change while the part moves shows only once it settles."""
        moving = np.flatnonzero(stats.complete & ~stats.steady(self.drift))
        if not moving.size:
            return
        self.log_end = max(self.log_end, float(np.max(stats.end)))
        runs = np.split(moving, np.flatnonzero(np.diff(moving) > 1) + 1)
        spans = [f"{self._when(stats.start[r[0]])} to {self._when(stats.end[r[-1]])}" for r in runs[:3]]
        more = f" and {len(runs) - 3} more stretches" if len(runs) > 3 else ""
        self.warnings.append(f"{moving.size} of {int(stats.complete.sum())} windows were not steady (a sensor "
                             f"drifted {self.drift:g} K or more): {'; '.join(spans)}{more}. The trend leaves "
                             f"them out, so a change while the part was moving shows only once it settles; "
                             f"follow it row by row with --every")

    # ---------------------------------------------------------------- summaries
    def figure_data(self) -> dict:
        b = self.digest.bins
        t = b.get(("time",), np.zeros(0))
        if self.reader.timestamps:
            time = self.reader.local_times(t)[0]
            label = f"time ({self.reader.zone_label})" if self.reader.aware else "time"
            ref = tuple(self.reader.local_times(np.array(self.ref_window))[0])
        else:
            time, label = t / 3600.0, "time [h]"
            ref = tuple(np.array(self.ref_window) / 3600.0)
        zones = [{"name": z, **{k: b[(z, k)] for k in ("value", "lower", "upper", "change", "limit", "flag")}}
                 for z in self.model.zone_names]
        return {"quantity": self.result.quantity, "face": self.result.face, "time": time, "time_label": label,
                "mean": {k: b[("mean", k)] for k in ("value", "lower", "upper")}, "zones": zones,
                "reference": ref}

    def _flag_records(self) -> list[dict]:
        out = []
        for f in self.flags.flagged():
            rec = {"zone": f.zone, "flagged_rows": f.flagged_rows, "first_flagged_start_s": f.first_flagged_start_s,
                   "largest_change_in_sd": f.largest_change_in_sd, "first_flagged_end_s": f.first_flagged_end_s}
            if self.reader.timestamps:
                rec["first_flagged_start_iso"] = str(self.reader.iso([f.first_flagged_start_s])[0])
            rec.update(change_at_first_flag=f.change_at_first_flag, change_sd_at_first_flag=f.change_sd_at_first_flag)
            lone = f.lone_sensor()
            rec.update(support_rows_examined=f.support_rows, rests_on_one_sensor=dict(f.rests_on),
                       lone_sensor=lone[0] if lone else None)
            out.append(rec)
        return out

    def _when(self, t) -> str:
        """A row's start time for a sentence: ISO 8601 for timestamps, else seconds or hours."""
        from .trend_text import log_time

        return str(self.reader.iso([t])[0]) if self.reader.timestamps else f"t = {log_time(t, self.log_end)}"

    def _fault_records(self) -> list[dict]:
        out = []
        for f in self.checks.found():
            rec = {"sensor": f.sensor, "rows": f.rows, "first_start_s": f.first_start_s,
                   "last_start_s": f.last_start_s, "largest_score": f.largest_score}
            if self.reader.timestamps:
                rec["first_start_iso"] = str(self.reader.iso([f.first_start_s])[0])
            out.append(rec)
        return out

    def summary(self, case_path, log_path) -> dict:
        from .fit_outputs import CAUTION, summary_dict

        stats = self.windows.stats
        steady = stats.steady(self.drift)
        ref = {"start_s": self.ref_window[0], "end_s": self.ref_window[1]}
        if self.reader.timestamps:
            ref.update(start_iso=str(self.reader.iso([self.ref_window[0]])[0]),
                       end_iso=str(self.reader.iso([self.ref_window[1]])[0]))
        m = self.model
        return {
            "case": str(case_path), "log": str(log_path),
            "mode": "every" if self.every else "windows", "every": self.every,
            "window_s": self.window, "drift_K": self.drift, "sigma_floor_K": self.floor,
            "face": self.result.face, "quantity": self.result.quantity, "unit": self.units.unit,
            "rows_read": int(self.reader.rows),
            "windows": {"total": int(stats.size), "complete": int(stats.complete.sum()),
                        "steady": int(steady.sum())},
            "trend_rows": int(self.trend_rows),
            "rows_not_inverted": int(self.skipped),
            "reference_window": ref,
            "strength": float(m.solver.alpha),
            "strength_method": m.strength_rule,
            "change_strength": None if m.change_mixture is not None else float(m.changes.alpha),
            "change_step_factor": m.change_step_factor,
            "change_strength_method": m.change_rule,
            "sensors_used": [s for s, u in zip(self.names, m.used) if u],
            "set_aside": list(m.set_aside),
            "zones": m.zone_names,
            "flag_threshold_sd": self.flags.threshold, "flag_family_level": self.flags.family_level,
            "flag_comparisons": int(self.flags.comparisons),
            "flags": self._flag_records(),
            "sensor_faults": self._fault_records(), "sensor_check_threshold_sd": self.checks.threshold,
            "warnings": list(dict.fromkeys(self.checks.warnings(self._when) + self.warnings
                                           + list(self.result.warnings))),
            "caution": CAUTION,
            "reference_fit": summary_dict(self.result, case_path=case_path, readings_path=log_path),
        }
