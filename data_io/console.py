"""What a command says on the terminal, in one place: the answer on stdout (text, or JSON with
--json), warnings and progress on stderr (``heatsight: warning: ...``), nothing but
warnings and errors with --quiet, the steps of the run with --verbose.

Progress bars come from tqdm when it is installed (the optional extra ``progress``), else a
plain one-line bar; either way they are drawn only when stderr is a terminal, so a
redirected stderr never receives carriage-return lines.
"""

from __future__ import annotations

import shutil
import sys
from dataclasses import dataclass, field

PROG = "heatsight"
#: console lines of the summaries that are warnings (they are moved to stderr)
WARNING_PREFIX = "  warning: "


def printable(text) -> str:
    """One line with no control characters (sensor ids are checked when read; this guards
    every other message too, e.g. a key of a case file)."""
    return "".join(ch if ch.isprintable() else "?" for ch in " ".join(str(text).split()))


@dataclass
class Console:
    """quiet: no answer text or progress; verbose: also the steps; json: the answer as JSON."""

    quiet: bool = False
    verbose: bool = False
    json: bool = False
    out: object = None       # streams; None: sys.stdout / sys.stderr at the time of writing
    err: object = None
    _status: object = field(default=None, repr=False, compare=False)

    @property
    def stdout(self):
        return self.out or sys.stdout

    @property
    def stderr(self):
        return self.err or sys.stderr

    def warn(self, message: str) -> None:
        print(f"{PROG}: warning: {printable(message)}", file=self.stderr)

    def step(self, message: str) -> None:
        if self.verbose:
            print(f"{PROG}: {printable(message)}", file=self.stderr)

    def answer(self, text: str, data=None) -> None:
        """The command's summary: `text` for people, `data` (a JSON-able dict) with --json.
        Lines of `text` that are warnings go to stderr."""
        body = []
        for line in str(text).splitlines():
            if line.startswith(WARNING_PREFIX):
                self.warn(line[len(WARNING_PREFIX):])
            else:
                body.append(line)
        if self.json:
            from .csv_out import json_text
            self.stdout.write(json_text({} if data is None else data))
        elif not self.quiet and body:
            print("\n".join(body), file=self.stdout)

    def progress(self, total: int, label: str):
        """A progress bar with .update(n), .describe(label) and .close(); silent unless stderr is a terminal.
        A status line on show (status()) is cleared first: the bar takes its line."""
        if self._status is not None:
            self._status.close()
        if self.quiet or self.json or not self._terminal():
            return _Silent()
        try:
            from tqdm import tqdm
        except ImportError:
            return _PlainBar(total, label, self.stderr)
        return _TqdmBar(tqdm(total=total, desc=f"  {label}", file=self.stderr, leave=False))

    def status(self) -> "_Status":
        """A one-line status of a long command's steps on stderr: .show(text) replaces the
        line, .close() clears it; shown only on a terminal (not quiet, not --json); with
        --verbose each step is a line of its own instead."""
        self._status = _Status(self, self._terminal() and not (self.quiet or self.json))
        return self._status

    def _terminal(self) -> bool:
        """Is stderr a terminal (bars and status lines are drawn only there)?"""
        try:
            return bool(self.stderr.isatty())
        except (AttributeError, ValueError, OSError):
            return False


def _one_row(text: str, beside: int = 0) -> str:
    """`text` cut with "..." to fit one row of the terminal next to `beside` more characters:
    a wrapped line could not be redrawn in place."""
    room = max(shutil.get_terminal_size(fallback=(80, 24)).columns - 1 - beside, 10)
    return text if len(text) <= room else text[:room - 3] + "..."


def _redraw(stream, line: str, width: int) -> int:
    """Write `line` over the row's last one (`width` characters, blanked where longer);
    returns the new width."""
    print("\r" + line.ljust(width), end="", file=stream, flush=True)
    return len(line)


class _Status:
    """The status line: one line of stderr, cut to the terminal's width (a wrapped line could
    not be rewritten in place)."""

    def __init__(self, console, live: bool):
        self.console, self.live, self.width = console, live, 0

    def show(self, text: str) -> None:
        if self.console.verbose:
            self.console.step(text)
            return
        if self.live:
            self.width = _redraw(self.console.stderr, _one_row(f"{PROG}: {printable(text)}"), self.width)

    def close(self) -> None:
        if self.live and self.width:
            print("\r" + " " * self.width + "\r", end="", file=self.console.stderr, flush=True)
            self.width = 0


class _Silent:
    def update(self, n: int = 1) -> None:
        pass

    def describe(self, label: str) -> None:
        pass

    def close(self) -> None:
        pass


class _TqdmBar:
    """A tqdm bar with .update(n), .describe(label) and .close()."""

    def __init__(self, bar):
        self.bar = bar

    def update(self, n: int = 1) -> None:
        self.bar.update(n)

    def describe(self, label: str) -> None:
        self.bar.set_description_str(f"  {printable(label)}")

    def close(self) -> None:
        self.bar.close()


class _PlainBar:
    """A one-line bar for a terminal without tqdm."""

    WIDTH = 30

    def __init__(self, total: int, label: str, stream):
        self.total, self.label, self.stream, self.done = max(int(total), 1), label, stream, 0
        self.width = 0

    def update(self, n: int = 1) -> None:
        self.done += n
        filled = int(self.WIDTH * min(self.done, self.total) / self.total)
        bar = f" {self.done}/{self.total} [{'#' * filled}{'.' * (self.WIDTH - filled)}]"
        self.width = _redraw(self.stream, _one_row(f"  {self.label}", len(bar)) + bar, self.width)

    def describe(self, label: str) -> None:
        """Another label, the bar redrawn."""
        self.label = printable(label)
        self.update(0)

    def close(self) -> None:
        if self.width:
            print("", file=self.stream, flush=True)


#: the console of the running command (set by cli.main; a plain one for library use)
CURRENT = Console()


def current() -> Console:
    return CURRENT


def use(console: Console) -> Console:
    global CURRENT
    CURRENT = console
    return console
