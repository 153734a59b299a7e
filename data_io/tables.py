"""CSV inputs: sensor layout, snapshot readings, logged readings, query points.

Every reader validates its file and raises InputError with one line naming the file, the
line and the column and saying what was expected.  Values come out in SI units
(m, rad, K) in pandas DataFrames; units in the CSV headers stand in brackets
(``r [mm]``), and a header without a unit means m, deg or degC (design §3).

Line numbers in messages are those of the file as an editor shows them (header = line 1).
"""

from __future__ import annotations

import difflib
import io
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from . import thermocouples as tc
from .errors import InputError
from .textfile import read_text
from .units import column_unit, convert, split_header, ureg

# ---------------------------------------------------------------------------- results


@dataclass
class Table:
    """A validated table: `frame` in SI units, `warnings` as sentences for the user."""

    path: Path
    frame: pd.DataFrame
    warnings: list[str] = field(default_factory=list)
    kind: str = ""          # "layout", "snapshot", "log", "points", "profile"


# ---------------------------------------------------------------------------- columns


@dataclass(frozen=True)
class Column:
    """One column a CSV file may have.

    `dimension` is a units.DIMENSIONS key for numeric columns, None for text.
    `required`: the column must be present.  `nonfinite`: NaN/inf/empty cells are kept
    as NaN (readings) instead of being refused.  `optional_cells`: empty cells mean
    "not given" (NaN or "").
    """

    name: str
    dimension: str | None = None
    required: bool = True
    nonfinite: bool = False
    optional_cells: bool = False


LAYOUT_COLUMNS = (
    Column("sensor"),
    Column("r", "length"),
    Column("theta", "angle"),
    Column("z", "length"),
    Column("sigma", "temperature_difference", required=False, optional_cells=True),
    Column("type", required=False, optional_cells=True),
    Column("class", required=False, optional_cells=True),
    Column("position_tolerance", "length", required=False, optional_cells=True),
    Column("note", required=False, optional_cells=True),
)

SNAPSHOT_COLUMNS = (
    Column("sensor"),
    Column("temperature", "temperature", nonfinite=True),
    Column("sigma", "temperature_difference", required=False, optional_cells=True),
)

POINT_COLUMNS = (
    Column("r", "length"),
    Column("theta", "angle"),
    Column("z", "length"),
)

_NONFINITE_WORDS = {"nan", "inf", "+inf", "-inf", "infinity", "-infinity", "+infinity", "na", "n/a", ""}


@dataclass
class RawTable:
    """A CSV read as text: header names/units and cells, with file line numbers."""

    path: Path
    names: list[str]            # lower-cased column names without units
    headers: list[str]          # headers as written
    units: list[str | None]     # unit text in brackets, or None
    cells: list[list[str]]      # rows of stripped cells
    lines: list[int]            # file line number of each row
    header_line: int = 1        # file line number of the header

    def column(self, name: str) -> int:
        return self.names.index(name)

    def where(self, row: int, col: int) -> str:
        return f"line {self.lines[row]}, column '{self.headers[col]}'"


def _read_text(path: Path) -> str:
    return read_text(path, "a CSV file", hint="; save the CSV as UTF-8")


def read_raw(path: Path) -> RawTable:
    """Read a CSV as text cells, keeping file line numbers; refuse ragged or empty files."""
    path = Path(path)
    text = _read_text(path)
    if not text.strip():
        raise InputError("the file is empty; expected a header line and rows", file=path)
    try:
        df = pd.read_csv(io.StringIO(text), header=None, dtype=str, keep_default_na=False,
                         skip_blank_lines=False, skipinitialspace=True)
    except pd.errors.ParserError as exc:
        msg = str(exc).replace("Error tokenizing data. C error: ", "")
        raise InputError(f"malformed CSV ({msg.strip()}); every line needs the same number of "
                         f"comma-separated fields as the header", file=path) from exc
    except pd.errors.EmptyDataError as exc:
        raise InputError("the file is empty; expected a header line and rows", file=path) from exc
    rows = [[("" if v is None else str(v)).strip() for v in row] for row in df.itertuples(index=False)]
    # the header is the first non-blank line
    first = next((i for i, row in enumerate(rows) if any(row)), None)
    if first is None:
        raise InputError("the file has no header line; expected column names on the first line", file=path)
    headers = rows[first]
    if len(headers) == 1 and (";" in headers[0] or "\t" in headers[0]):
        sep = "semicolons" if ";" in headers[0] else "tabs"
        raise InputError(f"line {first + 1}: the fields seem separated by {sep}; "
                         f"separate them with commas", file=path)
    names, units = [], []
    for col, h in enumerate(headers):
        if h == "":
            raise InputError(f"line {first + 1}, column {col + 1}: empty column header", file=path)
        try:
            name, unit = split_header(h)
        except ValueError as exc:
            raise InputError(f"line {first + 1}: {exc}", file=path) from None
        names.append(name.lower())
        units.append(unit)
    seen = {}
    for col, name in enumerate(names):
        if name in seen:
            raise InputError(f"line {first + 1}: column '{headers[col]}' appears twice "
                             f"(columns {seen[name] + 1} and {col + 1})", file=path)
        seen[name] = col
    body, lines = [], []
    for i in range(first + 1, len(rows)):
        if any(rows[i]):
            body.append(rows[i])
            lines.append(i + 1)
    return RawTable(path, names, headers, units, body, lines, first + 1)


