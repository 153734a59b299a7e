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


def test_edge_gap_note_cases():
    """Stretches next to a face's edges with no sensor over them (END_GAP_FRACTION of the extent)."""
    import heatsight.forward as fw
    from heatsight.inverse.layout import END_GAP_FRACTION, edge_gap_note
    tube = fw.Cylinder(0.08, 0.60, 45.0, inner_radius=0.05)
    z = np.array([0.12, 0.25, 0.37, 0.48])                     # the tube demo's four heights
    note = edge_gap_note("bore", tube, np.full(4, 0.06), z)
    assert "z = 0-120 mm and z = 480-600 mm" in note and "each of those edges" in note
    # what the note says the fit does there: in general (check), as this fit does, or not
    assert "a fit with the learned prior lets" in note
    assert "lets the temperature bend" in edge_gap_note("bore", tube, np.full(4, 0.06), z, True, "temperature")
    assert "lets the heat flux step" in edge_gap_note("bore", tube, np.full(4, 0.06), z, True, "heat_flux")
    assert "can be too narrow" in edge_gap_note("bore", tube, np.full(4, 0.06), z, False, "temperature")
    spread = np.array([0.05, 0.3, 0.55])                       # within 0.15 x 600 mm of both ends
    assert edge_gap_note("bore", tube, np.full(3, 0.06), spread) is None
    # just inside and just beyond the fraction at the bottom end
    near = END_GAP_FRACTION * 0.60
    assert edge_gap_note("side", tube, np.full(2, 0.07), [0.99 * near, 0.59]) is None
    assert "z = 0-" in edge_gap_note("side", tube, np.full(2, 0.07), [1.01 * near, 0.59])
    # end faces: the rim of a solid part (its axis is no edge), both walls' edges of a hollow one
    solid = fw.Cylinder(0.15, 0.04, 16.0)
    assert edge_gap_note("bottom", solid, [0.0, 0.05, 0.10], [0.005] * 3) == \
        edge_gap_note("bottom", solid, [0.06, 0.10], [0.005] * 2)
    assert "r = 100-150 mm" in edge_gap_note("bottom", solid, [0.0, 0.05, 0.10], [0.005] * 3)
    assert edge_gap_note("bottom", solid, [0.0, 0.13], [0.005] * 2) is None
    assert "r = 50-60 mm" in edge_gap_note("top", tube, [0.06, 0.075], [0.59] * 2)
    # a long tube's wall and a semi-infinite bar's side have no axial edges
    long = fw.Cylinder(0.08, 1.0, 45.0, inner_radius=0.05, long=True)
    assert edge_gap_note("bore", long, [0.06], [0.0]) is None
    assert edge_gap_note("side", fw.Cylinder(0.05, math.inf, 45.0), [0.045], [0.01]) is None
