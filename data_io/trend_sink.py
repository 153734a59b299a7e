"""Where the rows of a trend go: trend.csv (default, the fast byte-matrix writer of
data_io.fast_csv) or trend.parquet (`--format parquet`, pyarrow, extra ``parquet``), both
written block by block so that a long log's rows never sit in memory.

A block is a list of columns (name, kind, values) with kind "time" (seconds, 13
significant digits in CSV), "number" (9 digits), "count", "text" or "flag"; the names
carry their units (data_io.csv_columns convention) and are the same in both formats.
Parquet keeps full double precision, counts as int64, flags as booleans, ISO times as text.
"""

from __future__ import annotations

import numpy as np

from .csv_out import neutralize
from .errors import InputError
from .fast_csv import csv_header, csv_rows, number_cells, text_cells

#: output formats of trend rows: file name of each
FORMATS = {"csv": "trend.csv", "parquet": "trend.parquet"}


def require_format(fmt: str) -> str:
    """The format name, or InputError naming the missing extra (checked before any work)."""
    if fmt not in FORMATS:
        raise InputError(f"--format must be one of {', '.join(FORMATS)}, got {fmt!r}")
    if fmt == "parquet":
        try:
            import pyarrow  # noqa: F401
        except ImportError:
            raise InputError("--format parquet needs the optional extra: pip install 'heatsight[parquet]'") from None
    return fmt


class CsvSink:
    """trend.csv on a binary stream: the header before the first block, then rows."""

    def __init__(self, stream):
        self.stream = stream
        self.started = False

    def header(self, names):
        if not self.started:
            self.stream.write(csv_header([neutralize(c) for c in names]).encode("utf-8"))
            self.started = True

    def write(self, columns):
        self.header([c[0] for c in columns])
        if not len(columns[0][2]):
            return
        cells = []
        for _, kind, x in columns:
            if kind == "time":
                cells.append(number_cells(x, 13))
            elif kind == "text":
                cells.append(text_cells(x))
            elif kind == "flag":
                words = text_cells(["true", "false"])
                cells.append(np.where(np.asarray(x, bool)[:, None], words[0], words[1]))
            else:
                cells.append(number_cells(x))
        self.stream.write(csv_rows(cells))

    def close(self):
        pass


class ParquetSink:
    """trend.parquet on a binary stream: one row group per block (pyarrow.parquet.ParquetWriter)."""

    def __init__(self, stream):
        self.stream = stream
        self.writer = None
        self.schema = None
        self._names = None

    def _arrays(self, columns):
        import pyarrow as pa

        out = []
        for _, kind, x in columns:
            if kind == "text":
                out.append(pa.array(np.asarray(x).astype(str), pa.string()))
            elif kind == "flag":
                out.append(pa.array(np.asarray(x, bool), pa.bool_()))
            elif kind == "count":
                out.append(pa.array(np.asarray(x, np.int64), pa.int64()))
            else:
                out.append(pa.array(np.asarray(x, float), pa.float64()))
        return out

    def header(self, names):
        self._names = list(names)

    def write(self, columns):
        import pyarrow as pa
        import pyarrow.parquet as pq

        table = pa.Table.from_arrays(self._arrays(columns), names=[c[0] for c in columns])
        if self.writer is None:
            self.schema = table.schema
            # dictionary pages only for text: on doubles pyarrow builds a dictionary, finds it
            # too large and falls back, which made writing 3.6x slower and the file larger
            self.writer = pq.ParquetWriter(self.stream, self.schema,
                                           use_dictionary=[c[0] for c in columns if c[1] == "text"])
        if table.num_rows:
            self.writer.write_table(table)

    def close(self):
        if self.writer is None and self._names is not None:     # no rows at all: an empty table
            import pyarrow as pa
            import pyarrow.parquet as pq

            pq.write_table(pa.table({n: pa.array([], pa.float64()) for n in self._names}), self.stream)
        elif self.writer is not None:
            self.writer.close()
            self.writer = None


def open_sink(fmt: str, stream):
    """The sink of `fmt` ("csv" or "parquet") writing on the binary `stream`."""
    return ParquetSink(stream) if fmt == "parquet" else CsvSink(stream)
