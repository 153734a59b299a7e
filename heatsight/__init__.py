"""heatsight: infer the unseen face of a heated cylinder from a few thermocouples.

One import package with three layers, installed from the repository's top-level folders:
``heatsight.forward`` (physics) <- ``heatsight.inverse`` (statistics) <- ``heatsight.data_io``
(files, units, figures, report, command line).  Nothing heavy is imported until used, so
``import heatsight`` and ``heatsight --help`` stay quick.

    import heatsight
    result = heatsight.fit("platen.toml")    # a Fit: repr, summary(), to_frame(), predict(),
                                             # plot_face(), plot_sensors(), write_report(folder)
"""

from __future__ import annotations

import importlib

__all__ = ["fit", "plan", "forward", "inverse", "data_io"]

_SUBPACKAGES = ("forward", "inverse", "data_io")


def fit(case, **options):
    """Fit the unknown face of the case file `case` (a path) and return a ``Fit`` (answers in
    user units, figures, ``write_report``); see ``heatsight.data_io.api``."""
    from .data_io.api import fit as _fit
    return _fit(case, **options)


def plan(case, add=4, **options):
    """Where `add` new thermocouples most reduce the uncertainty of the case file `case`: a
    ``Plan`` (picks and sensors' value as DataFrames, ``write``); see ``heatsight.data_io.api``."""
    from .data_io.api import plan as _plan
    return _plan(case, add, **options)


def __getattr__(name):
    if name in _SUBPACKAGES:
        return importlib.import_module(f"{__name__}.{name}")
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
