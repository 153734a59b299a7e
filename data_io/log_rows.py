"""Fields per line of a log's text, for the one log reader (data_io.logs): pandas fills a
row cut short with missing cells, so the lines whose last column came out empty are
counted here, in the file's own text (its encoding and separator), to tell an empty field
from a missing one."""

from __future__ import annotations

import csv
import io
import itertools


class RowWidths:
    """Fields per line of a log's text, for the few lines whose last column pandas left
    empty (an empty field and a missing one look alike there).  Reads the file once, forward
    only, alongside the chunks (a context manager closing the file)."""

    BLOCK_LINES = 10_000

    def __init__(self, columns):
        self.cols = columns
        self.fh = None
        self.line = 0          # lines consumed so far

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        if self.fh is not None:
            self.fh.close()
        return False

    def _open(self):
        fmt = self.cols.fmt
        if fmt.converted is not None:
            return io.StringIO(fmt.converted, newline=None)
        return open(self.cols.path, encoding=fmt.encoding, errors="replace", newline=None)

    def first_short(self, lines, width: int):
        """(line, fields) of the first of `lines` (increasing file line numbers, 1-based)
        with fewer than `width` fields, or None; the text is read in blocks of BLOCK_LINES."""
        if self.fh is None:
            self.fh = self._open()
        fmt = self.cols.fmt
        sep = fmt.sep if fmt.converted is None else ","
        wanted = [int(x) for x in lines]
        i = 0
        while i < len(wanted):
            base = self.line
            block = list(itertools.islice(self.fh, min(wanted[-1], base + self.BLOCK_LINES) - base))
            if not block:          # (the text ended first: nothing to refuse on)
                return None
            self.line += len(block)
            while i < len(wanted) and wanted[i] <= self.line:
                text = block[wanted[i] - base - 1]
                n = text.count(sep) + 1 if '"' not in text else \
                    len(next(csv.reader([text.rstrip("\n")], delimiter=sep, skipinitialspace=True), []))
                if n < width:
                    return wanted[i], n
                i += 1
        return None
