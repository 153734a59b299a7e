"""BLAS threads while many small matrix products run.

A fit multiplies and decomposes many small matrices (tens of readings by a few hundred
modes, once per hyperparameter point); a batch inversion does the same per log row.  Such
products are too small to split: a BLAS pool's hand-offs and spinning cost more than they
save.  Measured on this project's shared two-core machine: the demo's fit 11.7 s with
OpenBLAS's default pool against 3.0 s with one thread, 1e6 rows of `trend` inverted 4-6x
faster (bench/fit.py and bench/trend.py print both).
"""

from __future__ import annotations

import contextlib
import functools

#: BLAS threads inside `blas_threads()` (None: leave the library's own choice)
BLAS_THREADS: int | None = 1


@contextlib.contextmanager
def blas_threads(limit="default"):
    """BLAS pools limited to `limit` threads inside the block (default BLAS_THREADS; None:
    unchanged) through threadpoolctl (optional extra ``speed``); without threadpoolctl the
    block runs unchanged.  Yields whether a limit is in force."""
    limit = BLAS_THREADS if limit == "default" else limit
    if limit is None:
        yield False
        return
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:
        yield False
        return
    with threadpool_limits(limits=int(limit), user_api="blas"):
        yield True


def few_threads(function):
    """Run `function` inside `blas_threads()`."""
    @functools.wraps(function)
    def wrapped(*args, **kwargs):
        with blas_threads():
            return function(*args, **kwargs)
    return wrapped
