"""The library entry point: ``heatsight.fit("case.toml")`` reads the case and its readings
as the command line does and returns the fit result (no files are written)."""

from __future__ import annotations

from pathlib import Path

from ..forward.errors import ForwardModelError
from ..inverse import SensorReadings
from ..inverse import fit as inverse_fit
from ..inverse.errors import InverseError

from .case import load_case
from .errors import InputError
from .tables import read_layout, read_snapshot


def fit(case_path, *, readings=None, **options):
    """Fit the case file `case_path`; `readings` overrides the case's snapshot file; the
    options are those of ``heatsight.inverse.fit`` (strength, smoothing, ...)."""
    case = load_case(case_path, purpose="fit")
    case.require("fit")
    readings_path = Path(readings) if readings else case.sensors.readings
    if readings_path is None:
        raise InputError("no readings: add [sensors] readings = \"readings.csv\" or pass readings=",
                         file=case.path, where="sensors.readings")
    layout = read_layout(case.sensors.layout, case.cylinder)
    snapshot = read_snapshot(readings_path, layout)
    try:
        result = inverse_fit(case, SensorReadings.from_frame(snapshot.frame), **options)
    except (InverseError, ForwardModelError) as exc:
        raise InputError(str(exc), file=case.path) from None
    result.warnings[:0] = layout.warnings + snapshot.warnings
    return result
