"""Independent finite-element reference solver for steady conduction in a cylinder or tube.

Used by tests and demo-data generation so that synthetic readings do not come from the
series model being fitted (avoids the "inverse crime").  It deliberately shares no code
with the ``forward`` package.

Problem (SI units: m, K, W): k Laplace(T) = 0 in a_i <= r <= a, 0 <= z <= L (a_i = 0: solid
cylinder; a_i > 0: hollow part with the bore r = a_i as a fourth face).  One azimuthal
harmonic T(r, theta, z) = u(r, z) cos(m theta) (the sin harmonic is the same amplitude
problem) satisfies, in weak form on the (r, z) rectangle with weight r,

    int k (u_r v_r + u_z v_z + m^2 u v / r^2) r dr dz + sum_R int h u v r ds
        = sum_N int q v r ds + sum_R int h Tamb v r ds

(r ds = r dr on the end faces, a dz on the side, a_i dz on the bore).  Solid part: for
m >= 1, u = 0 on the axis r = 0; for m = 0 the axis is a natural (symmetry) boundary.
Hollow part: no axis; every integrand is smooth (r >= a_i > 0).

Face conditions (outward normal n), ``faces[name]`` with name in bottom (z=0), top (z=L),
side (r=a) and, for a hollow part, bore (r=a_i, n = -e_r); s is the coordinate along the
face (r on bottom/top, z on side and bore):

    ('D', g)          u = g(s)                      [K]
    ('N', q)          k du/dn = q(s), heat INTO     [W/m^2]
    ('R', h, Tamb)    -k du/dn = h (u - Tamb(s))    h [W/(m^2 K)], Tamb [K]

g, q, Tamb are numbers or vectorized callables of s giving the m-th harmonic amplitude.

Discretisation: P2 (or P1) Lagrange triangles on a structured, optionally graded tensor
mesh.  The m^2/r term on triangles that touch the axis at a single vertex is integrated
with a Duffy (collapsed-square) Gauss rule, which makes it smooth; all other integrands
are polynomials integrated exactly (or smooth, for the hollow part's 1/r, by a Gauss rule
of high order).  The factorized system of a (geometry, mesh, m, face kinds) combination is
kept in a small cache, so cos and sin harmonics and repeated solves with new face data
(fixed-point iterations) cost only a back-substitution.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np
from scipy.sparse.linalg import splu
from skfem import (Basis, BilinearForm, ElementTriP1, ElementTriP2, FacetBasis,
                   Functional, LinearForm, MeshTri)
from skfem.helpers import dot, grad

FACE_NAMES = ("bottom", "top", "side")
HOLLOW_FACE_NAMES = ("bottom", "top", "side", "bore")
_GRADE_NAMES = ("bottom", "top", "side", "axis")
_HOLLOW_GRADE_NAMES = ("bottom", "top", "side", "bore")
_CACHE_SIZE = 32
_SYSTEMS: dict = {}


def face_names(inner_radius: float = 0.0) -> tuple:
    """The faces of a solid (inner_radius = 0) or hollow (inner_radius > 0) part."""
    return HOLLOW_FACE_NAMES if inner_radius > 0 else FACE_NAMES


def clear_cache() -> None:
    """Forget the factorized systems kept between solves."""
    _SYSTEMS.clear()


# ----------------------------------------------------------------------------- mesh


def _graded_nodes(length: float, n: int, toward_start: float | None,
                  toward_end: float | None) -> np.ndarray:
    """Nodes 0..length with n cells; geometric clustering toward one or both ends.

    A grade G > 1 means the largest cell is G times the smallest one, the cell sizes
    growing by the constant factor G**(1/(n-1)) away from the clustered end (with both
    ends clustered, each half is graded and mirrored).
    """
    if n < 1:
        raise ValueError("need at least one cell per direction")
    gs = toward_start if toward_start is not None else 1.0
    ge = toward_end if toward_end is not None else 1.0
    if gs <= 0 or ge <= 0:
        raise ValueError("grade factors must be positive")

    def one_sided(nc: int, g: float) -> np.ndarray:
        # cell sizes h0 * q**i, i = 0..nc-1, with q**(nc-1) = g; normalised to length 1
        if nc == 1 or g == 1.0:
            w = np.ones(nc)
        else:
            w = g ** (np.arange(nc) / (nc - 1))
        return np.concatenate(([0.0], np.cumsum(w) / w.sum()))

    if toward_start is not None and toward_end is not None and n >= 2:
        n1 = n // 2
        n2 = n - n1
        left = one_sided(n1, gs) * 0.5
        right = 1.0 - one_sided(n2, ge)[::-1] * 0.5
        x = np.concatenate((left, right[1:]))
    elif toward_end is not None:
        x = 1.0 - one_sided(n, ge)[::-1]
    else:
        x = one_sided(n, gs)
    x[0], x[-1] = 0.0, 1.0
    return x * length


def _build_mesh(radius, height, nr, nz, grade, inner=0.0):
    grade = dict(grade or {})
    names = _HOLLOW_GRADE_NAMES if inner > 0 else _GRADE_NAMES
    bad = set(grade) - set(names)
    if bad:
        raise ValueError(f"unknown grade keys {sorted(bad)}; use {names}")
    start = "bore" if inner > 0 else "axis"
    rn = inner + _graded_nodes(radius - inner, nr, grade.get(start), grade.get("side"))
    rn[0], rn[-1] = inner, radius
    zn = _graded_nodes(height, nz, grade.get("bottom"), grade.get("top"))
    tol_r = 1e-12 * radius
    tol_z = 1e-12 * height
    mesh = MeshTri.init_tensor(rn, zn).with_boundaries({
        "bottom": lambda x: np.abs(x[1]) < tol_z,
        "top": lambda x: np.abs(x[1] - height) < tol_z,
        "side": lambda x: np.abs(x[0] - radius) < tol_r,
        start: lambda x: np.abs(x[0] - inner) < tol_r,
    })
    return mesh, rn, zn


# ------------------------------------------------------------------------- helpers


def _as_profile(value, what):
    """Number or vectorized callable of s -> callable returning an array like s."""
    if callable(value):
        def f(s):
            s = np.asarray(s, dtype=float)
            out = np.asarray(value(s.ravel()), dtype=float)
            return np.broadcast_to(out, s.ravel().shape).reshape(s.shape)
        return f
    try:
        c = float(value)
    except (TypeError, ValueError):
        raise ValueError(f"{what}: expected a number or a callable, got {value!r}")
    if not np.isfinite(c):
        raise ValueError(f"{what}: value must be finite")
    return lambda s: np.full(np.shape(s), c)


def _parse_faces(faces, names=FACE_NAMES):
    if set(faces) != set(names):
        raise ValueError(f"faces must have exactly the keys {names}, got {sorted(faces)}")
    parsed = {}
    for name in names:
        spec = faces[name]
        if not isinstance(spec, tuple) or not spec:
            raise ValueError(f"face {name!r}: expected a tuple like ('D', g)")
        kind = spec[0]
        if kind == "D" and len(spec) == 2:
            parsed[name] = ("D", _as_profile(spec[1], f"{name} temperature"))
        elif kind == "N" and len(spec) == 2:
            parsed[name] = ("N", _as_profile(spec[1], f"{name} flux"))
        elif kind == "R" and len(spec) == 3:
            h = float(spec[1])
            if not h > 0:
                raise ValueError(f"face {name!r}: heat transfer coefficient must be > 0")
            parsed[name] = ("R", h, _as_profile(spec[2], f"{name} ambient"))
        else:
            raise ValueError(f"face {name!r}: bad specification {spec!r}")
    return parsed


def _face_coord(name, x):
    """Coordinate s along a face from points x = (r, z): z on side and bore, r on the ends."""
    return x[1] if name in ("side", "bore") else x[0]


def _duffy_rule(vertex: int, n: int):
    """Gauss rule on the reference triangle collapsed toward one vertex.

    Maps the unit square (s, t) to the triangle P_v + s((1-t)(P_a-P_v) + t(P_b-P_v)),
    Jacobian 2*area*s; integrands like u v / r with r ~ s * (linear in t) become smooth.
    Returns (points (2, n*n), weights (n*n,)) for the reference triangle of area 1/2.
    """
    verts = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0]])
    pv = verts[vertex]
    pa, pb = verts[(vertex + 1) % 3], verts[(vertex + 2) % 3]
    g, w = np.polynomial.legendre.leggauss(n)
    g = 0.5 * (g + 1.0)
    w = 0.5 * w
    S, T = np.meshgrid(g, g, indexing="ij")
    WS, WT = np.meshgrid(w, w, indexing="ij")
    S, T, W = S.ravel(), T.ravel(), (WS * WT).ravel()
    d = (1 - T)[:, None] * (pa - pv) + T[:, None] * (pb - pv)
    X = pv + S[:, None] * d
    e1, e2 = pa - pv, pb - pv
    jac = abs(e1[0] * e2[1] - e1[1] * e2[0])  # = 1 for the reference triangle
    return X.T.copy(), W * S * jac


# ---------------------------------------------------------------------- solution


@dataclass
class FemSolution:
    """FE solution u(r, z) of one azimuthal harmonic (amplitude of cos or sin m theta)."""

    radius: float
    height: float
    conductivity: float
    m: int
    basis: Basis = field(repr=False)
    u: np.ndarray = field(repr=False)
    ndofs: int = 0
    solve_seconds: float = 0.0
    _faces: dict = field(default=None, repr=False)
    _A: object = field(default=None, repr=False)
    _b: np.ndarray = field(default=None, repr=False)
    _dirichlet: dict = field(default=None, repr=False)
    _rnodes: np.ndarray = field(default=None, repr=False)
    _znodes: np.ndarray = field(default=None, repr=False)
    _rect2tri: np.ndarray = field(default=None, repr=False)
    inner_radius: float = 0.0

    @property
    def face_names(self) -> tuple:
        """Faces of this part: bottom, top, side (and bore when hollow)."""
        return face_names(self.inner_radius)

    @property
    def r_nodes(self) -> np.ndarray:
        """Mesh node coordinates along r [m] (tensor grid)."""
        return self._rnodes

    @property
    def z_nodes(self) -> np.ndarray:
        """Mesh node coordinates along z [m] (tensor grid)."""
        return self._znodes

    # -------------------------------------------------------------- point queries

    def _locate(self, r, z):
        """Element index and reference coordinates of points (r, z) [m]."""
        a, L, ai = self.radius, self.height, self.inner_radius
        tol = 1e-9
        if np.any(r < ai - tol * a) or np.any(r > a * (1 + tol)) or \
                np.any(z < -tol * L) or np.any(z > L * (1 + tol)):
            raise ValueError("point outside the part a_i <= r <= a, 0 <= z <= L")
        r = np.clip(r, ai, a)
        z = np.clip(z, 0.0, L)
        nr = len(self._rnodes) - 1
        nz = len(self._znodes) - 1
        i = np.clip(np.searchsorted(self._rnodes, r, side="right") - 1, 0, nr - 1)
        j = np.clip(np.searchsorted(self._znodes, z, side="right") - 1, 0, nz - 1)
        cand = self._rect2tri[i * nz + j]  # (npts, 2)
        x = np.vstack((r, z))
        mapping = self.basis.mapping
        best_cells = cand[:, 0].copy()
        best_X = None
        best_score = np.full(r.size, -np.inf)
        for c in range(2):
            X = mapping.invF(x[:, :, None], tind=cand[:, c])[:, :, 0]
            score = np.minimum(np.minimum(X[0], X[1]), 1 - X[0] - X[1])
            better = score > best_score
            best_cells[better] = cand[better, c]
            if best_X is None:
                best_X = X.copy()
            else:
                best_X[:, better] = X[:, better]
            best_score[better] = score[better]
        return best_cells, best_X

    def _evaluate(self, r, z, want_grad):
        r = np.asarray(r, dtype=float)
        z = np.asarray(z, dtype=float)
        r, z = np.broadcast_arrays(r, z)
        shape = r.shape
        rf, zf = r.ravel(), z.ravel()
        if rf.size == 0:
            empty = np.zeros(shape)
            return (empty, empty.copy()) if want_grad else empty
        cells, X = self._locate(rf, zf)
        pts = X[:, :, None]
        elem = self.basis.elem
        mapping = self.basis.mapping
        val = np.zeros(rf.size)
        gr = np.zeros(rf.size)
        gz = np.zeros(rf.size)
        dofs = self.basis.element_dofs
        for k in range(self.basis.Nbfun):
            df = elem.gbasis(mapping, pts, k, tind=cells)[0]
            coef = self.u[dofs[k, cells]]
            if want_grad:
                gr += coef * df.grad[0][:, 0]
                gz += coef * df.grad[1][:, 0]
            else:
                val += coef * np.asarray(df)[:, 0]
        if want_grad:
            return gr.reshape(shape), gz.reshape(shape)
        return val.reshape(shape)

    def temperature(self, r, z):
        """Harmonic amplitude u(r, z) [K] at points r [m], z [m] (broadcast arrays)."""
        return self._evaluate(r, z, want_grad=False)

    def gradient(self, r, z):
        """(du/dr, du/dz) [K/m] of the FE solution at points (r, z) [m].

        Piecewise polynomial of one degree less than u; discontinuous across elements.
        """
        return self._evaluate(r, z, want_grad=True)

    # ------------------------------------------------------------------ heat flow

    def face_flux_integral(self, face: str, method: str = "consistent") -> float:
        """int k du/dn r ds over a face [W/rad]: the weighted flux amplitude INTO the part.

        r ds = r dr on bottom/top, a dz on the side, a_i dz on the bore.  method='consistent' uses the data
        (N), the Robin law with the FE trace (R) or the residual of the assembled system
        (D, exact discrete heat balance; a corner node shared by two D faces is split by
        gradient-based estimates); method='gradient' integrates k grad(u).n of the FE
        field (less accurate: one order lower).
        """
        if face not in self.face_names:
            raise ValueError(f"face must be one of {self.face_names}")
        mesh = self.basis.mesh
        fb = FacetBasis(mesh, self.basis.elem, facets=mesh.boundaries[face],
                        intorder=2 * self.basis.elem.maxdeg + 6)
        k = self.conductivity
        spec = self._faces[face]
        if method == "gradient":
            @Functional
            def flux(w):
                return k * dot(grad(w["u"]), w.n) * w.x[0]
            return float(flux.assemble(fb, u=fb.interpolate(self.u)))
        if method != "consistent":
            raise ValueError("method must be 'consistent' or 'gradient'")
        if spec[0] == "N":
            q = spec[1]

            @Functional
            def fq(w):
                return q(_face_coord(face, w.x)) * w.x[0]
            return float(fq.assemble(fb))
        if spec[0] == "R":
            h, tamb = spec[1], spec[2]

            @Functional
            def fr(w):
                return h * (tamb(_face_coord(face, w.x)) - w["u"]) * w.x[0]
            return float(fr.assemble(fb, u=fb.interpolate(self.u)))
        # Dirichlet face: residual of the full (unconstrained) system at its dofs,
        # sum_i (A u - b)_i = int k du/dn (sum_i phi_i) r ds.  A corner dof shared with
        # another D face carries both faces' flux: split it by the gradient-based
        # estimates G_f,i = int_f k grad(u).n phi_i r ds, sharing their misfit equally.
        res = self._A @ self.u - self._b
        mine = self._dirichlet[face]
        count = np.zeros(self.u.size, dtype=int)
        for dofs in self._dirichlet.values():
            count[dofs] += 1
        shared = mine[count[mine] > 1]
        total = float(np.sum(res[mine[count[mine] == 1]]))
        if shared.size:
            est = {name: self._gradient_load(name) for name in self._dirichlet}
            g_sum = sum(np.where(np.isin(np.arange(self.u.size), d), est[n], 0.0)
                        for n, d in self._dirichlet.items())
            total += float(np.sum(est[face][shared]
                                  + (res[shared] - g_sum[shared]) / count[shared]))
        return total

    def _gradient_load(self, face):
        """Vector of int_face k grad(u).n phi_i r ds over all dofs i [W/rad]."""
        mesh = self.basis.mesh
        fb = FacetBasis(mesh, self.basis.elem, facets=mesh.boundaries[face],
                        intorder=2 * self.basis.elem.maxdeg + 2)
        k = self.conductivity

        @LinearForm
        def load(v, w):
            return k * dot(grad(w["u"]), w.n) * v * w.x[0]
        return load.assemble(fb, u=fb.interpolate(self.u))

    def heat_in(self, face: str, method: str = "consistent") -> float:
        """Net heat [W] entering through a face: 2 pi int k dT/dn r ds (m = 0).

        For m >= 1 the net heat of a cos/sin(m theta) field through any face is 0.
        """
        if self.m != 0:
            if face not in self.face_names:
                raise ValueError(f"face must be one of {self.face_names}")
            return 0.0
        return 2.0 * np.pi * self.face_flux_integral(face, method=method)


# ---------------------------------------------------------------------- solver


def solve_harmonic(radius, height, conductivity, m, faces, *, order=2, nr=40, nz=40,
                   grade=None, inner_radius=0.0) -> FemSolution:
    """Solve one azimuthal harmonic u(r, z) of k Laplace(T) = 0 by finite elements.

    radius a [m], height L [m], conductivity k [W/(m K)], m >= 0 integer, faces: dict
    bottom/top/side (and bore when inner_radius > 0) -> ('D', g) | ('N', q) | ('R', h, Tamb)
    (see module docstring).  order: 2 (P2, default) or 1 (P1); nr, nz: cells in r and z;
    grade: optional dict {'bottom'|'top'|'side'|'axis'|'bore': G} clustering cells toward
    that face geometrically, largest/smallest cell = G ('axis' for a solid part, 'bore' for
    a hollow one).  inner_radius a_i [m]: 0 for a solid cylinder, 0 < a_i < a for a tube.
    """
    t0 = time.perf_counter()
    a, L, k, ai = float(radius), float(height), float(conductivity), float(inner_radius)
    if not (a > 0 and L > 0 and k > 0):
        raise ValueError("radius, height and conductivity must be positive")
    if not (0.0 <= ai < a):
        raise ValueError("inner_radius must satisfy 0 <= inner_radius < radius")
    if int(m) != m or m < 0:
        raise ValueError("m must be a non-negative integer")
    m = int(m)
    names = face_names(ai)
    spec = _parse_faces(faces, names)
    if m == 0 and all(s[0] == "N" for s in spec.values()):
        raise ValueError("m = 0 with flux conditions on every face: temperature level "
                         "not fixed, no unique steady state")
    if order not in (1, 2):
        raise ValueError("order must be 1 or 2")
    kinds = tuple((n, spec[n][0], spec[n][1] if spec[n][0] == "R" else None) for n in names)
    key = (ai, a, L, k, m, order, int(nr), int(nz),
           tuple(sorted((grade or {}).items())), kinds)
    sys_ = _SYSTEMS.get(key)
    if sys_ is None:
        sys_ = _assemble(a, L, k, ai, m, spec, names, order, int(nr), int(nz), grade)
        if len(_SYSTEMS) >= _CACHE_SIZE:
            _SYSTEMS.pop(next(iter(_SYSTEMS)))
        _SYSTEMS[key] = sys_
    basis, mesh, A = sys_["basis"], sys_["mesh"], sys_["A"]

    b = np.zeros(basis.N)
    for name in names:
        s = spec[name]
        if s[0] == "D":
            continue
        fb = sys_["facet"][name]
        if s[0] == "N":
            q = s[1]

            @LinearForm
            def lq(v, w, q=q, name=name):
                return q(_face_coord(name, w.x)) * v * w.x[0]
            b += lq.assemble(fb)
        else:
            h, tamb = s[1], s[2]

            @LinearForm
            def lr(v, w, h=h, tamb=tamb, name=name):
                return h * tamb(_face_coord(name, w.x)) * v * w.x[0]
            b += lr.assemble(fb)
    # Dirichlet values by nodal interpolation; corner dofs shared by two D faces get
    # the mean of both data; for m >= 1 the axis of a solid part (u = 0) overrides all.
    x = np.zeros(basis.N)
    count = np.zeros(basis.N)
    for name, dofs in sys_["dirichlet"].items():
        s_coord = _face_coord(name, basis.doflocs[:, dofs])
        x[dofs] += spec[name][1](s_coord)
        count[dofs] += 1
    fixed = count > 0
    x[fixed] /= count[fixed]
    x[sys_["axis"]] = 0.0
    D, I = sys_["D"], sys_["I"]
    u = x.copy()
    u[I] = sys_["lu"].solve(b[I] - sys_["A_ID"] @ x[D])

    return FemSolution(radius=a, height=L, conductivity=k, m=m, basis=basis, u=u,
                       ndofs=basis.N, solve_seconds=time.perf_counter() - t0,
                       _faces=spec, _A=A, _b=b, _dirichlet=sys_["dirichlet"],
                       _rnodes=sys_["rn"], _znodes=sys_["zn"], _rect2tri=sys_["rect2tri"],
                       inner_radius=ai)


def _assemble(a, L, k, ai, m, spec, names, order, nr, nz, grade):
    """Mesh, bases, the system matrix (stiffness, m^2/r term, Robin terms) and its
    factorization on the free dofs, for one (geometry, mesh, m, face kinds) combination."""
    elem = ElementTriP2() if order == 2 else ElementTriP1()
    mesh, rn, zn = _build_mesh(a, L, nr, nz, grade, inner=ai)
    p = elem.maxdeg
    basis = Basis(mesh, elem, intorder=2 * p + 1)

    @BilinearForm
    def stiff(u, v, w):
        return k * dot(grad(u), grad(v)) * w.x[0]

    A = stiff.assemble(basis)

    if m > 0:
        @BilinearForm
        def azim(u, v, w):
            return k * m * m * u * v / w.x[0]

        if ai > 0:
            # smooth (r >= a_i > 0): a Gauss rule of high order
            A = A + azim.assemble(Basis(mesh, elem, intorder=2 * p + 6))
        else:
            # polynomial (exact) where an element has an edge on the axis, smooth after a
            # Duffy map where it touches the axis at one vertex only.
            rv = mesh.p[0, mesh.t]  # (3, nelems)
            on_axis = np.abs(rv) < 1e-12 * a
            n_axis = on_axis.sum(axis=0)
            single = n_axis == 1
            regular = np.nonzero(~single)[0]
            if regular.size:
                A = A + azim.assemble(Basis(mesh, elem, intorder=2 * p + 2, elements=regular))
            for vtx in range(3):
                sel = np.nonzero(single & on_axis[vtx])[0]
                if sel.size:
                    quad = _duffy_rule(vtx, p + 8)
                    A = A + azim.assemble(Basis(mesh, elem, quadrature=quad, elements=sel))

    facet = {}
    forder = 2 * p + 6  # data may be non-polynomial callables
    for name in names:
        if spec[name][0] == "D":
            continue
        fb = FacetBasis(mesh, elem, facets=mesh.boundaries[name], intorder=forder)
        facet[name] = fb
        if spec[name][0] == "R":
            h = spec[name][1]

            @BilinearForm
            def rob(u, v, w, h=h):
                return h * u * v * w.x[0]
            A = A + rob.assemble(fb)

    fixed = np.zeros(basis.N, bool)
    dirichlet = {}
    for name in names:
        if spec[name][0] == "D":
            dirichlet[name] = basis.get_dofs(name).all()
            fixed[dirichlet[name]] = True
    axis = basis.get_dofs("axis").all() if (m > 0 and ai == 0) else np.zeros(0, int)
    fixed[axis] = True
    D = np.nonzero(fixed)[0]
    I = np.nonzero(~fixed)[0]
    A = A.tocsr()
    lu = splu(A[I][:, I].tocsc())

    # map rectangle (i, j) -> its two triangles, for fast point location
    cent = mesh.p[:, mesh.t].mean(axis=1)
    i = np.clip(np.searchsorted(rn, cent[0], side="right") - 1, 0, len(rn) - 2)
    j = np.clip(np.searchsorted(zn, cent[1], side="right") - 1, 0, len(zn) - 2)
    rect = i * (len(zn) - 1) + j
    order_idx = np.argsort(rect, kind="stable")
    rect2tri = order_idx.reshape(-1, 2)
    if not np.all(rect[rect2tri[:, 0]] == rect[rect2tri[:, 1]]):
        raise RuntimeError("unexpected tensor-mesh topology")
    return dict(basis=basis, mesh=mesh, A=A, facet=facet, dirichlet=dirichlet, axis=axis,
                D=D, I=I, A_ID=A[I][:, D], lu=lu, rn=rn, zn=zn, rect2tri=rect2tri)


# ------------------------------------------------------------------ several harmonics


@dataclass
class FemField:
    """Sum of FE harmonics: T(r, theta, z) = sum u_m(r, z) cos|sin(m theta) [K]."""

    harmonics: dict  # (m, 'cos'|'sin') -> FemSolution

    def temperature(self, r, theta, z):
        """T [K] at r [m], theta [rad], z [m] (broadcast arrays)."""
        r, theta, z = np.broadcast_arrays(np.asarray(r, float), np.asarray(theta, float),
                                          np.asarray(z, float))
        total = np.zeros(r.shape)
        for (m, kind), sol in self.harmonics.items():
            ang = np.cos(m * theta) if kind == "cos" else np.sin(m * theta)
            total += sol.temperature(r, z) * ang
        return total

    def gradient(self, r, theta, z):
        """(dT/dr, (1/r) dT/dtheta, dT/dz) [K/m] at r [m], theta [rad], z [m]; the angular
        component is nan on the axis r = 0 of a solid part."""
        r, theta, z = np.broadcast_arrays(np.asarray(r, float), np.asarray(theta, float),
                                          np.asarray(z, float))
        gr, gt, gz = np.zeros(r.shape), np.zeros(r.shape), np.zeros(r.shape)
        for (m, kind), sol in self.harmonics.items():
            c, s = np.cos(m * theta), np.sin(m * theta)
            ang, dang = (c, -m * s) if kind == "cos" else (s, m * c)
            dr, dz = sol.gradient(r, z)
            gr += dr * ang
            gz += dz * ang
            gt += sol.temperature(r, z) * dang
        with np.errstate(divide="ignore", invalid="ignore"):
            gt = np.where(r > 0, gt / np.where(r > 0, r, 1.0), np.nan)
        return gr, gt, gz

    def heat_in(self, face, method="consistent"):
        """Net heat [W] entering through a face (only the m = 0 term contributes)."""
        return sum(sol.heat_in(face, method) for (m, kind), sol in self.harmonics.items()
                   if m == 0)

    @property
    def solve_seconds(self):
        return sum(s.solve_seconds for s in self.harmonics.values())


def solve_field(radius, height, conductivity, faces_by_harmonic, *, order=2, nr=40,
                nz=40, grade=None, inner_radius=0.0) -> FemField:
    """Solve several harmonics; faces_by_harmonic maps (m, 'cos'|'sin') -> faces dict.

    Each entry's face data are the amplitudes of that harmonic (m = 0 only as 'cos');
    inner_radius > 0 makes the part a tube (faces then include 'bore').
    """
    out = {}
    for key, faces in faces_by_harmonic.items():
        m, kind = key
        if kind not in ("cos", "sin"):
            raise ValueError(f"harmonic kind must be 'cos' or 'sin', got {kind!r}")
        if m == 0 and kind == "sin":
            raise ValueError("(0, 'sin') is identically zero; use (0, 'cos')")
        out[(int(m), kind)] = solve_harmonic(radius, height, conductivity, m, faces,
                                             order=order, nr=nr, nz=nz, grade=grade,
                                             inner_radius=inner_radius)
    return FemField(out)
