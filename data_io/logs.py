"""The one log reader: logged readings read in chunks, so that a log larger than memory
can be processed.  `trend` streams it; `check` streams it too keeping only counts
(`summarize_log`), and `tables.read_log` reads a whole log for the Python API with the same
code (`read_whole_log`), so all accept and refuse the same logs.

A log is a CSV file: a time column (seconds, another time unit in brackets such as
``time [min]``, or ISO 8601 timestamps; the first row's time decides which), then one column
per sensor id with an optional temperature unit in brackets (``TC1 [degF]``; default degC).
The header is parsed once (`open_log`) and the body streamed with
pandas.read_csv(chunksize=...) (`LogReader`), each chunk validated as it arrives:

- refused (InputError naming the file, line and column): times that are missing, not
  numbers / timestamps, repeated (a duplicated timestamp) or going back (an unsorted log,
  also across chunk boundaries); text in a sensor column that is not a number (empty
  cells, NaN, N/A and inf mean "no reading"); ragged lines (more fields than the header,
  unless the extra ones are empty; or fewer: a missing reading keeps its empty field, so a
  cut-off line is not read as missing cells); a log sharing no sensor with the layout; a
  log without a single valid reading.
- kept with a warning: a column that is not a sensor of the layout (loggers record other
  channels; it is ignored), a layout sensor missing from the log, missing readings, readings
  at or below absolute zero or outside the thermocouple type's usable range (open-circuit
  codes of loggers; they become missing readings), gaps in time.

Values leave in SI: seconds (from the first row for timestamps, else the log's own times
in s) and kelvin.  `inverse.steady.WindowAccumulator` turns the stream into steady-window
statistics, so memory stays bounded by one chunk plus one window.
"""

from __future__ import annotations

import io
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from . import thermocouples as tc
from .csv_in import NONFINITE_WORDS
from .errors import InputError
from .limits import MAX_TEMPERATURE_K
from .log_header import LogColumns, open_log
from .log_rows import RowWidths
from .plant_files import ENCODING_NAMES, undecodable_line

#: rows per chunk (bounded memory: about 30 MB for 32 sensors)
DEFAULT_CHUNK_ROWS = 100_000
#: a time step longer than this many typical steps is reported as a gap (common practice, no source)
GAP_FACTOR = 5.0
#: at most this many examples are named in one warning
EXAMPLES = 3
_OFFSET = re.compile(r"(?:Z|[+-]\d\d(?::?\d\d)?)\s*$", re.IGNORECASE)


def _who(names, every) -> str:
    """"sensor 'A' has" / "3 sensors (A, B, C) have" / "all 20 sensors (A, ..., ...) have"."""
    if len(names) == 1:
        return f"sensor '{names[0]}' has"
    return (f"{'all ' if len(names) == len(every) else ''}{len(names)} sensors "
            f"({', '.join(names[:6])}{', ...' if len(names) > 6 else ''}) have")


def _plural(n: int, word: str) -> str:
    return f"{n} {word}{'' if n == 1 else 's'}"


def count_rows(path) -> int:
    """Number of lines of a file (an upper bound of its data rows + 1), counted in blocks; a
    Parquet log's rows + 1 from its footer."""
    from .log_parquet import is_parquet, row_count

    if is_parquet(path):
        return row_count(path) + 1
    n, last = 0, b"\n"
    with open(path, "rb") as fh:
        while block := fh.read(1 << 24):
            n += block.count(b"\n")
            last = block[-1:]
    return n + (last != b"\n")


@dataclass
class LogChunk:
    """Validated rows: times (R,) [s], values (R, n) [K] (NaN = no reading), lines (R,) file
    line numbers."""

    times: np.ndarray
    values: np.ndarray
    lines: np.ndarray


