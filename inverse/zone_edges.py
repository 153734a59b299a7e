"""Where heater zones' edges lie on the unknown face and how wide their ramps may be: the
zones' break points, each zone's room (half the gap to the next zone, half its own extent) and
the edge widths the zone model is averaged over when no zone declares one."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np


#: edge widths (x the face size: the radius on an end face, max(radius, height) on a wall) the
#: zone model is averaged over when no zone declares one.  A heater's edge reaches the face
#: blurred by the layers between (sheath, clamp, gap) by an amount nobody declares; a sharp
#: edge alone put zone means 3-4 sd off on finite-element heaters with 8-10 mm tanh edges
#: (bench/scenarios.py sparse_sector, side_flux), each width's own evidence weighs it.
EDGE_FRACTIONS = (0.0, 1.0 / 15.0, 2.0 / 15.0)
#: ... each zone's at most this share of the gap to the nearest edge of a zone beside it along
#: the radius (end face) or the height (wall), or of the rest of the turn beside a sector
#: (edge_rooms): ramps wider than the gap between two rings made their levels trade off.  Half
#: the gap: each ramp is centred on its edge (zone_breaks), so two facing ramps reach a quarter
#: of the gap into it each and its middle half stays the background's.  A quarter capped the platen's heaters (rings 20 mm apart, tanh edges about 9 mm from 10 to
#: 90 %) at 5 mm ramps, and their zone means sat 2.0-2.5 sd off with a pointwise coverage of
#: 0.69-0.71 (bench/scenarios.py platen_heater_zones; 10 mm ramps: 0.5-1.3 sd, 0.87-0.89).
#: Cost: three sharp rings 10 mm apart, relative RMS 0.07 -> 0.13, coverage 1.00 both ways ...
EDGE_ROOM = 0.5
#: ... and at most this share of the zone's own extent (along, and around at its radius): a
#: ramp as wide as the zone leaves it no plateau
OWN_ROOM = 0.5


def zone_breaks(zone, side, radius):
    """Break points of a zone's windows: (along [m], around [rad])."""
    half = 0.5 * zone.edge
    lo, hi = zone.z if side else zone.r
    along = [lo - half, lo + half, hi - half, hi + half]
    around = []
    if not zone.full_turn:
        at = radius if side else 0.5 * (zone.r[0] + zone.r[1])
        half_angle = 0.5 * zone.edge / max(at, 1e-12)
        for t in zone.theta:
            for shift in (-2 * math.pi, 0.0, 2 * math.pi):
                around += [t + shift - half_angle, t + shift, t + shift + half_angle]
    return along, around


def _disjoint(a, b) -> bool:
    return a[1] <= b[0] or b[1] <= a[0]


def _same(x, y) -> bool:
    return abs(x - y) <= 1e-12 * max(abs(x), abs(y), 1.0)


def edge_rooms(zones, side, radius, span) -> np.ndarray:
    """The widest edge ramp [m] each zone may take: OWN_ROOM x its own extent along and around
    (at its mid radius on an end face, the wall's radius on a wall), EDGE_ROOM x the rest of
    the turn beside a sector, and EDGE_ROOM x the gap from its edges to the nearest edge of a
    zone it does not overlap along the radius (end face) or the height (wall); edges at the
    face's own ends do not count, and a zone without an edge on the face gets 0 (its width
    changes nothing).  Zones that overlap (a streak across quadrants) are separate columns
    whose ramps may cross; zones that share an edge share the smaller room, so that their
    indicators still add up to 1 across it (`Zone.indicator`), except across an angular edge
    of sectors with different radial (axial) spans, whose angular ramps are the width over
    each one's own mid radius.  Gaps around the turn between two sectors are not counted."""
    lo_face, hi_face = span

    def along(z):
        return z.z if side else z.r

    def inner(x):
        return lo_face * (1 + 1e-12) < x < hi_face * (1 - 1e-12)

    def edges(z):
        return [x for x in along(z) if inner(x)], ([] if z.full_turn else
                                                    [t % (2 * math.pi) for t in z.theta])

    out = np.full(len(zones), math.inf)
    for j, z in enumerate(zones):
        lo, hi = along(z)
        mine, turn = edges(z)
        if not (mine or turn):
            out[j] = 0.0
            continue
        room = OWN_ROOM * (hi - lo)
        if turn:
            at = radius if side else 0.5 * (z.r[0] + z.r[1])
            span_t = z.theta[1] - z.theta[0]
            room = min(room, OWN_ROOM * span_t * at, EDGE_ROOM * (2 * math.pi - span_t) * at)
        for other in zones:
            if other is z or not _disjoint(along(other), (lo, hi)):
                continue
            gaps = [abs(x - e) for x in edges(other)[0] for e in mine if not _same(x, e)]
            if gaps:
                room = min(room, EDGE_ROOM * min(gaps))
        out[j] = room
    # zones sharing an edge (along, or around where both span the same radii / heights: an
    # angular ramp is the width over the zone's own mid radius) take the smaller room of the
    # two, passed on until nothing changes
    def same_span(a, b):
        return all(_same(x, y) for x, y in zip(along(a), along(b)))

    shares = [(i, j) for i in range(len(zones)) for j in range(i + 1, len(zones))
              if any(_same(x, y) for x in edges(zones[i])[0] for y in edges(zones[j])[0])
              or (same_span(zones[i], zones[j])
                  and any(_same(x, y) for x in edges(zones[i])[1] for y in edges(zones[j])[1]))]
    changed = True
    while changed:
        changed = False
        for i, j in shares:
            low = min(out[i], out[j])
            if out[i] != low or out[j] != low:
                out[i] = out[j] = low
                changed = True
    return out


def edge_widths(zones, size, rooms=None, quantity="flux") -> tuple:
    """Edge settings the zone model is averaged over: (None,) when any zone declares an edge
    (keep the zones as declared), else one tuple of per-zone widths [m] per EDGE_FRACTIONS
    value f: min(f x the face size, the zone's room (edge_rooms)), repeats dropped.  On a
    temperature face the sharp edge is left out: a step in temperature has a singular heat
    flux (no total power)."""
    if any(getattr(z, "edge", 0.0) > 0 for z in zones):
        return (None,)
    rooms = np.full(len(zones), math.inf) if rooms is None else np.asarray(rooms, float)
    fractions = [f for f in EDGE_FRACTIONS if f > 0 or quantity != "temperature"]
    out = []
    for f in fractions:
        widths = tuple(float(min(f * float(size), r)) for r in rooms)
        # a width reached two ways (1/15 of the size, and a room) counts once (_same)
        if not any(all(_same(x, y) for x, y in zip(widths, seen)) for seen in out):
            out.append(widths)
    return tuple(out)


def with_edge(zones, widths):
    """The zones with edge widths `widths` [m] (one per zone; None: as declared)."""
    return list(zones) if widths is None else [replace(z, edge=float(w)) for z, w in zip(zones, widths)]
