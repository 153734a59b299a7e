"""Steps over an unseen edge stretch of the unknown face, marginalized like the left-out modes.

A stretch of the face next to one of its edges with no sensor over it (layout.edge_gaps) is
where heaters end, inlets and cooled ends sit, and where the readings say least.  A
stationary prior, whose amplitude is learned where the sensors are, holds a drop there as
large as the face's own level for improbable, so the fit carried a heater's power out to a
rim it never reached (tests/scenario_cases.py chuck_calibrated: three of four zone means
2.9-4.3 sd low).  Here the stretch may depart from the rest of the face by steps:

    q(x) += sum_j s_j H_j(x),   s_j ~ N(0, level^2 / J),   j = 1..J per stretch,

H_j the indicator of the part of the stretch beyond the j-th of STEPS points evenly inside it
(at (j / (STEPS + 1)) of its length from the sensors' side: a step at the outermost sensor
itself would be pinned by it) and, on a flux face, beyond each edge of a declared zone inside
it (J = STEPS + those edges), so that at the face's edge the steps add up to a prior sd of
`level` [face unit]: how far the face's own level is from zero.  The steps are marginalized
into the readings' covariance, S += G_s diag(v) G_s^T, and, with the left-out modes
(truncation.py), their conditional mean and variance given the residual reach the face map,
the total power, the face mean and the zone means.

On an unknown-temperature face the departure is continuous: each H_j is then a linear ramp
from its point (0) to the face's edge (1), a cooled end or an inlet bending the profile away
from what the sensors see, and `level` is the spread (max - min) of the first fit's face map
[K] (mostly how much the face varies where it is seen: over an unseen stretch that map
extrapolates): the tube demo's bore at the liquid's
inlet, 16 K under the flat extrapolation of four stations 130 mm apart, lay 3 sd outside
the bands before.  None at an edge the series holds (pinned_edges.pinned_edges) nor, on a
temperature face, beside a face held at a known temperature (the corner's value is known).
"""

from __future__ import annotations

import math

import numpy as np

from ..forward.faces import Temperature
from ..forward.geometry import is_wall

from .face_grid import display_grid, face_interval
from .functionals import functional_matrix
from .layout import edge_gaps
from .pinned_edges import face_edges, pinned_edges
from .problem import Zone
from .truncation import nearest_distance
from .zone_columns import ZoneDesign

#: steps per unseen stretch
STEPS = 3


class StretchSteps:
    """The steps over the unseen edge stretches of `design`'s face (columns for
    functionals.face_functionals: face, face_grid, powers) with their prior variances `v`
    (J,) [face unit^2], their field at sensors from the projection on an enlarged basis
    (zone_columns.ZoneDesign)."""

    def __init__(self, design, zones, level, nearest):
        self.zones = list(zones)
        self.columns = ZoneDesign(design, self.zones, nearest)
        self.level = float(level)
        self.face_name, self.quantity, self.cylinder = design.face_name, design.quantity, design.cylinder
        # each stretch's steps share level^2 (STEPS, and one more per declared edge inside it);
        # a step of the outer stretch reaches the face's outer end
        _, hi = face_interval(self.face_name, self.cylinder)
        outward = np.array([math.isclose(b, hi, rel_tol=1e-12, abs_tol=1e-12) for _, b in self._spans()])
        self.v = self.level ** 2 / np.where(outward, outward.sum(), (~outward).sum())
        self.at_readings = None     # G_s (n, J) at the fit's readings (attach)

    def attach(self, rd) -> "StretchSteps":
        """Hold the steps' fields at the fit's readings `rd` (all of them, in its order)."""
        self.at_readings = self.fields(rd.r, rd.theta, rd.z)
        return self

    @property
    def covariance(self) -> np.ndarray:
        """G_s diag(v) G_s^T (n, n) [K^2] at the readings held (attach)."""
        return (self.at_readings * self.v) @ self.at_readings.T

    def variances(self, prior=None) -> np.ndarray:
        """v (J,) [face unit^2]: the steps' own prior variances (`prior` is not theirs)."""
        return self.v

    def summary(self) -> dict:
        """For summary.json: where each step (or ramp) begins [m] (r on an end face, z on a
        wall) and the prior sd the steps reach at the face's edge [face unit]."""
        _, hi = face_interval(self.face_name, self.cylinder)
        starts = [a - 0.5 * z.edge if math.isclose(b, hi, rel_tol=1e-12, abs_tol=1e-12) else b + 0.5 * z.edge
                  for (a, b), z in zip(self._spans(), self.zones)]
        return {"unseen_stretch_steps_m": [float(x) for x in starts], "unseen_stretch_level_sd": self.level}

    def _spans(self) -> list:
        """Each step's span along the face [m]: z on a wall, r on an end face."""
        return [z.z if is_wall(self.face_name) else z.r for z in self.zones]

    def fields(self, r, theta, z) -> np.ndarray:
        """G_s (n, J) [K per face unit]: each step's field at the points."""
        return self.columns.sensors(r, theta, z)[0][:, -len(self.zones):]

    def gradients(self, r, theta, z) -> np.ndarray:
        """grad G_s (3, n, J) [K/m per face unit]: each step's temperature gradient at the points."""
        return self.columns.at(r, theta, z, gradient=True)[3][:, :, -len(self.zones):]

    def face(self, u, v):
        u, v = (np.asarray(x, float).ravel() for x in (u, v))
        return self.columns._indicators(u, v), np.zeros(u.size)

    def face_grid(self, along, around):
        S, TH = (a.ravel() for a in np.meshgrid(np.asarray(along, float), np.asarray(around, float),
                                                 indexing="ij"))
        return self.face(*((TH, S) if is_wall(self.face_name) else (S, TH)))

    def powers(self):
        """(p (J,) [W per face unit], 0): each step's heat into the part per unit level; on a
        flux face its area from the fit's quadrature rule of the exact indicator (the
        projection on the enlarged basis gave 0.95-0.98 of it beside a side held at a
        temperature), on a temperature face the heat its ramp's field carries in through the
        face (the projection's, as for the zone model's columns)."""
        if self.quantity == "temperature":
            return self.columns.powers()[0][-len(self.zones):], 0.0
        names, F, _ = functional_matrix(self)
        return F[names.index("total_power")], 0.0