class LogReader:
    """Iterate over validated LogChunks of a log; afterwards `warnings()` says what was
    missing, out of range or irregular.  `timestamps` tells whether the log had ISO times;
    `iso(seconds)` turns times back into ISO 8601 text: times with a UTC offset keep the
    offset of the log's first row (or the zone `tz`, a data_io.timezones tzinfo), naive
    times stay naive."""

    def __init__(self, columns: LogColumns, layout, chunk_rows: int = DEFAULT_CHUNK_ROWS, tz=None):
        self.cols = columns
        self.chunk_rows = int(chunk_rows)
        self.rows = 0
        self.timestamps: bool | None = None
        self.aware = False
        self.tz = tz
        self.origin_ns = 0
        self._last_t, self._last_line = None, None
        self._step = None
        n = columns.n
        self.missing = np.zeros(n, np.int64)
        self.out_of_range = np.zeros(n, np.int64)
        self._range_first: list = [None] * n
        self._empty_lines = np.zeros((n, 2), np.int64)       # first and last line of an empty reading
        self._types = [layout.frame.at[s, "type"] if layout is not None else "" for s in columns.sensors]
        lo, hi = np.zeros(n), np.full(n, MAX_TEMPERATURE_K)
        for i, typ in enumerate(self._types):
            if typ:
                lo[i], hi[i] = tc.usable_range_k(typ)
        self._lo, self._hi = lo, hi
        self.gaps, self._gap_examples, self._gap_largest = 0, [], 0.0

    # ---------------------------------------------------------------- iteration
    def __iter__(self):
        cols = self.cols
        fmt = cols.fmt
        source = cols.path if fmt.converted is None else io.StringIO(fmt.converted)
        # one spare column: a row with more fields than the header is caught, not shifted
        width = len(cols.headers)
        if cols.parquet:
            from .log_parquet import frames

            for frame in frames(cols.path, self.chunk_rows, width):
                chunk = self._chunk(frame)
                if chunk is not None:
                    yield chunk
            self._finish()
            return
        self._widths = RowWidths(cols)
        try:
            reader = pd.read_csv(source, header=None, skiprows=cols.header_line, names=list(range(width + 1)),
                                 index_col=False, skip_blank_lines=False, skipinitialspace=True,
                                 chunksize=self.chunk_rows, encoding=fmt.encoding,
                                 sep=fmt.sep if fmt.converted is None else ",",
                                 decimal=fmt.decimal if fmt.converted is None else ".", engine="c")
            with reader, self._widths:
                for frame in reader:
                    chunk = self._chunk(frame)
                    if chunk is not None:
                        yield chunk
        except pd.errors.ParserError as exc:
            msg = str(exc).replace("Error tokenizing data. C error: ", "").strip()
            m = re.search(r"line (\d+), saw (\d+)", msg)
            detail = (f"line {int(m.group(1)) + cols.header_line} has {m.group(2)} fields" if m else msg)
            raise InputError(f"malformed CSV: {detail} but the header has {width}; every line needs one field "
                             f"per column (fields separated by {fmt.separator_name})", file=cols.path) from None
        except UnicodeDecodeError:
            line = undecodable_line(cols.path, fmt.encoding)
            at = f"line {line}: " if line else ""
            raise InputError(f"{at}is not {ENCODING_NAMES.get(fmt.encoding, fmt.encoding)} text like the lines "
                             f"before it; save the log in "
                             f"one encoding (UTF-8 preferred)", file=cols.path) from None
        self._finish()

    def _finish(self):
        cols = self.cols
        if self.rows == 0:
            raise InputError("no data rows below the header", file=cols.path)
        if np.all(self.missing == self.rows):
            raise InputError(f"no valid reading in the log: {'; '.join(self.warnings(with_path=False))}",
                             file=cols.path)

    def _error(self, problem, line, col):
        where = f"line {int(line)}, column '{self.cols.headers[col]}'"
        return InputError(problem, file=self.cols.path, where=where)

    def _chunk(self, frame: pd.DataFrame) -> LogChunk | None:
        lines = frame.index.to_numpy(np.int64) + self.cols.header_line + 1
        blank = frame.isna().all(axis=1).to_numpy()
        if blank.all():
            return None
        if blank.any():
            frame, lines = frame.loc[~blank], lines[~blank]
        spare = frame[len(self.cols.headers)].notna().to_numpy()
        if spare.any():
            i = int(np.argmax(spare))
            raise InputError(f"malformed CSV: line {int(lines[i])} has more fields than the header "
                             f"({len(self.cols.headers)}: {', '.join(self.cols.headers)}); every line needs one "
                             f"field per column (a record-number column needs a header too)", file=self.cols.path)
        self._check_short(frame, lines)
        t = self._times(frame[0], lines)
        self._check_order(t, lines)
        values = np.empty((len(frame), self.cols.n))
        for i, col in enumerate(self.cols.positions):
            values[:, i] = self._sensor(frame[col], lines, col)
        empty = np.isnan(values)
        if empty.any():
            for i in np.flatnonzero(empty.any(axis=0)):
                at = lines[np.flatnonzero(empty[:, i])]
                if not self._empty_lines[i, 0]:
                    self._empty_lines[i, 0] = int(at[0])
                self._empty_lines[i, 1] = int(at[-1])
        values = self._screen(values, lines)
        self.missing += np.isnan(values).sum(axis=0)
        self._note_gaps(t, lines)
        self.rows += t.size
        return LogChunk(t, values, lines)

    def _check_short(self, frame: pd.DataFrame, lines) -> None:
        """Refuse a row with fewer fields than the header (pandas would fill it with missing
        cells).  Only rows whose last column is empty are looked at in the file's text."""
        width = len(self.cols.headers)
        candidates = np.flatnonzero(frame[width - 1].isna().to_numpy())
        if candidates.size == 0:
            return
        short = self._widths.first_short(lines[candidates], width)
        if short is not None:
            line, n = short
            raise InputError(f"malformed CSV: line {line} has {n} field{'' if n == 1 else 's'} but the "
                             f"header has {width} ({', '.join(self.cols.headers)}); every line needs one "
                             f"field per column (leave a field empty for a missing reading, but keep "
                             f"its separator)", file=self.cols.path)

    def _times(self, series: pd.Series, lines) -> np.ndarray:
        cols = self.cols
        missing = series.isna().to_numpy()
        if missing.any():
            raise self._error("missing time", lines[np.argmax(missing)], 0)
        if pd.api.types.is_datetime64_any_dtype(series.dtype):     # a Parquet timestamp column
            if self.timestamps is False:
                raise self._error("do not mix numbers and timestamps", lines[0], 0)
            self.timestamps = True
            return self._stamps(series, lines)
        if self.timestamps is None:        # the first row's time decides: seconds or timestamps
            numeric = pd.api.types.is_numeric_dtype(series.dtype) or bool(
                pd.to_numeric(series.iloc[:1], errors="coerce").notna().all())
            self.timestamps = not numeric
            if self.timestamps and cols.time_scale is not None:
                raise InputError(f"timestamps need no unit in the header; found '{cols.time_header}' but the "
                                 f"values are not numbers", file=cols.path, where=f"line {cols.header_line}")
        if not self.timestamps:
            t = pd.to_numeric(series, errors="coerce").to_numpy(float)
            bad = ~np.isfinite(t)
            if bad.any():
                i = int(np.argmax(bad))
                cell = series.iloc[i]
                if not isinstance(cell, str):     # read as a number already: too large or not finite
                    raise self._error(f"{float(cell):g} is not a finite number of seconds", lines[i], 0)
                why = ("do not mix numbers and timestamps" if pd.notna(pd.to_datetime(cell, format="ISO8601",
                                                                                      errors="coerce"))
                       else "this cell is neither a number of seconds nor an ISO 8601 timestamp")
                raise self._error(f"'{cell}' is not a number of seconds (the log's first rows have numeric "
                                  f"times; {why})", lines[i], 0)
            return t * (cols.time_scale or 1.0)
        return self._stamps(series.astype(str), lines)

    def _stamps(self, text: pd.Series, lines) -> np.ndarray:
        if pd.api.types.is_datetime64_any_dtype(text.dtype):
            return self._seconds(text, text, lines)
        try:
            ts = pd.to_datetime(text, format="ISO8601", errors="coerce")
        except ValueError:          # offsets differ between rows (e.g. a change of summer time)
            has = text.str.contains(_OFFSET).to_numpy()
            if not has.all():
                i = int(np.argmin(has))
                raise self._error("timestamps mix times with and without a UTC offset", lines[i], 0) from None
            ts = pd.to_datetime(text, format="ISO8601", errors="coerce", utc=True)
        bad = ts.isna().to_numpy()
        if bad.any():
            i = int(np.argmax(bad))
            raise self._error(f"{text.iloc[i]!r} is neither a number of seconds nor an ISO 8601 timestamp "
                              f"(e.g. 2024-05-01T08:30:00)", lines[i], 0)
        return self._seconds(ts, text, lines)

    def _seconds(self, ts: pd.Series, text: pd.Series, lines) -> np.ndarray:
        """Seconds since the first row of datetimes `ts` (read from `text`)."""
        aware = ts.dt.tz is not None
        if ts.isna().any():
            raise self._error("missing time", lines[int(np.argmax(ts.isna().to_numpy()))], 0)
        if self.rows == 0 and self._last_t is None:
            self.aware = aware
            if aware and self.tz is None:       # the log's own offset
                first = text.iloc[0]
                self.tz = (first.tzinfo if isinstance(first, pd.Timestamp)
                           else pd.Timestamp(str(first).strip()).tzinfo)
        elif aware != self.aware:
            raise self._error("timestamps mix times with and without a UTC offset", lines[0], 0)
        if aware:
            ts = ts.dt.tz_convert("UTC").dt.tz_localize(None)
        ns = ts.to_numpy("datetime64[ns]").astype(np.int64)
        if self._last_t is None:
            self.origin_ns = int(ns[0])
        return (ns - self.origin_ns) / 1e9

    def _check_order(self, t, lines):
        prev_t = np.r_[self._last_t if self._last_t is not None else -np.inf, t[:-1]]
        prev_line = np.r_[self._last_line if self._last_line is not None else 0, lines[:-1]]
        bad = np.flatnonzero(t <= prev_t)
        if bad.size:
            i = int(bad[0])
            if t[i] == prev_t[i]:
                raise self._error(f"duplicated time: the same as line {int(prev_line[i])}; times must increase, "
                                  f"every row needs its own time", lines[i], 0)
            raise self._error(f"time goes back (earlier than line {int(prev_line[i])}); times must increase: "
                              f"sort the log by time", lines[i], 0)
        self._last_t, self._last_line = float(t[-1]), int(lines[-1])

    def _sensor(self, series: pd.Series, lines, col) -> np.ndarray:
        scale, shift = self.cols.scale, self.cols.shift
        i = self.cols.positions.index(col)
        if pd.api.types.is_numeric_dtype(series.dtype):
            x = series.to_numpy(float)
        else:
            x = pd.to_numeric(series, errors="coerce").to_numpy(float)
            bad = np.isnan(x) & series.notna().to_numpy()
            if bad.any():
                words = series[bad].astype(str).str.strip().str.lower()
                unknown = ~words.isin(NONFINITE_WORDS).to_numpy()
                if unknown.any():
                    j = int(np.flatnonzero(bad)[np.argmax(unknown)])
                    raise self._error(f"{str(series.iloc[j]).strip()!r} is not a number; expected a temperature "
                                      f"(leave the cell empty or write NaN for a missing reading)", lines[j], col)
        x = np.where(np.isfinite(x), x, np.nan)
        return shift[i] + scale[i] * x

    def _screen(self, values, lines):
        """Readings at or below absolute zero or outside the type's range become missing."""
        with np.errstate(invalid="ignore"):
            bad = (values <= 0) | (values < self._lo) | (values > self._hi)
        if bad.any():
            for i in np.flatnonzero(bad.any(axis=0)):
                rows = np.flatnonzero(bad[:, i])
                self.out_of_range[i] += rows.size
                if self._range_first[i] is None:
                    self._range_first[i] = (int(lines[rows[0]]), float(values[rows[0], i]))
            values = np.where(bad, np.nan, values)
        return values

    def _note_gaps(self, t, lines):
        if t.size < 2 and self._step is None:
            return
        if self._step is None:
            self._step = float(np.median(np.diff(t)))
        dt = np.diff(t)
        big = np.flatnonzero(dt > GAP_FACTOR * self._step)
        if big.size:
            self.gaps += big.size
            self._gap_largest = max(self._gap_largest, float(dt[big].max()))
            for j in big[: max(0, EXAMPLES - len(self._gap_examples))]:
                self._gap_examples.append((int(lines[j]), int(lines[j + 1]), float(dt[j])))

    # ---------------------------------------------------------------- reporting
    def warnings(self, with_path: bool = True) -> list[str]:
        cols, out = self.cols, []
        path = cols.path if with_path else "the log"
        empty: dict = {}                    # (count, first line, last line) -> sensors
        none: list = []                     # sensors without one valid reading
        for i, s in enumerate(cols.sensors):
            n_bad = int(self.out_of_range[i])
            if n_bad:
                line, value = self._range_first[i]
                why = (f"outside the range of a type {self._types[i]} thermocouple" if self._types[i]
                       else f"outside 0 to {MAX_TEMPERATURE_K:g} K")
                out.append(f"{path}: sensor '{s}' has {_plural(n_bad, 'reading')} {why} (first at line {line}: "
                           f"{value - tc.KELVIN_OFFSET:.4g} degC), likely an open circuit or a logger's overflow code; "
                           f"treated as missing")
            n_missing = int(self.missing[i]) - n_bad
            if self.rows and int(self.missing[i]) == self.rows:
                none.append(s)
            elif n_missing > 0:
                empty.setdefault((n_missing, *map(int, self._empty_lines[i])), []).append(s)
        if none:
            out.append(f"{path}: {_who(none, cols.sensors)} no valid reading")
        for (n_missing, first, last), names in empty.items():
            where = f"line {first}" if first == last else f"lines {first} to {last}"
            who = _who(names, cols.sensors)
            out.append(f"{path}: {who} {_plural(n_missing, 'empty, NaN or inf reading')}"
                       f"{' each' if len(names) > 1 else ''} ({where}; missing)")
        if self.gaps:
            examples = ", ".join(f"lines {a}-{b} ({d:.4g} s)" for a, b, d in self._gap_examples)
            out.append(f"{path}: {_plural(self.gaps, 'gap')} in time longer than {GAP_FACTOR:g} typical steps "
                       f"of {self._step:.4g} s (largest {self._gap_largest:.4g} s; {examples}); windows across a "
                       f"gap count as steady only if their samples still span half the window")
        return out

    def local_times(self, seconds) -> tuple[np.ndarray, np.ndarray]:
        """Wall-clock datetime64[ns] of times in s since the first row, and each one's UTC
        offset in s (0 for naive logs)."""
        ns = self.origin_ns + np.rint(np.asarray(seconds, float) * 1e9).astype(np.int64)
        if not self.aware:
            return ns.astype("datetime64[ns]"), np.zeros(ns.shape, np.int64)
        idx = pd.DatetimeIndex(ns.ravel().astype("datetime64[ns]")).tz_localize("UTC").tz_convert(self.tz)
        local = idx.tz_localize(None).asi8.reshape(ns.shape)
        return local.astype("datetime64[ns]"), (local - ns) // 1_000_000_000

    @property
    def zone_label(self) -> str:
        """The zone of the shown times for axis labels ("" for naive logs)."""
        if not self.aware:
            return ""
        name = getattr(self.tz, "key", None) or str(self.tz)
        return name if name not in ("UTC", "UTC+00:00") else "UTC"

    def iso(self, seconds) -> np.ndarray:
        """ISO 8601 text of times in s since the first row (timestamp logs only), local to the
        log's offset (or --tz) with the offset written: 2024-05-01T08:00:00+02:00."""
        local, offset = self.local_times(seconds)
        ns = local.astype(np.int64)
        whole = bool(np.all(ns % 1_000_000_000 == 0))
        text = np.datetime_as_string(local, unit="s" if whole else "ms")
        if not self.aware:
            return text
        sign = np.where(offset < 0, "-", "+")
        a = np.abs(offset)
        hh = np.char.zfill((a // 3600).astype(str), 2)
        mm = np.char.zfill((a % 3600 // 60).astype(str), 2)
        return np.char.add(np.char.add(np.char.add(np.char.add(text, sign), hh), ":"), mm)


#: rows per chunk when `check` streams a log (a smaller peak; the whole log is still read)
CHECK_CHUNK_ROWS = 20_000


@dataclass
class LogSummary:
    """What `check` says about a log, gathered while streaming it: rows, the first and last
    time [s since the first row], the sensors found and the reader's warnings."""

    path: object
    rows: int
    first: float
    last: float
    sensors: list
    warnings: list


def summarize_log(path, layout=None, chunk_rows: int | None = None) -> LogSummary:
    """Stream a log through the one reader keeping only counts, so `check` accepts and
    refuses exactly what `trend` does with memory that does not grow with the log (chunks of
    CHECK_CHUNK_ROWS rows unless `chunk_rows`)."""
    columns = open_log(path, layout)
    reader = LogReader(columns, layout, chunk_rows or CHECK_CHUNK_ROWS)
    first = last = 0.0
    for i, chunk in enumerate(reader):
        if i == 0:
            first = float(chunk.times[0])
        last = float(chunk.times[-1])
    return LogSummary(columns.path, reader.rows, first, last, list(columns.sensors),
                      columns.warnings + reader.warnings())


def read_ahead(chunks, depth: int = 2):
    """Iterate over `chunks` (an iterator of LogChunks) parsed in a reader thread, at most
    `depth` chunks ahead of the consumer, so that parsing (pandas' C parser releases the
    GIL) overlaps the consumer's computation.  An exception of the reader is raised in the
    consumer at the point where its chunk would have come; closing the generator early stops
    the reader."""
    import queue
    import threading

    box: queue.Queue = queue.Queue(maxsize=max(int(depth), 1))
    stop = threading.Event()
    done = object()

    def put(item):
        while not stop.is_set():
            try:
                box.put(item, timeout=0.1)
                return True
            except queue.Full:
                continue
        return False

    def produce():
        try:
            for chunk in chunks:
                if not put((chunk, None)):
                    return
            put((done, None))
        except BaseException as exc:  # noqa: BLE001 - handed to the consumer
            put((done, exc))

    worker = threading.Thread(target=produce, name="heatsight-log-reader", daemon=True)
    worker.start()
    try:
        while True:
            item, exc = box.get()
            if item is done:
                if exc is not None:
                    raise exc
                return
            yield item
    finally:
        stop.set()
        worker.join()


def read_whole_log(path, layout=None, chunk_rows: int = DEFAULT_CHUNK_ROWS):
    """A whole log through the same reader as the stream: (times (R,) [s], values (R, n)
    [K], LogColumns, warnings)."""
    columns = open_log(path, layout)
    reader = LogReader(columns, layout, chunk_rows)
    chunks = list(reader)
    times = np.concatenate([c.times for c in chunks])
    values = np.vstack([c.values for c in chunks])
    return times, values, columns, columns.warnings + reader.warnings()
