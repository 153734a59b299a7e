"""Layout rules shared by fit and check (inverse/layout.py); fit readings from scikit-fem."""

import math

import numpy as np
import pytest
from threadpoolctl import threadpool_limits

from heatsight import inverse
from heatsight.inverse.layout import angular_note, angular_span
from test_fit_sensors import case, fem, readings  # noqa: F401  (fixture)

A = 0.10


def test_angular_span_closed_forms():
    assert angular_span([0.1]) == 0.0
    # three angles 0, 30, 80 deg: the smallest arc holding them is 80 deg (definition)
    assert angular_span(np.radians([0.0, 30.0, 80.0])) == pytest.approx(math.radians(80.0))
    # wrapping across 0: 350 and 20 deg lie within a 30 deg arc
    assert angular_span(np.radians([350.0, 20.0])) == pytest.approx(math.radians(30.0))
    # evenly spread: 4 angles 90 deg apart span 270 deg
    assert angular_span(np.radians([0.0, 90.0, 180.0, 270.0])) == pytest.approx(math.radians(270.0))


def test_angular_note_cases():
    r = np.full(5, 0.5 * A)
    assert "one angle" in angular_note("bottom", A, r, np.full(5, 0.3))
    assert "cover only 80 deg" in angular_note("bottom", A, r, np.radians(np.linspace(10, 90, 5)))
    assert angular_note("bottom", A, r, np.radians(np.linspace(0, 288, 5))) is None
    assert "off the axis" in angular_note("top", A, np.zeros(5), np.zeros(5))


def test_fit_warns_about_one_sector_layout(fem):  # noqa: F811
    n = 10
    rng = np.random.default_rng(8)
    r = A * rng.uniform(0.2, 0.9, n)
    th = np.radians(np.linspace(20.0, 100.0, n))          # all in one 80 deg sector
    z = np.where(np.arange(n) % 2 == 0, 0.006, 0.015)
    with threadpool_limits(1):
        res = inverse.fit(case(), readings(r, th, z, fem.temperature(r, th, z), seed=1), grid=(3, 4))
    assert any("cover only 80 deg" in w for w in res.warnings), res.warnings