def _check_columns(raw: RawTable, spec: tuple[Column, ...], what: str) -> None:
    valid = [c.name for c in spec]
    for col, name in enumerate(raw.names):
        if name not in valid:
            close = difflib.get_close_matches(name, valid, n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise InputError(f"line {raw.header_line}: unknown column "
                             f"'{raw.headers[col]}' in {what}{hint} (expected columns: "
                             f"{', '.join(valid)})", file=raw.path)
    missing = [c.name for c in spec if c.required and c.name not in raw.names]
    if missing:
        raise InputError(f"{what} needs the column{'s' if len(missing) > 1 else ''} "
                         f"{', '.join(missing)}; found: {', '.join(raw.headers)}", file=raw.path)
    if not raw.cells:
        raise InputError(f"no data rows; {what} needs at least one row below the header",
                         file=raw.path)


def _numeric_column(raw: RawTable, c: Column) -> np.ndarray:
    """Cells of a numeric column as SI floats (NaN for empty optional / non-finite cells)."""
    col = raw.column(c.name)
    units = column_unit(raw.units[col], c.dimension, f"line {raw.header_line}, column '{raw.headers[col]}'",
                        file=raw.path)
    out = np.empty(len(raw.cells))
    for i, row in enumerate(raw.cells):
        cell = row[col]
        if cell == "" and c.optional_cells:
            out[i] = math.nan
            continue
        if cell.lower() in _NONFINITE_WORDS:
            if c.nonfinite:
                out[i] = math.nan
                continue
            what = "missing value" if cell == "" else f"{cell!r} is not a finite number"
            raise InputError(f"{what}; expected {_dim_name(c.dimension)}", file=raw.path,
                             where=raw.where(i, col))
        try:
            value = float(cell)
        except ValueError:
            raise InputError(f"{cell!r} is not a number; expected {_dim_name(c.dimension)}"
                             f"{_unit_hint(cell, raw.units[col])}", file=raw.path,
                             where=raw.where(i, col)) from None
        if not math.isfinite(value):
            if c.nonfinite:
                out[i] = math.nan
                continue
            raise InputError(f"{cell!r} is not a finite number", file=raw.path, where=raw.where(i, col))
        out[i] = value
    if c.dimension == "temperature":
        ok = np.isfinite(out)
        if np.any(ok):
            # absolute temperatures: check absolute zero before conversion loses the cell
            k = np.full_like(out, np.nan)
            k[ok] = convert(out[ok], units, "temperature")
            bad = np.flatnonzero(ok & ~(k > 0))
            if bad.size:
                i = int(bad[0])
                raise InputError(f"{raw.cells[i][col]} is at or below absolute zero "
                                 f"(check the unit in the header)", file=raw.path, where=raw.where(i, col))
            return k
        return out
    ok = np.isfinite(out)
    res = out.copy()
    if np.any(ok):
        res[ok] = convert(out[ok], units, c.dimension)
    return res


def _unit_hint(cell: str, header_unit: str | None) -> str:
    parts = cell.split()
    if len(parts) == 2:
        try:
            float(parts[0])
            return f"; put the unit in the header instead (e.g. '... [{parts[1]}]')"
        except ValueError:
            pass
    return ""


def _dim_name(dimension: str | None) -> str:
    from .units import DIMENSIONS
    return "text" if dimension is None else DIMENSIONS[dimension].name


def _text_column(raw: RawTable, c: Column) -> list[str]:
    col = raw.column(c.name)
    out = []
    for i, row in enumerate(raw.cells):
        if row[col] == "" and not c.optional_cells:
            raise InputError(f"missing {c.name}", file=raw.path, where=raw.where(i, col))
        out.append(row[col])
    return out


def _parse(raw: RawTable, spec: tuple[Column, ...], what: str) -> dict:
    _check_columns(raw, spec, what)
    values: dict = {}
    for c in spec:
        if c.name not in raw.names:
            continue
        values[c.name] = _text_column(raw, c) if c.dimension is None else _numeric_column(raw, c)
    return values


def _check_sensor_ids(raw: RawTable, ids: list[str]) -> None:
    col = raw.column("sensor")
    first: dict[str, int] = {}
    for i, s in enumerate(ids):
        if s in first:
            raise InputError(f"sensor '{s}' appears twice (also on line {raw.lines[first[s]]}); "
                             f"each sensor needs one row", file=raw.path, where=raw.where(i, col))
        first[s] = i


# ---------------------------------------------------------------------------- geometry checks

_ALT_LENGTH_UNITS = ("mm", "cm", "inch")


def _outside_hint(raw: RawTable, values_si: np.ndarray, name: str, cylinder) -> str:
    """Suggest another length unit under which every value of column `name` would fit."""
    current = raw.units[raw.column(name)] or "m"
    to_m = float(ureg.Quantity(1.0, current).to("m").magnitude)
    limit = cylinder.radius if name == "r" else cylinder.height
    for alt in _ALT_LENGTH_UNITS:
        alt_to_m = float(ureg.Quantity(1.0, alt).to("m").magnitude)
        if math.isclose(alt_to_m, to_m):
            continue
        si = values_si / to_m * alt_to_m
        if np.all(si >= -1e-9 * cylinder.radius) and np.all(si <= limit * (1 + 1e-9)):
            return f"; the values would fit if they were {alt}: write '{name} [{alt}]' in the header"
    return ""


def check_inside(raw: RawTable, cols: dict[str, np.ndarray], cylinder, what: str) -> None:
    """Refuse the first row whose (r, z) lies outside the part, with a unit hint."""
    from .units import format_quantity
    r = cols.get("r")
    z = cols.get("z")
    n = len(raw.cells)
    r_arr = np.zeros(n) if r is None else r
    z_arr = np.zeros(n) if z is None else z
    inside = cylinder.contains(r_arr, z_arr)
    if r is not None:
        inside &= r_arr >= -1e-9 * cylinder.radius
    if np.all(inside):
        return
    i = int(np.flatnonzero(~inside)[0])
    height = format_quantity(cylinder.height, "length")
    if r is not None and not (-1e-9 * cylinder.radius <= r_arr[i] <= cylinder.radius * (1 + 1e-9)):
        name = "r"
        limit = f"0 <= r <= radius {format_quantity(cylinder.radius, 'length')}"
    else:
        name = "z"
        limit = f"0 <= z <= height {height}" if not cylinder.semi_infinite else "z >= 0"
    col = raw.column(name)
    text = f"{name} = {raw.cells[i][col]}"
    hint = _outside_hint(raw, cols[name], name, cylinder)
    raise InputError(f"{what} at {text} ({raw.units[col] or 'm'}) lies outside the part "
                     f"({limit}){hint}", file=raw.path, where=raw.where(i, col))


# ---------------------------------------------------------------------------- layout


def read_layout(path, cylinder) -> Table:
    """Read the sensor layout CSV.

    Columns: sensor, r, theta, z; optional sigma (random standard deviation of the
    readings), type (thermocouple type B, E, J, K, N, R, S, T), class (1, 2, 3 of IEC
    60584-1 or standard / special of ASTM E230), position_tolerance, note.
    Returns a Table whose frame is indexed by sensor id with columns r [m], theta [rad],
    z [m], sigma [K] (NaN when not given), type, class ("" when not given),
    position_tolerance [m] (0 when not given).
    """
    raw = read_raw(Path(path))
    v = _parse(raw, LAYOUT_COLUMNS, "a sensor layout")
    ids = v["sensor"]
    _check_sensor_ids(raw, ids)
    check_inside(raw, v, cylinder, "sensor")
    warnings: list[str] = []
    n = len(ids)
    sigma = v.get("sigma", np.full(n, np.nan))
    for i in np.flatnonzero(np.isfinite(sigma) & ~(sigma > 0)):
        raise InputError("sigma must be positive", file=raw.path, where=raw.where(int(i), raw.column("sigma")))
    ptol = v.get("position_tolerance", np.full(n, np.nan))
    for i in np.flatnonzero(np.isfinite(ptol) & (ptol < 0)):
        raise InputError("position_tolerance must not be negative", file=raw.path,
                         where=raw.where(int(i), raw.column("position_tolerance")))
    ptol = np.where(np.isfinite(ptol), ptol, 0.0)
    types = list(v.get("type", [""] * n))
    classes = list(v.get("class", [""] * n))
    assumed = []
    for i in range(n):
        if types[i]:
            try:
                types[i] = tc.normalize_type(types[i])
            except ValueError as exc:
                raise InputError(str(exc), file=raw.path, where=raw.where(i, raw.column("type"))) from None
        if classes[i]:
            try:
                classes[i] = tc.normalize_class(classes[i])
            except ValueError as exc:
                raise InputError(str(exc), file=raw.path, where=raw.where(i, raw.column("class"))) from None
            if not types[i]:
                raise InputError(f"class {classes[i]} is given without a thermocouple type; add the type "
                                 f"({', '.join(tc.TYPES)})", file=raw.path,
                                 where=raw.where(i, raw.column("class")))
        elif types[i]:
            classes[i] = tc.DEFAULT_CLASS
            assumed.append(ids[i])
        if types[i]:
            try:
                tc.check_defined(types[i], classes[i])
            except ValueError as exc:
                col = raw.column("class") if "class" in raw.names else raw.column("type")
                raise InputError(str(exc), file=raw.path, where=raw.where(i, col)) from None
    if assumed:
        warnings.append(f"{raw.path}: no class given for sensor{'s' if len(assumed) > 1 else ''} "
                        f"{', '.join(assumed)}; assumed {tc.class_name(tc.DEFAULT_CLASS)}")
    frame = pd.DataFrame({
        "r": v["r"], "theta": v["theta"], "z": v["z"], "sigma": sigma,
        "type": types, "class": classes, "position_tolerance": ptol,
    }, index=pd.Index(ids, name="sensor"))
    return Table(Path(path), frame, warnings, "layout")


# ---------------------------------------------------------------------------- readings


def readings_form(path) -> str:
    """"snapshot" when the file has sensor and temperature columns, else "log"."""
    raw = read_raw(Path(path))
    return "snapshot" if {"sensor", "temperature"} <= set(raw.names) else "log"


def _check_range(path, where_of, sensors, temps, layout_frame) -> None:
    """Refuse readings outside the usable range of the sensor's thermocouple type."""
    for s, t, where in zip(sensors, temps, where_of):
        if not np.isfinite(t):
            continue
        typ = layout_frame.at[s, "type"]
        if not typ:
            continue
        lo, hi = tc.usable_range_k(typ)
        if not lo <= t <= hi:
            raise InputError(
                f"sensor '{s}' reads {t - tc.KELVIN_OFFSET:.1f} degC, outside the range of a type "
                f"{typ} thermocouple ({lo - tc.KELVIN_OFFSET:g} to {hi - tc.KELVIN_OFFSET:g} degC): "
                f"likely an open circuit or a wrong type; fix the reading or write NaN to drop it",
                file=path, where=where)


def offset_sd(layout_frame: pd.DataFrame, temperature_k) -> tuple[np.ndarray, list[str]]:
    """Standard uncertainty [K] of each sensor's offset from its type and class at the given
    temperatures (one per layout row); 0 where no type is given.  Returns (u, notes)."""
    temps = np.broadcast_to(np.asarray(temperature_k, float), (len(layout_frame),))
    out = np.zeros(len(layout_frame))
    notes = []
    for i, (s, typ, cls) in enumerate(zip(layout_frame.index, layout_frame["type"], layout_frame["class"])):
        if typ and np.isfinite(temps[i]):
            out[i], note = tc.standard_uncertainty(typ, cls, temps[i])
            if note:
                notes.append(f"sensor '{s}': {note}")
    return out, notes


def read_snapshot(path, layout: Table) -> Table:
    """Read snapshot readings (sensor, temperature, optional sigma) against a layout.

    Returns a Table whose frame is indexed by sensor (layout order, only sensors with a
    finite reading) with columns r [m], theta [rad], z [m], temperature [K], sigma [K]
    (random standard deviation: readings' sigma, else layout's, else
    thermocouples.DEFAULT_SIGMA_K), offset_sd [K] (standard uncertainty of the sensor
    offset from its type/class, 0 without a type), type, class, position_tolerance [m].
    NaN/inf/empty readings are dropped with a warning naming the sensors.
    """
    path = Path(path)
    raw = read_raw(path)
    if "sensor" not in raw.names and "temperature" not in raw.names and raw.names:
        # a log-form file handed to the snapshot reader
        raise InputError("expected snapshot readings with columns sensor, temperature "
                         f"(optional sigma); found: {', '.join(raw.headers)}", file=path)
    v = _parse(raw, SNAPSHOT_COLUMNS, "snapshot readings")
    ids = v["sensor"]
    _check_sensor_ids(raw, ids)
    lay = layout.frame
    scol = raw.column("sensor")
    for i, s in enumerate(ids):
        if s not in lay.index:
            close = difflib.get_close_matches(s, list(lay.index), n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise InputError(f"sensor '{s}' is not in the layout ({layout.path}){hint}", file=path,
                             where=raw.where(i, scol))
    temps = v["temperature"]
    tcol = raw.column("temperature")
    _check_range(path, [raw.where(i, tcol) for i in range(len(ids))], ids, temps, lay)
    sig = v.get("sigma", np.full(len(ids), np.nan))
    for i in np.flatnonzero(np.isfinite(sig) & ~(sig > 0)):
        raise InputError("sigma must be positive", file=path, where=raw.where(int(i), raw.column("sigma")))
    warnings: list[str] = []
    dropped = [s for s, t in zip(ids, temps) if not np.isfinite(t)]
    if dropped:
        warnings.append(f"{path}: no valid reading (empty, NaN or inf) for sensor"
                        f"{'s' if len(dropped) > 1 else ''} {', '.join(dropped)}; dropped")
    given = dict(zip(ids, zip(temps, sig)))
    absent = [s for s in lay.index if s not in given]
    if absent:
        warnings.append(f"{path}: no reading for sensor{'s' if len(absent) > 1 else ''} "
                        f"{', '.join(absent)} of the layout")
    keep = [s for s in lay.index if s in given and np.isfinite(given[s][0])]
    if not keep:
        raise InputError("no valid reading: every temperature is empty, NaN or inf", file=path)
    frame = lay.loc[keep, ["r", "theta", "z"]].copy()
    frame["temperature"] = [given[s][0] for s in keep]
    own = np.array([given[s][1] for s in keep])
    lay_sig = lay.loc[keep, "sigma"].to_numpy(float)
    frame["sigma"] = np.where(np.isfinite(own), own, np.where(np.isfinite(lay_sig), lay_sig, tc.DEFAULT_SIGMA_K))
    u, notes = offset_sd(lay.loc[keep], frame["temperature"].to_numpy())
    frame["offset_sd"] = u
    for col in ("type", "class", "position_tolerance"):
        frame[col] = lay.loc[keep, col].to_numpy()
    warnings.extend(f"{path}: {n}" for n in notes)
    return Table(path, frame, warnings, "snapshot")


def _parse_times(raw: RawTable) -> np.ndarray:
    """The first column as seconds: numbers (unit in brackets, default s) or ISO timestamps
    (seconds since the first row)."""
    cells = [row[0] for row in raw.cells]
    header = raw.headers[0]
    for i, cell in enumerate(cells):
        if cell == "":
            raise InputError("missing time", file=raw.path, where=raw.where(i, 0))
    numeric = True
    values = np.empty(len(cells))
    for i, cell in enumerate(cells):
        try:
            values[i] = float(cell)
        except ValueError:
            numeric = False
            break
    if numeric:
        if not np.all(np.isfinite(values)):
            i = int(np.flatnonzero(~np.isfinite(values))[0])
            raise InputError(f"{cells[i]!r} is not a finite time", file=raw.path, where=raw.where(i, 0))
        units = column_unit(raw.units[0], "time", f"line {raw.header_line}, column '{header}'", file=raw.path)
        return np.asarray(convert(values, units, "time"), float)
    if raw.units[0] is not None:
        raise InputError(f"timestamps need no unit in the header; found [{raw.units[0]}] but "
                         f"the values are not numbers", file=raw.path, where=f"line {raw.header_line}, column '{header}'")
    stamps = []
    for i, cell in enumerate(cells):
        try:
            stamps.append(pd.Timestamp(cell))
        except (ValueError, TypeError):
            raise InputError(f"{cell!r} is neither a number of seconds nor an ISO 8601 timestamp "
                             f"(e.g. 2024-05-01T08:30:00)", file=raw.path, where=raw.where(i, 0)) from None
    aware = {s.tzinfo is not None for s in stamps}
    if len(aware) > 1:
        raise InputError("timestamps mix times with and without a UTC offset", file=raw.path,
                         where=f"column '{header}'")
    t0 = stamps[0]
    return np.array([(s - t0).total_seconds() for s in stamps])


def read_log(path, layout: Table | None = None) -> Table:
    """Read logged readings: a time column (seconds, a unit in brackets, or ISO 8601
    timestamps), then one column per sensor id (optionally with a temperature unit,
    ``TC1 [degF]``; default degC).

    Returns a Table whose frame is indexed by time in seconds (float, from the first row
    for timestamps; index name "time_s") with one column per sensor in K; NaN/inf/empty
    cells stay NaN and are reported in the warnings.
    """
    path = Path(path)
    raw = read_raw(path)
    if len(raw.names) < 2:
        raise InputError("a log needs a time column and at least one sensor column", file=path)
    if not raw.cells:
        raise InputError("no data rows below the header", file=path)
    lay = None if layout is None else layout.frame
    if lay is not None and raw.headers[0] in lay.index:
        raise InputError(f"the first column '{raw.headers[0]}' is a sensor; a log starts with a time "
                         f"column", file=path, where=f"line {raw.header_line}")
    times = _parse_times(raw)
    bad = np.flatnonzero(np.diff(times) <= 0)
    if bad.size:
        i = int(bad[0]) + 1
        raise InputError("times must increase from row to row", file=path, where=raw.where(i, 0))
    data = {}
    warnings: list[str] = []
    ids = []
    for col in range(1, len(raw.headers)):
        sid, unit = split_header(raw.headers[col])
        if sid in data:
            raise InputError(f"sensor '{sid}' appears twice in the header", file=path,
                             where=f"line {raw.header_line}")
        if lay is not None and sid not in lay.index:
            close = difflib.get_close_matches(sid, list(lay.index), n=1)
            hint = f"; did you mean '{close[0]}'?" if close else ""
            raise InputError(f"sensor '{sid}' is not in the layout ({layout.path}){hint}", file=path,
                             where=f"line {raw.header_line}, column {col + 1}")
        c = Column(raw.names[col], "temperature", nonfinite=True)
        values = _numeric_column(raw, c)
        if lay is not None:
            _check_range(path, [raw.where(i, col) for i in range(len(values))], [sid] * len(values),
                         values, lay)
        data[sid] = values
        ids.append(sid)
        n_bad = int(np.sum(~np.isfinite(values)))
        if n_bad == len(values):
            warnings.append(f"{path}: sensor '{sid}' has no valid reading")
        elif n_bad:
            warnings.append(f"{path}: sensor '{sid}' has {n_bad} empty, NaN or inf reading"
                            f"{'s' if n_bad > 1 else ''} (dropped)")
    frame = pd.DataFrame(data, index=pd.Index(times, name="time_s"))
    return Table(path, frame, warnings, "log")


def read_readings(path, layout: Table) -> Table:
    """Snapshot or log readings, recognised by their header (see `readings_form`)."""
    if readings_form(path) == "snapshot":
        return read_snapshot(path, layout)
    return read_log(path, layout)


# ---------------------------------------------------------------------------- points


def read_points(path, cylinder) -> Table:
    """Read query points (r, theta, z, units in header brackets); frame columns r [m],
    theta [rad], z [m], one row per point in file order."""
    path = Path(path)
    raw = read_raw(path)
    v = _parse(raw, POINT_COLUMNS, "a query-point table")
    check_inside(raw, v, cylinder, "point")
    frame = pd.DataFrame({"r": v["r"], "theta": v["theta"], "z": v["z"]})
    return Table(path, frame, [], "points")
