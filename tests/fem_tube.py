"""Independent finite-element reference for a LONG tube: the plane r-theta problem.

Nothing varies along the axis, so one azimuthal harmonic T = u(r) cos|sin(m theta) of
k Laplace(T) = 0 in a_i <= r <= a satisfies

    u'' + u'/r - m^2 u / r^2 = 0,

in weak form with weight r (SI units: m, K, W):

    int k (u' v' + m^2 u v / r^2) r dr + sum_R r_f h u(r_f) v(r_f)
        = sum_N r_f q v(r_f) + sum_R r_f h Tamb v(r_f),

r_f = a_i on the bore (outward normal -e_r), a on the side.  Face conditions as in
tests/fem_cylinder.py, with numbers (the harmonic's amplitude) instead of profiles:

    ('D', g)          u = g                          [K]
    ('N', q)          k du/dn = q, heat INTO the part [W/m^2]
    ('R', h, Tamb)    -k du/dn = h (u - Tamb)        h [W/(m^2 K)], Tamb [K]

Discretisation: Lagrange P2 (or P1) on skfem's MeshLine, optionally graded toward either
wall.  Shares no code with the ``forward`` package (no inverse crime).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from skfem import Basis, BilinearForm, ElementLineP1, ElementLineP2, MeshLine, condense, solve
from skfem.helpers import dot, grad

from fem_cylinder import _graded_nodes

WALLS = ("bore", "side")


def _parse(faces):
    if set(faces) != set(WALLS):
        raise ValueError(f"faces must have exactly the keys {WALLS}, got {sorted(faces)}")
    out = {}
    for name in WALLS:
        spec = faces[name]
        if not isinstance(spec, tuple) or not spec:
            raise ValueError(f"face {name!r}: expected a tuple like ('D', g)")
        kind = spec[0]
        if kind in ("D", "N") and len(spec) == 2:
            out[name] = (kind, float(spec[1]))
        elif kind == "R" and len(spec) == 3:
            if not float(spec[1]) > 0:
                raise ValueError(f"face {name!r}: heat transfer coefficient must be > 0")
            out[name] = ("R", float(spec[1]), float(spec[2]))
        else:
            raise ValueError(f"face {name!r}: bad specification {spec!r}")
        if not all(np.isfinite(out[name][1:])):
            raise ValueError(f"face {name!r}: values must be finite")
    return out


@dataclass
class TubeSolution:
    """FE solution u(r) of one harmonic of a long tube (amplitude of cos or sin m theta)."""

    inner_radius: float
    radius: float
    conductivity: float
    m: int
    basis: Basis = field(repr=False)
    u: np.ndarray = field(repr=False)
    _faces: dict = field(default=None, repr=False)
    _residual: np.ndarray = field(default=None, repr=False)
    _wall_dof: dict = field(default=None, repr=False)

    @property
    def r_nodes(self) -> np.ndarray:
        """Mesh nodes along r [m]."""
        return self.basis.mesh.p[0]

    def _evaluate(self, r, want_grad):
        r = np.asarray(r, dtype=float)
        shape = r.shape
        rf = r.ravel()
        ai, a = self.inner_radius, self.radius
        if np.any(rf < ai * (1 - 1e-9)) or np.any(rf > a * (1 + 1e-9)):
            raise ValueError("point outside the wall a_i <= r <= a")
        rf = np.clip(rf, ai, a)
        nodes = self.r_nodes
        cells = np.clip(np.searchsorted(nodes, rf, side="right") - 1, 0, nodes.size - 2)
        # MeshLine cells are (p[i], p[i+1]) for sorted nodes; local coordinate in [0, 1]
        t = self.basis.mesh.t
        lo, hi = nodes[t[0, cells]], nodes[t[1, cells]]
        X = ((rf - lo) / (hi - lo))[None, :, None]
        out = np.zeros(rf.size)
        for k in range(self.basis.Nbfun):
            df = self.basis.elem.gbasis(self.basis.mapping, X, k, tind=cells)[0]
            coef = self.u[self.basis.element_dofs[k, cells]]
            out += coef * (df.grad[0][:, 0] if want_grad else np.asarray(df)[:, 0])
        return out.reshape(shape)

    def temperature(self, r):
        """Harmonic amplitude u(r) [K] at r [m]."""
        return self._evaluate(r, False)

    def gradient(self, r):
        """du/dr [K/m] at r [m] (piecewise polynomial, discontinuous at nodes)."""
        return self._evaluate(r, True)

    def face_flux_integral(self, face: str) -> float:
        """r_f k du/dn at a wall [W/(m rad)]: the weighted flux amplitude INTO the part.

        Data (N), the Robin law with the FE trace (R), or the residual of the assembled
        system at the wall's dof (D: exact discrete heat balance).
        """
        if face not in WALLS:
            raise ValueError(f"face must be one of {WALLS}")
        rf = self.inner_radius if face == "bore" else self.radius
        spec = self._faces[face]
        if spec[0] == "N":
            return rf * spec[1]
        if spec[0] == "R":
            return rf * spec[1] * (spec[2] - self.u[self._wall_dof[face]])
        return float(self._residual[self._wall_dof[face]])

    def heat_in(self, face: str) -> float:
        """Net heat per unit length [W/m] entering through a wall: 2 pi r_f k du/dn (m = 0);
        0 for m >= 1 (a cos/sin(m theta) field carries no net heat)."""
        if face not in WALLS:
            raise ValueError(f"face must be one of {WALLS}")
        return 2.0 * np.pi * self.face_flux_integral(face) if self.m == 0 else 0.0


def solve_long_tube(inner_radius, radius, conductivity, m, faces, *, order=2, n=40,
                    grade=None) -> TubeSolution:
    """Solve one harmonic of the long tube's plane problem by finite elements.

    inner_radius a_i [m] (> 0), radius a [m], conductivity k [W/(m K)], m >= 0, faces:
    {'bore': spec, 'side': spec} (see module docstring); n cells across the wall;
    grade: optional {'bore'|'side': G} clustering cells toward that wall (largest /
    smallest cell = G).
    """
    ai, a, k = float(inner_radius), float(radius), float(conductivity)
    if not (0 < ai < a and k > 0):
        raise ValueError("need 0 < inner_radius < radius and conductivity > 0")
    if int(m) != m or m < 0:
        raise ValueError("m must be a non-negative integer")
    m = int(m)
    spec = _parse(faces)
    if m == 0 and all(s[0] == "N" for s in spec.values()):
        raise ValueError("m = 0 with flux on both walls: temperature level not fixed")
    grade = dict(grade or {})
    if set(grade) - set(WALLS):
        raise ValueError(f"unknown grade keys {sorted(set(grade) - set(WALLS))}; use {WALLS}")
    if order not in (1, 2):
        raise ValueError("order must be 1 or 2")
    nodes = ai + _graded_nodes(a - ai, int(n), grade.get("bore"), grade.get("side"))
    nodes[0], nodes[-1] = ai, a
    mesh = MeshLine(nodes)
    elem = ElementLineP2() if order == 2 else ElementLineP1()
    basis = Basis(mesh, elem, intorder=2 * elem.maxdeg + 6)

    @BilinearForm
    def form(u, v, w):
        return k * (dot(grad(u), grad(v)) + m * m * u * v / w.x[0] ** 2) * w.x[0]

    A = form.assemble(basis).tolil()
    b = np.zeros(basis.N)
    wall_dof = {"bore": int(basis.nodal_dofs[0, np.argmin(np.abs(mesh.p[0] - ai))]),
                "side": int(basis.nodal_dofs[0, np.argmin(np.abs(mesh.p[0] - a))])}
    x = np.zeros(basis.N)
    D = []
    for name in WALLS:
        s, i = spec[name], wall_dof[name]
        rf = ai if name == "bore" else a
        if s[0] == "D":
            x[i] = s[1]
            D.append(i)
        elif s[0] == "N":
            b[i] += rf * s[1]
        else:
            A[i, i] += rf * s[1]
            b[i] += rf * s[1] * s[2]
    A = A.tocsr()
    u = solve(*condense(A, b, x=x, D=np.array(D, dtype=int))) if D else solve(A, b)
    return TubeSolution(ai, a, k, m, basis, u, _faces=spec, _residual=A @ u - b,
                        _wall_dof=wall_dof)


@dataclass
class TubeField:
    """Sum of long-tube harmonics: T(r, theta) = sum u_m(r) cos|sin(m theta) [K]."""

    harmonics: dict  # (m, 'cos'|'sin') -> TubeSolution

    def temperature(self, r, theta):
        """T [K] at r [m], theta [rad] (broadcast arrays)."""
        r, theta = np.broadcast_arrays(np.asarray(r, float), np.asarray(theta, float))
        out = np.zeros(r.shape)
        for (m, kind), sol in self.harmonics.items():
            out += sol.temperature(r) * (np.cos(m * theta) if kind == "cos" else np.sin(m * theta))
        return out

    def gradient(self, r, theta):
        """(dT/dr, (1/r) dT/dtheta) [K/m] at r [m], theta [rad]."""
        r, theta = np.broadcast_arrays(np.asarray(r, float), np.asarray(theta, float))
        gr, gt = np.zeros(r.shape), np.zeros(r.shape)
        for (m, kind), sol in self.harmonics.items():
            c, s = np.cos(m * theta), np.sin(m * theta)
            ang, dang = (c, -m * s) if kind == "cos" else (s, m * c)
            gr += sol.gradient(r) * ang
            gt += sol.temperature(r) * dang / r
        return gr, gt

    def heat_in(self, face):
        """Net heat per unit length [W/m] entering through a wall (the m = 0 term)."""
        return sum(s.heat_in(face) for (m, _), s in self.harmonics.items() if m == 0)


def solve_long_field(inner_radius, radius, conductivity, faces_by_harmonic, *, order=2,
                     n=40, grade=None) -> TubeField:
    """Several harmonics; faces_by_harmonic maps (m, 'cos'|'sin') -> {'bore', 'side'} specs."""
    out = {}
    for (m, kind), faces in faces_by_harmonic.items():
        if kind not in ("cos", "sin"):
            raise ValueError(f"harmonic kind must be 'cos' or 'sin', got {kind!r}")
        if m == 0 and kind == "sin":
            raise ValueError("(0, 'sin') is identically zero; use (0, 'cos')")
        out[(int(m), kind)] = solve_long_tube(inner_radius, radius, conductivity, m, faces,
                                              order=order, n=n, grade=grade)
    return TubeField(out)
