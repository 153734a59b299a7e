"""The fit's face display grid and quadrature rule evaluated on grid lines (face_grid.face_on
-> Design.face_grid -> UnknownBasis.face_values_lines) give the pointwise numbers.

Consistency checks between two evaluation paths of the same model (no outside value): the
separable path must reproduce Design.face at every point of the grid, and the face
functionals (mean, power, zones) must not move.
"""

import math

import numpy as np
import pytest

from heatsight.forward import Convection, Cylinder, Flux, Insulated, Temperature, UnknownFlux, UnknownTemperature
from heatsight.inverse.design import Design
from heatsight.inverse.face_grid import display_grid, face_on, quadrature
from heatsight.inverse.functionals import face_functionals
from heatsight.inverse.problem import Zone

CASES = {
    "unknown flux bottom, insulated rim": (
        Cylinder(0.15, 0.04, 16.0),
        {"bottom": UnknownFlux(), "top": Convection(250.0, 313.15), "side": Insulated()}),
    "unknown flux bottom beside a temperature side (rim columns)": (
        Cylinder(0.08, 0.1, 20.0),
        {"bottom": UnknownFlux(), "top": Convection(25.0, 298.15), "side": Temperature(300.0)}),
    "unknown temperature wall beside a cooled base (wall columns)": (
        Cylinder(0.08, 0.1, 20.0),
        {"bottom": Convection(1500.0, 300.0), "top": Convection(15.0, 300.0), "side": UnknownTemperature()}),
    "unknown temperature top, known flux bottom": (
        Cylinder(0.08, 0.1, 20.0),
        {"bottom": Flux(lambda r, th: 2e3 + 500.0 * (r / 0.08) * np.cos(th)), "top": UnknownTemperature(),
         "side": Convection(10.0, 300.0)}),
}


def _zones(face, cyl):
    if face == "side":
        return [Zone("band", "side", (0.5, 2.5), z=(0.2 * cyl.height, 0.6 * cyl.height))]
    return [Zone("inner", face, (0.0, 2 * math.pi), r=(0.0, 0.5 * cyl.radius)),
            Zone("sector", face, (-1.0, 1.0), r=(0.5 * cyl.radius, cyl.radius))]


class _Pointwise:
    """The same model columns without the grid method: face_on falls back to points."""

    def __init__(self, design):
        self._d = design

    def __getattr__(self, name):
        if name == "face_grid":
            raise AttributeError(name)
        return getattr(self._d, name)


@pytest.mark.parametrize("name", list(CASES))
def test_display_grid_and_rule_on_lines_equal_pointwise(name):
    cyl, faces = CASES[name]
    design = Design(cyl, faces, 1e-8, 4, 6)
    zones = _zones(design.face_name, cyl)
    breaks = ([0.5 * cyl.radius], [-1.0, 1.0]) if design.face_name != "side" else ([0.2 * cyl.height], [0.5])
    for pts in (display_grid(design.face_name, cyl, 9, 12),
                quadrature(design.face_name, cyl, 16, 24, breaks=breaks)):
        B, known = face_on(design, pts)
        Bp, kp = design.face(pts.u, pts.v)
        assert B.shape == Bp.shape == (pts.u.size, design.size)
        assert np.abs(B - Bp).max() <= 1e-13 * np.abs(Bp).max()
        assert np.abs(known - kp).max() <= 1e-13 * max(1.0, np.abs(kp).max())
        assert pts.shape == (pts.lines[0].size, pts.lines[1].size) and np.prod(pts.shape) == pts.u.size
    grid = {n: (f, k) for n, f, k in face_functionals(design, zones)}
    points = {n: (f, k) for n, f, k in face_functionals(_Pointwise(design), zones)}
    assert set(grid) == set(points) == {"mean", "total_power"} | {z.name for z in zones}
    for n in grid:
        f, k = grid[n]
        fp, kp = points[n]
        assert np.abs(f - fp).max() <= 1e-12 * max(np.abs(fp).max(), 1e-300)
        assert abs(k - kp) <= 1e-12 * max(abs(kp), 1.0)


@pytest.mark.parametrize("name", list(CASES))
def test_face_sums_in_blocks_equal_the_whole_matrix(name, monkeypatch):
    """face_sums over blocks of a few grid lines (or points) equals weights @ face_on's whole
    matrix, on lines and point by point."""
    from heatsight.inverse import face_grid
    cyl, faces = CASES[name]
    design = Design(cyl, faces, 1e-8, 4, 6)
    pts = quadrature(design.face_name, cyl, 17, 24)               # 17 lines: a short last block
    W = np.vstack([pts.weights, pts.weights * (np.arange(pts.u.size) % 3 == 0)])
    B, known = face_on(design, pts)
    monkeypatch.setattr(face_grid, "FACE_SUM_BLOCK", 3 * 24 * design.size)       # three lines a block
    for columns in (design, _Pointwise(design)):
        F, k = face_grid.face_sums(columns, pts, W)
        np.testing.assert_allclose(F, W @ B, rtol=0, atol=1e-13 * np.abs(W @ B).max())
        np.testing.assert_allclose(k, W @ known, rtol=0, atol=1e-13 * max(np.abs(W @ known).max(), 1.0))


@pytest.mark.parametrize("name", list(CASES))
def test_zone_columns_on_lines_equal_pointwise(name):
    """The zone model's columns (smooth columns | zone indicators) on grid lines equal
    ZoneDesign.face point by point, and so do the face functionals built on them."""
    from heatsight.inverse.zone_columns import ZoneDesign
    cyl, faces = CASES[name]
    design = Design(cyl, faces, 1e-8, 4, 6)
    zones = _zones(design.face_name, cyl)
    columns = ZoneDesign(design, zones, None, big=design.basis)
    for pts in (display_grid(design.face_name, cyl, 9, 12), quadrature(design.face_name, cyl, 16, 24)):
        B, known = face_on(columns, pts)
        Bp, kp = columns.face(pts.u, pts.v)
        assert B.shape == Bp.shape == (pts.u.size, design.size + len(zones))
        assert np.abs(B - Bp).max() <= 1e-13 * np.abs(Bp).max()
        assert np.abs(known - kp).max() <= 1e-13 * max(1.0, np.abs(kp).max())
    grid = {n: (f, k) for n, f, k in face_functionals(columns, zones)}
    points = {n: (f, k) for n, f, k in face_functionals(_Pointwise(columns), zones)}
    for n in grid:
        assert np.abs(grid[n][0] - points[n][0]).max() <= 1e-12 * max(np.abs(points[n][0]).max(), 1e-300)
        assert abs(grid[n][1] - points[n][1]) <= 1e-12 * max(abs(points[n][1]), 1.0)
