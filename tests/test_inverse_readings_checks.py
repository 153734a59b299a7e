"""SensorReadings refuses what no thermocouple can report, with the project's own error."""

import numpy as np
import pytest

from heatsight import inverse
from heatsight.inverse.errors import InverseError


def _readings(names=("a", "b", "c"), t=300.0, tau=0.0, tol=0.0):
    n = len(names)
    return inverse.SensorReadings(list(names), np.full(n, 0.01), np.zeros(n), np.full(n, 0.01),
                                  np.full(n, t), 0.2, tau, tol)


@pytest.mark.parametrize("kwargs, message", [
    ({"names": ("a", "b", "a")}, "repeated: a"),
    ({"t": -1.0}, "below 0 K"),
    ({"tau": -0.1}, "offset_sd must not be negative"),
    ({"tol": -1e-3}, "position_tolerance must not be negative"),
])
def test_impossible_readings_are_refused(kwargs, message):
    with pytest.raises(InverseError, match=message):
        _readings(**kwargs)


def test_plain_readings_pass():
    assert _readings().n == 3
