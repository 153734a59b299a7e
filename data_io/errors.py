"""Errors of the data_io layer.

`InputError` is raised for anything wrong in what the user gave us: a case file, a CSV
table, a command-line option.  Its message is one line that names the file, the row (line)
and column or the key, and says what was expected.  The command line prints it as
``heatsight: error: <message>`` and exits with status 2.
"""

from __future__ import annotations

from pathlib import Path


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


class InputError(ValueError):
    """Bad user input; ``str(err)`` is a one-line message fit to show the user.  A ValueError,
    so library callers catching that still catch it.

    `file` (a path or None), `where` (e.g. ``"line 4, column 'r [mm]'"`` or ``"part.radius"``)
    and `problem` are kept separately for callers that want them.
    """

    def __init__(self, problem: str, *, file: str | Path | None = None, where: str | None = None):
        self.problem = _one_line(problem)
        self.file = None if file is None else Path(file)
        self.where = None if where is None else _one_line(where)
        parts = []
        if self.file is not None:
            parts.append(str(self.file))
        if self.where:
            parts.append(self.where)
        parts.append(self.problem)
        super().__init__(": ".join(parts))

    @property
    def message(self) -> str:
        return str(self)
