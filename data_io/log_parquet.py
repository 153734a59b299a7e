"""Parquet logs read in row groups (extra ``parquet``): the header from the file's schema
alone and the body as record batches of the log reader's chunk size, so a Parquet log
larger than memory streams like a CSV one (data_io.logs).  Columns keep their Parquet
types: numbers stay numbers, timestamp columns arrive as datetimes.  Line numbers in
messages count as in the CSV text of the table (header on line 1, first row on line 2)."""

from __future__ import annotations

from pathlib import Path

from .errors import InputError
from .plant_files import BINARY_FORMATS, _head, binary_kind

#: the line of the header in a Parquet log (as in its CSV text)
HEADER_LINE = 1


def is_parquet(path) -> bool:
    """Whether `path` is a Parquet file (its first bytes or its name)."""
    path = Path(path)
    try:
        return path.is_file() and binary_kind(path, _head(path, 4)) == "parquet"
    except InputError:
        return False


def _open(path):
    extra, package, name = BINARY_FORMATS["parquet"]
    try:
        import pyarrow.parquet as pq
    except ImportError:
        raise InputError(f"is {name}; reading it needs the optional extra: pip install 'heatsight[{extra}]' "
                         f"(or save it as CSV)", file=path) from None
    try:
        return pq.ParquetFile(path)
    except Exception as exc:  # noqa: BLE001 - pyarrow raises many kinds on broken files
        raise InputError(f"cannot read it as {name} ({type(exc).__name__}: {' '.join(str(exc).split())[:160]})",
                         file=path) from None


def header(path) -> list[str]:
    """Column names of a Parquet log, from its schema (no row is read)."""
    return [str(n) for n in _open(path).schema_arrow.names]


def boolean_columns(path) -> set[int]:
    """Positions of the columns whose Parquet type is boolean (true/false flags, not numbers)."""
    schema = _open(path).schema_arrow      # first: it names the extra when pyarrow is missing
    import pyarrow as pa

    return {i for i, f in enumerate(schema) if pa.types.is_boolean(f.type)}


def row_count(path) -> int:
    """Rows of a Parquet log, from its footer."""
    return int(_open(path).metadata.num_rows)


def frames(path, chunk_rows: int, width: int):
    """pandas frames of at most `chunk_rows` rows, columns 0..width-1 as in the header plus
    an empty spare column `width` (as the CSV reader's), index = row number from 0."""
    import pandas as pd

    pf = _open(path)
    offset = 0
    try:
        for batch in pf.iter_batches(batch_size=max(int(chunk_rows), 1)):
            frame = batch.to_pandas()
            frame.columns = range(frame.shape[1])
            frame[width] = pd.Series(float("nan"), index=frame.index)
            frame.index = pd.RangeIndex(offset, offset + len(frame))
            offset += len(frame)
            yield frame
    except InputError:
        raise
    except Exception as exc:  # noqa: BLE001
        raise InputError(f"cannot read it as a Parquet file ({type(exc).__name__}: "
                         f"{' '.join(str(exc).split())[:160]})", file=path) from None