def declared_edges(zones, face) -> list:
    """Coordinates [m] along the face (r on an end face, z on a wall) where the declared
    zones on `face` begin or end: where their heaters end."""
    wall = is_wall(face)
    out = set()
    for zone in zones or ():
        if getattr(zone, "face", None) in (None, face):
            span = getattr(zone, "z" if wall else "r", None)
            out.update(float(x) for x in (span or ()))
    return sorted(out)


def stretch_zones(face, cylinder, r, z, pinned=(), ramps=False, edges=()) -> list:
    """The step regions (Zone, full turn) over each unseen edge stretch of `face` for sensors
    at (r, z) [m] (layout.edge_gaps): STEPS per stretch, each from a point j / (STEPS + 1) of
    the stretch's length away from the sensors out to the face's edge, and one from each
    coordinate of `edges` [m] inside the stretch (declared_edges: where a declared zone, a
    heater, ends: the readings cannot see whether its heat stops there); none at an edge in
    `pinned` (coordinates [m]: pinned_edges.pinned_edges, the series holds the map there, and
    says so; _held_edges).  ramps: each region a linear ramp from its point (0) to the edge
    (1) instead of a step: a window whose edge, as wide as the region, is centred half way."""
    lo_face, hi_face = face_interval(face, cylinder)
    wall = is_wall(face)
    out = []
    for a, b in edge_gaps(face, cylinder, r, z):
        outward = math.isclose(b, hi_face, rel_tol=1e-12, abs_tol=1e-12)
        edge = hi_face if outward else lo_face
        if any(math.isclose(edge, x, rel_tol=1e-12, abs_tol=1e-12) for x in pinned):
            continue
        spacing = (b - a) / (STEPS + 1)
        points = [a + spacing * j if outward else b - spacing * j for j in range(1, STEPS + 1)]
        # every declared edge inside adds a step, even one next to an evenly spaced point: letting
        # it take that point's place put the second set's quadrant chuck back to 10/12 zone means
        # within 2 sd (its heaters end at 95 mm, 1.25 mm past the point at 93.75 mm; 12/12 with both)
        for x in edges:
            if a + 1e-9 * spacing < x < b - 1e-9 * spacing and not any(abs(x - y) <= 1e-9 * spacing
                                                                        for y in points):
                points.append(x)
        for x in sorted(points, reverse=not outward):
            inner = 0.5 * (x + edge) if ramps else x
            span = (inner, hi_face) if outward else (lo_face, inner)
            out.append(Zone(f"unseen stretch step {len(out) + 1}", face, (0.0, 2 * math.pi),
                            edge=abs(edge - x) if ramps else 0.0, **({"z": span} if wall else {"r": span})))
    return out


def _held_edges(design) -> list:
    """Coordinates [m] of the edges of `design`'s face beside a face held at a known
    temperature (pinned_edges.face_edges)."""
    return [at for name, at in face_edges(design.face_name, design.cylinder)
            if isinstance(design.faces.get(name), Temperature)]


def step_level(design, coefficients) -> float:
    """The prior sd the steps reach at the face's edge [face unit], from the coefficients of
    a first fit: on a flux face |face mean| (a heater's end takes the flux to zero), on a
    temperature face the spread (max - min) of its face map on a 21 x 24 grid over the whole
    face (mostly how much the face varies where it is seen; the map extrapolates over an
    unseen stretch)."""
    c = np.asarray(coefficients, float)
    if design.quantity == "temperature":
        pts = display_grid(design.face_name, design.cylinder, 21, 24)
        B, k = design.face(pts.u, pts.v)
        values = B @ c + k
        return float(values.max() - values.min())
    _, F, k = functional_matrix(design)
    return abs(float(k[0] + F[0] @ c))


def stretch_steps(design, rd, level, zones=()):
    """StretchSteps of the unknown face of `design` for the sensors of `rd` with prior sd
    `level` [face unit] at the edge (step_level): steps on a flux face, also from the edges
    of the declared `zones` inside a stretch; ramps on a temperature face; None when there
    is no unseen stretch or the level is 0."""
    if not level > 0:
        return None
    ramps = design.quantity == "temperature"
    held = [x for _, x in pinned_edges(design)] + (_held_edges(design) if ramps else [])
    # a declared zone's edge starts a step of its own on a flux face, where a heater's flux
    # stops there; a temperature face departs continuously (its ramps), and ramps from the
    # zones' edges as well made the second set's roll worse (relative RMS 0.57 -> 0.66)
    edges = () if ramps else declared_edges(zones, design.face_name)
    zones = stretch_zones(design.face_name, design.cylinder, rd.r, rd.z, held, ramps, edges)
    if not zones:
        return None
    return StretchSteps(design, zones, level, nearest_distance(design, rd.r, rd.z))
