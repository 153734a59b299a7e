"""PNG bytes of several figures, about half of them drawn in a forked second process.

Drawing is the slow part of a figure (text layout and rasterizing: 0.1-0.4 s each for the
demo's five) and it runs on one core.  On Linux a process forks cheaply with the figures
already in its memory, so a child draws every other figure while this process draws the
rest, and the child's PNG bytes come back through a pipe (nothing else crosses).  Elsewhere,
when this process runs other threads (forking those is unsafe), or when the child fails, the
figures are drawn one by one here.  The bytes are the same either way.
"""

from __future__ import annotations

import io
import os
import pickle
import signal
import sys
import threading

from .figure_style import DPI


def figure_png(fig, dpi: int = DPI) -> bytes:
    """PNG bytes of a matplotlib Figure (Agg renderer)."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=dpi)
    return buf.getvalue()


def _can_fork() -> bool:
    return sys.platform.startswith("linux") and hasattr(os, "fork") and threading.active_count() == 1


def figure_pngs(figures: dict, dpi: int = DPI) -> dict:
    """name -> PNG bytes for name -> Figure, in the same order (module doc)."""
    names = list(figures)
    if len(names) < 2 or not _can_fork():
        return {n: figure_png(figures[n], dpi) for n in names}
    far, near = names[::2], names[1::2]
    read, write = os.pipe()
    try:
        pid = os.fork()
    except OSError:
        os.close(read)
        os.close(write)
        return {n: figure_png(figures[n], dpi) for n in names}
    if pid == 0:                      # the child: draw its share, send the bytes, leave at once
        code = 1
        try:
            os.close(read)
            data = pickle.dumps({n: figure_png(figures[n], dpi) for n in far})
            with os.fdopen(write, "wb") as out:
                out.write(data)
            code = 0
        finally:
            os._exit(code)            # no exit handlers, no buffered output of the parent's
    os.close(write)
    status, data = 1, b""
    try:
        drawn = {n: figure_png(figures[n], dpi) for n in near}
        src, read = os.fdopen(read, "rb"), None        # the file object owns the descriptor now
        with src:
            data = src.read()
        _, status = os.waitpid(pid, 0)
        pid = None
    finally:                          # this process failed or was interrupted: no child left behind
        if read is not None:
            os.close(read)
        if pid is not None:
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
            os.waitpid(pid, 0)
    child = {}
    if status == 0 and data:
        try:
            child = pickle.loads(data)
        except (pickle.UnpicklingError, EOFError):
            child = {}
    return {n: drawn[n] if n in drawn else child.get(n) or figure_png(figures[n], dpi) for n in names}
