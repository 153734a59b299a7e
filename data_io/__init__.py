"""data_io: the outside world — case files, CSV tables, units, outputs, the command line.

The only layer that touches files and the terminal.  Library use: ``heatsight.fit(path)``
(data_io.api) returns a `Fit` in user units; the readers one by one::

    from heatsight.data_io import load_case, read_layout, read_readings
    case = load_case("plate.toml")
    layout = read_layout(case.sensors.layout, case.cylinder)
    readings = read_readings(case.sensors.readings, layout)
"""

import importlib

#: public name -> module that defines it; imported on first use, so that the command line's
#: --help and --version load nothing heavy
_EXPORTS = {
    "Fit": "api", "fit": "api", "Case": "case", "FitOptions": "case", "SensorFiles": "case", "Zone": "case",
    "load_case": "case", "InputError": "errors", "TableProfile": "profiles", "load_profile": "profiles",
    "Table": "tables", "read_layout": "tables", "read_log": "tables", "read_points": "tables",
    "read_readings": "tables", "read_snapshot": "tables", "parse_quantity": "units", "ureg": "units",
}

__all__ = list(_EXPORTS)


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(importlib.import_module(f".{_EXPORTS[name]}", __name__), name)
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
