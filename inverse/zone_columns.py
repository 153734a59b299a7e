"""The heater-zone model's columns: each zone's indicator on the face and, at the sensors, its
field from the projection on the face's eigenfunctions (a_jk = integral chi_j Phi_k dA / N_k,
G_zone = G_big A^T), with the interface of design.Design."""

from __future__ import annotations

import math

import numpy as np

from ..forward.geometry import is_wall
from .face_grid import face_interval, segments
from .truncation import enlarged_size
from .zone_edges import edge_rooms, edge_widths, with_edge, zone_breaks


#: the projection keeps modes down to exp(-kappa d_min) = PROJECTION_DECAY at the nearest sensor
PROJECTION_DECAY = 1e-5
MAX_TERMS, MAX_HARMONICS = 120, 40


def projection(basis, zones):
    """A (J, K_eigen): coefficients of each zone's indicator on the basis's eigenfunctions
    (rim columns, which are no eigenfunctions, get none)."""
    cyl = basis.model.cylinder
    side = is_wall(basis.face)
    lo, hi = face_interval(basis.face, cyl)
    r_w = cyl.wall_radius(basis.face)
    ne = basis.n_eigen
    m, is_sin, n_idx = basis.m[:ne], basis.is_sin[:ne], basis.n_index[:ne]
    partner = {(int(mm), int(nn)): k for k, (mm, s, nn) in enumerate(zip(m, is_sin, n_idx)) if not s}
    cos_of = np.array([partner[(int(mm), int(nn))] for mm, nn in zip(m, n_idx)])
    norms = basis.norms()[:ne]
    along, around = [], []
    for zone in zones:           # one rule for all zones, split at every zone's breaks
        a, b = zone_breaks(zone, side, r_w)
        along += a
        around += b
    s, ws = segments(along, lo, hi, 4 * ne // max(1, int(m.max()) + 1) + 200)
    t, wt = segments(around, 0.0, 2 * math.pi, 8 * int(m.max()) + 64)
    # each (m, n) profile once, from its cos column (Phi = profile x cos(m theta) there)
    uniq, back = np.unique(cos_of, return_inverse=True)
    if side:
        prof = basis.modes.axial(s)[0][:, uniq][:, back]                     # Z_k(z)
        ws = ws * r_w
    else:
        prof = basis.modes.radial_values(s, uniq)[:, back]                   # R_k(r)
        ws = ws * s
    # each harmonic's cos and sin once: column k reads row (m_k, is_sin_k) of `trig`
    orders, m_at = np.unique(m, return_inverse=True)
    arg = np.multiply.outer(t, orders)
    trig = np.hstack([np.cos(arg), np.sin(arg)])
    col = m_at + np.where(is_sin, orders.size, 0)
    A = np.zeros((len(zones), ne))
    for j, zone in enumerate(zones):
        radial = (ws * zone.along(s, hi, lo)) @ prof
        angular = ((wt * zone.around(t, r_w)) @ trig)[col]
        A[j] = radial * angular / norms
    return A


class ZoneDesign:
    """Model columns [smooth basis | zone indicators] with the interface of design.Design.
    `big`: the enlarged basis the indicators are projected on (built here when None); `A`:
    the zones' projection on it when already computed (rows of a `projection` that held
    these zones among others: one quadrature rule split at every zone's breaks)."""

    def __init__(self, design, zones, nearest, big=None, A=None):
        self.smooth, self.zones = design, list(zones)
        self.cylinder, self.faces, self.model = design.cylinder, design.faces, design.model
        self.basis = design.basis
        if big is None:
            # modes down to exp(-kappa d_min) = PROJECTION_DECAY at the nearest sensor;
            # harmonics only when some zone covers part of the turn
            h, t = enlarged_size(design, nearest, PROJECTION_DECAY, any(not z.full_turn for z in zones),
                                 (MAX_HARMONICS, MAX_TERMS))
            big = design.model.basis(h, t)
        self.big = big
        self.A = projection(self.big, self.zones) if A is None else np.asarray(A, float)
        self.n_zones = len(self.zones)

    @property
    def size(self):
        return self.smooth.size + self.n_zones

    def with_faces(self, faces) -> "ZoneDesign":
        """The same zones on the columns rebuilt with other face conditions (calibration's
        sensitivities): an enlarged basis of the same size, the indicators projected afresh."""
        smooth = self.smooth.with_faces(faces)
        ne = self.big.n_eigen
        size = (int(self.big.m[:ne].max()), int(self.big.n_index[:ne].max()) + 1)
        return ZoneDesign(smooth, self.zones, None, smooth.model.basis(*size))

    face_name = property(lambda self: self.smooth.face_name)
    quantity = property(lambda self: self.smooth.quantity)

    def _indicators(self, u, v):
        cyl = self.cylinder
        lo, hi = face_interval(self.face_name, cyl)
        r_w = cyl.wall_radius(self.face_name)
        return np.stack([z.indicator(u, v, r_w, hi, lo) for z in self.zones], axis=1)

    def at(self, r, theta, z, gradient=False):
        G, t0, ev, dG = self.smooth.at(r, theta, z, gradient=gradient)
        Gb, dGb = self.big.fields(r, theta, z, gradient=gradient)
        ne = self.big.n_eigen
        G = np.hstack([G, Gb[:, :ne] @ self.A.T])
        if gradient:
            dG = np.concatenate([dG, np.einsum("dpk,jk->dpj", dGb[:, :, :ne], self.A)], axis=2)
        return G, t0, ev, dG

    def sensors(self, r, theta, z):
        G, t0, _, _ = self.at(r, theta, z)
        return G, t0

    def face(self, u, v):
        B, known = self.smooth.face(u, v)
        u, v = (np.asarray(x, float).ravel() for x in (u, v))
        return np.hstack([B, self._indicators(u, v)]), known

    def face_grid(self, along, around):
        """face() on the grid of lines along (r or z) x around (theta), along major: the
        smooth columns once per line (Design.face_grid), the indicators per point."""
        B, known = self.smooth.face_grid(along, around)
        S, TH = (a.ravel() for a in np.meshgrid(np.asarray(along, float), np.asarray(around, float),
                                                 indexing="ij"))
        u, v = (TH, S) if is_wall(self.face_name) else (S, TH)
        return np.hstack([B, self._indicators(u, v)]), known

    def powers(self):
        p, known = self.smooth.powers()
        return np.concatenate([p, self.A @ self.big.powers()[:self.big.n_eigen]]), known


def edge_settings(design, zones) -> tuple:
    """The edge widths the zones are averaged over on design's face (zone_edges.edge_widths
    of their rooms, zone_edges.edge_rooms): one tuple of per-zone widths [m] per setting, or
    (None,) when a zone declares its own edge."""
    from .hyperprior import face_size

    cyl, face = design.cylinder, design.face_name
    rooms = edge_rooms(zones, is_wall(face), cyl.wall_radius(face), face_interval(face, cyl))
    return edge_widths(zones, face_size(design.basis), rooms, design.quantity)


def designs_by_edge(design, zones, nearest, widths) -> list:
    """One ZoneDesign of `zones` per edge setting of `widths` (zone_edges.with_edge), all
    projected in one go (one quadrature rule split at all their breaks) on one enlarged basis."""
    sets = [with_edge(zones, w) for w in widths]
    every = ZoneDesign(design, [z for zs in sets for z in zs], nearest)
    J = len(zones)
    return [ZoneDesign(design, zs, None, big=every.big, A=every.A[i * J:(i + 1) * J]) for i, zs in enumerate(sets)]
