"""CSV inputs: sensor layout, snapshot readings, logged readings, query points.

Every reader validates its file (through data_io.csv_in; logs through data_io.logs) and
raises InputError with one line naming the file, the line and the column and saying what
was expected.  Values come out in SI units
(m, rad, K) in pandas DataFrames; units in the CSV headers stand in brackets
(``r [mm]``), and a header without a unit means m, deg or degC (design §3).

Line numbers in messages are those of the file as an editor shows them (header = line 1).
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd

from . import thermocouples as tc
from .csv_in import Column, Table, _check_sensor_ids, _parse, check_inside, closest_name, likely_typo, read_raw
from .errors import InputError
from .limits import MAX_TEMPERATURE_K

# ---------------------------------------------------------------------------- columns

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


def for_part(columns: tuple[Column, ...], cylinder) -> tuple[Column, ...]:
    """The columns a table needs on this part: on a long part (nothing varies along z) the
    z column may be left out or empty (taken as 0)."""
    if not getattr(cylinder, "long", False):
        return columns
    return tuple(replace(c, required=False, optional_cells=True) if c.name == "z" else c for c in columns)


def _z_or_zero(v: dict, n: int) -> None:
    """A long part's z column: absent or empty cells -> 0 (z plays no part there)."""
    z = np.asarray(v.get("z", np.zeros(n)), float)
    v["z"] = np.where(np.isfinite(z), z, 0.0)


# ---------------------------------------------------------------------------- layout


#: the smallest random scatter of a reading [K] taken: 0.1 mK, below any thermocouple logger's
#: resolution (common practice, no source); smaller values only make the fit's arithmetic fail
MIN_SIGMA_K = 1e-4


def _check_sigma(raw, path, sigma) -> None:
    """A sigma column's values [K] (NaN: not given) must be positive and at least MIN_SIGMA_K."""
    for i in np.flatnonzero(np.isfinite(sigma) & ~(sigma > 0)):
        raise InputError("sigma must be positive", file=path, where=raw.where(int(i), raw.column("sigma")))
    for i in np.flatnonzero(np.isfinite(sigma) & (sigma < MIN_SIGMA_K)):
        raise InputError(f"sigma {sigma[i]:.3g} K is below {MIN_SIGMA_K:g} K, finer than any thermocouple "
                         f"logger resolves; give the readings' real scatter", file=path,
                         where=raw.where(int(i), raw.column("sigma")))


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
    v = _parse(raw, for_part(LAYOUT_COLUMNS, cylinder), "a sensor layout")
    ids = v["sensor"]
    _z_or_zero(v, len(ids))
    _check_sensor_ids(raw, ids)
    check_inside(raw, v, cylinder, "sensor")
    warnings: list[str] = []
    n = len(ids)
    sigma = v.get("sigma", np.full(n, np.nan))
    _check_sigma(raw, raw.path, sigma)
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
    """"snapshot" when the file has a sensor or a temperature column (a log's columns are a
    time and sensor ids, so a snapshot with one wrong header is then told what a snapshot
    needs, not that a log needs a time column), else "log" (from the header alone, so a
    large log is not read here)."""
    from .log_header import header_names

    names = set(header_names(path))
    return "snapshot" if "sensor" in names or "temperature" in names else "log"


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
    warnings: list[str] = []
    # the rule of logs: channels that are not sensors of the layout are ignored with a warning;
    # a file sharing no sensor with the layout is refused
    known = [i for i, s in enumerate(ids) if s in lay.index]
    if not known:
        s = ids[0]
        close = closest_name(s, list(lay.index))
        hint = f"; did you mean '{close}'?" if close is not None else ""
        raise InputError(f"none of the sensors is in the layout: sensor '{s}' is not in the layout "
                         f"({layout.path}){hint}", file=path, where=raw.where(0, scol))
    typo = likely_typo([s for s in ids if s not in lay.index], [s for s in lay.index if s not in ids])
    if typo is not None:
        i = ids.index(typo[0])
        raise InputError(f"sensor '{typo[0]}' is not in the layout ({layout.path}); did you mean '{typo[1]}', "
                         f"which has no reading?", file=path, where=raw.where(i, scol))
    # (a sensor close to a layout sensor without a reading was refused above as a likely typo;
    # the layout sensors close to the rest have their readings, so no "did you mean" for them)
    for i, s in enumerate(ids):
        if s not in lay.index:
            warnings.append(f"{path}: {raw.where(i, scol)}: sensor '{s}' is not a sensor of the layout; "
                            f"ignored")
    if len(known) < len(ids):
        raw.cells = [raw.cells[i] for i in known]
        raw.lines = [raw.lines[i] for i in known]
        ids = [ids[i] for i in known]
        v = {k: ([x[i] for i in known] if isinstance(x, list) else x[known]) for k, x in v.items()}
    temps = v["temperature"].copy()
    tcol = raw.column("temperature")
    over = np.flatnonzero(np.isfinite(temps) & (temps > MAX_TEMPERATURE_K))
    if over.size:
        warnings.append(f"{path}: sensor{'s' if over.size > 1 else ''} {', '.join(ids[i] for i in over)} "
                        f"read{'' if over.size > 1 else 's'} above {MAX_TEMPERATURE_K:g} K (first: "
                        f"{raw.cells[over[0]][tcol]}), a logger's overflow code; treated as missing")
        temps[over] = np.nan
    _check_range(path, [raw.where(i, tcol) for i in range(len(ids))], ids, temps, lay)
    sig = v.get("sigma", np.full(len(ids), np.nan))
    _check_sigma(raw, path, sig)
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


def read_log(path, layout: Table | None = None) -> Table:
    """Read a whole log with the one log reader (data_io.logs, the reader `trend` streams):
    a time column (seconds, a unit in brackets, or ISO 8601 timestamps), then one column
    per sensor id (optionally with a temperature unit, ``TC1 [degF]``; default degC).

    Returns a Table whose frame is indexed by time in seconds (float, from the first row
    for timestamps; index name "time_s") with one column per layout sensor found in the log,
    in K; missing and out-of-range readings are NaN and reported in the warnings, as are
    columns that are not sensors of the layout (ignored).  A log in which no sensor has a
    valid reading is refused.  layout None: every column after the time is a sensor.
    """
    from .logs import read_whole_log

    times, values, columns, warnings = read_whole_log(path, layout)
    frame = pd.DataFrame(values, index=pd.Index(times, name="time_s"), columns=list(columns.sensors))
    return Table(Path(path), frame, warnings, "log")


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
    v = _parse(raw, for_part(POINT_COLUMNS, cylinder), "a query-point table")
    _z_or_zero(v, len(raw.cells))
    check_inside(raw, v, cylinder, "point")
    frame = pd.DataFrame({"r": v["r"], "theta": v["theta"], "z": v["z"]})
    return Table(path, frame, unitless_lengths(raw, path, "m"), "points")


def unitless_length(header: str, name: str, unit: str) -> str:
    """The warning on a points table's length column `name` (r or z) whose `header` names no
    unit: it is read as `unit` (m at the command line, mm in Fit.predict), which a table
    written for the other would miss by a factor of 1000."""
    return f"column '{header}' names no unit; read as {unit} (write '{name} [mm]' or '{name} [m]' to say)"


def unitless_lengths(raw, path, unit: str) -> list[str]:
    """unitless_length for each such column of a points file."""
    return [f"{path}: {unitless_length(raw.headers[i], name, unit)}" for i, name in enumerate(raw.names)
            if name in ("r", "z") and raw.units[i] is None]
