"""Edges of an unknown flux face where the series cannot carry the flux.

A hollow part's unknown wall beside an end held at a temperature: its axial eigenfunctions
vanish there and it has no corner columns yet, so the map and its band are held at the known
part along that edge whatever the true flux does.  Found from the columns' own face values,
so the note goes away when such columns arrive.  Used by `fit` (warnings) and `check` (notes).
"""

from __future__ import annotations

import numpy as np

from ..forward.geometry import is_wall

from .design import Design
from .face_grid import display_grid, face_interval
from .problem import Problem


#: a face edge counts as pinned where every column's face value stays below this share of
#: the columns' largest face value (round-off of functions that vanish there)
PINNED = 1e-9


def face_edges(face: str, cylinder) -> list:
    """[(neighbour face, coordinate [m])] of the edges of `face`: a wall's bottom and top
    (z), an end face's side and, on a hollow part, its bore (r)."""
    lo, hi = face_interval(face, cylinder)
    if is_wall(face):
        return [("bottom", lo), ("top", hi)]
    return [("side", hi)] + ([("bore", lo)] if lo > 0 else [])


def pinned_edges(design) -> list:
    """[(neighbour face, coordinate [m])] of each edge of an unknown flux face along which
    every column of `design` vanishes (below PINNED of their largest face value); none for a
    temperature face.  (The solid part's faces have corner columns wherever this could happen.)"""
    if design.quantity == "temperature":
        return []
    cyl, face = design.cylinder, design.face_name
    around = np.linspace(0.0, 2.0 * np.pi, 24, endpoint=False)
    wall = is_wall(face)
    pts = display_grid(face, cyl, 21, 24)
    rows = design.face(pts.u, pts.v)[0]
    out = []
    for neighbour, at in face_edges(face, cyl):
        u, v = (around, np.full(around.size, at)) if wall else (np.full(around.size, at), around)
        edge = design.face(u, v)[0]
        if not estimated_points(np.vstack([rows, edge]), design.quantity)[len(rows):].any():
            out.append((neighbour, at))
    return out


def estimated_points(F, quantity: str) -> np.ndarray:
    """Which rows of face values F (points x columns) the fit estimates: on a flux face not
    those where every column vanishes (below PINNED of the largest value; a pinned edge,
    whose value is fixed, not estimated); every row of a temperature face."""
    F = np.asarray(F, float)
    size = np.abs(F).max(axis=1) if F.size else np.zeros(F.shape[0])
    if quantity == "temperature" or not size.size or size.max() == 0:
        return np.ones(F.shape[0], dtype=bool)
    return size > PINNED * size.max()


def pinned_edge_notes(design) -> list[str]:
    """One sentence per pinned edge of an unknown flux face (pinned_edges)."""
    face = design.face_name
    return [f"the heat flux on the {face} face is not estimated where it meets the {neighbour} face "
            f"(held at a temperature): every column of the series vanishes along that edge, so the "
            f"map has a band of zero width there whatever the true flux does; read it a few mm away. "
            f"The total power and the zone means that reach that edge leave out what flows in along "
            f"it and can be off by more than their sd (a uniform bore flux beside an end at a known "
            f"temperature: total power 4-6 sd low)"
            for neighbour, _ in pinned_edges(design)]


def pinned_edge_notes_for_case(case) -> list[str]:
    """pinned_edge_notes for a case (anything Problem.from_case takes), building its columns."""
    spec = Problem.from_case(case)
    opts = spec.options
    return pinned_edge_notes(Design(spec.cylinder, spec.faces, opts.tolerance, *opts.basis_size))
