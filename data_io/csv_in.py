"""CSV tables read as text: the header (names, units in brackets), cells with file line
numbers, and typed columns converted to SI.  Every problem raises InputError with one line
naming the file, the line and the column and saying what was expected.  Used by the table
readers (tables.py) and the face profiles (profiles.py).

Line numbers in messages are those of the file as an editor shows them (header = line 1).
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .errors import InputError
from .limits import MAX_TEMPERATURE_K, implausible_mask
from .plant_files import rows, table_text
from .units import column_unit, convert, plausibility, split_header, ureg

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


#: cell texts meaning "no reading" (case-insensitive) where missing values are allowed
NONFINITE_WORDS = {"nan", "inf", "+inf", "-inf", "infinity", "-infinity", "+infinity", "na", "n/a", ""}


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


def _control_hint(text: str) -> str | None:
    """The first control character (a terminal escape, a bell) in a cell, shown escaped."""
    for ch in text:
        if ord(ch) < 32 and ch != "\t" or 127 <= ord(ch) < 160:
            return repr(ch)
    return None


def check_printable(text: str, path, where: str) -> None:
    """Refuse text holding control characters: they would reach the terminal and the report."""
    bad = _control_hint(text)
    if bad is not None:
        raise InputError(f"holds the control character {bad}; remove it (ids and headers must be plain text)",
                         file=path, where=where)


def read_raw(path: Path) -> RawTable:
    """Read a table as text cells (CSV in any of the plant formats of data_io.plant_files,
    or a workbook / Parquet file), keeping file line numbers; refuse ragged or empty files."""
    path = Path(path)
    text, fmt = table_text(path)
    records = [(line, cells) for line, cells in rows(text, fmt, path) if any(cells)]
    if not records:
        raise InputError("the file is empty; expected a header line and rows", file=path)
    header_line, headers = records[0]
    while len(headers) > 1 and headers[-1] == "":
        headers = headers[:-1]     # a trailing separator after the last header
    for line, cells in records:
        for col, cell in enumerate(cells):
            check_printable(cell, path, f"line {line}, column {col + 1}")
    for line, cells in records[1:]:
        if len(cells) != len(headers):
            extra = cells[len(headers):]
            if len(cells) > len(headers) and not any(extra):
                continue          # trailing separators: empty fields past the header's
            raise InputError(f"malformed CSV: line {line} has {len(cells)} field{'' if len(cells) == 1 else 's'} "
                             f"but the header (line {header_line}) has "
                             f"{len(headers)}; every line needs one field per column "
                             f"(fields separated by {fmt.separator_name})", file=path)
    names, units = [], []
    for col, h in enumerate(headers):
        if h == "":
            raise InputError(f"line {header_line}, column {col + 1}: empty column header", file=path)
        try:
            name, unit = split_header(h)
        except ValueError as exc:
            raise InputError(f"line {header_line}: {exc}", file=path) from None
        names.append(name.lower())
        units.append(unit)
    seen = {}
    for col, name in enumerate(names):
        if name in seen:
            raise InputError(f"line {header_line}: column '{headers[col]}' appears twice "
                             f"(columns {seen[name] + 1} and {col + 1})", file=path)
        seen[name] = col
    body = [cells[:len(headers)] for _, cells in records[1:]]
    lines = [line for line, _ in records[1:]]
    return RawTable(path, names, headers, units, body, lines, header_line)


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
        if cell.lower() in NONFINITE_WORDS:
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
            over = np.flatnonzero(ok & implausible_mask(k, "temperature"))
            if over.size and not c.nonfinite:     # readings: read_snapshot drops them with a warning
                i = int(over[0])
                raise InputError(f"{raw.cells[i][col]} is above {MAX_TEMPERATURE_K:g} K, not a plausible "
                                 f"temperature (check the unit in the header)", file=raw.path,
                                 where=raw.where(i, col))
            return k
        return out
    ok = np.isfinite(out)
    res = out.copy()
    if np.any(ok):
        res[ok] = convert(out[ok], units, c.dimension)
        bad = np.flatnonzero(ok & implausible_mask(res, c.dimension))
        if bad.size:
            i = int(bad[0])
            raise InputError(f"{raw.cells[i][col]} {plausibility(float(res[i]), c.dimension)}", file=raw.path,
                             where=raw.where(i, col))
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


def closest_name(name: str, names, cutoff: float = 0.6) -> str | None:
    """The name of `names` that `name` most likely means: the same name in other letter case
    ('tc06' for 'TC06'), else the closest by difflib's ratio (>= cutoff) with case ignored;
    None when none is close."""
    folded = {str(n).casefold(): n for n in names}
    key = str(name).casefold()
    if key in folded:
        return folded[key]
    close = difflib.get_close_matches(key, list(folded), n=1, cutoff=cutoff)
    return folded[close[0]] if close else None


def likely_typo(extra: list[str], absent: list[str]) -> tuple[str, str] | None:
    """(channel, sensor) when a channel that is not in the layout looks like a misspelt layout
    sensor that has no reading (closest_name): the one rule for snapshots and logs.  Other
    extra channels (loggers record water, ambient...) are ignored with a warning."""
    for name in extra:
        close = closest_name(name, absent)
        if close is not None:
            return name, close
    return None


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
    r_arr = np.full(n, cylinder.radius) if r is None else r   # a wall point: on the outer wall
    z_arr = np.zeros(n) if z is None else z
    inside = cylinder.contains(r_arr, z_arr)
    if r is not None:
        inside &= r_arr >= -1e-9 * cylinder.radius
    if np.all(inside):
        return
    i = int(np.flatnonzero(~inside)[0])
    height = format_quantity(cylinder.height, "length")
    a = cylinder.inner_radius
    if r is not None and a > 0 and r_arr[i] < a * (1 - 1e-9) and r_arr[i] >= -1e-9 * cylinder.radius:
        col = raw.column("r")
        raise InputError(f"{what} at r = {raw.cells[i][col]} ({raw.units[col] or 'm'}) lies inside the bore "
                         f"(the material spans inner radius {format_quantity(a, 'length')} <= r <= radius "
                         f"{format_quantity(cylinder.radius, 'length')})", file=raw.path, where=raw.where(i, col))
    if r is not None and not (-1e-9 * cylinder.radius <= r_arr[i] <= cylinder.radius * (1 + 1e-9)):
        name = "r"
        limit = (f"inner radius {format_quantity(a, 'length')} <= r <= radius "
                 f"{format_quantity(cylinder.radius, 'length')}" if a > 0 else
                 f"0 <= r <= radius {format_quantity(cylinder.radius, 'length')}")
    else:
        name = "z"
        limit = f"0 <= z <= height {height}" if not cylinder.semi_infinite else "z >= 0"
    col = raw.column(name)
    text = f"{name} = {raw.cells[i][col]}"
    hint = _outside_hint(raw, cols[name], name, cylinder)
    raise InputError(f"{what} at {text} ({raw.units[col] or 'm'}) lies outside the part "
                     f"({limit}){hint}", file=raw.path, where=raw.where(i, col))
