"""The header of a log (the one log reader's first step, data_io.logs): the time column and
its unit, the sensor columns of the layout with their temperature units, and the columns
that are not sensors (kept with a warning and ignored)."""

from __future__ import annotations

import codecs
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .csv_in import check_printable, closest_name, likely_typo
from .errors import InputError
from .plant_files import SNIFF_BYTES, TextFormat, _head, rows, sniff
from .units import column_unit, convert, split_header


@dataclass
class LogColumns:
    """The header of a log: where each used sensor column is and how to convert it.

    sensors: ids of the layout sensors found in the log (log order); positions: their
    0-based column numbers; scale, shift: K = shift + scale * value; time_scale: seconds per
    time unit (None for timestamps); ignored: headers that are not sensors of the layout;
    absent: layout sensors missing from the log; fmt: encoding, separator and decimal mark
    (data_io.plant_files), or the CSV text of a workbook / Parquet log.
    """

    path: Path
    header_line: int
    headers: list
    time_header: str
    time_scale: float | None
    sensors: list
    positions: list
    scale: np.ndarray
    shift: np.ndarray
    ignored: list = field(default_factory=list)
    absent: list = field(default_factory=list)
    warnings: list = field(default_factory=list)
    fmt: TextFormat = field(default_factory=TextFormat)
    parquet: bool = False      # a Parquet log, streamed in row groups (data_io.log_parquet)

    @property
    def n(self) -> int:
        return len(self.sensors)


def _header_line(path: Path) -> tuple[int, list[str], TextFormat]:
    """The header's line number and cells, and the file's format (from its first bytes; a
    Parquet log's header from its schema alone)."""
    from . import log_parquet

    if log_parquet.is_parquet(path):
        cells = log_parquet.header(path)
        for col, cell in enumerate(cells):
            check_printable(cell, path, f"line {log_parquet.HEADER_LINE}, column {col + 1}")
        return log_parquet.HEADER_LINE, cells, TextFormat()
    fmt = sniff(path)
    if fmt.converted is not None:
        text = fmt.converted
    else:
        head = _head(path, SNIFF_BYTES)
        text = codecs.getincrementaldecoder(fmt.encoding)(errors="replace").decode(head, final=False)
    for number, cells in rows(text, fmt, path):
        if any(cells):
            while len(cells) > 1 and cells[-1] == "":
                cells = cells[:-1]     # a trailing separator after the last header
            for col, cell in enumerate(cells):
                check_printable(cell, path, f"line {number}, column {col + 1}")
            return number, cells, fmt
    raise InputError("the file is empty; expected a header line and rows", file=path)


def header_names(path, as_written: bool = False) -> list[str]:
    """Column names (units dropped) of a table's header line, read alone: lower-cased for
    matching, or as written (for messages)."""
    _, cells, _ = _header_line(Path(path))
    out = []
    for cell in cells:
        try:
            name = split_header(cell)[0]
        except ValueError:
            name = cell
        out.append(name if as_written else name.lower())
    return out


def open_log(path, layout) -> LogColumns:
    """Parse and check the header of a log against a layout Table (units, sensor ids);
    layout None takes every column after the time as a sensor."""
    path = Path(path)
    number, headers, fmt = _header_line(path)
    where = f"line {number}"
    if len(headers) < 2:
        raise InputError("a log needs a time column and at least one sensor column", file=path, where=where)
    known = None if layout is None else layout.frame.index
    parsed = []
    for col, h in enumerate(headers):
        if h == "":
            raise InputError(f"column {col + 1}: empty column header", file=path, where=where)
        try:
            parsed.append(split_header(h))
        except ValueError as exc:
            raise InputError(str(exc), file=path, where=where) from None
    time_name, time_unit = parsed[0]
    if known is not None and time_name in known:
        raise InputError(f"the first column '{headers[0]}' is a sensor; a log starts with a time column",
                         file=path, where=where)
    time_scale = None
    if time_unit is not None:
        unit = column_unit(time_unit, "time", f"{where}, column '{headers[0]}'", file=path)
        time_scale = float(convert(1.0, unit, "time"))
    seen: dict[str, int] = {}
    sensors, positions, scale, shift, ignored = [], [], [], [], []
    for col in range(1, len(headers)):
        sid, unit_text = parsed[col]
        if sid in seen:
            raise InputError(f"sensor '{sid}' appears twice in the header (columns {seen[sid] + 1} and "
                             f"{col + 1})", file=path, where=where)
        seen[sid] = col
        if known is not None and sid not in known:
            ignored.append(headers[col])
            continue
        unit = column_unit(unit_text, "temperature", f"{where}, column '{headers[col]}'", file=path)
        k0, k1 = (float(convert(x, unit, "temperature")) for x in (0.0, 1.0))
        sensors.append(sid), positions.append(col), shift.append(k0), scale.append(k1 - k0)
    warnings = []
    if not sensors:       # (a layout is given: without one every column is a sensor)
        first = split_header(ignored[0])[0]
        raise InputError(f"none of the log's columns ({', '.join(headers[1:])}) is a sensor of the layout "
                         f"({layout.path}): sensor '{first}' is not in the layout{_did_you_mean(first, known)}",
                         file=path, where=where)
    absent = [] if known is None else [s for s in known if s not in seen]
    typo = likely_typo([split_header(h)[0] for h in ignored], absent)
    if typo is not None:
        raise InputError(f"column '{typo[0]}' is not a sensor of the layout ({layout.path}); did you mean "
                         f"'{typo[1]}', which has no column?", file=path, where=where)
    # (a channel close to a sensor without a column was refused above as a likely typo; the
    # sensors close to the rest have their columns, so no "did you mean" for them)
    for h in ignored:
        warnings.append(f"{path}: column '{h}' is not a sensor of the layout; ignored")
    if absent:
        warnings.append(f"{path}: no column for sensor{'s' if len(absent) > 1 else ''} {', '.join(absent)} "
                        f"of the layout; the trend uses the others")
    from .log_parquet import boolean_columns, is_parquet

    parquet = is_parquet(path)
    flags = boolean_columns(path) & set(positions) if parquet else set()
    if flags:
        col = min(flags)
        raise InputError(f"column '{headers[col]}' holds true/false values, not temperatures (a sensor of the "
                         f"layout's name on an alarm or status channel?)", file=path, where=where)
    return LogColumns(path, number, headers, headers[0], time_scale, sensors, positions, np.array(scale),
                      np.array(shift), ignored, absent, warnings, fmt, parquet=parquet)


def _did_you_mean(name, known) -> str:
    """'; did you mean 'TC1'?' for the closest known sensor id, or ''."""
    close = closest_name(name, known) if known is not None else None
    return f"; did you mean '{close}'?" if close is not None else ""
