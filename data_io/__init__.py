"""data_io: the outside world — case files, CSV tables, units, outputs, the command line.

The only layer that touches files and the terminal.  Library use: ``heatsight.fit(path)``
(data_io.api) returns a `Fit` in user units; the readers one by one::

    from heatsight.data_io import load_case, read_layout, read_readings
    case = load_case("plate.toml")
    layout = read_layout(case.sensors.layout, case.cylinder)
    readings = read_readings(case.sensors.readings, layout)
"""

from .api import Fit, fit
from .case import Case, FitOptions, SensorFiles, Zone, load_case
from .errors import InputError
from .profiles import TableProfile, load_profile
from .tables import Table, read_layout, read_log, read_points, read_readings, read_snapshot
from .units import parse_quantity, ureg

__all__ = ["Fit", "fit", "Case", "FitOptions", "SensorFiles", "Zone", "load_case", "InputError", "TableProfile",
           "load_profile", "Table", "read_layout", "read_log", "read_points", "read_readings",
           "read_snapshot", "parse_quantity", "ureg"]
